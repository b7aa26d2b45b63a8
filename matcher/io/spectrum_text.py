"""Mass spectra written as text in one table cell: ``m/z:intensity`` pairs.

The peak-table column ``spectrum`` (docs/formats.md) holds one centroided mass
spectrum as pairs separated by spaces, commas or semicolons, each pair an m/z
and an intensity joined by a colon, for example ``41:12 67:30 68:100 93:45``.
Intensities are in any linear unit (counts or relative); they are not
rescaled here. An empty cell means no spectrum.

Rules (ours): m/z from 1 to :data:`matcher.limits.MAX_MZ`, intensities finite
and not negative, each m/z at most once, at most :data:`MAX_PAIRS` pairs.
Pairs are returned sorted by m/z.

>>> mz, y = parse_spectrum_text("93:45 68:100, 41:12")
>>> mz.tolist(), y.tolist()
([41.0, 68.0, 93.0], [12.0, 100.0, 45.0])
>>> format_spectrum_text(mz, y)
'41:12 68:100 93:45'
>>> parse_spectrum_text("")
"""

from __future__ import annotations

import math
import re

import numpy as np

from matcher.limits import MAX_MZ

#: most pairs one cell may hold (a full-scan spectrum from m/z 1 to 5000 at unit resolution)
MAX_PAIRS = MAX_MZ

_SPLIT = re.compile(r"[\s,;]+")


def parse_spectrum_text(text: str) -> tuple[np.ndarray, np.ndarray] | None:
    """Parse ``m/z:intensity`` pairs; returns ``(mz, intensity)`` float64 arrays sorted by m/z, or None if empty.

    Raises :class:`ValueError` with a one-line message naming the offending pair.
    """
    text = (text or "").strip()
    if not text:
        return None
    parts = [p for p in _SPLIT.split(text) if p]
    fast = _fast(parts)
    if fast is not None:
        return fast
    return _checked(parts)


def _fast(parts: list[str]):
    """One NumPy parse of well-formed pairs; None when anything is off (the checked reading names it)."""
    if len(parts) > MAX_PAIRS or any(p.count(":") != 1 for p in parts):
        return None
    try:
        arr = np.array(":".join(parts).split(":"), dtype=np.float64).reshape(-1, 2)
    except ValueError:
        return None
    mz, y = arr[:, 0], arr[:, 1]
    if not (np.all(np.isfinite(mz) & (mz >= 1) & (mz <= MAX_MZ)) and np.all(np.isfinite(y) & (y >= 0))):
        return None
    order = np.argsort(mz, kind="stable")
    mz, y = mz[order], y[order]
    if np.any(np.diff(mz) == 0):
        return None
    return mz, y


def _checked(parts: list[str]):
    if len(parts) > MAX_PAIRS:
        raise ValueError(f"a spectrum may hold at most {MAX_PAIRS} m/z:intensity pairs, this one has {len(parts)}")
    mz = np.empty(len(parts))
    y = np.empty(len(parts))
    for k, part in enumerate(parts):
        a, sep, b = part.partition(":")
        try:
            if not sep:
                raise ValueError
            m, v = float(a), float(b)
        except ValueError:
            raise ValueError(f"spectrum pair {part[:40]!r} is not m/z:intensity (for example 93:45)") from None
        if not (math.isfinite(m) and 1 <= m <= MAX_MZ):
            raise ValueError(f"spectrum pair {part[:40]!r}: m/z must be between 1 and {MAX_MZ}")
        if not (math.isfinite(v) and v >= 0):
            raise ValueError(f"spectrum pair {part[:40]!r}: the intensity must be a number of at least 0")
        mz[k], y[k] = m, v
    order = np.argsort(mz, kind="stable")
    mz, y = mz[order], y[order]
    dup = np.flatnonzero(np.diff(mz) == 0)
    if dup.size:
        raise ValueError(f"spectrum lists m/z {mz[dup[0]]:g} twice")
    return mz, y


_WELL_FORMED = re.compile(r"\s*[^\s:,;]+:[^\s:,;]+(?:[\s,;]+[^\s:,;]+:[^\s:,;]+)*[\s,;]*")


def parse_spectrum_cells(cells) -> list:
    """:func:`parse_spectrum_text` of every cell of a column, the well-formed ones parsed by NumPy in one go.

    Returns one ``(mz, intensity)`` or None per cell; a faulty cell raises the same :class:`ValueError` as
    :func:`parse_spectrum_text` (the caller adds the row). Cells with more than :data:`MAX_PAIRS` pairs, or
    anything else the vectorised checks do not pass, are read one by one.
    """
    cells = ["" if c is None else str(c) for c in cells]
    out: list = [None] * len(cells)
    fast = [k for k, c in enumerate(cells) if c.strip() and _WELL_FORMED.fullmatch(c)]
    if fast:
        texts = [cells[k] for k in fast]
        counts = np.array([t.count(":") for t in texts], dtype=np.int64)
        try:
            flat = np.array(" ".join(texts).replace(",", " ").replace(";", " ").replace(":", " ").split(),
                            dtype=np.float64).reshape(-1, 2)
        except ValueError:
            flat = None
        if flat is not None and len(flat) == counts.sum():
            cell = np.repeat(np.arange(len(fast)), counts)
            mz, y = flat[:, 0], flat[:, 1]
            bad = ~(np.isfinite(mz) & (mz >= 1) & (mz <= MAX_MZ) & np.isfinite(y) & (y >= 0))
            order = np.lexsort((mz, cell))
            mz, y, cs = mz[order], y[order], cell[order]
            dup = np.flatnonzero((np.diff(mz) == 0) & (cs[1:] == cs[:-1]))
            wrong = np.zeros(len(fast), dtype=bool)
            wrong[cell[bad]] = True
            wrong[cs[dup]] = True
            wrong |= counts > MAX_PAIRS
            bounds = np.cumsum(counts)[:-1]
            for j, (m, v) in enumerate(zip(np.split(mz, bounds), np.split(y, bounds))):
                if not wrong[j]:
                    out[fast[j]] = (m.copy(), v.copy())
    for k, c in enumerate(cells):
        if out[k] is None and c.strip():
            out[k] = parse_spectrum_text(c)
    return out


def _number(v: float) -> str:
    return str(int(v)) if float(v).is_integer() and abs(v) < 1e15 else repr(float(v))


def format_spectrum_text(mz, intensity) -> str:
    """The inverse of :func:`parse_spectrum_text` (lossless for float64 values)."""
    mz = np.asarray(mz, dtype=np.float64)
    y = np.asarray(intensity, dtype=np.float64)
    order = np.argsort(mz, kind="stable")
    return " ".join(f"{_number(m)}:{_number(v)}" for m, v in zip(mz[order], y[order]))


__all__ = ["parse_spectrum_text", "parse_spectrum_cells", "format_spectrum_text", "MAX_PAIRS"]
