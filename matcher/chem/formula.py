"""Molecular formulas: parsing, validation and nominal mass.

The **nominal mass** is the sum of the integer masses of each element's most
abundant isotope (C 12, H 1, N 14, O 16, F 19, Si 28, P 31, S 32, Cl 35,
Br 79, I 127), the value a unit-resolution mass spectrometer shows for the
molecular ion of the all-light-isotope molecule.

>>> nominal_mass("C10H16")          # a monoterpene hydrocarbon
136
>>> nominal_mass("C6H5Cl")
112
>>> parse_formula("CH3(CH2)4OH")
{'C': 5, 'H': 12, 'O': 1}
>>> carbon_count("C10H18O")
10
"""

from __future__ import annotations

import re

#: Integer mass of the most abundant isotope of each element accepted in formulas.
NOMINAL_ISOTOPE_MASS: dict[str, int] = {
    "H": 1, "D": 2, "B": 11, "C": 12, "N": 14, "O": 16, "F": 19, "Na": 23,
    "Si": 28, "P": 31, "S": 32, "Cl": 35, "K": 39, "Se": 80, "Br": 79, "Sn": 120,
    "I": 127, "Hg": 202, "Pb": 208, "As": 75, "Ge": 74, "Fe": 56,
}

_TOKEN = re.compile(r"([A-Z][a-z]?)(\d*)|(\()|(\))(\d*)")


def parse_formula(text: str) -> dict[str, int]:
    """Element counts of a formula such as ``C10H18O`` or ``CH3(CH2)4OH``.

    Raises :class:`ValueError` with a short reason for anything else.
    """
    s = str(text).strip().replace(" ", "")
    if not s:
        raise ValueError("empty formula")
    stack: list[dict[str, int]] = [{}]
    pos = 0
    while pos < len(s):
        m = _TOKEN.match(s, pos)
        if not m:
            raise ValueError(f"invalid formula {text!r}: unexpected {s[pos]!r} at position {pos + 1}")
        if m.group(1):
            el = m.group(1)
            if el not in NOMINAL_ISOTOPE_MASS:
                raise ValueError(f"invalid formula {text!r}: unknown element {el!r}")
            k = int(m.group(2)) if m.group(2) else 1
            if k == 0:
                raise ValueError(f"invalid formula {text!r}: zero count for {el}")
            stack[-1][el] = stack[-1].get(el, 0) + k
        elif m.group(3):
            stack.append({})
        else:
            if len(stack) == 1:
                raise ValueError(f"invalid formula {text!r}: unbalanced ')'")
            k = int(m.group(5)) if m.group(5) else 1
            inner = stack.pop()
            for el, c in inner.items():
                stack[-1][el] = stack[-1].get(el, 0) + c * k
        pos = m.end()
    if len(stack) != 1:
        raise ValueError(f"invalid formula {text!r}: unbalanced '('")
    if not stack[0]:
        raise ValueError(f"invalid formula {text!r}")
    return stack[0]


def nominal_mass(text: str) -> int:
    r"""Nominal (integer) molecular mass of a formula [1]_.

    .. math::

        M_{nom} = \sum_e n_e \, A_e

    with :math:`n_e` the count of element :math:`e` and :math:`A_e` the mass
    number of its most abundant isotope (:data:`NOMINAL_ISOTOPE_MASS`: C 12,
    H 1, N 14, O 16, Cl 35, Br 79 ...).

    Parameters
    ----------
    text : str
        Molecular formula, e.g. ``C10H16`` or ``CH3(CH2)4OH``

    Returns
    -------
    mass : int
        Nominal mass, the m/z of the all-light-isotope molecular ion, [Da]

    Examples
    --------
    Monoterpene hydrocarbons C10H16 (limonene, the pinenes) show m/z 136, a
    fact of the trade: 10·12 + 16·1 = 136. Chlorobenzene: 6·12 + 5·1 + 35 = 112.

    >>> nominal_mass("C10H16"), nominal_mass("C6H5Cl"), nominal_mass("C10H18O")
    (136, 112, 154)

    References
    ----------
    .. [1] IUPAC. Compendium of Chemical Terminology (the "Gold Book"),
       entry "nominal mass"; 2nd ed., Blackwell, 1997 (from memory).
    """
    return sum(NOMINAL_ISOTOPE_MASS[el] * k for el, k in parse_formula(text).items())


def carbon_count(text: str) -> int:
    """Number of carbon atoms (``-1`` if the formula cannot be parsed).

    >>> carbon_count("C15H24"), carbon_count("not a formula")
    (15, -1)
    """
    try:
        return parse_formula(text).get("C", 0)
    except ValueError:
        return -1


def hill_formula(text: str) -> str:
    """The formula rewritten in Hill order (C, H, then alphabetical).

    >>> hill_formula("OH2")
    'H2O'
    >>> hill_formula("HOCH2CH3")
    'C2H6O'
    """
    counts = parse_formula(text)
    order = (["C", "H"] + sorted(k for k in counts if k not in ("C", "H"))) if "C" in counts else sorted(counts)
    return "".join(f"{el}{counts[el] if counts[el] != 1 else ''}" for el in order if el in counts)
