"""Limits on values, declared once and shared by file readers, the Python API and the command line.

A value typed on the command line obeys the same rule as the same value read
from a file, with the same one-line message (raised as
:class:`~matcher.errors.MatcherError`). The file readers (:mod:`matcher.io.delimited`,
:mod:`matcher.io.peak_tables`, the library reader) take their bounds from here.

>>> check_sd(2.5)
2.5
>>> check_sd(float("nan"))
Traceback (most recent call last):
...
matcher.errors.MatcherError: --index-scatter must be a finite number greater than 0 (index units), got nan
>>> check_mol_ion(136.0)
136
>>> check_mol_ion(136.5)
Traceback (most recent call last):
...
matcher.errors.MatcherError: --mol-ion must be a whole m/z between 1 and 5000, got 136.5
>>> check_id("99999999999999999999", "observation id")
Traceback (most recent call last):
...
matcher.errors.MatcherError: observation id must be a whole number between 1 and 9223372036854775807, got '99999999999999999999'
"""

from __future__ import annotations

import math
from typing import Any

from matcher.errors import MatcherError

#: Longest text cell (and name, source, synonym...) accepted, in characters.
MAX_CELL = 1000
#: Longest name accepted by ``library add`` / ``confirm`` (the import's cell cap).
MAX_NAME = MAX_CELL
#: Retention times: positive minutes, at most this.
MAX_RT_MIN = 10_000.0
#: Retention indices: 0 to this (well above the largest indices GC reaches).
MAX_RI = 10_000.0
#: m/z of molecular and key ions: whole numbers 1 to this.
MAX_MZ = 5_000
#: Index scatter (``--index-scatter``, a library ``ri_sd``): finite, > 0 (files: >= 0), at most this many index units.
MAX_SD = 1_000.0
#: ``n`` of a library summary (how many measurements an observation stands for): 1 to this.
MAX_N = 1_000_000
#: Database ids: 1 to the largest signed 64-bit integer (SQLite and PostgreSQL ``bigint``).
MAX_ID = 2**63 - 1
#: Largest input file read, in bytes (peak tables, ladders, library files, calibrations, results).
MAX_FILE_BYTES = 512 * 1024 * 1024
#: Largest JSON document read (calibrations, screening results), in bytes.
MAX_JSON_BYTES = 256 * 1024 * 1024
#: Deepest nesting accepted in a JSON document.
MAX_JSON_DEPTH = 64
#: Longest run of digits in a JSON number (a float64 needs at most 17 significant ones).
MAX_JSON_DIGITS = 100
#: Most rows read from one table (CSV or XLSX); the XLSX sheet limit plus one.
MAX_ROWS = 1_048_576
#: Most cells read from one XLSX sheet (rows x columns), checked while streaming.
MAX_XLSX_CELLS = 20_000_000


def _number(value: Any) -> float | None:
    if isinstance(value, bool):
        return None
    try:
        return float(value)
    except (TypeError, ValueError, OverflowError):
        return None


def check_sd(value: Any, option: str = "--index-scatter") -> float:
    """An index scatter: finite, greater than 0, at most :data:`MAX_SD`."""
    v = _number(value)
    if v is None or not math.isfinite(v) or v <= 0:
        raise MatcherError(f"{option} must be a finite number greater than 0 (index units), got {value!r}"
                           if v is None else f"{option} must be a finite number greater than 0 (index units), got {v:g}")
    if v > MAX_SD:
        raise MatcherError(f"{option} must be at most {MAX_SD:g} index units, got {v:g}")
    return v


def check_mol_ion(value: Any, option: str = "--mol-ion") -> int:
    """A molecular ion: a whole m/z from 1 to :data:`MAX_MZ` (the peak-table rule)."""
    v = _number(value)
    if v is None or not math.isfinite(v) or v != round(v) or not 1 <= v <= MAX_MZ:
        shown = f"{v:g}" if v is not None and math.isfinite(v) and abs(v) < 1e15 else repr(value) if v is None else f"{v!r}"
        raise MatcherError(f"{option} must be a whole m/z between 1 and {MAX_MZ}, got {shown}")
    return int(v)


def check_ri(value: Any, option: str = "RI") -> float:
    """A retention index: finite, 0 to :data:`MAX_RI`."""
    v = _number(value)
    if v is None or not math.isfinite(v) or not 0 <= v <= MAX_RI:
        raise MatcherError(f"{option} must be a finite index between 0 and {MAX_RI:g}, got {value!r}")
    return v


def check_name(value: Any, what: str = "name") -> str:
    """A compound name (or other one-line text): not empty, at most :data:`MAX_NAME` characters."""
    text = " ".join(str(value if value is not None else "").split())
    if not text:
        raise MatcherError(f"the {what} is empty")
    if len(text) > MAX_NAME:
        raise MatcherError(f"the {what} has {len(text)} characters; at most {MAX_NAME} are accepted (as in a library file)")
    return text


def check_text(value: Any, what: str) -> str | None:
    """Optional free text (source, analyst, reason): None when empty, at most :data:`MAX_CELL` characters."""
    if value is None:
        return None
    text = str(value)
    if len(text) > MAX_CELL:
        raise MatcherError(f"the {what} has {len(text)} characters; at most {MAX_CELL} are accepted (as in a library file)")
    return text


def check_id(value: Any, what: str = "id") -> int:
    """A database id: a whole number from 1 to :data:`MAX_ID`."""
    try:
        v = int(str(value).strip())
    except (TypeError, ValueError):
        v = None
    if v is None or not 1 <= v <= MAX_ID:
        raise MatcherError(f"{what} must be a whole number between 1 and {MAX_ID}, got {str(value)!r}")
    return v


__all__ = [
    "MAX_CELL", "MAX_NAME", "MAX_RT_MIN", "MAX_RI", "MAX_MZ", "MAX_SD", "MAX_N", "MAX_ID", "MAX_FILE_BYTES",
    "MAX_JSON_BYTES", "MAX_JSON_DEPTH", "MAX_JSON_DIGITS", "MAX_ROWS", "MAX_XLSX_CELLS",
    "check_sd", "check_mol_ion", "check_ri", "check_name", "check_text", "check_id",
]
