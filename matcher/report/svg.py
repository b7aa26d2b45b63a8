"""Small inline SVG plots drawn by hand (no plotting library, nothing loaded from outside).

An :func:`xy_plot` takes layers (points, lines, a band) in data units and
returns one ``<svg>`` element as text, with axes, "nice" tick marks and
labels. All text is HTML-escaped, so names of standards or compounds cannot
inject markup. Colours are presentation attributes, so the SVG looks the
same with or without the page's style sheet.

>>> nice_ticks(803.0, 1396.0)
[800.0, 1000.0, 1200.0, 1400.0]
>>> svg = xy_plot([points([1, 2], [3, 4], labels=["<b>"])], x_label="t", y_label="I")
>>> svg.startswith("<svg") and "&lt;b&gt;" in svg and "<b>" not in svg
True
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Sequence

from matcher.safe_text import html_text

INK = "#1f2d36"
GRID = "#d9dee2"
COLOURS = {"primary": "#2f6f8f", "secondary": "#b5651d", "muted": "#7c8a93"}


@dataclass
class Layer:
    kind: str                      # "points", "line" or "band"
    x: list[float]
    y: list[float]
    y2: list[float] = field(default_factory=list)   # band: upper edge (y is the lower edge)
    labels: list[str] = field(default_factory=list)  # points: tooltip per point
    colour: str = "primary"
    dashed: bool = False
    name: str = ""                 # legend text
    marker: str = "circle"         # points: "circle" (hollow), "dot" (small, filled, behind) or "diamond"
    css: str = ""                  # points: class attribute of every marker (lets a reader or test find them)


def _clean(xs: Sequence, ys: Sequence) -> tuple[list[float], list[float]]:
    out_x, out_y = [], []
    for a, b in zip(xs, ys):
        try:
            fa, fb = float(a), float(b)
        except (TypeError, ValueError):
            continue
        if math.isfinite(fa) and math.isfinite(fb):
            out_x.append(fa)
            out_y.append(fb)
    return out_x, out_y


MARKERS = ("circle", "dot", "diamond")


def points(x: Sequence, y: Sequence, *, labels: Sequence | None = None, colour: str = "primary", name: str = "",
           marker: str = "circle", css: str = "") -> Layer:
    """Markers at (x, y); ``labels`` become tooltips (escaped). ``marker``: one of :data:`MARKERS`
    (a "dot" layer is drawn behind the other points); ``css`` becomes each marker's class."""
    if marker not in MARKERS:
        raise ValueError(f"marker must be one of {', '.join(MARKERS)}, not {marker!r}")
    lab = [str(v) for v in labels] if labels is not None else []
    keep = [i for i, (a, b) in enumerate(zip(x, y)) if _clean([a], [b])[0]]
    xs, ys = _clean([x[i] for i in keep], [y[i] for i in keep])
    return Layer("points", xs, ys, labels=[lab[i] if i < len(lab) else "" for i in keep], colour=colour, name=name,
                 marker=marker, css="".join(ch for ch in css if ch.isalnum() or ch in " -_"))


def _marker(kind: str, cx: float, cy: float, colour: str, css: str, inner: str = "") -> str:
    """One point marker as SVG text."""
    cls = f' class="{css}"' if css else ""
    if kind == "dot":
        return f'<circle{cls} cx="{cx}" cy="{cy}" r="1.9" fill="{colour}" fill-opacity="0.45" stroke="none">{inner}</circle>'
    if kind == "diamond":
        r = 5.0
        pts = f"{cx},{round(cy - r, 2)} {round(cx + r, 2)},{cy} {cx},{round(cy + r, 2)} {round(cx - r, 2)},{cy}"
        return f'<polygon{cls} points="{pts}" fill="{colour}" fill-opacity="0.25" stroke="{colour}" stroke-width="1.8">{inner}</polygon>'
    return f'<circle{cls} cx="{cx}" cy="{cy}" r="3.6" fill="#ffffff" stroke="{colour}" stroke-width="1.8">{inner}</circle>'


def line(x: Sequence, y: Sequence, *, colour: str = "primary", dashed: bool = False, name: str = "") -> Layer:
    """A polyline through (x, y) in the given order."""
    xs, ys = _clean(x, y)
    return Layer("line", xs, ys, colour=colour, dashed=dashed, name=name)


def band(x: Sequence, lower: Sequence, upper: Sequence, *, colour: str = "muted", name: str = "") -> Layer:
    """A shaded area between two curves over x."""
    xs, lo = _clean(x, lower)
    _, hi = _clean(x, upper)
    return Layer("band", xs, lo, y2=hi, colour=colour, name=name)


def nice_ticks(lo: float, hi: float, count: int = 5) -> list[float]:
    """Round tick values from at or below ``lo`` to at or above ``hi`` (steps 1, 2 or 5 × 10^k).

    >>> nice_ticks(0.0, 1.0)
    [0.0, 0.2, 0.4, 0.6, 0.8, 1.0]
    >>> nice_ticks(-3.4, 2.2)
    [-4.0, -2.0, 0.0, 2.0, 4.0]
    """
    if not (math.isfinite(lo) and math.isfinite(hi)):
        return []
    if hi < lo:
        lo, hi = hi, lo
    if hi == lo:
        hi, lo = hi + 1.0, lo - 1.0
    raw = (hi - lo) / max(count, 1)
    mag = 10.0 ** math.floor(math.log10(raw))
    step = next(m * mag for m in (1, 2, 5, 10) if m * mag >= raw)
    start = math.floor(lo / step + 1e-9) * step
    end = math.ceil(hi / step - 1e-9) * step
    ticks = []
    k = 0
    while start + k * step <= end + step * 1e-9:
        ticks.append(round(start + k * step, 10) + 0.0)
        k += 1
    return ticks


def _fmt_tick(v: float) -> str:
    return f"{v:.6g}"


def xy_plot(
    layers: Sequence[Layer],
    *,
    x_label: str,
    y_label: str,
    title: str = "",
    width: int = 560,
    height: int = 320,
    zero_line: bool = False,
) -> str:
    """One SVG element with the layers drawn on shared axes (an empty frame when no data)."""
    left, right, top, bottom = 64, 16, 28 if title else 12, 46
    pw, ph = width - left - right, height - top - bottom
    xs = [v for layer in layers for v in layer.x]
    ys = [v for layer in layers for v in layer.y + layer.y2]
    if zero_line and ys:
        ys.append(0.0)
    parts = [
        f'<svg class="plot" viewBox="0 0 {width} {height}" '
        f'width="{width}" height="{height}" role="img" aria-label="{html_text(title or y_label)}" '
        f'font-family="system-ui, sans-serif" font-size="11">'
    ]
    if title:
        parts.append(f'<text x="{left}" y="16" fill="{INK}" font-size="12" font-weight="600">{html_text(title)}</text>')
    if not xs or not ys:
        parts.append(f'<rect x="{left}" y="{top}" width="{pw}" height="{ph}" fill="none" stroke="{GRID}"/>')
        parts.append(f'<text x="{left + pw / 2}" y="{top + ph / 2}" text-anchor="middle" fill="{COLOURS["muted"]}">no data to plot</text>')
        parts.append("</svg>")
        return "".join(parts)
    xt, yt = nice_ticks(min(xs), max(xs)), nice_ticks(min(ys), max(ys))
    x0, x1 = min(xt[0], min(xs)), max(xt[-1], max(xs))
    y0, y1 = min(yt[0], min(ys)), max(yt[-1], max(ys))
    x1 = x1 if x1 > x0 else x0 + 1
    y1 = y1 if y1 > y0 else y0 + 1

    def sx(v: float) -> float:
        return round(left + (v - x0) / (x1 - x0) * pw, 2)

    def sy(v: float) -> float:
        return round(top + ph - (v - y0) / (y1 - y0) * ph, 2)

    # grid and ticks
    for v in xt:
        parts.append(f'<line x1="{sx(v)}" y1="{top}" x2="{sx(v)}" y2="{top + ph}" stroke="{GRID}" stroke-width="1"/>')
        parts.append(f'<text x="{sx(v)}" y="{top + ph + 15}" text-anchor="middle" fill="{INK}">{_fmt_tick(v)}</text>')
    for v in yt:
        parts.append(f'<line x1="{left}" y1="{sy(v)}" x2="{left + pw}" y2="{sy(v)}" stroke="{GRID}" stroke-width="1"/>')
        parts.append(f'<text x="{left - 6}" y="{sy(v) + 4}" text-anchor="end" fill="{INK}">{_fmt_tick(v)}</text>')
    if zero_line and y0 < 0 < y1:
        parts.append(f'<line x1="{left}" y1="{sy(0)}" x2="{left + pw}" y2="{sy(0)}" stroke="{INK}" stroke-width="1" stroke-opacity="0.5"/>')
    parts.append(f'<rect x="{left}" y="{top}" width="{pw}" height="{ph}" fill="none" stroke="{INK}" stroke-width="1"/>')
    parts.append(f'<text x="{left + pw / 2}" y="{height - 8}" text-anchor="middle" fill="{INK}">{html_text(x_label)}</text>')
    parts.append(
        f'<text transform="translate(14 {top + ph / 2}) rotate(-90)" text-anchor="middle" fill="{INK}">{html_text(y_label)}</text>'
    )
    # layers: bands first, then lines, then points on top
    order = {"band": 0, "line": 1, "points": 2}
    for layer in sorted(layers, key=lambda la: order.get(la.kind, 3) + (0.5 if la.kind == "points" and la.marker != "dot" else 0)):
        colour = COLOURS.get(layer.colour, COLOURS["primary"])
        if layer.kind == "band" and layer.x:
            upper = " ".join(f"{sx(a)},{sy(b)}" for a, b in zip(layer.x, layer.y2))
            lower = " ".join(f"{sx(a)},{sy(b)}" for a, b in reversed(list(zip(layer.x, layer.y))))
            parts.append(f'<polygon points="{upper} {lower}" fill="{colour}" fill-opacity="0.15" stroke="none"/>')
        elif layer.kind == "line" and len(layer.x) >= 2:
            path = " ".join(f"{sx(a)},{sy(b)}" for a, b in zip(layer.x, layer.y))
            dash = ' stroke-dasharray="6 4"' if layer.dashed else ""
            parts.append(f'<polyline points="{path}" fill="none" stroke="{colour}" stroke-width="1.8"{dash}/>')
        elif layer.kind == "points":
            for i, (a, b) in enumerate(zip(layer.x, layer.y)):
                tip = layer.labels[i] if i < len(layer.labels) else ""
                title_el = f"<title>{html_text(tip)}</title>" if tip else ""
                parts.append(_marker(layer.marker, sx(a), sy(b), colour, layer.css, title_el))
    # legend
    named = [la for la in layers if la.name]
    lx = left + 10
    for i, layer in enumerate(named):
        colour = COLOURS.get(layer.colour, COLOURS["primary"])
        y = top + 14 + 15 * i
        if layer.kind == "points":
            parts.append(_marker(layer.marker, lx + 8, y - 4, colour, "legend"))
        elif layer.kind == "band":
            parts.append(f'<rect x="{lx}" y="{y - 9}" width="16" height="9" fill="{colour}" fill-opacity="0.2"/>')
        else:
            dash = ' stroke-dasharray="6 4"' if layer.dashed else ""
            parts.append(f'<line x1="{lx}" y1="{y - 4}" x2="{lx + 16}" y2="{y - 4}" stroke="{colour}" stroke-width="1.8"{dash}/>')
        parts.append(f'<text x="{lx + 22}" y="{y}" fill="{INK}">{html_text(layer.name)}</text>')
    parts.append("</svg>")
    return "".join(parts)


def trace_plot(x: Sequence, y: Sequence, marks_x: Sequence, marks_y: Sequence, mark_labels: Sequence, *,
               tips: Sequence | None = None, title: str = "", x_label: str = "retention time (min)",
               y_label: str = "total ion current", width: int = 900, height: int = 280, max_labels: int = 150) -> str:
    """A chromatogram: one trace (already decimated) with marked, labelled peaks; an SVG element as text.

    Labels (escaped) stand above their markers; beyond ``max_labels`` marks only the tallest are labelled,
    every mark keeps its tooltip.

    >>> svg = trace_plot([0, 1, 2], [0, 5, 0], [1], [5], ["<1>"], title="TIC")
    >>> svg.count("<circle"), "&lt;1&gt;" in svg and "<1>" not in svg
    (1, True)
    """
    xs, ys = _clean(x, y)
    left, right, top, bottom = 64, 16, 36 if title else 20, 46
    pw, ph = width - left - right, height - top - bottom
    parts = [f'<svg class="plot trace" viewBox="0 0 {width} {height}" width="{width}" height="{height}" role="img" '
             f'aria-label="{html_text(title or y_label)}" font-family="system-ui, sans-serif" font-size="10">']
    if title:
        parts.append(f'<text x="{left}" y="16" fill="{INK}" font-size="12" font-weight="600">{html_text(title)}</text>')
    if len(xs) < 2:
        parts.append(f'<text x="{left + pw / 2}" y="{top + ph / 2}" text-anchor="middle" fill="{COLOURS["muted"]}">'
                     "no data to plot</text></svg>")
        return "".join(parts)
    x0, x1 = min(xs), max(xs)
    y0, y1 = min(0.0, min(ys)), max(ys) * 1.08 or 1.0
    x1 = x1 if x1 > x0 else x0 + 1

    def sx(v: float) -> float:
        return round(left + (v - x0) / (x1 - x0) * pw, 2)

    def sy(v: float) -> float:
        return round(top + ph - (v - y0) / (y1 - y0) * ph, 2)

    for v in nice_ticks(x0, x1, 10):
        if x0 <= v <= x1:
            parts.append(f'<line x1="{sx(v)}" y1="{top}" x2="{sx(v)}" y2="{top + ph}" stroke="{GRID}"/>')
            parts.append(f'<text x="{sx(v)}" y="{top + ph + 14}" text-anchor="middle" fill="{INK}">{_fmt_tick(v)}</text>')
    for v in nice_ticks(y0, y1, 4):
        if y0 <= v <= y1:
            parts.append(f'<text x="{left - 6}" y="{sy(v) + 4}" text-anchor="end" fill="{INK}">{_fmt_tick(v)}</text>')
    parts.append(f'<rect x="{left}" y="{top}" width="{pw}" height="{ph}" fill="none" stroke="{INK}"/>')
    parts.append(f'<text x="{left + pw / 2}" y="{height - 8}" text-anchor="middle" fill="{INK}">{html_text(x_label)}</text>')
    parts.append(f'<text transform="translate(14 {top + ph / 2}) rotate(-90)" text-anchor="middle" fill="{INK}">'
                 f'{html_text(y_label)}</text>')
    path = " ".join(f"{sx(a)},{sy(b)}" for a, b in zip(xs, ys))
    parts.append(f'<polyline points="{path}" fill="none" stroke="{COLOURS["primary"]}" stroke-width="1"/>')
    mx, my = list(marks_x), list(marks_y)
    labels = [str(v) for v in mark_labels]
    tips = [str(v) for v in tips] if tips is not None else labels
    order = sorted(range(len(mx)), key=lambda i: -float(my[i]) if _clean([mx[i]], [my[i]])[0] else 0.0)
    labelled = set(order[:max_labels])
    colour = COLOURS["secondary"]
    for i, (a, b) in enumerate(zip(mx, my)):
        if not _clean([a], [b])[0]:
            continue
        a, b = float(a), float(b)
        tip = f"<title>{html_text(tips[i] if i < len(tips) else '')}</title>"
        parts.append(f'<circle cx="{sx(a)}" cy="{sy(b)}" r="2.6" fill="#ffffff" stroke="{colour}" stroke-width="1.4">{tip}</circle>')
        if i in labelled and i < len(labels):
            parts.append(f'<text x="{sx(a)}" y="{sy(b) - 5}" text-anchor="middle" fill="{colour}">{html_text(labels[i])}</text>')
    parts.append("</svg>")
    return "".join(parts)


def spectra_plot(unknown: tuple[Sequence, Sequence], reference: tuple[Sequence, Sequence], *, upper: str, lower: str,
                 title: str = "", width: int = 560, height: int = 300) -> str:
    """Two mass spectra on one m/z axis: ``unknown`` drawn upwards, ``reference`` downwards, each scaled to its base peak (100).

    >>> svg = spectra_plot(([41, 93], [20, 100]), ([41, 93, 136], [30, 100, 12]), upper="peak 7", lower="<i>limonene</i>")
    >>> svg.count("<line") > 5 and "&lt;i&gt;limonene" in svg
    True
    """
    left, right, top, bottom = 48, 16, 28 if title else 14, 40
    pw, ph = width - left - right, height - top - bottom

    def scaled(spec):
        mz = [float(m) for m in spec[0]]
        y = [float(v) for v in spec[1]]
        top_y = max(y) if y and max(y) > 0 else 1.0
        return [(m, 100.0 * v / top_y) for m, v in zip(mz, y) if math.isfinite(m) and math.isfinite(v) and v > 0]

    up, down = scaled(unknown), scaled(reference)
    allmz = [m for m, _ in up + down]
    parts = [f'<svg class="plot spectra-plot" viewBox="0 0 {width} {height}" width="{width}" height="{height}" role="img" '
             f'aria-label="{html_text(title or "mass spectra")}" font-family="system-ui, sans-serif" font-size="11">']
    if title:
        parts.append(f'<text x="{left}" y="16" fill="{INK}" font-size="12" font-weight="600">{html_text(title)}</text>')
    lo, hi = (min(allmz), max(allmz)) if allmz else (0.0, 1.0)
    xt = nice_ticks(max(0.0, lo - 5), hi + 5)
    x0, x1 = min(xt[0], lo - 5), max(xt[-1], hi + 5)

    def sx(v: float) -> float:
        return round(left + (v - x0) / (x1 - x0) * pw, 2)

    mid = top + ph / 2

    def sy(v: float) -> float:  # +100 at the top, -100 at the bottom
        return round(mid - v / 100.0 * (ph / 2), 2)

    for v in xt:
        parts.append(f'<line x1="{sx(v)}" y1="{top}" x2="{sx(v)}" y2="{top + ph}" stroke="{GRID}" stroke-width="1"/>')
        parts.append(f'<text x="{sx(v)}" y="{top + ph + 15}" text-anchor="middle" fill="{INK}">{_fmt_tick(v)}</text>')
    for v in (100, 50, -50, -100):
        parts.append(f'<text x="{left - 6}" y="{sy(v) + 4}" text-anchor="end" fill="{INK}">{abs(v)}</text>')
    parts.append(f'<rect x="{left}" y="{top}" width="{pw}" height="{ph}" fill="none" stroke="{INK}" stroke-width="1"/>')
    parts.append(f'<line x1="{left}" y1="{mid}" x2="{left + pw}" y2="{mid}" stroke="{INK}" stroke-width="1"/>')
    for (pts, sign, colour) in ((up, 1, COLOURS["primary"]), (down, -1, COLOURS["secondary"])):
        for m, v in pts:
            parts.append(f'<line x1="{sx(m)}" y1="{mid}" x2="{sx(m)}" y2="{sy(sign * v)}" stroke="{colour}" stroke-width="1.6">'
                         f'<title>m/z {m:g}: {v:.1f}</title></line>')
        # label the three largest peaks
        for m, v in sorted(pts, key=lambda t: -t[1])[:3]:
            inside = v > 88  # a label past the frame would collide with the axis: put it beside the bar instead
            y = (sy(sign * v) + (9 if sign > 0 else -2)) if inside else (sy(sign * v) - 3 if sign > 0 else sy(sign * v) + 11)
            anchor, dx = ("start", 4) if inside else ("middle", 0)
            parts.append(f'<text x="{sx(m) + dx}" y="{y}" text-anchor="{anchor}" fill="{colour}" font-size="10">{m:g}</text>')
    parts.append(f'<text x="{left + 6}" y="{top + 12}" fill="{COLOURS["primary"]}">{html_text(upper)}</text>')
    parts.append(f'<text x="{left + 6}" y="{top + ph - 5}" fill="{COLOURS["secondary"]}">{html_text(lower)}</text>')
    parts.append(f'<text x="{left + pw / 2}" y="{height - 6}" text-anchor="middle" fill="{INK}">m/z</text>')
    parts.append(f'<text transform="translate(12 {mid}) rotate(-90)" text-anchor="middle" fill="{INK}">relative intensity</text>')
    parts.append("</svg>")
    return "".join(parts)
