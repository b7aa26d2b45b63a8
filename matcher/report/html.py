"""The screening report: one self-contained HTML file a colleague or auditor can read.

``write_report(result, "report.html")`` writes (atomically) a page with

* the caution (:data:`matcher.CAUTION` as carried by the result), at the top and the bottom;
* provenance: tool version, creation time, library (password masked), settings;
* a run summary: peaks, peaks with candidates, peaks flagged for review,
  peaks with no candidate, peaks most likely not in the library, and per
  flag the number of peaks carrying it (rules in :mod:`matcher.report.summary`);
* per run: the ladder's QC checks and standards, a calibration plot
  (retention time against index of the standards, with the interpolation
  the method uses between them: straight segments for the linear index of
  van den Dool & Kratz, J. Chromatogr. 11, 463, 1963; log-adjusted-time
  segments for the Kováts index, Helv. Chim. Acta 41, 1915, 1958); the
  adaptive correction (Zenkevich, Molecules 30, 4706, 2025) with a plot of
  the deviation RIref − RIexp against the index for its anchors and the
  fitted line ΔRI = a·RIexp + b (without anchors, the confident matches of
  the run are shown: rank 1, probability ≥ 0.9, not marked for review);
* each peak's shortlist with its flags; rows needing review are marked in
  words (and colour).

Nothing is loaded from anywhere: inline CSS, inline SVG drawn by
:mod:`matcher.report.svg`, no scripts at all. Every piece of library or user
text is HTML-escaped with :func:`matcher.safe_text.html_text`. Long runs
show at most ``max_peaks`` peaks per run (those marked for review first);
the CSV/JSON output holds them all.

>>> from matcher.results import ScreenResult
>>> page = render_report(ScreenResult(runs=[], library={"location": "x://u:pw@h/db"},
...                                   created="2026-01-01T00:00:00Z", tool_version="0.1.0", caution="Tentative <only>."))
>>> page.count("Tentative &lt;only&gt;."), "pw@" in page, "<script" in page
(2, False, False)
"""

from __future__ import annotations

import math
import os
from typing import Any, Sequence

import numpy as np
import pandas as pd

from matcher.report import svg as plots
from matcher.io.atomic import atomic_write
from matcher.results import RunResult, ScreenResult
from matcher.report.summary import REVIEW_FLAG, engine_marks_review, row_needs_review, split_flags, summarise_table
from matcher.safe_text import html_text as e
from matcher.store.location import mask_secrets, mask_url

#: Default cap on peaks listed per run in the report.
MAX_PEAKS = 2000

#: Rank-1 probability from which a match counts as confident for the deviation plot (without anchors).
CONFIDENT_PROBABILITY = 0.9

_CSS = """
:root { --ink:#1f2d36; --soft:#5b6b75; --line:#d9dee2; --band:#f4f6f7; --accent:#2f6f8f;
        --warn:#8a5a00; --warnbg:#fff4dc; --fail:#9b2c2c; --failbg:#fbe6e6; --pass:#2e6b3a; --passbg:#e5f3e8; }
* { box-sizing: border-box; }
body { font: 14px/1.45 system-ui, -apple-system, "Segoe UI", Roboto, sans-serif; color: var(--ink);
       margin: 0 auto; padding: 24px 32px 40px; max-width: 1180px; background: #fff; }
h1 { font-size: 24px; margin: 0 0 4px; letter-spacing: .01em; }
h2 { font-size: 19px; margin: 36px 0 8px; padding-bottom: 4px; border-bottom: 2px solid var(--ink); }
h3 { font-size: 15px; margin: 22px 0 6px; color: var(--accent); text-transform: uppercase; letter-spacing: .06em; }
p.meta, .note { color: var(--soft); margin: 2px 0; }
.caution { border: 2px solid var(--ink); border-left-width: 8px; padding: 10px 14px; margin: 14px 0 18px;
           background: var(--band); font-size: 15px; }
.caution strong { text-transform: uppercase; letter-spacing: .08em; margin-right: .5em; }
table { border-collapse: collapse; margin: 6px 0 10px; font-variant-numeric: tabular-nums; }
th, td { padding: 3px 9px; border-bottom: 1px solid var(--line); text-align: left; vertical-align: top; }
th { font-weight: 600; background: var(--band); border-bottom: 1px solid var(--soft); }
td.n, th.n { text-align: right; }
table.kv th { background: none; border-bottom: 1px solid var(--line); font-weight: 600; width: 15em; }
.grid { display: flex; flex-wrap: wrap; gap: 18px 28px; align-items: flex-start; }
.grid > .plotbox { flex: 1 1 420px; max-width: 560px; }
.grid > .plotbox svg.plot { width: 100%; height: auto; }
td.n, td.cas, td.formula, td.mark, td.peak { white-space: nowrap; }
td.name { min-width: 11em; }
.status { display: inline-block; min-width: 3.6em; text-align: center; font-weight: 700; font-size: 12px;
          border-radius: 3px; padding: 0 6px; }
.status.pass { color: var(--pass); background: var(--passbg); }
.status.warn { color: var(--warn); background: var(--warnbg); }
.status.fail { color: var(--fail); background: var(--failbg); }
.flag { display: inline-block; font-size: 12px; border: 1px solid var(--line); border-radius: 3px;
        padding: 0 5px; margin: 1px 2px 1px 0; white-space: nowrap; }
.flag.review { border-color: var(--warn); color: var(--warn); font-weight: 700; }
table.shortlist { width: 100%; }
table.shortlist tbody { border-top: 2px solid var(--soft); }
table.shortlist tr.needs-review td:first-child { box-shadow: inset 4px 0 0 var(--warn); }
table.shortlist tr.needs-review { background: #fffaf0; }
td.mark { font-weight: 700; color: var(--warn); font-size: 12px; white-space: nowrap; }
td.peak { font-weight: 600; }
.empty { color: var(--soft); font-style: italic; }
nav ul { margin: 4px 0; padding-left: 18px; }
svg.plot { border: 1px solid var(--line); background: #fff; max-width: 100%; height: auto; }
footer { margin-top: 36px; }
@media print {
  body { padding: 0; max-width: none; font-size: 11px; }
  h2 { break-before: page; }
  h2.first { break-before: avoid; }
  tr, svg { break-inside: avoid; }
  nav { display: none; }
  .caution { background: none; }
}
"""


# --------------------------------------------------------------------------- small helpers

def _num(value: Any, decimals: int = 2) -> str:
    try:
        v = float(value)
    except (TypeError, ValueError):
        return e(value)
    if not math.isfinite(v):
        return ""
    return f"{v:.{decimals}f}"


def _int(value: Any) -> str:
    try:
        v = float(value)
    except (TypeError, ValueError):
        return e(value)
    return "" if not math.isfinite(v) else str(int(round(v)))


def _kv_table(rows: Sequence[tuple[str, str]]) -> str:
    body = "".join(f"<tr><th scope=\"row\">{e(k)}</th><td>{v}</td></tr>" for k, v in rows if v not in (None, ""))
    return f'<table class="kv">{body}</table>' if body else ""


def _text(value: Any) -> str:
    """A value of a metadata dict as escaped text (lists joined, dicts as key: value)."""
    if value is None:
        return ""
    if isinstance(value, float):
        return _num(value, 4).rstrip("0").rstrip(".") if math.isfinite(value) else ""
    if isinstance(value, dict):
        return e("; ".join(f"{k}: {v}" for k, v in value.items()))
    if isinstance(value, (list, tuple)):
        return e(", ".join(str(v) for v in value))
    return e(value)


def _flags_html(flags: Sequence[str]) -> str:
    return "".join(f'<span class="flag{" review" if f == REVIEW_FLAG else ""}">{e(f)}</span>' for f in flags)


# --------------------------------------------------------------------------- sections

def _header(result: ScreenResult) -> str:
    lib = result.library or {}
    bits = []
    if lib.get("location"):
        bits.append(f"library {e(mask_url(str(lib['location'])))}")
    if lib.get("revision") not in (None, ""):
        bits.append(f"revision {e(lib['revision'])}")
    if lib.get("entries") is not None:
        bits.append(f"{_int(lib['entries'])} entries")
    if lib.get("compounds") is not None:
        bits.append(f"{_int(lib['compounds'])} compounds")
    settings = ", ".join(f"{k} = {v}" for k, v in (result.settings or {}).items())
    return (
        "<header>"
        "<h1>Retention-index screening report</h1>"
        f'<p class="meta">matcher {e(result.tool_version)} · created {e(result.created)}</p>'
        + (f'<p class="meta">{" · ".join(bits)}</p>' if bits else "")
        + (f'<p class="meta">settings: {e(settings)}</p>' if settings else "")
        + "</header>"
    )


def _caution(result: ScreenResult, where: str) -> str:
    return f'<div class="caution" role="note" id="caution-{where}"><strong>Caution</strong>{e(result.caution)}</div>'


def _summary(result: ScreenResult, summaries: list[dict[str, Any]]) -> str:
    head = ("<tr><th>run</th><th>class</th><th>window</th><th class=\"n\">peaks</th>"
            "<th class=\"n\">with candidates</th><th class=\"n\">flagged for review</th>"
            "<th class=\"n\">no candidate</th><th class=\"n\">not in library (most likely)</th></tr>")
    rows = []
    for i, (run, s) in enumerate(zip(result.runs, summaries), start=1):
        rows.append(
            f'<tr><td><a href="#run-{i}">{e(run.label)}</a></td><td>{e(run.phase_class)}</td>'
            f"<td>{_window(run.window)}</td><td class=\"n\">{s['peaks']}</td>"
            f"<td class=\"n\">{s['with_candidates']}</td><td class=\"n\">{s['review']}</td>"
            f"<td class=\"n\">{s['no_candidate']}</td><td class=\"n\">{s['not_in_library']}</td></tr>"
        )
    flags = sorted({f for s in summaries for f in s["flags"]})
    flag_table = ""
    if flags:
        fhead = "<tr><th>flag</th>" + "".join(f'<th class="n">{e(r.label)}</th>' for r in result.runs) + "</tr>"
        frows = "".join(
            f"<tr><td>{_flags_html([f])}</td>"
            + "".join(f'<td class="n">{s["flags"].get(f, 0)}</td>' for s in summaries)
            + "</tr>"
            for f in flags
        )
        flag_table = f'<h3>Peaks per flag</h3><table class="flags">{fhead}{frows}</table>'
    if not result.runs:
        return '<h2 class="first" id="summary">Summary</h2><p class="empty">No runs were screened.</p>'
    return (f'<h2 class="first" id="summary">Summary</h2><table class="summary">{head}{"".join(rows)}</table>'
            f"{flag_table}")


def _window(window: Any) -> str:
    if not isinstance(window, dict):
        return _text(window)
    value, mode = window.get("value"), window.get("mode")
    if mode == "percent":
        return f"± {_text(value)} %"
    return f"± {_text(value)}" if value is not None else _text(window)


def _calibration_curve(cal: dict[str, Any], std: list[tuple[float, float]]) -> tuple[list[float], list[float]]:
    """Retention time and index along the interpolation between consecutive standards."""
    mode = str(cal.get("mode") or "").lower()
    holdup = cal.get("holdup") or {}
    try:
        tm = float(holdup.get("minutes")) if isinstance(holdup, dict) and holdup.get("minutes") is not None else None
    except (TypeError, ValueError):
        tm = None
    xs: list[float] = []
    ys: list[float] = []
    for (t1, i1), (t2, i2) in zip(std, std[1:]):
        if mode == "isothermal" and tm is not None and tm < t1 < t2:
            # Kováts: the index is linear in log(t - tM) between the bracketing standards
            t = np.linspace(t1, t2, 24)
            frac = (np.log(t - tm) - math.log(t1 - tm)) / (math.log(t2 - tm) - math.log(t1 - tm))
            xs += t.tolist()
            ys += (i1 + (i2 - i1) * frac).tolist()
        else:
            # van den Dool & Kratz: linear in t between the bracketing standards
            xs += [t1, t2]
            ys += [i1, i2]
    return xs, ys


def _calibration(cal: dict[str, Any] | None) -> str:
    if not cal:
        return '<h3>Ladder calibration</h3><p class="empty">No ladder was used: the peak table gave indices.</p>'
    holdup = cal.get("holdup") or {}
    qc = cal.get("qc") or {}
    facts = [
        ("reference series", _text(cal.get("series"))),
        ("mode", _text(cal.get("mode"))),
        ("hold-up time", (f"{_num(holdup.get('minutes'), 3)} min" if isinstance(holdup, dict) and holdup.get("minutes") is not None else "")
         + (f" ({e(holdup.get('method'))})" if isinstance(holdup, dict) and holdup.get("method") else "")),
        ("index range covered", " – ".join(_num(v, 0) for v in (qc.get("range") or [])) if isinstance(qc.get("range"), (list, tuple)) else _text(qc.get("range"))),
        ("gaps", _gaps(qc.get("gaps"))),
    ]
    parts = ["<h3>Ladder calibration</h3>", _kv_table(facts)]
    checks = qc.get("checks") or []
    if checks:
        rows = "".join(
            f'<tr class="qc-{e(str(c.get("status", "")).lower())}"><td>{e(c.get("check"))}</td>'
            f'<td><span class="status {e(str(c.get("status", "")).lower())}">{e(c.get("status"))}</span></td>'
            f"<td>{e(c.get('detail'))}</td></tr>"
            for c in checks if isinstance(c, dict)
        )
        parts.append(f'<table class="qc"><tr><th>QC check</th><th>status</th><th>detail</th></tr>{rows}</table>')
    standards = [s for s in (cal.get("standards") or []) if isinstance(s, dict)]
    residuals = qc.get("residuals")
    per_std = isinstance(residuals, (list, tuple)) and len(residuals) == len(standards) and all(
        not isinstance(r, (dict, list)) for r in residuals)
    std_table = ""
    if standards:
        rhead = '<th class="n">residual</th>' if per_std else ""
        rows = "".join(
            f"<tr><td>{e(s.get('name'))}</td><td class=\"n\">{_num(s.get('rt'), 3)}</td><td class=\"n\">{_num(s.get('index'), 1)}</td>"
            + (f'<td class="n">{_num(residuals[i], 2)}</td>' if per_std else "") + "</tr>"
            for i, s in enumerate(standards)
        )
        std_table = (f'<table class="standards"><tr><th>standard</th><th class="n">rt (min)</th>'
                     f'<th class="n">index</th>{rhead}</tr>{rows}</table>')
    elif residuals:
        parts.append(_kv_table([("residuals", _text(residuals))]))
    pairs = sorted(
        (float(s["rt"]), float(s["index"])) for s in standards
        if _finite(s.get("rt")) and _finite(s.get("index"))
    )
    plot = ""
    if pairs:
        cx, cy = _calibration_curve(cal, pairs)
        mode = str(cal.get("mode") or "")
        layers = [
            plots.line(cx, cy, name="interpolation (isothermal, log scale)" if mode.lower() == "isothermal" else "interpolation (linear)"),
            plots.points([p[0] for p in pairs], [p[1] for p in pairs],
                         labels=[f"{s.get('name')}: {s.get('rt')} min, {s.get('index')}" for s in sorted(
                             (s for s in standards if _finite(s.get("rt")) and _finite(s.get("index"))),
                             key=lambda s: float(s["rt"]))],
                         name="standards"),
        ]
        plot = plots.xy_plot(layers, x_label="retention time (min)", y_label="retention index",
                             title="Calibration: standards and interpolation", width=520, height=300)
    if std_table or plot:
        parts.append(f'<div class="grid"><div>{std_table}</div><div class="plotbox">{plot}</div></div>')
    return "".join(parts)


def _gaps(gaps: Any) -> str:
    if not gaps:
        return "none" if isinstance(gaps, (list, tuple)) else ""
    if isinstance(gaps, (list, tuple)) and all(isinstance(g, (list, tuple)) and len(g) == 2 for g in gaps):
        return e(", ".join(f"{_num(a, 0)}–{_num(b, 0)}" for a, b in gaps))
    return _text(gaps)


def _finite(value: Any) -> bool:
    try:
        return math.isfinite(float(value))
    except (TypeError, ValueError):
        return False


def _confident_matches(table: pd.DataFrame) -> list[dict[str, Any]]:
    """Rank-1 rows with probability ≥ CONFIDENT_PROBABILITY that are not marked for review."""
    if table is None or len(table) == 0 or "rank" not in table:
        return []
    marks = engine_marks_review(table)
    rank = pd.to_numeric(table["rank"], errors="coerce")
    prob = pd.to_numeric(table.get("probability"), errors="coerce")
    pick = table[(rank == 1) & (prob >= CONFIDENT_PROBABILITY)]
    out = []
    for rec in pick.to_dict("records"):
        if row_needs_review(rec.get("flags"), engine_marks=marks):
            continue
        measured = rec.get("ri_measured") if _finite(rec.get("ri_measured")) else rec.get("ri")
        if _finite(measured) and _finite(rec.get("library_ri")):
            out.append({"peak": rec.get("peak"), "name": rec.get("name"),
                        "ri_measured": float(measured), "ri_reference": float(rec["library_ri"])})
    return out


def _correction(run: RunResult) -> str:
    cor = run.correction
    parts = ["<h3>Adaptive correction</h3>"]
    anchors: list[dict[str, Any]] = []
    fit_a = fit_b = None
    if cor:
        applied = bool(cor.get("applied"))
        fit_a, fit_b = cor.get("a"), cor.get("b")
        if applied and _finite(fit_a) and _finite(fit_b):
            eq = (f"ΔRI = RIref − RIexp = {_num(fit_a, 5)} · RIexp {'+' if float(fit_b) >= 0 else '−'} "
                  f"{_num(abs(float(fit_b)), 2)}")
            status = f'<span class="status pass">applied</span> {e(eq)}'
        else:
            status = '<span class="status warn">not applied</span>'
        parts.append(_kv_table([
            ("correction", status),
            ("method", _text(cor.get("method"))),
            ("run index scatter", _num(cor.get("scatter"), 2) if _finite(cor.get("scatter")) else ""),
            ("notice", e(mask_secrets(str(cor.get("notice")))) if cor.get("notice") else ""),
        ]))
        anchors = [a for a in (cor.get("anchors") or []) if isinstance(a, dict)]
        if anchors:
            rows = "".join(
                f"<tr><td>{e(a.get('peak'))}</td><td>{e(a.get('name'))}</td>"
                f"<td class=\"n\">{_num(a.get('ri_measured'))}</td><td class=\"n\">{_num(a.get('ri_reference'))}</td>"
                f"<td class=\"n\">{_num(_dev(a))}</td><td class=\"n\">{_num(a.get('residual'))}</td></tr>"
                for a in anchors
            )
            anchor_table = ('<table class="anchors"><tr><th>peak</th><th>anchor</th><th class="n">RI measured</th>'
                            '<th class="n">RI reference</th><th class="n">ΔRI</th><th class="n">residual</th></tr>'
                            f"{rows}</table>")
        else:
            anchor_table = '<p class="empty">No anchors.</p>'
        point_name = "anchors"
    else:
        parts.append('<p class="note">No adaptive correction was requested for this run; '
                     "the plot shows the run's confident matches (rank 1, probability ≥ "
                     f"{CONFIDENT_PROBABILITY:g}, not marked for review).</p>")
        anchors = _confident_matches(run.table)
        anchor_table = ""
        point_name = "confident matches"
    xs = [float(a["ri_measured"]) for a in anchors if _finite(a.get("ri_measured")) and _finite(a.get("ri_reference"))]
    ys = [_dev(a) for a in anchors if _finite(a.get("ri_measured")) and _finite(a.get("ri_reference"))]
    labels = [f"{a.get('name')} (peak {a.get('peak')})" for a in anchors
              if _finite(a.get("ri_measured")) and _finite(a.get("ri_reference"))]
    layers = [plots.points(xs, ys, labels=labels, name=point_name)]
    if xs and _finite(fit_a) and _finite(fit_b):
        lo, hi = min(xs), max(xs)
        span = max(hi - lo, 1.0)
        gx = [lo - 0.05 * span, hi + 0.05 * span]
        gy = [float(fit_a) * x + float(fit_b) for x in gx]
        applied = bool(cor and cor.get("applied"))
        scatter = cor.get("scatter") if cor else None
        if applied and _finite(scatter):
            s = float(scatter)
            layers.insert(0, plots.band(gx, [y - s for y in gy], [y + s for y in gy], name=f"± scatter ({_num(s, 2)})"))
        layers.append(plots.line(gx, gy, colour="secondary", dashed=not applied,
                                 name="fit ΔRI = a·RIexp + b" + ("" if applied else " (not applied)")))
    plot = plots.xy_plot(layers, x_label="retention index (measured)", y_label="ΔRI = reference − measured",
                         title="Deviation against index", width=520, height=300, zero_line=True)
    parts.append(f'<div class="grid"><div>{anchor_table}</div><div class="plotbox">{plot}</div></div>')
    return "".join(parts)


def _dev(anchor: dict[str, Any]) -> float:
    try:
        return float(anchor.get("ri_reference")) - float(anchor.get("ri_measured"))
    except (TypeError, ValueError):
        return math.nan


_SHORT_HEAD = ("<thead><tr><th></th><th>peak</th><th class=\"n\">rt</th><th class=\"n\">RI</th><th class=\"n\">rank</th>"
               "<th>name</th><th>CAS</th><th>formula</th><th class=\"n\">library RI</th><th class=\"n\">ΔRI</th>"
               "<th class=\"n\">probability</th><th class=\"n\">not in library</th><th>flags</th></tr></thead>")


def _shortlists(run: RunResult, max_peaks: int) -> str:
    table = run.table
    if table is None or len(table) == 0:
        return '<h3>Shortlists</h3><p class="empty">No peaks.</p>'
    marks = engine_marks_review(table)
    records = table.to_dict("records")
    groups: dict[str, list[dict[str, Any]]] = {}
    for rec in records:
        groups.setdefault(str(rec.get("peak")), []).append(rec)
    keys = list(groups)
    review = {k for k in keys if any(row_needs_review(r.get("flags"), engine_marks=marks) for r in groups[k])}
    note = ""
    if len(keys) > max_peaks:
        chosen = [k for k in keys if k in review][:max_peaks]
        chosen += [k for k in keys if k not in review][: max_peaks - len(chosen)]
        keep = set(chosen)
        shown = [k for k in keys if k in keep]
        note = (f'<p class="note">{len(keys)} peaks; {len(shown)} shown here (peaks marked for review first). '
                "The CSV or JSON output lists every peak.</p>")
    else:
        shown = keys
    bodies = []
    for key in shown:
        rows = []
        for j, rec in enumerate(groups[key]):
            flags = split_flags(rec.get("flags"))
            needs = row_needs_review(rec.get("flags"), engine_marks=marks)
            ranked = _finite(rec.get("rank"))
            first = j == 0
            rows.append(
                f'<tr class="{"needs-review" if needs else "ok"}">'
                f'<td class="mark">{"review" if needs else ""}</td>'
                f'<td class="peak">{e(rec.get("peak")) if first else ""}</td>'
                f'<td class="n">{_num(rec.get("rt"), 3) if first else ""}</td>'
                f'<td class="n">{_num(rec.get("ri"), 1) if first else ""}</td>'
                f'<td class="n">{_int(rec.get("rank"))}</td>'
                f'<td class="name">{e(rec.get("name")) if ranked else "<span class=empty>no candidate</span>"}</td>'
                f'<td class="cas">{e(rec.get("cas"))}</td><td class="formula">{e(rec.get("formula"))}</td>'
                f'<td class="n">{_num(rec.get("library_ri"), 1)}</td><td class="n">{_num(rec.get("delta_ri"), 1)}</td>'
                f'<td class="n">{_num(rec.get("probability"), 3)}</td>'
                f'<td class="n">{_num(rec.get("not_in_library"), 3) if first else ""}</td>'
                f"<td>{_flags_html(flags)}</td></tr>"
            )
        bodies.append("<tbody>" + "".join(rows) + "</tbody>")
    return (f"<h3>Shortlists</h3>{note}"
            f'<table class="shortlist">{_SHORT_HEAD}{"".join(bodies)}</table>')


def _spectra(run: RunResult, max_peaks: int) -> str:
    """For each peak to review with spectra: the unknown's spectrum above, the leading candidate's below."""
    drawn = getattr(run, "spectra", None) or {}
    if not drawn:
        return ""
    figs = []
    for peak, d in list(drawn.items())[:max_peaks]:
        sim = d.get("similarity")
        caption = (f"peak {e(peak)}: its spectrum (above) and that of {e(d.get('name'))}, the leading candidate "
                   f"(below); similarity {_num(sim, 3)} (Stein &amp; Scott composite, 0–1)")
        svg = plots.spectra_plot(d["unknown"], d["reference"], upper=f"peak {peak}",
                                 lower=f"{d.get('name')} (reference)")
        figs.append(f'<figure class="spectra">{svg}<figcaption>{caption}</figcaption></figure>')
    return ("<h3>Spectra of the peaks to review</h3>"
            '<p class="note">Each peak marked for review whose leading candidate has a reference spectrum; '
            "intensities relative to each spectrum's base peak.</p>" + '<div class="grid">' + "".join(figs) + "</div>")


def _run_section(i: int, run: RunResult, summary: dict[str, Any], max_peaks: int) -> str:
    facts = [
        ("peak file", e(mask_secrets(str(run.source)))),
        ("phase class", e(run.phase_class)),
        ("tolerance window", _window(run.window)),
        ("index scatter assumed", _num(run.measurement_sd, 2) if _finite(run.measurement_sd) else ""),
        ("peaks", str(summary["peaks"])),
    ]
    notices = "".join(f"<li>{e(mask_secrets(str(n)))}</li>" for n in (run.notices or []))
    return (
        f'<section class="run" id="run-{i}"><h2>Run {i}: {e(run.label)}</h2>'
        + _kv_table(facts)
        + (f'<h3>Notices</h3><ul class="notices">{notices}</ul>' if notices else "")
        + f'<div id="run-{i}-calibration">{_calibration(run.calibration)}</div>'
        + f'<div id="run-{i}-correction">{_correction(run)}</div>'
        + f'<div id="run-{i}-shortlists">{_shortlists(run, max_peaks)}</div>'
        + f'<div id="run-{i}-spectra">{_spectra(run, max_peaks)}</div>'
        + "</section>"
    )


def render_report(result: ScreenResult, *, max_peaks: int = MAX_PEAKS) -> str:
    """The whole report as one HTML string (see the module doc)."""
    summaries = [summarise_table(r.table) for r in result.runs]
    nav = ""
    if len(result.runs) > 1:
        items = "".join(f'<li><a href="#run-{i}">{e(r.label)}</a></li>' for i, r in enumerate(result.runs, start=1))
        nav = f"<nav><ul>{items}</ul></nav>"
    body = (
        _header(result)
        + _caution(result, "top")
        + nav
        + _summary(result, summaries)
        + "".join(_run_section(i, r, s, max_peaks) for i, (r, s) in enumerate(zip(result.runs, summaries), start=1))
        + f"<footer>{_caution(result, 'bottom')}"
        + f'<p class="meta">matcher {e(result.tool_version)} · {e(result.created)}</p></footer>'
    )
    title = "Screening report – " + ", ".join(str(r.label) for r in result.runs[:3]) if result.runs else "Screening report"
    return (
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
        "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
        "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; style-src 'unsafe-inline'; img-src data:\">"
        f"<title>{e(title)}</title><style>{_CSS}</style></head><body>{body}</body></html>\n"
    )


def write_report(result: ScreenResult, path: str | os.PathLike, *, max_peaks: int = MAX_PEAKS) -> str:
    """Write the report to ``path`` atomically; returns the path."""
    page = render_report(result, max_peaks=max_peaks)
    with atomic_write(path) as fh:
        fh.write(page)
    return os.fspath(path)
