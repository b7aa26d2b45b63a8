"""Form checks for structure identifiers kept with library compounds.

An InChIKey (IUPAC/InChI Trust, InChI Technical Manual) is 27 characters:
a 14-letter skeleton hash, a hyphen, a 10-letter block (8 hash letters, the
standard flag and the version letter), a hyphen and one protonation letter.
Only the form is checked here, not that it belongs to the structure.

>>> is_inchikey("XLYOFNOQVPJJNP-UHFFFAOYSA-N")   # water
True
>>> normalise_inchikey(" xlyofnoqvpjjnp-uhfffaoysa-n ")
'XLYOFNOQVPJJNP-UHFFFAOYSA-N'
>>> is_inchikey("XLYOFNOQVPJJNP-UHFFFAOYSA")
False
"""

from __future__ import annotations

import re

INCHIKEY = re.compile(r"^[A-Z]{14}-[A-Z]{10}-[A-Z]$")


def is_inchikey(text: str) -> bool:
    """True when ``text`` has the form of an InChIKey."""
    return bool(INCHIKEY.match(str(text)))


def normalise_inchikey(text: str) -> str:
    """Upper-cased, stripped InChIKey, or :class:`ValueError` when the form is wrong."""
    s = str(text).strip().upper()
    if not INCHIKEY.match(s):
        raise ValueError(f"not an InChIKey: {text!r} (expected 14 letters, '-', 10 letters, '-', 1 letter)")
    return s


__all__ = ["INCHIKEY", "is_inchikey", "normalise_inchikey"]
