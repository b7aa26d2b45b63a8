"""The screening report: one self-contained HTML file a colleague or auditor can read.

``write_report(result, "report.html")`` writes (atomically) a page with

* the caution (:data:`matcher.CAUTION` as carried by the result), at the top and the bottom;
* the QC record (sample or lot, analyst, instrument, column: ``RunResult.record``), provenance
  (tool version, creation time, library with any password masked) and the settings in words;
* a run summary: peaks, peaks with candidates, peaks flagged for review,
  peaks with no candidate, peaks most likely not in the library, and per
  flag the number of peaks carrying it (rules in :mod:`matcher.report.summary`);
* per run: which index the RI column holds; what the ladder checks found, read from the calibration
  file's own keys (``qc.findings`` and ``warnings``: a probable mislabelled or missing standard;
  ``qc.gaps`` as readable lines; ``holdup.value`` with its method), the standards with their
  leave-one-out deviations, a calibration plot (retention time against index of the standards, with
  the interpolation the method uses between them: straight segments for the linear index of
  van den Dool & Kratz, J. Chromatogr. 11, 463, 1963; log-adjusted-time segments for the Kováts
  index, Helv. Chim. Acta 41, 1915, 1958); the adaptive correction (Zenkevich, Molecules 30, 4706,
  2025) in the one sign convention of every output, ΔRI = measured − library = slope·RI + offset,
  with its anchors (without anchors, the confident matches of the run are shown: rank 1,
  probability ≥ 0.9, not marked for review); the composition (area % per peak and its most
  probable candidate);
* for a two-column screen, the second column: the second run's file, class, calibration and
  correction, the pairing of the peaks (counts, the areas' split factor k with its scatter, the
  second run's peaks without partner) and a plot of every pair's two indices over the library
  compounds listed on both classes, pairs the leading candidate's second-column index contradicts
  drawn as diamonds (legend in words);
* each peak's shortlist with its flags; rows needing review are marked in
  words (and colour);
* a review and sign-off block (screened by, reviewed by, date, signature).

No program value (None, True/False, NaN, a dict or list) reaches the visible text: every value goes
through :func:`matcher.report.wording.readable` or a number format.

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
from matcher.results import REPORT_PEAKS, RunResult, ScreenResult
from matcher.report.summary import REVIEW_FLAG, engine_marks_review, row_needs_review, split_flags, summarise_table, summary_of  # noqa: F401
from matcher.safe_text import html_text as e
from matcher.report.wording import (finding_label, format_time, gap_text, index_statement, plural, readable,
                                    settings_rows)
from matcher.results import RECORD_FIELDS
from matcher.location import mask_secrets, mask_url

#: Default cap on peaks listed per run in the report.
MAX_PEAKS = REPORT_PEAKS

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
.plotbox.wide svg.plot { width: 100%; max-width: 900px; height: auto; }
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
table.shortlist.two { font-size: 13px; }
table.shortlist.two .flag { white-space: normal; }
table.shortlist.two td:last-child { min-width: 11.5em; }
.partner { font-weight: 400; font-size: 12px; color: var(--soft); white-space: nowrap; }
.empty { color: var(--soft); font-style: italic; }
nav ul { margin: 4px 0; padding-left: 18px; }
svg.plot { border: 1px solid var(--line); background: #fff; max-width: 100%; height: auto; }
footer { margin-top: 36px; }
table.signoff { min-width: 32em; }
table.signoff td.line { border-bottom: 1px solid var(--ink); min-width: 22em; height: 2.2em; }
tr.total td { font-weight: 600; border-top: 1px solid var(--soft); }
.status.note { color: var(--soft); background: var(--band); }
details.settings { color: var(--soft); margin: 4px 0; }
div.record table.kv th { width: 10em; }
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
    """A value of a metadata dict as escaped text a reader understands (see :mod:`matcher.report.wording`)."""
    return e(readable(value))


def _flags_html(flags: Sequence[str]) -> str:
    return "".join(f'<span class="flag{" review" if f == REVIEW_FLAG else ""}">{e(f)}</span>' for f in flags)


# --------------------------------------------------------------------------- sections

def _record_rows(record: dict[str, Any] | None) -> list[tuple[str, str]]:
    record = record or {}
    return [(label, e(record[key])) for key, label in RECORD_FIELDS.items() if record.get(key)]


def _header(result: ScreenResult) -> str:
    lib = result.library or {}
    bits = []
    if lib.get("location"):
        bits.append(f"library {e(mask_url(str(lib['location'])))}")
    if lib.get("revision") not in (None, ""):
        bits.append(f"revision {e(lib['revision'])}")
    if lib.get("entries") is not None:
        bits.append(e(plural(int(lib["entries"]), "entry", "entries")))
    if lib.get("compounds") is not None:
        bits.append(e(plural(int(lib["compounds"]), "compound")))
    # the QC record: facts shared by every run go up here, the others in each run's section
    records = [r.record or {} for r in result.runs]
    shared = {k: records[0][k] for k in RECORD_FIELDS if records and records[0].get(k)
              and all(r.get(k) == records[0][k] for r in records)}
    record = _kv_table(_record_rows(shared)) if shared else ""
    settings = _kv_table([(label, e(value)) for label, value in settings_rows(result.settings)])
    return (
        "<header>"
        "<h1>Retention-index screening report</h1>"
        + _caution(result, "top")
        + (f'<div class="record" id="record">{record}</div>' if record else "")
        + f'<p class="meta">matcher {e(result.tool_version)} · created {e(result.created)}</p>'
        + (f'<p class="meta">{" · ".join(bits)}</p>' if bits else "")
        + (f'<details class="settings"><summary>Settings</summary>{settings}</details>' if settings else "")
        + "</header>"
    )


def _caution(result: ScreenResult, where: str) -> str:
    return f'<div class="caution" role="note" id="caution-{where}"><strong>Caution</strong>{e(result.caution)}</div>'


def _summary(result: ScreenResult, summaries: list[dict[str, Any]]) -> str:
    head = ("<tr><th>run</th><th>polarity class</th><th>window</th><th class=\"n\">peaks</th>"
            "<th class=\"n\">with candidates</th><th class=\"n\">flagged for review</th>"
            "<th class=\"n\">no candidate</th><th class=\"n\">not in library (most likely)</th></tr>")
    rows = []
    for i, (run, s) in enumerate(zip(result.runs, summaries), start=1):
        rows.append(
            f'<tr><td><a href="#run-{i}">{e(run.label)}</a></td><td>{e(run.phase_class)}{_second_class(run)}</td>'
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


def _second_class(run: RunResult) -> str:
    second = run.second if isinstance(getattr(run, "second", None), dict) else None
    return f" (second column: {e(second.get('class'))})" if second else ""


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
        tm = float(holdup.get("value")) if isinstance(holdup, dict) and holdup.get("value") is not None else None
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


def _holdup_text(holdup: Any) -> str:
    if not isinstance(holdup, dict) or not _finite(holdup.get("value")):
        return ""
    method = {"given": "given", "marker": "unretained marker peak", "peterson-hirsch": "Peterson–Hirsch",
              "fit": "least-squares fit over the ladder"}.get(str(holdup.get("method")), readable(holdup.get("method")))
    text = f"{_num(holdup.get('value'), 3)} min ({e(method)}"
    if holdup.get("detail"):
        text += f"; {e(holdup.get('detail'))}"
    text += ")"
    if holdup.get("used") is False:
        text += " – recorded only: it cancels in the linear index"
    return text


def _calibration(cal: dict[str, Any] | None) -> str:
    if not cal:
        return '<h3>Ladder calibration</h3><p class="empty">No ladder was used: the peak table gave indices.</p>'
    qc = cal.get("qc") or {}
    source = cal.get("source") or {}
    index_range = qc.get("index_range")
    rt_range = qc.get("rt_range")
    gaps = [g for g in (qc.get("gaps") or []) if isinstance(g, dict)]
    facts = [
        ("ladder file", e(source.get("ladder")) if isinstance(source, dict) else ""),
        ("reference series", _series_text(cal.get("series"), cal.get("index_scale"))),
        ("temperature mode", _text(cal.get("mode")) + (f" – {e(cal.get('formula'))}" if cal.get("formula") else "")),
        ("hold-up time", _holdup_text(cal.get("holdup"))),
        ("index range covered", " to ".join(_num(v, 0) for v in index_range)
         if isinstance(index_range, (list, tuple)) and len(index_range) == 2 else ""),
        ("time range covered", " to ".join(e(format_time(v)) for v in rt_range) + " min"
         if isinstance(rt_range, (list, tuple)) and len(rt_range) == 2 else ""),
        ("gaps", "<br>".join(e(gap_text(g)) for g in gaps) if gaps else ("none" if "gaps" in qc else "")),
    ]
    parts = ["<h3>Ladder calibration</h3>", _kv_table(facts)]
    findings = [f for f in (qc.get("findings") or []) if isinstance(f, dict)]
    warnings = [str(w) for w in (cal.get("warnings") or [])]
    listed = {str(f.get("message")) for f in findings}
    rows = "".join(
        f'<tr class="qc-{e(f.get("level"))}"><td><span class="status {"warn" if f.get("level") == "warning" else "note"}">'
        f'{e(f.get("level"))}</span></td><td>{e(finding_label(f.get("code")))}</td><td>{e(f.get("message"))}</td></tr>'
        for f in findings
    ) + "".join(
        f'<tr class="qc-warning"><td><span class="status warn">warning</span></td><td>ladder</td><td>{e(w)}</td></tr>'
        for w in warnings if w not in listed
    )
    if rows:
        parts.append('<table class="qc ladder-findings"><tr><th>level</th><th>ladder check</th><th>finding</th></tr>'
                     f"{rows}</table>")
    else:
        parts.append('<p class="note ladder-findings"><span class="status pass">pass</span> '
                     "The ladder's spacing follows its trend throughout; no standard looks mislabelled or missing.</p>")
    standards = [s for s in (cal.get("standards") or []) if isinstance(s, dict)]

    def per_standard(key: str) -> list | None:
        values = qc.get(key)
        ok = isinstance(values, (list, tuple)) and len(values) == len(standards)
        return list(values) if ok else None

    loo, fit, marks = per_standard("loo_residual"), per_standard("fit_residual"), per_standard("flags")
    ratio = qc.get("spacing_ratio") if isinstance(qc.get("spacing_ratio"), (list, tuple)) else None
    spacing = ([None] + list(ratio)) if ratio is not None and len(ratio) == len(standards) - 1 else None
    if fit is not None and all(v is None for v in fit):
        fit = None
    std_table = ""
    if standards:
        head = ('<th>standard</th><th class="n">time (min)</th><th class="n">index</th>'
                + ('<th class="n">spacing vs trend</th>' if spacing else "")
                + ('<th class="n">leave-one-out deviation</th>' if loo else "")
                + ('<th class="n">deviation from the log line</th>' if fit else "")
                + ("<th>check</th>" if marks else ""))
        body = "".join(
            f"<tr><td>{e(s.get('name'))}</td><td class=\"n\">{e(format_time(s.get('rt'), s.get('rt_decimals')))}</td>"
            f"<td class=\"n\">{_num(s.get('index'), 1)}</td>"
            + (f'<td class="n">{_num(spacing[i], 2) if spacing[i] is not None else ""}</td>' if spacing else "")
            + (f'<td class="n">{_num(loo[i], 1) if loo[i] is not None else ""}</td>' if loo else "")
            + (f'<td class="n">{_num(fit[i], 2) if fit[i] is not None else ""}</td>' if fit else "")
            + (f"<td>{_check_mark(marks[i])}</td>" if marks else "")
            + "</tr>"
            for i, s in enumerate(standards)
        )
        std_table = f'<table class="standards"><tr>{head}</tr>{body}</table>'
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
                         labels=[f"{s.get('name')}: {format_time(s.get('rt'))} min, {readable(s.get('index'))}" for s in sorted(
                             (s for s in standards if _finite(s.get("rt")) and _finite(s.get("index"))),
                             key=lambda s: float(s["rt"]))],
                         name="standards"),
        ]
        plot = plots.xy_plot(layers, x_label="retention time (min)", y_label="retention index",
                             title="Calibration: standards and interpolation", width=520, height=300)
    if std_table or plot:
        parts.append(f'<div class="grid"><div>{std_table}</div><div class="plotbox">{plot}</div></div>')
    return "".join(parts)


def _series_text(series: Any, scale: Any) -> str:
    from matcher.retention.series import SERIES

    known = SERIES.get(str(series))
    name = known.label if known else readable(series)
    return e(name) + (f"; index scale: {e(scale)}" if scale else "")


def _check_mark(mark: Any) -> str:
    words = {"mislabel?": "probable mislabel", "missing?": "standard missing before it", "uneven?": "uneven spacing"}
    text = readable(mark)
    return f'<span class="status warn">{e(words.get(text, text))}</span>' if text else ""


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
                        "ri_measured": float(measured), "library_ri": float(rec["library_ri"])})
    return out


def _correction(run: RunResult) -> str:
    cor = run.correction
    parts = ["<h3>Adaptive correction</h3>"]
    anchors: list[dict[str, Any]] = []
    slope = offset = None
    if cor:
        applied = bool(cor.get("applied"))
        slope, offset = cor.get("slope"), cor.get("offset")
        if applied and _finite(slope) and _finite(offset):
            eq = (f"ΔRI (measured − library) = {_num(slope, 5)} · RI {'+' if float(offset) >= 0 else '−'} "
                  f"{_num(abs(float(offset)), 2)}")
            status = f'<span class="status pass">applied</span> {e(eq)}'
        else:
            status = '<span class="status warn">not applied</span> the plain screen was used'
        parts.append(_kv_table([
            ("correction", status),
            ("fit", e({"theil-sen": "Theil–Sen line, anchors beyond 3 robust SDs dropped and refitted"}.get(
                str(cor.get("method")), readable(cor.get("method"))))),
            ("anchors from", _text(cor.get("source"))),
            ("index scatter of the run", _num(cor.get("scatter"), 2) if _finite(cor.get("scatter")) else ""),
            ("notice", e(mask_secrets(str(cor.get("notice")))) if cor.get("notice") else ""),
        ]))
        anchors = [a for a in (cor.get("anchors") or []) if isinstance(a, dict)]
        if anchors:
            rows = "".join(
                f"<tr><td>{e(a.get('peak'))}</td><td>{e(a.get('name'))}</td>"
                f"<td class=\"n\">{_num(a.get('ri_measured'))}</td><td class=\"n\">{_num(a.get('library_ri'))}</td>"
                f"<td class=\"n\">{_num(_dev(a))}</td><td class=\"n\">{_num(a.get('residual'))}</td>"
                f"<td>{'' if a.get('kept') is None else ('kept' if a.get('kept') else 'dropped')}</td></tr>"
                for a in anchors
            )
            anchor_table = ('<table class="anchors"><tr><th>peak</th><th>anchor</th><th class="n">RI measured</th>'
                            '<th class="n">library RI</th><th class="n">ΔRI</th><th class="n">residual</th>'
                            f"<th>in the fit</th></tr>{rows}</table>")
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
    usable = [a for a in anchors if _finite(a.get("ri_measured")) and _finite(a.get("library_ri"))]
    xs = [float(a["ri_measured"]) for a in usable]
    ys = [_dev(a) for a in usable]
    labels = [f"{a.get('name')} (peak {a.get('peak')})" for a in usable]
    layers = [plots.points(xs, ys, labels=labels, name=point_name)]
    if xs and _finite(slope) and _finite(offset):
        lo, hi = min(xs), max(xs)
        span = max(hi - lo, 1.0)
        gx = [lo - 0.05 * span, hi + 0.05 * span]
        gy = [float(slope) * x + float(offset) for x in gx]
        applied = bool(cor and cor.get("applied"))
        scatter = cor.get("scatter") if cor else None
        if applied and _finite(scatter):
            s = float(scatter)
            layers.insert(0, plots.band(gx, [y - s for y in gy], [y + s for y in gy], name=f"± index scatter ({_num(s, 2)})"))
        layers.append(plots.line(gx, gy, colour="secondary", dashed=not applied,
                                 name="fit ΔRI = slope·RI + offset" + ("" if applied else " (not applied)")))
    plot = plots.xy_plot(layers, x_label="retention index (measured)", y_label="ΔRI = measured − library",
                         title="Deviation against index", width=520, height=300, zero_line=True)
    parts.append(f'<div class="grid"><div>{anchor_table}</div><div class="plotbox">{plot}</div></div>')
    return "".join(parts)


def _dev(anchor: dict[str, Any]) -> float:
    """ΔRI of an anchor or confident match: measured − library (the one sign convention of every output)."""
    try:
        return float(anchor.get("ri_measured")) - float(anchor.get("library_ri"))
    except (TypeError, ValueError):
        return math.nan


def _composition(run: RunResult) -> str:
    """Peak areas with each peak's best candidate: the composition a QC record lists."""
    table = run.table
    if table is None or len(table) == 0 or "area_percent" not in table:
        return ""
    pct = pd.to_numeric(table["area_percent"], errors="coerce")
    if not pct.notna().any():
        return ""
    marks = engine_marks_review(table)
    rows = []
    total_pct = 0.0
    for _, group in table.groupby("peak", sort=False):
        first = group.iloc[0].to_dict()
        p = first.get("area_percent")
        if not _finite(p):
            continue
        total_pct += float(p)
        ranked = _finite(first.get("rank"))
        if ranked and _finite(first.get("not_in_library")) and _finite(first.get("probability")) \
                and float(first["not_in_library"]) > float(first["probability"]):
            ranked = False  # none of the listed compounds is as probable as "not in library"
        needs = any(row_needs_review(f, engine_marks=marks) for f in group["flags"])
        rows.append(
            f"<tr><td>{e(first.get('peak'))}</td><td class=\"n\">{e(run.time_text(first.get('peak'), first.get('rt')))}</td>"
            f"<td class=\"n\">{_num(first.get('ri'), 1)}</td><td class=\"n\">{_num(first.get('area'), 0) if _finite(first.get('area')) else ''}</td>"
            f"<td class=\"n\">{_num(p, 2)}</td>"
            f"<td>{e(first.get('name')) if ranked else '<span class=empty>most likely not in the library</span>'}</td>"
            f"<td class=\"n\">{_num(first.get('probability'), 3) if ranked else _num(first.get('not_in_library'), 3)}</td>"
            f"<td>{'review' if needs else ''}</td></tr>"
        )
    source = (run.record or {}).get("area_percent", "")
    note = ("Area % as given in the peak table." if source == "file"
            else "Area % computed from the areas: each peak's share of the run's summed area.")
    return ('<h3>Composition</h3>'
            f'<p class="note">{e(note)} The name is the most probable candidate, tentative like every '
            "identification here.</p>"
            '<table class="composition"><tr><th>peak</th><th class="n">rt (min)</th><th class="n">RI</th>'
            '<th class="n">area</th><th class="n">area %</th><th>most probable candidate</th>'
            f'<th class="n">probability</th><th></th></tr>{"".join(rows)}'
            f'<tr class="total"><td colspan="4">total listed</td><td class="n">{_num(total_pct, 2)}</td>'
            "<td colspan=\"3\"></td></tr></table>")


_SHORT_HEAD = ("<thead><tr><th></th><th>peak</th><th class=\"n\">rt (min)</th><th class=\"n\">RI</th>"
               "<th class=\"n\">area %</th><th class=\"n\">rank</th>"
               "<th>name</th><th>CAS</th><th>formula</th><th class=\"n\">library RI</th><th class=\"n\">ΔRI</th>"
               "<th class=\"n\">probability</th><th class=\"n\">not in library</th><th>flags</th></tr></thead>")


#: The shortlist head of a two-column screen: the paired peak with its index, and ΔRI on the second class.
_SHORT_HEAD_TWO = (_SHORT_HEAD.replace("<th>peak</th>", "<th>peak<br><span class=\"partner\">second col.</span></th>")
                   .replace("<th class=\"n\">ΔRI</th>", "<th class=\"n\">ΔRI<br><span class=\"partner\">second</span></th>"))


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
    two = "second_delta_ri" in table.columns  # a two-column screen: the partner's index and each candidate's Δ there
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
                f'<td class="peak">{e(rec.get("peak")) if first else ""}'
                f'{"<br>" + _second_peak_cell(rec) if first and two else ""}</td>'
                f'<td class="n">{e(run.time_text(rec.get("peak"), rec.get("rt"))) if first else ""}</td>'
                f'<td class="n">{_num(rec.get("ri"), 1) if first else ""}</td>'
                f'<td class="n">{_num(rec.get("area_percent"), 2) if first and _finite(rec.get("area_percent")) else ""}</td>'
                f'<td class="n">{_int(rec.get("rank"))}</td>'
                f'<td class="name">{e(rec.get("name")) if ranked else "<span class=empty>no candidate</span>"}</td>'
                f'<td class="cas">{e(rec.get("cas"))}</td><td class="formula">{e(rec.get("formula"))}</td>'
                f'<td class="n">{_num(rec.get("library_ri"), 1)}</td><td class="n">{_num(rec.get("delta_ri"), 1)}'
                f'{"<br>" + _second_delta_cell(rec) if two and ranked else ""}</td>'
                f'<td class="n">{_num(rec.get("probability"), 3)}</td>'
                f'<td class="n">{_num(rec.get("not_in_library"), 3) if first else ""}</td>'

                + f"<td>{_flags_html(flags)}</td></tr>"
            )
        bodies.append("<tbody>" + "".join(rows) + "</tbody>")
    return (f"<h3>Shortlists</h3>{note}"
            f'<table class="shortlist{" two" if two else ""}">{_SHORT_HEAD_TWO if two else _SHORT_HEAD}'
            f'{"".join(bodies)}</table>')


def _second_delta_cell(rec: dict[str, Any]) -> str:
    """The candidate's ΔRI on the second class (paired index − its library index there), or why there is none."""
    if _finite(rec.get("second_delta_ri")):
        return f'<span class="partner" title="ΔRI on the second column">{_num(rec.get("second_delta_ri"), 1)}</span>'
    if not _finite(rec.get("second_library_ri")) and "not-on-second-class" in split_flags(rec.get("flags")):
        return '<span class="partner" title="no library entry on the second class">not listed</span>'
    return ""


def _second_peak_cell(rec: dict[str, Any]) -> str:
    """The paired second-run peak and its index ("B7: 1306.0"), or "unpaired"."""
    peak = rec.get("second_peak")
    if peak is None or (isinstance(peak, float) and not math.isfinite(peak)) or str(peak).strip() == "":
        return '<span class="partner empty">unpaired</span>'
    prob = rec.get("second_pair_probability")
    tip = "paired peak of the second run and its index" + (f"; pair probability {_num(prob, 3)}" if _finite(prob) else "")
    return f'<span class="partner" title="{e(tip)}">{e(peak)} · {_num(rec.get("second_ri"), 1)}</span>'


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


def _chromatograms(i: int, run: RunResult) -> str:
    """The run's TIC with its detected peaks numbered, and the ladder run's TIC with its alkanes labelled.

    Both come already decimated (min/max per bucket, :func:`matcher.signal.run_peaks.decimate`); only runs read
    from a run file, and ladders found in one, have them.
    """
    parts = []
    chrom = run.chromatogram if isinstance(run.chromatogram, dict) else None
    if chrom and chrom.get("rt"):
        peaks = [p for p in chrom.get("peaks") or [] if isinstance(p, dict)]
        names: dict[str, str] = {}
        t = run.table
        if t is not None and len(t):
            first = t[t["rank"] == 1]
            names = {str(p): str(n) for p, n in zip(first["peak"], first["name"])}
        tips = [f"peak {p.get('peak')}: {_num(p.get('rt'), 3)} min" + (f", {names[str(p.get('peak'))]}"
                                                                       if str(p.get("peak")) in names else "")
                for p in peaks]
        svg = plots.trace_plot(chrom["rt"], chrom["tic"], [p.get("rt") for p in peaks], [p.get("tic") for p in peaks],
                               [p.get("peak") for p in peaks], tips=tips,
                               title=f"Total-ion chromatogram: {len(peaks)} peaks detected (numbers as in the shortlist)")
        parts.append(f'<h3>Chromatogram</h3><div class="plotbox wide">{svg}</div>')
    source = (run.calibration or {}).get("source") if isinstance(run.calibration, dict) else None
    lrun = source.get("run") if isinstance(source, dict) else None
    if isinstance(lrun, dict) and isinstance(lrun.get("chromatogram"), dict):
        lc = lrun["chromatogram"]
        taken = [p for p in lrun.get("taken") or [] if isinstance(p, dict)]
        rt_l, tic_l = lc.get("rt") or [], lc.get("tic") or []
        ys = [_interp(rt_l, tic_l, p.get("rt")) for p in taken]
        svg = plots.trace_plot(rt_l, tic_l, [p.get("rt") for p in taken], ys, [f"C{p.get('carbons')}" for p in taken],
                               tips=[f"C{p.get('carbons')} ({p.get('carbons_from')}): {_num(p.get('rt'), 3)} min"
                                     for p in taken],
                               title=f"Ladder run: {len(taken)} n-alkanes found")
        parts.append(f'<h3>Ladder chromatogram</h3><div class="plotbox wide">{svg}</div>')
    return f'<div id="run-{i}-chromatograms">' + "".join(parts) + "</div>" if parts else ""


def _interp(xs: Sequence, ys: Sequence, x: Any) -> float:
    import numpy as np

    try:
        return float(np.interp(float(x), np.asarray(xs, dtype=float), np.asarray(ys, dtype=float)))
    except (TypeError, ValueError):
        return float("nan")


def _scatter_text(run: RunResult, settings: dict[str, Any]) -> str:
    if not _finite(run.index_scatter):
        return ""
    value = _num(run.index_scatter, 2)
    cor = run.correction or {}
    if settings.get("index_scatter") is not None:
        how = "given with --index-scatter"
    elif cor.get("applied") and _finite(cor.get("scatter")):
        how = "estimated from the adaptive fit's kept anchors"
    else:
        how = "class default, 0.3 × the window"
    return f"{value} index units ({e(how)})"


def _run_section(i: int, run: RunResult, summary: dict[str, Any], max_peaks: int, settings: dict[str, Any],
                 shared: set[str]) -> str:
    facts = [
        ("peak file", e(mask_secrets(str(run.source)))),
        *[(label, value) for label, value in _record_rows({k: v for k, v in (run.record or {}).items() if k not in shared})],
        ("polarity class", e(run.phase_class)),
        ("tolerance window", _window(run.window)),
        ("index scatter", _scatter_text(run, settings)),
        ("peaks", str(summary["peaks"])),
        ("RI column", e(index_statement(run.calibration, run.correction))),
    ]
    notices = "".join(f"<li>{e(mask_secrets(str(n)))}</li>" for n in (run.notices or []) if n)
    return (
        f'<section class="run" id="run-{i}"><h2>Run {i}: {e(run.label)}</h2>'
        + _kv_table(facts)
        + (f'<h3>Notices</h3><ul class="notices">{notices}</ul>' if notices else "")
        + _chromatograms(i, run)
        + f'<div id="run-{i}-calibration">{_calibration(run.calibration)}</div>'
        + f'<div id="run-{i}-correction">{_correction(run)}</div>'
        + (f'<div id="run-{i}-second">{_second_column(i, run)}</div>' if getattr(run, "second", None) else "")
        + f'<div id="run-{i}-composition">{_composition(run)}</div>'
        + f'<div id="run-{i}-shortlists">{_shortlists(run, max_peaks)}</div>'
        + f'<div id="run-{i}-spectra">{_spectra(run, max_peaks)}</div>'
        + "</section>"
    )


#: The flag on a leading candidate whose second-column index disagrees (matcher.identify.flags).
DISAGREES_FLAG = "second-column-disagrees"
#: At most this many second-run peaks without a partner are named in the report (all are in the JSON output).
SHOWN_UNPAIRED = 60


def _leading_flags(table: pd.DataFrame | None) -> dict[str, list[str]]:
    """Per peak id, the flags of its leading row (rank 1, else its only row)."""
    if table is None or len(table) == 0 or "peak" not in table:
        return {}
    out: dict[str, list[str]] = {}
    ranks = (pd.to_numeric(table["rank"], errors="coerce").to_numpy(dtype=float, na_value=np.nan) if "rank" in table
             else np.full(len(table), np.nan))
    flags = table["flags"] if "flags" in table else [""] * len(table)
    for peak, rank, f in zip(table["peak"].astype(str), ranks, flags):
        if rank == 1 or peak not in out:  # the rank-1 row, else the peak's only (candidate-less) row
            out[peak] = split_flags(f)
    return out


def _split_factor_text(area: dict[str, Any] | None) -> str:
    """k = exp(ln k) with the scatter of ln(area ratio) about it, and where the estimate came from."""
    if not isinstance(area, dict) or not _finite(area.get("log_factor")):
        return "not estimated: one of the runs gave no areas, so the pairing rests on the indices (and spectra) alone"
    k = math.exp(float(area["log_factor"]))
    text = f"k = {k:.3g} (area on the second column ÷ area on the first)"
    if _finite(area.get("scatter")):
        sc = float(area["scatter"])
        text += f"; scatter of ln(area ratio) about ln k: {sc:.3g} (a factor of about {math.exp(sc):.3g} either way)"
    if area.get("source"):
        text += f"; estimated from {readable(area.get('source'))}"
    return text


def _second_column(i: int, run: RunResult) -> str:
    """A two-column screen: the second run's provenance, the pairing, and the plot of paired indices."""
    second = run.second if isinstance(run.second, dict) else None
    if not second:
        return ""
    pairing = second.get("pairing") if isinstance(second.get("pairing"), dict) else {}
    cal = second.get("calibration") if isinstance(second.get("calibration"), dict) else None
    cor = second.get("correction") if isinstance(second.get("correction"), dict) else None
    cal_text = ""
    if cal:
        source = cal.get("source") if isinstance(cal.get("source"), dict) else {}
        rng = (cal.get("qc") or {}).get("index_range") if isinstance(cal.get("qc"), dict) else None
        findings = [f for f in ((cal.get("qc") or {}).get("findings") or []) if isinstance(f, dict)] \
            if isinstance(cal.get("qc"), dict) else []
        warnings = [w for w in cal.get("warnings") or []]
        bits = [f"ladder {e(mask_secrets(str(source.get('ladder'))))}" if source.get("ladder") else "",
                _series_text(cal.get("series"), cal.get("index_scale")) if cal.get("series") else "",
                _text(cal.get("mode")) if cal.get("mode") else "",
                ("index range " + " to ".join(_num(v, 0) for v in rng))
                if isinstance(rng, (list, tuple)) and len(rng) == 2 else "",
                e(plural(len(findings), "ladder finding")) + (", " + e(plural(len(warnings), "warning")) if warnings else "")]
        cal_text = "; ".join(b for b in bits if b)
    else:
        cal_text = "no ladder: the second peak table gave indices"
    if cor:
        if cor.get("applied") and _finite(cor.get("slope")) and _finite(cor.get("offset")):
            cor_text = (f"applied: ΔRI (measured − library) = {_num(cor.get('slope'), 5)} · RI "
                        f"{'+' if float(cor['offset']) >= 0 else '−'} {_num(abs(float(cor['offset'])), 2)}")
        else:
            cor_text = "not applied: the plain screen was used" + (
                f" ({mask_secrets(str(cor.get('notice')))})" if cor.get("notice") else "")
    else:
        cor_text = "not requested"
    scatter = second.get("index_scatter")
    checksum = second.get("checksum")
    checksum = checksum.get("sha256") if isinstance(checksum, dict) else checksum
    facts = [
        ("second run", e(second.get("label"))),
        ("peak file", e(mask_secrets(str(second.get("source") or "")))),
        ("polarity class", e(second.get("class"))),
        ("tolerance window", _window(second.get("window"))),
        ("peaks", _int(second.get("peak_count"))),
        ("index scatter", f"{_num(scatter, 2)} index units" if _finite(scatter) else ""),
        ("ladder calibration", cal_text),
        ("RI column", e(index_statement(cal, cor))),
        ("adaptive correction", e(cor_text)),
        ("peak table SHA-256", f"<code>{e(checksum)}</code>" if checksum else ""),
    ]
    pairs = second.get("pairs") if isinstance(second.get("pairs"), dict) else {}
    ids = [str(v) for v in pairs.get("peak") or []]
    partners = [str(v) for v in pairs.get("second_peak") or []]
    xs, ys = list(pairs.get("ri") or []), list(pairs.get("second_ri") or [])
    n = min(len(ids), len(partners), len(xs), len(ys))
    unpaired_b = [str(v) for v in second.get("unpaired_second") or []]
    lead = _leading_flags(run.table)
    pair_p = _pair_probabilities(run.table)
    disagree = [k for k in range(n) if DISAGREES_FLAG in lead.get(ids[k], [])]
    unpaired_a = [p for p, f in lead.items() if "unpaired" in f]
    pair_rows = [
        ("pairs made", e(_int(pairing.get("paired")) if pairing.get("paired") is not None else str(n))),
        ("pairs less probable than 0.9", _int(pairing.get("uncertain_pairs"))),
        ("peaks of this run without partner", _int(pairing.get("unpaired_first"))
         + (f" ({e(', '.join(unpaired_a[:SHOWN_UNPAIRED]))}{' …' if len(unpaired_a) > SHOWN_UNPAIRED else ''})"
            if unpaired_a else "")),
        ("peaks of the second run without partner", _int(pairing.get("unpaired_second"))
         + (f" ({e(', '.join(unpaired_b[:SHOWN_UNPAIRED]))}{' …' if len(unpaired_b) > SHOWN_UNPAIRED else ''})"
            if unpaired_b else "")),
        ("split factor of the areas", e(_split_factor_text(pairing.get("area")))),
        ("pairs with both spectra compared", _int(pairing.get("spectra_compared"))),
        ("prior probability of no partner", _num(pairing.get("unpaired_prior"), 2)),
        ("method", e(readable(pairing.get("method")))),
        ("leading candidates the second column contradicts", str(len(disagree))),
    ]
    notes = [str(v) for v in pairing.get("notes") or []]
    plot = _pairs_plot(second, ids[:n], partners[:n], xs[:n], ys[:n], set(disagree), pair_p)
    return (
        '<h3>Second column</h3>'
        '<p class="note">The same sample run on a column of another polarity. Each peak of this run was paired with '
        "at most one peak of the second run (on the indices, the areas of the split injection and, where both have "
        "them, the spectra); the paired peak's index on the second class enters each candidate's probability. "
        "Agreement on two columns strengthens a tentative identification; it does not confirm it.</p>"
        + _kv_table(facts)
        + "<h3>Pairing of the peaks</h3>" + _kv_table(pair_rows)
        + ("".join(f'<p class="note">{e(mask_secrets(t))}</p>' for t in notes))
        + f'<div class="plotbox wide">{plot}</div>'
        + '<p class="note">Each marker is a pair of peaks: its index on this run\'s column across, on the second '
        "column up. Small grey dots are library compounds with an entry on both classes; a pair far from them "
        "suggests a wrong pair or a compound the library does not list on both. Diamonds mark pairs whose leading "
        "candidate's second-column index lies outside its window on the second class (flag "
        "second-column-disagrees): review them.</p>"
    )


def _pair_probabilities(table: pd.DataFrame | None) -> dict[str, float]:
    """Per peak id, the probability of its pairing (``second_pair_probability``), where the table has it."""
    if table is None or len(table) == 0 or "second_pair_probability" not in table:
        return {}
    first = table.drop_duplicates("peak")
    values = pd.to_numeric(first["second_pair_probability"], errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    return {str(p): float(v) for p, v in zip(first["peak"], values) if math.isfinite(v)}


def _pairs_plot(second: dict[str, Any], ids: list[str], partners: list[str], xs: list, ys: list,
                disagree: set[int], pair_p: dict[str, float] | None = None) -> str:
    """First-column index against second-column index of every pair, the library's two-class compounds behind."""
    cls = readable(second.get("class"))
    ok = [k for k in range(len(ids)) if _finite(xs[k]) and _finite(ys[k])]
    layers = []
    if ok:
        fx, fy = [float(xs[k]) for k in ok], [float(ys[k]) for k in ok]
        span_x, span_y = max(fx) - min(fx), max(fy) - min(fy)
        lo_x, hi_x = min(fx) - max(0.05 * span_x, 20.0), max(fx) + max(0.05 * span_x, 20.0)
        lo_y, hi_y = min(fy) - max(0.05 * span_y, 20.0), max(fy) + max(0.05 * span_y, 20.0)
        lib = second.get("library_points") if isinstance(second.get("library_points"), dict) else {}
        lx, ly, ln = list(lib.get("ri") or []), list(lib.get("second_ri") or []), list(lib.get("name") or [])
        keep = [j for j in range(min(len(lx), len(ly))) if _finite(lx[j]) and _finite(ly[j])
                and lo_x <= float(lx[j]) <= hi_x and lo_y <= float(ly[j]) <= hi_y]
        if keep:
            layers.append(plots.points([lx[j] for j in keep], [ly[j] for j in keep],
                                       labels=[f"{ln[j] if j < len(ln) else ''}: library {_num(lx[j], 0)} / "
                                               f"{_num(ly[j], 0)}" for j in keep],
                                       colour="muted", marker="dot", css="library-point",
                                       name="library compound listed on both classes"))

        def tip(k: int) -> str:
            p = (pair_p or {}).get(ids[k])
            return (f"peak {ids[k]} ({_num(xs[k], 1)}) with second-run peak {partners[k]} ({_num(ys[k], 1)})"
                    + (f", pair probability {p:.3f}" if p is not None else ""))

        agree = [k for k in ok if k not in disagree]
        against = [k for k in ok if k in disagree]
        layers.append(plots.points([xs[k] for k in agree], [ys[k] for k in agree], labels=[tip(k) for k in agree],
                                   colour="primary", css="pair", name="pair of peaks"))
        if against:
            layers.append(plots.points([xs[k] for k in against], [ys[k] for k in against],
                                       labels=[tip(k) + ": leading candidate disagrees on the second column"
                                               for k in against],
                                       colour="secondary", marker="diamond", css="pair disagrees",
                                       name="pair whose leading candidate disagrees on the second column"))
    return plots.xy_plot(layers, x_label="retention index, this run's column",
                         y_label=f"retention index, second column ({cls})",
                         title=f"Paired peaks: {len(ok)} pairs", width=720, height=420)


def _signature(result: ScreenResult) -> str:
    """The sign-off block that ends the record: screened by, reviewed by, date, signature."""
    analysts = sorted({str((r.record or {}).get("analyst")) for r in result.runs if (r.record or {}).get("analyst")})
    return (
        '<section class="signoff" id="sign-off"><h2>Review and sign-off</h2>'
        '<table class="signoff">'
        f"<tr><th scope=\"row\">screened by</th><td>{e(', '.join(analysts))}</td></tr>"
        "<tr><th scope=\"row\">reviewed by</th><td class=\"line\"></td></tr>"
        "<tr><th scope=\"row\">date</th><td class=\"line\"></td></tr>"
        "<tr><th scope=\"row\">signature</th><td class=\"line\"></td></tr>"
        "</table>"
        '<p class="note">The reviewer confirms that the flagged peaks were looked at; identifications stay '
        "tentative until confirmed with an authentic standard.</p></section>"
    )


def render_report(result: ScreenResult, *, max_peaks: int = MAX_PEAKS) -> str:
    """The whole report as one HTML string (see the module doc)."""
    summaries = [summary_of(r) for r in result.runs]
    records = [r.record or {} for r in result.runs]
    shared = {k for k in RECORD_FIELDS if records and records[0].get(k) and all(r.get(k) == records[0][k] for r in records)}
    nav = ""
    if len(result.runs) > 1:
        items = "".join(f'<li><a href="#run-{i}">{e(r.label)}</a></li>' for i, r in enumerate(result.runs, start=1))
        nav = f"<nav><ul>{items}</ul></nav>"
    body = (
        _header(result)
        + nav
        + _summary(result, summaries)
        + "".join(_run_section(i, r, s, max_peaks, result.settings or {}, shared)
                  for i, (r, s) in enumerate(zip(result.runs, summaries), start=1))
        + _signature(result)
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
