"""The peak table reader: one run's peaks, with whatever columns the lab exported.

Canonical columns (docs/formats.md, "Peak table"): ``peak`` (id), ``rt`` and/or ``ri``; optional
``mol_ion`` (nominal m/z), ``ions`` (key ions separated by spaces, commas or
semicolons), ``hit`` (name from the lab's spectral search), ``hit_match``
(0-100), ``area`` and ``area_percent`` (computed from ``area`` when the file has none). A
metadata preamble above the header (``[Header]``, ``Sample Name,oil lot 7``, ...) is skipped: the
header is the first row naming a time or index column and another known column, and recognised
preamble keys (sample, acquisition date, operator, instrument, column) become run metadata. Header spellings commonly seen in instrument exports
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
``hit_match`` within 0-100; ``area`` not negative; peak ids unique. A table
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
    "rt": ["rt", "r.t.", "r.time", "r. time", "ret.time", "peak rt", "rt apex", "ret. time", "ret time", "retention time", "retention", "rt min", "time", "tr", "apex rt",
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
    "hit_match": ["hit_match", "hit_score", "score", "match", "match score", "match factor", "similarity", "hit score", "quality", "sim",
                  "match quality", "probability score"],
    "area_percent": ["area %", "area pct", "area percent", "% area", "percent area", "pct area", "area norm",
                     "norm area", "normalised area", "normalized area", "area %total", "relative area"],
    "area": ["area", "peak area", "integrated area", "area counts", "abundance", "response", "height area"],
    "spectrum": ["spectrum", "mass spectrum", "ms", "spectrum pairs"],
}

#: Preamble keys recognised as run metadata (normalised spellings, see
#: :func:`matcher.io.delimited.normalize_header`) and the record field each one fills.
PREAMBLE_KEYS: dict[str, tuple[str, ...]] = {
    "sample": ("sample", "samplename", "sampleid", "samplelot", "lot", "lotnumber", "lotno", "batch", "samplenumber"),
    "acquired": ("acquired", "acquisitiondate", "acquisitiontime", "dateacquired", "injectiondate", "injectiontime",
                 "rundate", "date", "datetime", "analysisdate"),
    "analyst": ("analyst", "operator", "operatorname", "user", "username", "acquiredby"),
    "instrument": ("instrument", "instrumentname", "instrumentid", "system", "systemname", "gc"),
    "column": ("column", "columnname", "columntype", "stationaryphase"),
    "method": ("method", "methodname", "acquisitionmethod"),
}

#: Columns that, named in a row, make it the header row of a peak table below a preamble.
_ANCHOR_COLUMNS = ("rt", "ri")

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
    hit_match: np.ndarray
    area: np.ndarray
    has_rt: bool
    has_ri: bool
    rt_unit_source: str
    columns: dict          # canonical name -> header used
    lines: np.ndarray      # physical line of each peak in the file
    checksum: str = ""     # SHA-256 of the table's normalised content (see content_checksum)
    #: each peak's share of the summed area, per cent (from the file's area % column, else computed from area)
    area_percent: np.ndarray | None = None
    #: where area_percent comes from: "file", "computed from area" or "" (no areas)
    area_percent_source: str = ""
    #: run facts found in a preamble above the header (sample, acquired, analyst, instrument, column, method)
    metadata: dict | None = None
    #: the preamble as read: (key, value) pairs, one per line
    preamble: tuple = ()
    #: decimals each time was written with (None: unknown or converted from seconds), to show it as given
    rt_decimals: tuple = ()
    #: one entry per peak: ``(mz, intensity)`` float64 arrays sorted by m/z, or None (no spectrum);
    #: an empty tuple when the table has no spectra at all
    spectra: tuple = ()

    def __len__(self) -> int:
        return len(self.peak)


def content_checksum(peak, rt, ri, mol_ion, ions, hit, hit_match, area) -> str:
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
    for arr in (rt, ri, mol_ion, hit_match, area):
        a = np.ascontiguousarray(np.asarray(arr, dtype=np.float64))
        a = np.where(np.isnan(a), np.nan, a)  # one NaN bit pattern
        h.update(a.tobytes() + b"\0")
    h.update("\x1f".join(" ".join(map(str, i)) for i in ions).encode() + b"\0")
    h.update("\x1f".join(str(x) for x in hit).encode("utf-8", "surrogatepass"))
    return h.hexdigest()


def spectra_checksum(peak, spectra) -> str:
    """SHA-256 (hex) of a run's peak spectra: per peak its id, m/z values and intensities scaled to a base peak
    of 1 (rounded to 6 digits), whatever file or column they came from; "" when no peak has a spectrum.

    >>> s = spectra_checksum(["1", "2"], [(np.array([41.0, 93.0]), np.array([20.0, 100.0])), None])
    >>> len(s), s == spectra_checksum(["1", "2"], [([41, 93], [2.0, 10.0]), None]), spectra_checksum(["1"], [None])
    (64, True, '')
    """
    import hashlib

    h = hashlib.sha256(b"matcher peak spectra v1\0")
    any_spectrum = False
    for p, sp in zip(peak, spectra):
        if sp is None:
            continue
        mz, y = (np.asarray(v, dtype=np.float64) for v in sp)
        if not len(mz):
            continue
        any_spectrum = True
        top = float(np.max(y)) if len(y) else 0.0
        rel = np.round(y / top, 6) if top > 0 else y
        h.update(str(p).encode("utf-8", "surrogatepass") + b"\0")
        h.update(np.ascontiguousarray(mz).tobytes() + b"\0" + np.ascontiguousarray(rel).tobytes() + b"\0")
    return h.hexdigest() if any_spectrum else ""


def _is_header(fields: list[str]) -> bool:
    """A peak table's header row: it names a time or index column and at least one other known column."""
    from matcher.io.delimited import normalize_header, strip_units

    known = {}
    for canon, names in ALIASES.items():
        for n in [canon] + names:
            known[normalize_header(n)] = canon
    hits = [known.get(normalize_header(f)) or known.get(normalize_header(strip_units(f))) for f in fields]
    return any(h in _ANCHOR_COLUMNS for h in hits) and sum(1 for h in hits if h) >= 2


def preamble_metadata(lines) -> tuple[dict, tuple]:
    """Run facts from preamble lines (``(line, fields)`` pairs): ``(record, pairs)``.

    A line ``Sample Name,Rosemary oil lot 7`` or ``Operator: ana`` gives a key and a value;
    section markers such as ``[Header]`` are skipped. Keys in :data:`PREAMBLE_KEYS` fill the
    record (the first value wins); every pair is kept.

    >>> preamble_metadata([(1, ["[Header]"]), (2, ["Sample Name", "oil lot 7"]), (3, ["Operator: ana"])])
    ({'sample': 'oil lot 7', 'analyst': 'ana'}, (('Sample Name', 'oil lot 7'), ('Operator', 'ana')))
    """
    from matcher.io.delimited import normalize_header

    lookup = {k: field for field, keys in PREAMBLE_KEYS.items() for k in keys}
    record: dict = {}
    pairs = []
    for _, fields in lines:
        fields = [f.strip() for f in fields if f is not None and str(f).strip()]
        if not fields:
            continue
        if len(fields) == 1:
            text = fields[0]
            if text.startswith("[") and text.endswith("]"):
                continue
            m = re.match(r"\s*([^:=]{1,80}?)\s*[:=]\s*(.*)$", text)
            if not m:
                continue
            key, value = m.group(1), m.group(2).strip()
        else:
            key, value = fields[0].rstrip(":= ").strip(), fields[1]
        if not key or not value:
            continue
        key, value = key[:200], value[:1000]
        pairs.append((key, value))
        field = lookup.get(normalize_header(key))
        if field and field not in record:
            record[field] = value
    return record, tuple(pairs)


def read_peaks(path, *, rt_unit: str | None = None, overrides: dict[str, str] | None = None) -> PeakTable:
    """Read and check a peak table: a file (CSV, TSV, semicolon CSV or ``.xlsx``) or a pandas DataFrame.

    A DataFrame gets exactly the checks a file gets (see :func:`matcher.io.delimited.from_frame`).
    """
    from matcher.io.delimited import as_table, decimals, echo, map_headers, numbers, texts

    raw = as_table(path, what="peak table", is_header=_is_header)
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
        rt_given = tuple(decimals(raw, cols["rt"])) if unit == "min" else ()
    else:
        rt = nan.copy()
        rt_given = ()
    ri = numbers(raw, cols["ri"], required="rt" not in cols, minimum=0.0, maximum=MAX_RI) if "ri" in cols else nan.copy()
    if "rt" in cols and "ri" in cols:
        both_empty = np.isnan(rt) & np.isnan(ri)
        if both_empty.any():
            k = int(np.flatnonzero(both_empty)[0])
            raise raw.fail("neither a time nor an index is given for this peak", row=k + 1, column=cols["rt"])
    mol_ion = (numbers(raw, cols["mol_ion"], required=False, integer=True, minimum=1, maximum=MAX_MZ)
               if "mol_ion" in cols else nan.copy())
    hit_match = (numbers(raw, cols["hit_match"], required=False, minimum=0.0, maximum=100.0)
                 if "hit_match" in cols else nan.copy())
    area = numbers(raw, cols["area"], required=False, nonnegative=True) if "area" in cols else nan.copy()
    if "area_percent" in cols:
        area_percent = numbers(raw, cols["area_percent"], required=False, minimum=0.0, maximum=100.0)
        percent_source = "file"
    elif np.isfinite(area).any() and np.nansum(area) > 0:
        area_percent = area / np.nansum(area) * 100.0
        percent_source = "computed from area"
    else:
        area_percent, percent_source = nan.copy(), ""
    metadata, pairs = preamble_metadata(raw.preamble)
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

    checksum = content_checksum(ids, rt, ri, mol_ion, ions, hit, hit_match, area)
    return PeakTable(
        checksum=checksum,
        path=raw.path,
        peak=np.array(ids, dtype=object),
        rt=rt, ri=ri, mol_ion=mol_ion, ions=tuple(ions),
        hit=np.array(hit, dtype=object), hit_match=hit_match, area=area,
        has_rt="rt" in cols, has_ri="ri" in cols, rt_unit_source=source, columns=cols,
        lines=np.array([raw.line_of(k + 1) for k in range(n)], dtype=np.int64),
        spectra=spectra, area_percent=area_percent, area_percent_source=percent_source,
        metadata=metadata, preamble=pairs, rt_decimals=rt_given,
    )


__all__ = ["PeakTable", "read_peaks", "preamble_metadata", "PREAMBLE_KEYS", "content_checksum", "time_unit", "parse_ions", "ALIASES", "MAX_RT_MIN", "MAX_RI", "MAX_MZ"]
