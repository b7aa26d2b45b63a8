"""Plain-text tables for the terminal (no heavy imports on the command path).

>>> print(format_table(["rank", "name"], [[1, "limonene"], [2, "p-cymene"]]))
rank  name
----  --------
   1  limonene
   2  p-cymene
"""

from __future__ import annotations

from typing import Sequence


def _cell(v) -> str:
    if v is None:
        return ""
    if isinstance(v, float):
        if v != v:  # NaN
            return ""
        return f"{v:.4g}" if abs(v) < 1e-3 and v != 0 else f"{v:.2f}".rstrip("0").rstrip(".") if abs(v) < 1e6 else f"{v:.4g}"
    return " ".join(str(v).split())  # one line per cell, whatever the text holds


def format_table(headers: Sequence[str], rows: Sequence[Sequence], align: str | None = None) -> str:
    """Columns padded to width; numbers right-aligned unless ``align`` (one 'l'/'r' per column) says otherwise."""
    text = [[_cell(v) for v in r] for r in rows]
    widths = [max([len(h)] + [len(r[i]) for r in text]) for i, h in enumerate(headers)]
    if align is None:
        align = "".join(
            "r" if rows and all(isinstance(r[i], (int, float)) and not isinstance(r[i], bool) or r[i] is None for r in rows) else "l"
            for i in range(len(headers))
        )
    def fmt(cells):
        out = [c.rjust(w) if a == "r" else c.ljust(w) for c, w, a in zip(cells, widths, align)]
        return "  ".join(out).rstrip()
    lines = [fmt(list(headers)), "  ".join("-" * w for w in widths)]
    lines += [fmt(r) for r in text]
    return "\n".join(lines)
