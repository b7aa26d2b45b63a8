"""Reference ladders: reading the ladder CSV and checking that it is sound.

A ladder file has a retention-time column ``rt`` and either ``carbons``
(chain length) or ``index`` (assigned index), optionally ``name``; see
:mod:`matcher.retention.series` for how each series assigns indices. Times are in
minutes unless the header says seconds (``rt [s]``) or ``rt_unit="s"``.

**Hard checks** (the ladder is refused with one :class:`~matcher.errors.InputError`):
retention rising strictly with index (no tied times, no times going
backwards), no duplicate or fractional chain lengths, at least two standards.

**Soft findings** (reported and stored with the calibration): a standard or
an interval whose spacing breaks the trend of its neighbours (a probable
mislabel or missing standard), gaps in the series, fewer than three standards
(spacing cannot be checked), leave-one-out residuals and, in isothermal mode,
residuals of the straight line of index on :math:`\\log(t_R - t_M)`.

The spacing check works on :math:`y = t_R` (programmed) or
:math:`y = \\log(t_R - t_M)` (isothermal). For each interval the slope
:math:`s_k = \\Delta y / \\Delta I` is compared with the trend of its
neighbours, the median slope of up to two intervals on each side. A ratio
above 1.5 or below 1/1.5 (end intervals, or ladders of fewer than five
standards: 1.8 and 1/1.8) is a finding; two neighbouring findings of
opposite sense name the shared standard as a probable mislabel. These
thresholds are our own choice (a skipped alkane doubles the spacing; ordinary
programmed ladders stay inside them, although the first standards of a run
with a long isothermal hold can trip them).

>>> rt = np.array([2.0, 4.0, 6.0, 10.0, 12.0])       # invented: C11 is missing
>>> qc = check_ladder(rt, np.array([800., 900, 1000, 1100, 1200]), names=["C8", "C9", "C10", "C11", "C12"])
>>> [f["code"] for f in qc.findings]
['probable-missing-standard']
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from matcher.errors import InputError, MatcherError
from matcher.rules import MAX_RT_MIN  # noqa: F401 - largest accepted retention time, minutes (declared in matcher.rules)
from matcher.retention.series import SERIES, check_series

#: Largest accepted chain length.
MAX_CARBONS = 200
#: Largest accepted assigned index.
MAX_INDEX = 20_000.0

ALIASES: dict[str, list[str]] = {
    "rt": ["retention time", "ret time", "rettime", "time", "tr", "r.t.", "retention"],
    "carbons": ["carbon number", "carbon", "c", "cn", "n", "chain length", "nc", "c#"],
    "index": ["ri", "retention index", "assigned index", "ecl", "lee index", "i"],
    "name": ["compound", "standard", "alkane", "component"],
}

INTERIOR_LIMIT = 1.5
END_LIMIT = 1.8


@dataclass
class Ladder:
    """Standards of a ladder, sorted by assigned index; times in minutes."""

    path: str
    series: str
    rt: np.ndarray
    index: np.ndarray
    names: list[str]
    carbons: np.ndarray
    rows: np.ndarray  # data row of each standard in the file
    rt_unit: str = "min"
    rt_unit_source: str = "default (minutes)"
    #: decimals each time was written with in the file (None: unknown, or converted from seconds)
    rt_decimals: list | None = None

    def __len__(self) -> int:
        return len(self.rt)


def read_ladder(path, *, series: str | None = None, rt_unit: str | None = None,
                overrides: dict[str, str] | None = None) -> Ladder:
    """Read and hard-check a ladder: a file or a pandas DataFrame (same checks); see the module docstring."""
    from matcher.io.peak_tables import time_unit
    from matcher.retention.series import assigned_index, lee_index
    from matcher.io.delimited import as_table, decimals, map_headers, numbers, texts

    raw = as_table(path, what="ladder")
    cols = map_headers(raw, ALIASES, overrides)
    if "rt" not in cols:
        raise InputError(f"the ladder has no retention-time column 'rt'; its header has: {', '.join(raw.header)}",
                         file=raw.path, line=raw.first_line)
    key = check_series(series).key if series else ("alkanes" if "carbons" in cols else "custom" if "index" in cols else None)
    if key is None:
        if "name" in cols and len(raw) and all(lee_index(n) is not None for n in texts(raw, cols["name"])):
            key = "pah"
        else:
            raise InputError("the ladder has no 'carbons' or 'index' column (which index does each standard have?)",
                             file=raw.path, line=raw.first_line)
    if len(raw) < 2:
        raise InputError(f"a ladder needs at least two standards; this one has {len(raw)}", file=raw.path)

    unit, source = time_unit(cols["rt"], rt_unit)
    rt = numbers(raw, cols["rt"], positive=True, maximum=MAX_RT_MIN * (60.0 if unit == "s" else 1.0))
    given = decimals(raw, cols["rt"]) if unit == "min" else [None] * len(rt)
    if unit == "s":
        rt = rt / 60.0
    n = len(rt)
    carbons = np.full(n, np.nan)
    names = texts(raw, cols["name"]) if "name" in cols else [""] * n
    if "index" in cols:
        index = numbers(raw, cols["index"], minimum=0.0, maximum=MAX_INDEX)
        idx_col = cols["index"]
        if "carbons" in cols:
            carbons = numbers(raw, cols["carbons"], required=False, positive=True, integer=True, maximum=MAX_CARBONS)
    elif key in ("alkanes", "fame"):
        if "carbons" not in cols:
            raise InputError(f"series {key!r} needs a 'carbons' column (chain length) or an 'index' column",
                             file=raw.path, line=raw.first_line)
        idx_col = cols["carbons"]
        carbons = numbers(raw, idx_col, positive=True, integer=True, maximum=MAX_CARBONS)
        index = assigned_index(key, carbons=carbons)
    elif key == "pah":
        if "name" not in cols:
            raise InputError("series 'pah' needs a 'name' column or an 'index' column", file=raw.path, line=raw.first_line)
        idx_col = cols["name"]
        for k, nm in enumerate(names):
            if lee_index(nm) is None:
                raise raw.fail(f"not a Lee-index standard (naphthalene, phenanthrene, chrysene, picene): {nm[:40]!r}; "
                               "give an 'index' column for other PAHs", row=k + 1, column=idx_col)
        index = assigned_index("pah", names=names)
    else:
        raise InputError("a custom series needs an 'index' column", file=raw.path, line=raw.first_line)

    names = [nm or default_name(key, index[i]) for i, nm in enumerate(names)]
    rows = np.arange(1, n + 1)
    what = "chain length" if "carbons" in cols and "index" not in cols else "index"
    order = np.argsort(index, kind="stable")
    si = index[order]
    dup = np.flatnonzero(np.diff(si) == 0)
    if dup.size:
        a, b = sorted((int(rows[order[dup[0]]]), int(rows[order[dup[0] + 1]])))
        val = si[dup[0]] / (100.0 if what == "chain length" else 1.0)
        raise raw.fail(f"duplicate {what} {val:g} (also on data row {a})", row=b, column=idx_col)
    srt = rt[order]
    back = np.flatnonzero(np.diff(srt) <= 0)
    if back.size:
        k = int(back[0])
        lo, hi = order[k], order[k + 1]
        nm = lambda i: names[i]
        if srt[k + 1] == srt[k]:
            msg = f"tied retention times: {nm(lo)} and {nm(hi)} both at {rt[hi]:g} min; every standard needs its own time"
        else:
            msg = (f"retention goes backwards: {nm(hi)} (index {index[hi]:g}) at {rt[hi]:g} min elutes before "
                   f"{nm(lo)} (index {index[lo]:g}, data row {rows[lo]}) at {rt[lo]:g} min; times must rise with index")
        raise raw.fail(msg, row=int(rows[hi]), column=cols["rt"])

    names = [names[i] for i in order]
    return Ladder(path=raw.path, series=key, rt=srt, index=si, names=names, carbons=carbons[order],
                  rows=rows[order], rt_unit=unit, rt_unit_source=source, rt_decimals=[given[i] for i in order])


def default_name(series: str, index: float) -> str:
    """A label for an unnamed standard.

    >>> default_name("alkanes", 1200.0), default_name("custom", 512.5)
    ('C12', 'I 512.5')
    """
    if series in ("alkanes", "fame") and float(index) % 100 == 0:
        return f"C{int(index // 100)}" + (" FAME" if series == "fame" else "")
    return f"I {index:g}"


@dataclass
class LadderQC:
    """Results of the soft checks; everything a QC table or a calibration file needs."""

    n_standards: int
    index_range: tuple[float, float]
    rt_range: tuple[float, float]
    spacing_ratio: list[float | None]  # per interval, slope / neighbour trend
    loo_residual: list[float | None]   # per standard, assigned minus predicted from its neighbours
    fit_residual: list[float | None]   # per standard (isothermal): assigned minus straight-line fit
    gaps: list[dict] = field(default_factory=list)
    findings: list[dict] = field(default_factory=list)
    flags: list[str] = field(default_factory=list)  # per standard: '' or a short word

    def to_dict(self) -> dict:
        return {
            "n_standards": self.n_standards,
            "index_range": list(self.index_range),
            "rt_range": list(self.rt_range),
            "spacing_ratio": self.spacing_ratio,
            "loo_residual": self.loo_residual,
            "fit_residual": self.fit_residual,
            "gaps": self.gaps,
            "findings": self.findings,
            "flags": self.flags,
        }


def _opt(v) -> float | None:
    return None if v is None or not np.isfinite(v) else round(float(v), 6)


def check_ladder(rt: np.ndarray, index: np.ndarray, *, names: list[str] | None = None, series: str = "alkanes",
                 mode: str = "programmed", holdup: float | None = None) -> LadderQC:
    """Soft checks of a hard-checked ladder (sorted, strictly increasing)."""
    rt = np.asarray(rt, dtype=np.float64)
    index = np.asarray(index, dtype=np.float64)
    n = len(rt)
    names = list(names) if names else [default_name(series, i) for i in index]
    if mode == "isothermal":
        if holdup is None:
            raise MatcherError("isothermal checks need a hold-up time")
        y = np.log(rt - holdup)
    else:
        y = rt.copy()
    findings: list[dict] = []
    flags = [""] * n

    s = np.diff(y) / np.diff(index)
    m = len(s)
    pred = np.full(m, np.nan)
    limit = np.full(m, INTERIOR_LIMIT)
    for k in range(m):  # m is the number of standards minus one: a handful, not per peak
        near = [s[j] for j in range(max(0, k - 2), min(m, k + 3)) if j != k]
        if near:
            pred[k] = float(np.median(near))
        if k == 0 or k == m - 1 or m < 4:
            limit[k] = END_LIMIT
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = s / pred
    high = ratio > limit
    low = ratio < 1.0 / limit
    used = np.zeros(m, dtype=bool)
    for k in range(1, m):
        if (high[k - 1] and low[k]) or (low[k - 1] and high[k]):
            if used[k - 1]:
                continue
            used[k - 1] = used[k] = True
            findings.append({
                "level": "warning", "code": "probable-mislabel", "standard": names[k],
                "message": f"{names[k]} (index {index[k]:g}, {rt[k]:g} min) breaks the trend of its neighbours "
                           f"(spacing {ratio[k - 1]:.2f}x and {ratio[k]:.2f}x the trend): probable mislabel",
            })
            flags[k] = "mislabel?"
    if m == 2 and (high[0] or low[0]) and not used.any():
        findings.append({
            "level": "warning", "code": "uneven-spacing", "standard": names[1],
            "message": f"the two intervals around {names[1]} differ by {max(ratio[0], 1 / ratio[0]):.2f}x; "
                       "with three standards it cannot be told which is wrong",
        })
        flags[1] = "uneven?"
        used[:] = True
    for k in range(m):
        if used[k] or not (high[k] or low[k]):
            continue
        a, b = names[k], names[k + 1]
        if high[k]:
            code, text = "probable-missing-standard", (
                f"spacing between {a} and {b} is {ratio[k]:.2f}x the trend of its neighbours: "
                "probable missing standard (a chain length skipped) or a mislabel")
        else:
            code, text = "probable-mislabel", (
                f"{a} and {b} are unusually close ({ratio[k]:.2f}x the trend of their neighbours): "
                "probable mislabel or an extra peak taken as a standard")
        findings.append({"level": "warning", "code": code, "standard": b, "message": text})
        flags[k + 1] = flags[k + 1] or ("missing?" if high[k] else "mislabel?")

    loo = [None] * n
    for k in range(1, n - 1):
        ip = index[k - 1] + (index[k + 1] - index[k - 1]) * (y[k] - y[k - 1]) / (y[k + 1] - y[k - 1])
        loo[k] = _opt(index[k] - ip)
    fit = [None] * n
    if mode == "isothermal" and n >= 3:
        b, a = np.polyfit(y, index, 1)
        fit = [_opt(v) for v in index - (a + b * y)]

    gaps = []
    step = SERIES[series].step if series in SERIES else None
    if step:
        for k in range(n - 1):
            d = index[k + 1] - index[k]
            if d > 1.5 * step:
                missing = np.arange(index[k] + step, index[k + 1] - 0.5 * step, step)
                gaps.append({"from": float(index[k]), "to": float(index[k + 1]),
                             "missing": [default_name(series, v) for v in missing]})
    if gaps:
        miss = [g for gap in gaps for g in gap["missing"]]
        findings.append({"level": "note", "code": "gaps", "standard": None,
                         "message": f"gaps in the ladder: no {', '.join(miss[:12])}{' ...' if len(miss) > 12 else ''}; "
                                    "indices there rest on wider brackets"})
    if n < 3:
        findings.append({"level": "note", "code": "few-standards", "standard": None,
                         "message": "only two standards: their spacing cannot be checked"})
    return LadderQC(
        n_standards=n,
        index_range=(float(index[0]), float(index[-1])),
        rt_range=(float(rt[0]), float(rt[-1])),
        spacing_ratio=[_opt(v) for v in ratio],
        loo_residual=loo,
        fit_residual=fit,
        gaps=gaps,
        findings=findings,
        flags=flags,
    )


__all__ = ["Ladder", "LadderQC", "read_ladder", "check_ladder", "default_name", "ALIASES", "MAX_RT_MIN"]
