"""Words and numbers as a reader sees them: one place for every label and value shown in a report or sheet.

Program values never reach a page: ``None`` becomes an empty cell or "none", booleans
"yes"/"no", NaN an empty cell, lists are joined and dictionaries written as "key: value"
(:func:`readable`). Settings, QC-record fields and ladder findings get the labels a
chromatographer reads (:data:`SETTING_LABELS`, :func:`settings_rows`, :func:`gap_text`), and
retention times keep the precision they were given in (:func:`format_time`).

>>> readable(None), readable(True), readable(float("nan")), readable([1.5, "x"]), readable({"from": 1100.0})
('', 'yes', '', '1.5, x', 'from: 1100')
>>> format_time(7.998), format_time(8.0), format_time(4.215), format_time(5.2083333)
('7.998', '8.00', '4.215', '5.2083')
>>> gap_text({"from": 1100.0, "to": 1300.0, "missing": ["C12"]})
'1100 to 1300: no C12'
"""

from __future__ import annotations

import math
from typing import Any

#: Labels of the screen settings (``ScreenResult.settings``), in display order.
SETTING_LABELS: dict[str, str] = {
    "class": "polarity class",
    "top": "candidates kept per peak",
    "window": "tolerance window (index units)",
    "window_percent": "tolerance window (% of the index)",
    "index_scatter": "index scatter (index units)",
    "crowding": "crowding of compounds not in the library",
    "adaptive": "adaptive correction",
    "anchors": "anchors file",
    "fallback": "neighbouring class searched",
    "homologues": "homologues predicted",
    "split_peaks": "one compound may explain several peaks",
}

#: What an unset setting means, in words.
SETTING_DEFAULTS: dict[str, str] = {
    "top": "all candidates in the window",
    "window": "class default",
    "window_percent": "not used",
    "index_scatter": "class default (0.3 × the window)",
    "crowding": "moderate (default)",
    "anchors": "none",
}

#: Labels of ladder-finding codes (``qc.findings[].code`` of the calibration file).
FINDING_LABELS: dict[str, str] = {
    "probable-mislabel": "probable mislabelled standard",
    "probable-missing-standard": "probable missing standard",
    "uneven-spacing": "uneven spacing",
    "gaps": "gaps in the ladder",
    "few-standards": "too few standards to check",
}


def _number(v: float) -> str:
    if not math.isfinite(v):
        return ""
    if v == int(v) and abs(v) < 1e15:
        return str(int(v))
    return f"{v:.4f}".rstrip("0").rstrip(".")


def readable(value: Any) -> str:
    """Any value as text for a reader (see the module doc)."""
    if value is None:
        return ""
    if isinstance(value, bool) or type(value).__name__ == "bool_":
        return "yes" if bool(value) else "no"
    if type(value).__name__ in ("NAType", "NaTType"):
        return ""
    if hasattr(value, "item") and not isinstance(value, (int, float, str)):
        try:
            value = value.item()
        except (TypeError, ValueError):
            pass
        if isinstance(value, bool):
            return "yes" if value else "no"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        return _number(value)
    if isinstance(value, dict):
        if {"from", "to", "missing"} <= set(value):
            return gap_text(value)
        return "; ".join(f"{k}: {readable(v)}" for k, v in value.items() if readable(v) != "")
    if isinstance(value, (list, tuple, set, frozenset)):
        return ", ".join(t for t in (readable(v) for v in value) if t)
    return str(value)


def format_time(minutes: Any, decimals: Any = None) -> str:
    """A retention time in minutes as shown everywhere: with the ``decimals`` it was given with when known,
    else at least 2 and at most 4 decimals, as precise as the value.

    >>> format_time(3.1, 2), format_time(12.5, 1), format_time(7.998, 3)
    ('3.10', '12.5', '7.998')
    """
    try:
        v = float(minutes)
    except (TypeError, ValueError):
        return ""
    if not math.isfinite(v):
        return ""
    if isinstance(decimals, int) and not isinstance(decimals, bool) and 0 <= decimals <= 12:
        return f"{v:.{decimals}f}"
    text = f"{v:.4f}".rstrip("0")
    whole, _, frac = text.partition(".")
    return f"{whole}.{frac:0<2}"


def gap_text(gap: dict[str, Any]) -> str:
    """One gap of a ladder (``qc.gaps`` of the calibration file) as a line."""
    missing = ", ".join(str(m) for m in gap.get("missing") or [])
    span = f"{readable(gap.get('from'))} to {readable(gap.get('to'))}"
    return f"{span}: no {missing}" if missing else span


def setting_text(key: str, value: Any) -> str:
    """One screen setting's value in words."""
    if value is None or value == "":
        return SETTING_DEFAULTS.get(key, "none")
    if key == "crowding" and isinstance(value, (int, float)) and not isinstance(value, bool):
        return f"{readable(value)} compounds not in the library per 100 index units"
    return readable(value)


def settings_rows(settings: dict[str, Any] | None) -> list[tuple[str, str]]:
    """The settings as (label, value) rows, known ones first in display order."""
    settings = dict(settings or {})
    rows = [(label, setting_text(key, settings.get(key))) for key, label in SETTING_LABELS.items() if key in settings]
    if settings.get("adaptive") and settings.get("index_scatter") is None:
        rows = [(label, value + ", estimated per run from the adaptive fit's kept anchors"
                 if label == SETTING_LABELS["index_scatter"] else value) for label, value in rows]
    rows += [(key.replace("_", " "), setting_text(key, v)) for key, v in settings.items() if key not in SETTING_LABELS]
    return rows


def finding_label(code: Any) -> str:
    return FINDING_LABELS.get(str(code), str(code).replace("-", " "))


def plural(n: int, word: str, many: str | None = None) -> str:
    """``1 observation``, ``2 observations``.

    >>> plural(1, "observation"), plural(3, "observation"), plural(2, "entry", "entries")
    ('1 observation', '3 observations', '2 entries')
    """
    return f"{n} {word if n == 1 else (many or word + 's')}"


def index_statement(calibration: dict[str, Any] | None, correction: dict[str, Any] | None) -> str:
    """Which index the RI column holds, in one sentence."""
    if not calibration:
        base = "the retention index given in the peak table"
    else:
        mode = str(calibration.get("mode") or "")
        base = ("the isothermal Kováts index" if mode == "isothermal"
                else "the linear (van den Dool & Kratz) index") + " from the ladder calibration"
    if correction and correction.get("applied"):
        return (f"RI is {base}, corrected by the run's adaptive fit (RI measured − ΔRI of the fit); "
                "the index before the correction is in ri_measured.")
    return f"RI is {base}, uncorrected."


__all__ = ["SETTING_LABELS", "SETTING_DEFAULTS", "FINDING_LABELS", "readable", "format_time", "gap_text",
           "setting_text", "settings_rows", "finding_label", "plural", "index_statement"]
