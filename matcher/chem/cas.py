"""CAS Registry Numbers: format, check digit and normalisation.

A CAS Registry Number has the form ``NNNNNNN-NN-R``: two to seven digits, a
hyphen, two digits, a hyphen and one check digit ``R``. The check digit is
the sum of the other digits, each multiplied by its position counted from the
right (the digit just left of the check digit has position 1), modulo 10
(Chemical Abstracts Service, "CAS Registry Number – check digit
verification", published on cas.org):

.. math::

   R = \\left( \\sum_{i=1}^{k} i \\cdot d_i \\right) \\bmod 10

Worked example, water 7732-18-5: digits 7 7 3 2 1 8 read from the right give
8·1 + 1·2 + 2·3 + 3·4 + 7·5 + 7·6 = 105, and 105 mod 10 = 5.

>>> check_digit("773218")
5
>>> is_valid_cas("7732-18-5")
True
>>> is_valid_cas("7732-18-4")
False
>>> normalise_cas(" 0007732-18-5 ")
'7732-18-5'
>>> normalise_cas("7732185")
'7732-18-5'
"""

from __future__ import annotations

import re

_FORM = re.compile(r"^(\d{2,7})-(\d{2})-(\d)$")


def check_digit(body: str) -> int:
    r"""The check digit of a CAS Registry Number from the digits before it [1]_.

    .. math::

        R = \left( \sum_{i=1}^{k} i \cdot d_i \right) \bmod 10

    with :math:`d_1` the digit just left of the check digit, :math:`d_k` the first.

    Parameters
    ----------
    body : str
        The digits before the check digit; hyphens and other non-digits are ignored

    Returns
    -------
    R : int
        The check digit, 0-9

    Examples
    --------
    The example CAS itself gives (water, 7732-18-5, from memory of the
    description cited below): 8·1 + 1·2 + 2·3 + 3·4 + 7·5 + 7·6 = 105 → 5.

    >>> check_digit("7732-18")
    5
    >>> check_digit("64-17")        # ethanol, 64-17-5 (common reference value)
    5

    References
    ----------
    .. [1] Chemical Abstracts Service. "CAS Registry Number: Check Digit
       Verification." CAS, a division of the American Chemical Society,
       https://www.cas.org (checked from memory, not fetched).
    """
    digits = [int(c) for c in str(body) if c.isdigit()]
    return sum(i * d for i, d in enumerate(reversed(digits), start=1)) % 10


def normalise_cas(text: str) -> str:
    """Canonical ``N-NN-R`` form of a CAS number, or :class:`ValueError` with the reason.

    Leading zeros are dropped; a bare run of 5 to 10 digits is split into the
    three parts. The check digit must agree.
    """
    s = str(text).strip().replace("\u2010", "-").replace("\u2011", "-").replace("\u2013", "-").replace("\u2212", "-")
    if s.isdigit() and 5 <= len(s) <= 10:
        s = f"{s[:-3]}-{s[-3:-1]}-{s[-1]}"
    m = _FORM.match(s)
    if not m:
        # allow leading zeros padding the first part beyond seven digits
        m2 = re.match(r"^0*(\d+)-(\d{2})-(\d)$", s)
        if not m2 or not 2 <= len(m2.group(1)) <= 7:
            raise ValueError(f"not a CAS Registry Number: {text!r} (expected the form 7732-18-5)")
        m = m2
    first = m.group(1).lstrip("0") or "0"
    if len(first) < 2:
        first = first.rjust(2, "0")
    expected = check_digit(first + m.group(2))
    if expected != int(m.group(3)):
        raise ValueError(
            f"CAS Registry Number {text!r} fails its check digit (the last digit should be {expected})"
        )
    return f"{first}-{m.group(2)}-{m.group(3)}"


def is_valid_cas(text: str) -> bool:
    """True when ``text`` is a well-formed CAS number whose check digit agrees."""
    try:
        normalise_cas(text)
    except ValueError:
        return False
    return True


__all__ = ["check_digit", "normalise_cas", "is_valid_cas"]
