"""The peak table reader: one run's peaks, with whatever columns the lab exported.

Canonical columns (docs/formats.md, "Peak table"): ``peak`` (id), ``rt`` and/or ``ri``; optional
``mol_ion`` (nominal m/z), ``ions`` (key ions separated by spaces, commas or
semicolons), ``hit`` (name from the lab's spectral search), ``hit_score``
(0-100) and ``area``. Header spellings commonly seen in instrument exports
are recognised (:data:`ALIASES`; case, spaces and punctuation are ignored, and
a bracketed unit such as ``[s]`` or ``(min)`` is set aside); ``--map
column=header`` overrides. A bare ``Index`` header is taken as the peak
number (as in many exports), not a retention index: write ``RI``.

**Time unit**: ``rt_unit`` wins; else the header decides (``[s]``, ``(s)``,
``sec``, ``seconds`` mean seconds; ``min`` minutes); else minutes. Times are
returned in minutes, and :attr:`PeakTable.rt_unit_source` says how the unit
was decided.

**Limits** (refused with one :class:`~matcher.errors.InputError`): times must
be positive, finite and at most 10,000 min (:data:`MAX_RT_MIN`); indices
finite and within 0-10,000 (:data:`MAX_RI`, well above the largest indices GC
reaches); ``mol_ion`` and ions whole numbers 1-5,000 (:data:`MAX_MZ`);
``hit_score`` within 0-100; ``area`` not negative; peak ids unique. A table
with neither a time nor an index column, or with a header but no peaks, is
refused. Empty cells in optional
columns are allowed (NaN / empty).

>>> time_unit("Retention time [s]"), time_unit("RT (min)"), time_unit("rt"), time_unit("RT [s]", "min")
(('s', "header 'Retention time [s]'"), ('min', "header 'RT (min)'"), ('min', 'default (minutes)'), ('min', 'option (--rt-unit min)'))
>>> parse_ions("93 121;136")
(93, 121, 136)
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

from matcher.errors import InputError

from matcher.limits import MAX_MZ, MAX_RI, MAX_RT_MIN  # declared once, shared with the command line

#: Header spellings (beyond the canonical name) for each canonical column.
ALIASES: dict[str, list[str]] = {
    "peak": ["peak", "peak #", "peak no", "peak no.", "peak number", "peak id", "pk", "pk#", "no", "no.", "nr", "#",
             "number", "id", "index", "idx", "index no", "compound no"],
    "rt": ["rt", "r.t.", "ret. time", "ret time", "retention time", "retention", "rt min", "time", "tr", "apex rt",
           "apex retention time", "rt s", "rt sec", "rt seconds", "rt minutes", "retention time min",
           "retention time sec", "retention time seconds", "retention time minutes", "ret time sec", "ret time min",
           "time min", "time sec", "time s"],
    "ri": ["ri", "retention index", "ret. index", "kovats index", "kovats", "lri", "linear retention index", "ri calc",
           "ri exp", "calculated ri", "calc. ri"],
    "mol_ion": ["mol_ion", "mol ion", "molecular ion", "m+", "m+.", "m.+", "m/z m+", "parent ion", "molecular mass",
                "mw", "nominal mass"],
    "ions": ["ions", "key ions", "main ions", "fragments", "major ions", "ion list", "ions m/z"],
    "hit": ["hit", "library hit", "library match", "best hit", "hit name", "compound", "compound name",
            "name", "identification", "tentative id"],
    "hit_score": ["hit_score", "score", "match", "match score", "match factor", "similarity", "hit score", "quality", "sim",
                  "match quality", "probability score"],
    "area": ["area", "peak area", "area %", "area pct", "abundance", "response", "height area"],
    "spectrum": ["spectrum", "mass spectrum", "ms", "spectrum pairs"],
}

_SECONDS = re.compile(r"[\[\(]\s*s\s*[\]\)]|\bsecs?\b|\bseconds?\b|\(sec\)|\[sec\]", re.IGNORECASE)
_MINUTES = re.compile(r"\bmin\b|\bmins\b|\bminutes?\b|[\[\(]\s*min\s*[\]\)]", re.IGNORECASE)


def time_unit(header: str, rt_unit: str | None = None) -> tuple[str, str]:
    """The unit (``'min'`` or ``'s'``) of a time column and how it was decided."""
    if rt_unit is not None:
        from matcher.rules import check_rt_unit

        u = check_rt_unit(rt_unit)
        return u, f"option (--rt-unit {u})"
    h = str(header).replace("_", " ")
    if _SECONDS.search(h):
        return "s", f"header {header!r}"
    if _MINUTES.search(h):
        return "min", f"header {header!r}"
    return "min", "default (minutes)"


def parse_ions(text: str) -> tuple[int, ...]:
    """Key ions from ``'93 121 136'``, ``'93;121'`` or ``'93, 121'``; raises ValueError on anything else."""
    parts = [p for p in re.split(r"[\s;,]+", str(text).strip()) if p]
    out = []
    for p in parts:
        if not re.fullmatch(r"\d+(\.0+)?", p):
            raise ValueError(f"not an ion m/z: {p[:20]!r}")
        v = int(float(p))
        if not 1 <= v <= MAX_MZ:
            raise ValueError(f"ion m/z {v} outside 1-{MAX_MZ}")
        out.append(v)
    return tuple(out)


@dataclass
class PeakTable:
    """A run's peaks as arrays (times in minutes; NaN where absent)."""

    path: str
    peak: np.ndarray       # object array of str
    rt: np.ndarray
    ri: np.ndarray
    mol_ion: np.ndarray
    ions: tuple            # one tuple of ints per peak
    hit: np.ndarray        # object array of str ('' when absent)
    hit_score: np.ndarray
    area: np.ndarray
    has_rt: bool
    has_ri: bool
    rt_unit_source: str
    columns: dict          # canonical name -> header used
    lines: np.ndarray      # physical line of each peak in the file
    checksum: str = ""     # SHA-256 of the table's normalised content (see content_checksum)
    #: one entry per peak: ``(mz, intensity)`` float64 arrays sorted by m/z, or None (no spectrum);
    #: an empty tuple when the table has no spectra at all
    spectra: tuple = ()

    def __len__(self) -> int:
        return len(self.peak)


def content_checksum(peak, rt, ri, mol_ion, ions, hit, hit_score, area) -> str:
    """SHA-256 (hex) of a peak table's normalised content: ids, times in minutes, indices, hints.

    The same peaks give the same checksum whatever the file's name, format (CSV, TSV,
    XLSX), delimiter, header spelling or time unit; screening outputs carry it per run so
    that ``matcher confirm`` recognises one peak confirmed through a copy of its results.

    >>> a = content_checksum(["1"], np.array([5.2]), np.array([np.nan]), np.array([np.nan]), [()], [""],
    ...                      np.array([np.nan]), np.array([np.nan]))
    >>> len(a), a == content_checksum(["1"], np.array([5.2]), np.array([np.nan]), np.array([np.nan]), [()], [""],
    ...                               np.array([np.nan]), np.array([np.nan]))
    (64, True)
    """
    import hashlib

    h = hashlib.sha256(b"matcher peak table v1\0")
    h.update("\x1f".join(str(p) for p in peak).encode("utf-8", "surrogatepass") + b"\0")
    for arr in (rt, ri, mol_ion, hit_score, area):
        a = np.ascontiguousarray(np.asarray(arr, dtype=np.float64))
        a = np.where(np.isnan(a), np.nan, a)  # one NaN bit pattern
        h.update(a.tobytes() + b"\0")
    h.update("\x1f".join(" ".join(map(str, i)) for i in ions).encode() + b"\0")
    h.update("\x1f".join(str(x) for x in hit).encode("utf-8", "surrogatepass"))
    return h.hexdigest()


def read_peaks(path, *, rt_unit: str | None = None, overrides: dict[str, str] | None = None) -> PeakTable:
    """Read and check a peak table: a file (CSV, TSV, semicolon CSV or ``.xlsx``) or a pandas DataFrame.

    A DataFrame gets exactly the checks a file gets (see :func:`matcher.io.delimited.from_frame`).
    """
    from matcher.io.delimited import as_table, echo, map_headers, numbers, texts

    raw = as_table(path, what="peak table")
    cols = map_headers(raw, ALIASES, overrides)
    if "rt" not in cols and "ri" not in cols:
        raise InputError(
            "the peak table has neither a retention-time column ('rt') nor an index column ('ri'); "
            f"its header has: {', '.join(raw.header)[:200]} (use --map rt=HEADER)",
            file=raw.path, line=raw.first_line,
        )
    n = len(raw)
    if n == 0:
        raise InputError("the peak table has a header but no peaks (no data rows)", file=raw.path, line=raw.first_line)
    nan = np.full(n, np.nan)

    if "peak" in cols:
        ids = texts(raw, cols["peak"], required=True)
        seen: dict[str, int] = {}
        for k, p in enumerate(ids):
            if p in seen:
                raise raw.fail(f"duplicate peak id {echo(p)} (also on data row {seen[p] + 1})", row=k + 1, column=cols["peak"])
            seen[p] = k
    else:
        ids = [str(k + 1) for k in range(n)]

    source = "no time column"
    if "rt" in cols:
        unit, source = time_unit(cols["rt"], rt_unit)
        factor = 60.0 if unit == "s" else 1.0
        rt = numbers(raw, cols["rt"], required="ri" not in cols, positive=True, maximum=MAX_RT_MIN * factor) / factor
    else:
        rt = nan.copy()
    ri = numbers(raw, cols["ri"], required="rt" not in cols, minimum=0.0, maximum=MAX_RI) if "ri" in cols else nan.copy()
    if "rt" in cols and "ri" in cols:
        both_empty = np.isnan(rt) & np.isnan(ri)
        if both_empty.any():
            k = int(np.flatnonzero(both_empty)[0])
            raise raw.fail("neither a time nor an index is given for this peak", row=k + 1, column=cols["rt"])
    mol_ion = (numbers(raw, cols["mol_ion"], required=False, integer=True, minimum=1, maximum=MAX_MZ)
               if "mol_ion" in cols else nan.copy())
    hit_score = (numbers(raw, cols["hit_score"], required=False, minimum=0.0, maximum=100.0)
                 if "hit_score" in cols else nan.copy())
    area = numbers(raw, cols["area"], required=False, nonnegative=True) if "area" in cols else nan.copy()
    hit = texts(raw, cols["hit"]) if "hit" in cols else [""] * n
    ions: list[tuple[int, ...]] = []
    if "ions" in cols:
        for k, cell in enumerate(texts(raw, cols["ions"])):
            try:
                ions.append(parse_ions(cell))
            except ValueError as exc:
                raise raw.fail(str(exc), row=k + 1, column=cols["ions"])
    else:
        ions = [()] * n
    spectra: tuple = ()
    if "spectrum" in cols:
        from matcher.io.spectrum_text import parse_spectrum_cells, parse_spectrum_text

        cells = texts(raw, cols["spectrum"])
        try:
            spectra = tuple(parse_spectrum_cells(cells))
        except ValueError:
            for k, cell in enumerate(cells):  # name the first faulty row
                try:
                    parse_spectrum_text(cell)
                except ValueError as exc:
                    raise raw.fail(str(exc), row=k + 1, column=cols["spectrum"])
            raise

    checksum = content_checksum(ids, rt, ri, mol_ion, ions, hit, hit_score, area)
    return PeakTable(
        checksum=checksum,
        path=raw.path,
        peak=np.array(ids, dtype=object),
        rt=rt, ri=ri, mol_ion=mol_ion, ions=tuple(ions),
        hit=np.array(hit, dtype=object), hit_score=hit_score, area=area,
        has_rt="rt" in cols, has_ri="ri" in cols, rt_unit_source=source, columns=cols,
        lines=np.array([raw.line_of(k + 1) for k in range(n)], dtype=np.int64),
        spectra=spectra,
    )


__all__ = ["PeakTable", "read_peaks", "content_checksum", "time_unit", "parse_ions", "ALIASES", "MAX_RT_MIN", "MAX_RI", "MAX_MZ"]
