"""The anchors file of ``matcher screen --anchors``: peaks the analyst knows, to correct a run with.

A CSV (or TSV, XLSX) with a ``peak`` column and a ``name`` (a library compound) or ``ri`` (its reference
index) column, optionally ``run`` (the run label a row belongs to; empty: every run). Header spellings:
``peak id``/``peak #``/``id``, ``compound``, ``reference index``/``index``, ``file``/``sample``.
Read once per screen; the engine looks the names up in the library (:mod:`matcher.identify.screening`).

>>> import tempfile, os
>>> with tempfile.TemporaryDirectory() as d:
...     p = os.path.join(d, "anchors.csv")
...     _ = open(p, "w").write("peak,compound,ri\\n7,limonene,\\n9,,1100\\n")
...     a = read_anchors(p)
>>> a.peak, a.name, [round(v, 1) for v in a.ri.tolist() if v == v], a.line
(['7', '9'], ['limonene', ''], [1100.0], [2, 3])
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field

import numpy as np

from matcher.errors import InputError


@dataclass
class AnchorRows:
    """The rows of an anchors file: per row its peak id, library name ('' when an index is given), reference
    index (NaN when a name is given), run label ('' for every run) and line in the file."""

    path: str
    peak: list[str]
    name: list[str]
    ri: np.ndarray
    run: list[str]
    line: list[int] = field(default_factory=list)
    name_column: str | None = None

    def for_run(self, label: str) -> list[int]:
        """Row positions that apply to run ``label``."""
        return [k for k, r in enumerate(self.run) if not r or r == label]

    def error(self, row: int, why: str) -> InputError:
        """An error naming the file, the row, its line and the name column."""
        return InputError(why, file=self.path, row=row + 1, line=self.line[row] if self.line else None,
                          column=self.name_column)


def read_anchors(path: str | os.PathLike) -> AnchorRows:
    """Read an anchors file (see module doc); a file without the needed columns is refused naming it."""
    from matcher.io.delimited import load_table, map_headers, numbers, texts

    path = os.fspath(path)
    raw = load_table(path, what="anchors file")
    cols = map_headers(raw, {"peak": ["peak id", "peak #", "id"], "name": ["compound"], "ri": ["reference index", "index"],
                             "run": ["file", "sample"]})
    if "peak" not in cols or not ({"name", "ri"} & set(cols)):
        raise InputError("needs a 'peak' column and a 'name' or 'ri' column", file=path)
    pk = texts(raw, cols["peak"], required=True)
    names = texts(raw, cols["name"]) if "name" in cols else [""] * len(pk)
    ref = numbers(raw, cols["ri"], required=False, positive=True) if "ri" in cols else np.full(len(pk), np.nan)
    runs = texts(raw, cols["run"]) if "run" in cols else [""] * len(pk)
    return AnchorRows(path, list(pk), list(names), np.asarray(ref, dtype=float), list(runs),
                      [raw.line_of(r) for r in range(1, len(pk) + 1)], cols.get("name"))
