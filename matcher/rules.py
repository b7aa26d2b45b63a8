"""Every input rule of matcher, declared once.

The library checks its own inputs: a setting that makes no sense raises
:class:`~matcher.errors.MatcherError` with the one-line message the command
line shows (the command line only parses text and relies on these checks).
Vocabularies and limits live here and nowhere else; other modules refer to
them (``rules.MODES``, ``rules.RI_MAX`` ...).

==================  ======================================================
rule                declared as
==================  ======================================================
polarity classes    :data:`PHASE_CLASSES` (+ spelling aliases), :func:`check_class`
oven modes          :data:`MODES`, :func:`check_mode`
time units          :data:`RT_UNITS`, :func:`check_rt_unit`
index range         0 .. :data:`RI_MAX` (10,000), :func:`check_ri` (from :mod:`matcher.limits`)
time range          :data:`MAX_RT_MIN` (10,000 min, from :mod:`matcher.limits`)
ion m/z             whole numbers 1 .. :data:`MAX_MZ` (:mod:`matcher.limits`), :func:`check_ions`
spectral-hit score  :data:`HIT_SCORE_RANGE` (0-100), :func:`check_hit_match`
candidates kept     top >= 1, :func:`check_top`
window              > 0 and finite index units, or 0 < percent <= :data:`WINDOW_PERCENT_MAX`,
                    not both: :func:`check_window`
added noise         0 .. :data:`NOISE_MAX` index units, :func:`check_noise`
two-column check    two different classes, :func:`check_class_pair`; 1 .. :data:`EVALUATION_RUNS_MAX`
                    simulated runs, :func:`check_runs`; a seed 0 .. 2**32 - 1, :func:`check_seed`
output files        :data:`SHORTLIST_SUFFIXES`, :data:`REPORT_SUFFIXES`,
                    :func:`check_shortlist_path`, :func:`check_report_path`
==================  ======================================================

Numeric limits shared with the file readers (index and time range, m/z,
scatter, name length, ids, file sizes) are declared in :mod:`matcher.limits`
and re-exported here; this module declares the vocabularies and the
settings of a query or a screen.

>>> check_class("Slightly polar"), check_mode("Isothermal"), check_top(3)
('slightly-polar', 'isothermal', 3)
>>> check_ions("93 136;68")
(93, 136, 68)
>>> check_top(0)
Traceback (most recent call last):
...
matcher.errors.MatcherError: --top must be at least 1
>>> check_ions([93.7, -5])
Traceback (most recent call last):
...
matcher.errors.MatcherError: --ions: an m/z must be a whole number from 1 to 5000, got 93.7
>>> check_hit_match(500)
Traceback (most recent call last):
...
matcher.errors.MatcherError: --hit-match must be between 0 and 100, got 500
"""

from __future__ import annotations

import math
import os
import re
from typing import Any, Iterable

from matcher.errors import MatcherError
from matcher.limits import MAX_MZ, MAX_RT_MIN
from matcher.limits import MAX_RI as RI_MAX
from matcher.limits import check_ri as _limits_check_ri

# --------------------------------------------------------------------------- vocabularies

#: The polarity classes, least to most polar (see :mod:`matcher.classes` for their windows).
PHASE_CLASSES: tuple[str, ...] = ("nonpolar", "slightly-polar", "mid-polar", "polar", "highly-polar")

#: Other spellings accepted for a class (after lower-casing and folding ``_`` to ``-``).
CLASS_ALIASES: dict[str, str] = {
    "non-polar": "nonpolar",
    "apolar": "nonpolar",
    "semi-polar": "slightly-polar",
    "slightlypolar": "slightly-polar",
    "slightly polar": "slightly-polar",
    "mid polar": "mid-polar",
    "midpolar": "mid-polar",
    "intermediate": "mid-polar",
    "highly polar": "highly-polar",
    "highlypolar": "highly-polar",
}

#: Oven modes: temperature-programmed (van den Dool & Kratz) and isothermal (Kováts).
MODES: tuple[str, ...] = ("programmed", "isothermal")

#: Other spellings of a mode accepted in library files.
MODE_ALIASES: dict[str, str] = {"temperature-programmed": "programmed", "prog": "programmed", "iso": "isothermal"}

#: Units of retention times.
RT_UNITS: tuple[str, ...] = ("min", "s")

#: Other spellings of a time unit accepted by ``rt_unit``.
RT_UNIT_ALIASES: dict[str, str] = {"minutes": "min", "m": "min", "sec": "s", "seconds": "s"}

# --------------------------------------------------------------------------- limits

#: Range of a spectral-search score.
HIT_SCORE_RANGE: tuple[float, float] = (0.0, 100.0)
#: Largest window given as a percentage of the index.
WINDOW_PERCENT_MAX: float = 20.0
#: Largest noise ``evaluate`` adds to its queries, index units.
NOISE_MAX: float = 100.0
#: Most runs the two-column self-check (``evaluate --second-class``) simulates.
EVALUATION_RUNS_MAX: int = 1000

#: Shortlist files by suffix, and the report's suffixes.
SHORTLIST_SUFFIXES: tuple[str, ...] = (".csv", ".json", ".xlsx")
REPORT_SUFFIXES: tuple[str, ...] = (".html", ".htm")


# --------------------------------------------------------------------------- checks

def _number(value: Any, option: str, what: str = "a number") -> float:
    if isinstance(value, bool):
        raise MatcherError(f"{option} must be {what}, got {value!r}")
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise MatcherError(f"{option} must be {what}, got {value!r}") from None
    if not math.isfinite(v):
        raise MatcherError(f"{option} must be {what}, got {value!r}")
    return v


def _fmt(v: Any) -> str:
    return f"{v:g}" if isinstance(v, float) else str(v)


def choice(value: str | None, allowed: Iterable[str], option: str, aliases: dict[str, str] | None = None) -> str | None:
    """``value`` lower-cased if it is one of ``allowed`` (``None`` passes through).

    >>> choice("FIT", ("given", "fit"), "--holdup")
    'fit'
    """
    if value is None:
        return None
    allowed = tuple(allowed)
    v = str(value).strip().lower()
    v = (aliases or {}).get(v, v)
    if v not in allowed:
        raise MatcherError(f"{option} must be one of {', '.join(allowed)}; got {value!r}")
    return v


def check_class(name: str) -> str:
    """The canonical class name, or a one-line error listing the valid ones."""
    key = " ".join(str(name).strip().lower().replace("_", "-").split())
    key = CLASS_ALIASES.get(key, key)
    if key not in PHASE_CLASSES:
        raise MatcherError(f"unknown phase class {name!r}; use one of: {', '.join(PHASE_CLASSES)}")
    return key


def check_mode(mode: str | None, option: str = "--mode") -> str:
    """``programmed`` (also for ``None`` or blank) or ``isothermal``."""
    if mode is None or not str(mode).strip():
        return MODES[0]
    return choice(mode, MODES, option, MODE_ALIASES)


def check_rt_unit(unit: str | None, option: str = "--rt-unit") -> str | None:
    """``min`` or ``s`` (``None``: let the file's header decide)."""
    return choice(unit, RT_UNITS, option, RT_UNIT_ALIASES)


def check_ri(ri: Any, what: str = "retention index") -> float:
    """An index within 0-:data:`RI_MAX` (the rule of :func:`matcher.limits.check_ri`)."""
    return _limits_check_ri(ri, what)


def check_top(top: Any) -> int | None:
    """How many candidates to keep per peak: a whole number of at least 1 (``None``: all)."""
    if top is None:
        return None
    v = _number(top, "--top", "a whole number of at least 1")
    if v != int(v):
        raise MatcherError(f"--top must be a whole number of at least 1, got {top!r}")
    if v < 1:
        raise MatcherError("--top must be at least 1")
    return int(v)


def check_window(window: Any = None, window_percent: Any = None) -> tuple[float | None, float | None]:
    """The tolerance window: a fixed half-width (> 0, finite) or a percentage of the index, not both."""
    if window is not None and window_percent is not None:
        raise MatcherError("give either --window or --window-percent, not both")
    if window_percent is not None:
        p = _number(window_percent, "--window-percent", f"in (0, {WINDOW_PERCENT_MAX:g}]")
        if not 0 < p <= WINDOW_PERCENT_MAX:
            raise MatcherError(f"--window-percent must be in (0, {WINDOW_PERCENT_MAX:g}], got {_fmt(window_percent)}")
        return None, p
    if window is not None:
        try:
            w = float(window)
        except (TypeError, ValueError):
            w = float("nan")
        if isinstance(window, bool) or not (math.isfinite(w) and w > 0):
            raise MatcherError(f"--window must be a positive number of index units, got {_fmt(window)}")
        return w, None
    return None, None


_ION_SPLIT = re.compile(r"[\s;,]+")


def check_ions(ions: Any, option: str = "--ions") -> tuple[int, ...] | None:
    """Key ions as whole m/z values 1-:data:`MAX_MZ`, from numbers or text such as ``'93 136'`` or ``'93;136'``.

    ``None`` or nothing given: ``None``.
    """
    if ions is None:
        return None
    items = [ions] if isinstance(ions, (str, int, float)) else list(ions)
    values: list[Any] = []
    for item in items:
        if isinstance(item, str):
            values += [t for t in _ION_SPLIT.split(item.strip()) if t]
        else:
            values.append(item)
    out = []
    for v in values:
        try:
            x = float(v)
        except (TypeError, ValueError):
            raise MatcherError(f"{option}: not an m/z value: {str(v)[:20]!r}") from None
        if isinstance(v, bool) or not math.isfinite(x) or x != int(x) or not 1 <= x <= MAX_MZ:
            raise MatcherError(f"{option}: an m/z must be a whole number from 1 to {MAX_MZ}, got {v}")
        out.append(int(x))
    return tuple(out) or None


def check_hit_match(score: Any) -> float | None:
    """A spectral-search score within 0-100 (``None``: not given)."""
    if score is None:
        return None
    lo, hi = HIT_SCORE_RANGE
    v = _number(score, "--hit-match", f"between {lo:g} and {hi:g}")
    if not lo <= v <= hi:
        raise MatcherError(f"--hit-match must be between {lo:g} and {hi:g}, got {_fmt(score)}")
    return v


def check_noise(noise: Any) -> float:
    """Noise added by ``evaluate``: 0-:data:`NOISE_MAX` index units."""
    v = _number(noise, "--noise", f"between 0 and {NOISE_MAX:g} index units")
    if not 0 <= v <= NOISE_MAX:
        raise MatcherError(f"--noise must be between 0 and {NOISE_MAX:g} index units")
    return v


def check_class_pair(first: Any, second: Any) -> tuple[str, str]:
    """The two columns' classes of a two-column self-check: both given, both known, not the same.

    >>> check_class_pair("slightly polar", "polar")
    ('slightly-polar', 'polar')
    """
    if first is None:
        raise MatcherError("give the first column's polarity class too: --class CLASS --second-class CLASS")
    a, b = check_class(first), check_class(second)
    if a == b:
        raise MatcherError(f"--second-class must differ from --class: both are {a}")
    return a, b


def check_runs(runs: Any) -> int | None:
    """Simulated runs of the two-column self-check: a whole number 1-:data:`EVALUATION_RUNS_MAX` (``None``: default)."""
    if runs is None:
        return None
    v = _number(runs, "--runs", f"a whole number from 1 to {EVALUATION_RUNS_MAX}")
    if v != int(v) or not 1 <= v <= EVALUATION_RUNS_MAX:
        raise MatcherError(f"--runs must be a whole number from 1 to {EVALUATION_RUNS_MAX}, got {_fmt(runs)}")
    return int(v)


def check_seed(seed: Any) -> int | None:
    """Seed of a simulated self-check: a whole number 0 to 2**32 - 1 (``None``: default)."""
    if seed is None:
        return None
    v = _number(seed, "--seed", "a whole number from 0 to 4294967295")
    if v != int(v) or not 0 <= v < 2 ** 32:
        raise MatcherError(f"--seed must be a whole number from 0 to 4294967295, got {_fmt(seed)}")
    return int(v)


#: Peak detection threshold (``--min-snr``): prominence in units of the run's TIC noise SD.
MIN_SNR_RANGE: tuple[float, float] = (1.0, 1000.0)


def check_min_snr(value: Any) -> float:
    """``--min-snr``: 1-1000 (default 5, see :mod:`matcher.signal.chromatogram`)."""
    lo, hi = MIN_SNR_RANGE
    v = _number(value, "--min-snr", f"a number between {lo:g} and {hi:g}")
    if not lo <= v <= hi:
        raise MatcherError(f"--min-snr must be between {lo:g} and {hi:g}, got {_fmt(v)}")
    return v


def check_carbons(text: Any) -> tuple[int, int] | None:
    """``--carbons FIRST-LAST``: the chain lengths of a ladder run's first and last alkane (1-200, rising)."""
    if text is None:
        return None
    if isinstance(text, (tuple, list)) and len(text) == 2:
        parts = [str(text[0]), str(text[1])]
    else:
        parts = str(text).strip().split("-")
    if len(parts) != 2 or not all(p.strip().isdigit() for p in parts):
        raise MatcherError(f"--carbons must be FIRST-LAST, for example 8-20, got {str(text)[:30]!r}")
    a, b = int(parts[0]), int(parts[1])
    if not 1 <= a < b <= 200:
        raise MatcherError(f"--carbons {a}-{b}: the first chain length must be below the last, both 1-200")
    return a, b


def _suffix(path: Any) -> str:
    return os.path.splitext(os.fspath(path))[1].lower()


def check_shortlist_path(path: Any, option: str = "-o") -> str:
    """A shortlist file name ending in .csv, .json or .xlsx."""
    if _suffix(path) not in SHORTLIST_SUFFIXES:
        raise MatcherError(f"{option} {os.fspath(path)}: the shortlist file must end in .csv, .json or .xlsx")
    return os.fspath(path)


def check_report_path(path: Any, option: str = "--report") -> str:
    """A report file name ending in .html (or .htm)."""
    if _suffix(path) not in REPORT_SUFFIXES:
        raise MatcherError(f"{option} {os.fspath(path)}: the report file must end in .html")
    return os.fspath(path)


#: Options of the QC record (``matcher screen --sample --analyst --instrument --column``).
RECORD_OPTIONS = ("sample", "analyst", "instrument", "column")


def check_record(record: Any) -> dict[str, str]:
    """The QC-record facts given to ``screen``: known keys only, one line of text each, at most 1,000 characters.

    >>> check_record({"sample": " juniper-berry oil, lot JB-0412 ", "analyst": None})
    {'sample': 'juniper-berry oil, lot JB-0412'}
    >>> check_record({"lot": "7"})
    Traceback (most recent call last):
    ...
    matcher.errors.MatcherError: unknown record field 'lot'; known: sample, analyst, instrument, column
    """
    from matcher.limits import MAX_CELL as MAX_TEXT

    out: dict[str, str] = {}
    for key, value in (record or {}).items():
        if key not in RECORD_OPTIONS:
            raise MatcherError(f"unknown record field {key!r}; known: {', '.join(RECORD_OPTIONS)}")
        if value is None:
            continue
        text = " ".join(str(value).split())
        if len(text) > MAX_TEXT:
            raise MatcherError(f"--{key} is longer than {MAX_TEXT} characters")
        if text:
            out[key] = text
    return out


#: What ``matcher review --export`` writes, by suffix.
REVIEW_EXPORT_SUFFIXES = (".csv", ".html", ".htm")


def check_port(port: Any, option: str = "--port") -> int | None:
    """A TCP port 1-65535, or None (the system chooses one)."""
    if port is None:
        return None
    if isinstance(port, bool) or not isinstance(port, int) or not 0 < port < 65536:
        raise MatcherError(f"{option} must be between 1 and 65535, got {port}")
    return port


def check_review_export_path(path: Any, option: str = "--export") -> str:
    """A review export file name ending in .csv or .html."""
    if _suffix(path) not in REVIEW_EXPORT_SUFFIXES:
        raise MatcherError(f"{option} {os.fspath(path)}: give a .csv or .html file")
    return os.fspath(path)


__all__ = [
    "PHASE_CLASSES", "CLASS_ALIASES", "MODES", "MODE_ALIASES", "RT_UNITS", "RT_UNIT_ALIASES",
    "RI_MAX", "MAX_RT_MIN", "MAX_MZ", "HIT_SCORE_RANGE", "WINDOW_PERCENT_MAX", "NOISE_MAX",
    "EVALUATION_RUNS_MAX", "check_class_pair", "check_runs", "check_seed",
    "SHORTLIST_SUFFIXES", "REPORT_SUFFIXES",
    "RECORD_OPTIONS", "check_record", "choice", "check_class", "check_mode", "check_rt_unit", "check_ri", "check_top", "check_window",
    "check_ions", "check_hit_match", "check_noise", "check_shortlist_path", "check_report_path",
    "MIN_SNR_RANGE", "check_min_snr", "check_carbons",
    "REVIEW_EXPORT_SUFFIXES", "check_port", "check_review_export_path",
]
