"""The reviewed list out of the page: a CSV for the QC record and an HTML report with a review section.

One row per peak: the run, peak, index, the engine's top candidate and its probability and
flags, the review status (``open`` when not decided), the name accepted, whether an authentic
standard confirmed it, the note, who decided and when, and the library observation when it was
added. Text cells are neutralised against spreadsheet formulas (:func:`matcher.safe_text.neutralise`);
the CSV starts with two ``#`` lines (the caution and what was reviewed), so
``pandas.read_csv(path, comment="#")`` reads it. Both files go through
:func:`matcher.io.atomic.atomic_write` after :func:`matcher.io.atomic.guard_output`.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any


#: Columns of the review CSV, in order (docs/formats.md, "Review export").
EXPORT_COLUMNS: tuple[str, ...] = (
    "run", "peak", "ri", "top_candidate", "top_probability", "flags", "status", "accepted_name",
    "standard", "note", "reviewer", "decided", "library_observation",
)


def review_rows(review) -> list[dict[str, Any]]:
    """The reviewed list, one dict per peak with :data:`EXPORT_COLUMNS`."""
    rows = []
    for p in review.peaks():
        top = p["candidates"][0] if p["candidates"] else {}
        d = p["decision"] or {}
        a = p["added"] or {}
        rows.append({"run": p["run"], "peak": p["peak"], "ri": p.get("ri"), "top_candidate": top.get("name", ""),
                     "top_probability": top.get("probability"), "flags": ";".join(p["flags"]),
                     "status": d.get("decision", "open"), "accepted_name": d.get("name", ""),
                     "standard": bool(d.get("standard", False)), "note": d.get("note", ""),
                     "reviewer": d.get("reviewer", ""), "decided": d.get("time", ""),
                     "library_observation": a.get("observation")})
    return rows


def _cell(value: Any) -> str:
    from matcher.safe_text import neutralise

    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return f"{value:.6g}"
    return str(neutralise(str(value)))


def _shown(column: str, value: Any) -> str:
    if value is None:
        return ""
    if column == "ri":
        return f"{value:.1f}"
    if column == "top_probability":
        return f"{value:.3f}"
    return _cell(value)


def write_review_csv(review, path: str | os.PathLike) -> Path:
    import csv

    from matcher.io.atomic import atomic_write

    s = review.summary()
    with atomic_write(path, newline="") as fh:
        fh.write(f"# {' '.join(s['caution'].split())} {' '.join(s['accepting_means'].split())}\n")
        fh.write(f"# review of {s['result']} (sha256 {s['sha256']}), library revision "
                 f"{s['library'].get('revision') or 'unknown'}, record {s['record']}\n")
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(EXPORT_COLUMNS)
        for row in review_rows(review):
            w.writerow([_cell(row[c]) for c in EXPORT_COLUMNS])
    return Path(path)


def render_review_html(review) -> str:
    """A self-contained report page (no scripts, nothing loaded) with the run summary and the review section."""
    from matcher.safe_text import html_text as h

    s = review.summary()
    c = s["counts"]
    rows = review_rows(review)
    body = []
    for r in rows:
        body.append("<tr>" + "".join(f"<td>{h(_shown(k, r[k]))}</td>" for k in EXPORT_COLUMNS) + "</tr>")
    runs = "; ".join(f"{h(r['label'])} ({h(r['class'])}, {r['peaks']} peaks)" for r in s["runs"])
    added = "".join(f"<li>{h(a['name'])}: peak {h(a['peak'])} of run {h(a['run'])}, observation {h(a.get('observation'))}"
                    f" ({h(a.get('reviewer', ''))}, {h(a.get('time', ''))})</li>" for a in review.record["added"])
    return f"""<!doctype html>
<html lang="en"><head><meta charset="utf-8">
<meta http-equiv="Content-Security-Policy" content="default-src 'none'; style-src 'unsafe-inline'; img-src data:">
<title>Review report · {h(s['result'])}</title>
<style>body{{font:14px/1.45 system-ui,sans-serif;margin:18px;color:#1d232b}}
.caution{{padding:6px 10px;background:#fff4e0;border-left:4px solid #8a4b00}}
table{{border-collapse:collapse}}td,th{{padding:3px 8px;border-bottom:1px solid #d5dae0;text-align:left}}
th{{background:#f3f5f7}}</style></head><body>
<h1>Review report: {h(s['result'])}</h1>
<p class="caution"><b>Caution.</b> {h(s['caution'])}</p>
<p>{h(s['accepting_means'])}</p>
<h2>Run</h2>
<p>{runs}; screened {h(s['created'] or 'unknown')}; library revision {h(s['library'].get('revision') or 'unknown')};
result checksum <code>{h(s['sha256'])}</code>.</p>
<h2 id="review">Review</h2>
<p>{s['peaks']} peaks: {c['accept']} accepted, {c['reject']} rejected, {c['unsure']} unsure, {c['open']} not decided.
Record <code>{h(s['record'])}</code>, {len(review.record['history'])} decisions taken in all.</p>
<h3>Added to the house library (confirmed with an authentic standard)</h3>
{('<ul>' + added + '</ul>') if added else '<p>None.</p>'}
<h3>Every peak</h3>
<table><tr>{''.join(f'<th>{h(c)}</th>' for c in EXPORT_COLUMNS)}</tr>
{chr(10).join(body)}
</table></body></html>
"""


def export_review(review, path: str | os.PathLike) -> Path:
    """Write the reviewed list to ``path``: ``.csv`` or ``.html`` (``.htm``)."""
    from matcher.io.atomic import atomic_write, guard_output

    from matcher.rules import check_review_export_path

    suffix = Path(check_review_export_path(path)).suffix.lower()
    guard_output(path, inputs=[("result", review.result_path), ("review record", review.path)], option="--export")
    if suffix == ".csv":
        return write_review_csv(review, path)
    text = render_review_html(review)
    with atomic_write(path) as fh:
        fh.write(text)
    return Path(path)
