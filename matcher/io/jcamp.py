"""Mass spectra in JCAMP-DX files: reading (checked, all or nothing) and writing (lossless).

JCAMP-DX (McDonald & Wilks, Appl. Spectrosc. 42, 151, 1988; mass spectra:
Lampen et al., Appl. Spectrosc. 48, 1545, 1994; version 5.01) is a text
format of *labelled data records* ``##LABEL=value``; a value runs on over the
following lines until the next ``##``; ``$$`` starts a comment. A **block**
runs from ``##TITLE=`` to ``##END=``; a link block (``##DATA TYPE=LINK``,
``##BLOCKS=n``) holds nested blocks, and files may hold several blocks one
after the other. Labels are compared as the standard says: upper case, with
spaces, ``-``, ``/`` and ``_`` ignored (``##CAS REGISTRY NO`` =
``##CASREGISTRYNO``).

What is read (each block holding data becomes one :class:`JcampSpectrum`):

* the spectrum from ``##PEAK TABLE=(XY..XY)`` or ``##XYDATA=(XY..XY)``:
  m/z and intensity pairs, separated by spaces, commas or semicolons, values
  multiplied by ``##XFACTOR`` / ``##YFACTOR`` when given; ``##NPOINTS``,
  when given, must match the number of pairs; an empty table is read as an
  empty spectrum (a run's peak without one; the library import refuses it);
* or from an evenly spaced ``##XYDATA=(X++(Y..Y))`` table (a profile spectrum)
  in any of the standard's compression forms (plain numbers, SQZ, DIF with its
  Y check, DUP; :func:`decode_asdf_line`), m/z running from ``##FIRSTX`` to
  ``##LASTX`` over ``##NPOINTS`` values; points of zero intensity are left out;
* ``##TITLE``, ``##NAMES`` (one name per line), ``##CAS REGISTRY NO``,
  ``##MOLFORM``, ``##ORIGIN``, ``##OWNER``, and every other record of the
  block in order (kept for a lossless export).

Refused, naming the file, the block (its number and title) and the line: a
record outside a block, a block without ``##END``, an ``##END`` without a
block, a data block without a table, a table form other than ``(XY..XY)`` or
``(X++(Y..Y))`` (``##NTUPLES`` are not read), a compressed line that does not
decode or whose Y check fails, a value
that is not a number, an odd count of values, m/z outside 1 to
:data:`matcher.limits.MAX_MZ`, a negative or infinite intensity, a repeated
m/z, an ``##NPOINTS`` that disagrees, more than :data:`MAX_BLOCKS` blocks.

**Writing** (:func:`write_jcamp`) gives one block per spectrum with
``##JCAMP-DX=5.01``, ``##DATA TYPE=MASS SPECTRUM``, ``##DATA CLASS=PEAK TABLE``,
the kept records, ``##NPOINTS`` and ``##PEAK TABLE=(XY..XY)`` with one
``m/z,intensity`` pair per line in the shortest form that reads back to the
same float64 values, so read → write → read gives identical spectra and
write → read → write identical text.

>>> text = "##TITLE=limonene\\n##JCAMP-DX=5.01\\n##DATA TYPE=MASS SPECTRUM\\n##PEAK TABLE=(XY..XY)\\n68,100 93,45\\n##END="
>>> s = parse_jcamp(text, "lim.jdx")[0]
>>> s.title, s.mz.tolist(), s.intensity.tolist()
('limonene', [68.0, 93.0], [100.0, 45.0])
"""

from __future__ import annotations

import math
import os
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from matcher.errors import InputError
from matcher.limits import MAX_MZ

#: most data blocks one file may hold
MAX_BLOCKS = 200_000
#: the largest JCAMP-DX file read (bytes)
MAX_BYTES = 512 * 1024 * 1024

_TABLES = {"PEAKTABLE", "XYDATA"}
#: records the writer produces itself (not kept among ``records``)
_OWN = {"TITLE", "JCAMPDX", "DATATYPE", "DATACLASS", "NPOINTS", "XFACTOR", "YFACTOR", "END", "FIRSTX", "LASTX",
        "MINX", "MAXX", "MINY", "MAXY", "XUNITS", "YUNITS", "DELTAX", "FIRSTY"} | _TABLES
_SPLIT = re.compile(r"[\s,;]+")


def label_key(label: str) -> str:
    """A label as JCAMP-DX compares them: upper case, spaces, '-', '/', '_' removed.

    >>> label_key("Cas Registry-No")
    'CASREGISTRYNO'
    """
    return re.sub(r"[\s\-/_]", "", label).upper()


@dataclass
class JcampSpectrum:
    """One mass spectrum read from (or to be written to) a JCAMP-DX block."""

    title: str
    mz: np.ndarray  # float64, ascending
    intensity: np.ndarray  # float64
    names: list[str] = field(default_factory=list)
    cas: str = ""
    molform: str = ""
    origin: str = ""
    owner: str = ""
    records: list[tuple[str, str]] = field(default_factory=list)  # other records, (label as written, value)
    block: int = 0  # 1-based number of the block in the file (every ##TITLE counts, link blocks too)
    line: int = 0  # line of the block's ##TITLE

    def where(self, file: str) -> str:
        return f"{file}: block {self.block} ({self.title!r}, line {self.line})"

    @property
    def spectrum(self) -> tuple[np.ndarray, np.ndarray]:
        """The shared in-memory form (:mod:`matcher.chem.spectra`)."""
        return self.mz, self.intensity


def _fail(file: str, line: int, why: str, block: int | None = None, title: str | None = None) -> InputError:
    where = f"block {block}" + (f" ({title!r})" if title else "") + ", " if block else ""
    return InputError(f"{where}line {line}: {why}; nothing was imported", file=file)


_RECORD = re.compile(r"^[ \t]*##", re.M)
_COMMENT = re.compile(r"\$\$[^\n\r]*")


class _Rec(list):
    """[label as written, label key, first-line value, line number, lines after it]; the lines after it are
    kept as one text and split (with their numbers) only when asked, so tables of many blocks stay fast."""

    @property
    def body(self) -> str:
        return self[4]

    def lines(self) -> list[tuple[int, str]]:
        out = []
        for k, raw in enumerate(self[4].split("\n"), start=self[3] + 1):
            t = raw.strip()
            if t:
                out.append((k, t))
        return out


def _records(text: str, file: str):
    """Every record: label, key, value, first line, and the lines after it (see :class:`_Rec`)."""
    text = text.replace("\r\n", "\n").replace("\r", "\n")
    if "$$" in text:
        text = _COMMENT.sub("", text)
    starts = [m.start() for m in _RECORD.finditer(text)]
    head = text[: starts[0]] if starts else text
    if head.strip():
        bad = next(k for k, ln in enumerate(head.split("\n"), start=1) if ln.strip())
        raise _fail(file, bad, "text before the first ##TITLE record")
    recs = []
    keys: dict[str, str] = {}
    line = 1 + head.count("\n")
    bounds = starts + [len(text)]
    for a, b in zip(bounds[:-1], bounds[1:]):
        chunk = text[a:b]
        first, nl, rest = chunk.partition("\n")
        body = first.strip()[2:]
        label, eq, value = body.partition("=")
        if not eq:
            raise _fail(file, line, f"record {first.strip()[:40]!r} has no '='")
        k = keys.get(label)
        if k is None:
            k = keys[label] = label_key(label)
        recs.append(_Rec([label.strip(), k, value.strip(), line, rest]))
        line += chunk.count("\n")
    return recs


def _number(tok: str, file: str, no: int, block: int, title: str) -> float:
    try:
        v = float(tok)
    except ValueError:
        raise _fail(file, no, f"{tok[:30]!r} is not a number", block, title) from None
    return v


def _table(rec, file: str, block: int, title: str, xf: float, yf: float, npoints: int | None):
    """The table's (m/z, intensity), sorted: one NumPy parse of all its values; on any problem the careful
    reading below finds the line to name."""
    label, key, value, no = rec[:4]
    if value.replace(" ", "").upper() == "(XY..XY)":
        body = rec.body.replace(",", " ").replace(";", " ").split()
        try:
            arr = np.array(body, dtype=np.float64)
        except ValueError:
            arr = None
        if arr is not None and len(arr) % 2 == 0 and (npoints is None or npoints == len(arr) // 2):
            arr = arr.reshape(-1, 2)
            mz, y = arr[:, 0] * xf, arr[:, 1] * yf
            if np.all(np.isfinite(mz) & (mz >= 1) & (mz <= MAX_MZ)) and np.all(np.isfinite(y) & (y >= 0)):
                order = np.argsort(mz, kind="stable")
                mz, y = mz[order], y[order]
                if not np.any(np.diff(mz) == 0):
                    return mz, y
    return _table_checked(rec, file, block, title, xf, yf, npoints)


def _table_checked(rec, file: str, block: int, title: str, xf: float, yf: float, npoints: int | None):
    label, key, value, no = rec[:4]
    lines = rec.lines()
    form = value.replace(" ", "").upper()
    if form != "(XY..XY)":
        raise _fail(file, no, f"##{label}={value} is not read (only (XY..XY) tables of m/z,intensity pairs and "
                    "evenly spaced (X++(Y..Y)) tables)", block, title)
    vals, where = [], []
    for ln, s in lines:
        for tok in _SPLIT.split(s):
            if tok:
                vals.append(_number(tok, file, ln, block, title))
                where.append(ln)
    if len(vals) % 2:
        raise _fail(file, where[-1] if where else no, f"##{label} holds an odd number of values ({len(vals)}): "
                    "each m/z needs an intensity", block, title)
    arr = np.asarray(vals, dtype=np.float64).reshape(-1, 2)
    lines_of = np.asarray(where[0::2], dtype=np.int64)
    mz = arr[:, 0] * xf
    y = arr[:, 1] * yf
    bad = np.flatnonzero(~(np.isfinite(mz) & (mz >= 1) & (mz <= MAX_MZ)))
    if len(bad):
        raise _fail(file, int(lines_of[bad[0]]), f"m/z {arr[bad[0], 0]:g} is outside 1 to {MAX_MZ}", block, title)
    bad = np.flatnonzero(~(np.isfinite(y) & (y >= 0)))
    if len(bad):
        raise _fail(file, int(lines_of[bad[0]]), f"intensity {arr[bad[0], 1]:g} at m/z {arr[bad[0], 0]:g} is "
                    "negative or not finite", block, title)
    if npoints is not None and npoints != len(mz):
        raise _fail(file, no, f"##NPOINTS says {npoints} but the table holds {len(mz)} pairs", block, title)
    order = np.argsort(mz, kind="stable")
    mz, y, lines_of = mz[order], y[order], lines_of[order]
    dup = np.flatnonzero(np.diff(mz) == 0)
    if len(dup):
        raise _fail(file, int(lines_of[dup[0] + 1]), f"m/z {mz[dup[0]]:g} is listed twice", block, title)
    return mz, y


#: ASDF pseudo-digits (McDonald & Wilks 1988, the compression forms of JCAMP-DX): SQZ starts a value with its
#: sign and first digit, DIF starts a difference from the previous value, DUP repeats the previous value or
#: difference until it has occurred that many times.
_SQZ = {"@": "0", **{c: str(k) for k, c in enumerate("ABCDEFGHI", 1)}, **{c: f"-{k}" for k, c in enumerate("abcdefghi", 1)}}
_DIF = {"%": "0", **{c: str(k) for k, c in enumerate("JKLMNOPQR", 1)}, **{c: f"-{k}" for k, c in enumerate("jklmnopqr", 1)}}
_DUP = {**{c: str(k) for k, c in enumerate("STUVWXYZ", 1)}, "s": "9"}
_ASDF_TOKEN = re.compile(r"[@A-Ia-i%J-Rj-rS-Zs][0-9.]*|[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[Ee][+-]?[0-9]+)?|[^\s,;]")


def decode_asdf_line(text: str) -> tuple[float, list[float], bool]:
    """One line of an ASDF table: (its abscissa check value, its ordinates, whether it ended in a difference).

    Plain numbers (AFFN/PAC), SQZ, DIF and DUP forms mix freely; a DUP repeats the token before it.

    >>> decode_asdf_line("100 A0JJ%TE")
    (100.0, [10.0, 11.0, 12.0, 12.0, 12.0, 5.0], False)
    >>> decode_asdf_line("8192@a3 12 -7.5J")
    (8192.0, [0.0, -13.0, 12.0, -7.5, -6.5], True)
    """
    tokens = _ASDF_TOKEN.findall(text)
    if not tokens:
        raise ValueError("an empty line")
    values: list[float] = []
    x = None
    last_dif = None  # the last difference, while the line is in difference form
    prev: tuple[str, float] | None = None  # ("abs" | "dif", amount) of the token a DUP repeats
    for tok in tokens:
        head = tok[0]
        if head in _DUP:
            if prev is None or x is None or not values:
                raise ValueError(f"{tok!r} repeats nothing")
            count = int(_DUP[head] + tok[1:])
            for _ in range(count - 1):
                values.append(values[-1] + prev[1] if prev[0] == "dif" else prev[1])
            continue
        if head in _DIF:
            if x is None or not values:
                raise ValueError(f"{tok!r} is a difference with no value before it")
            d = float(_DIF[head] + tok[1:])
            values.append(values[-1] + d)
            prev, last_dif = ("dif", d), d
            continue
        if head in _SQZ:
            v = float(_SQZ[head] + tok[1:])
        else:
            try:
                v = float(tok)
            except ValueError:
                raise ValueError(f"{tok!r} is neither a number nor an ASDF character") from None
        if x is None:
            x = v
            continue
        values.append(v)
        prev, last_dif = ("abs", v), None
    if x is None:
        raise ValueError("no abscissa at the start of the line")
    return x, values, last_dif is not None


def _evenly_spaced(rec, file: str, block: int, title: str, firstx: float, lastx: float, yf: float,
                   npoints: int | None):
    """An ``(X++(Y..Y))`` table: ordinates in any ASDF form, m/z spread evenly from ##FIRSTX to ##LASTX; a line
    ending in a difference repeats its last ordinate at the start of the next (the Y check), which is checked
    and dropped. Points of zero intensity are left out (the spectrum keeps its peaks)."""
    label, key, value, no = rec[:4]
    ys: list[float] = []
    ended_in_dif = False
    for ln, text in rec.lines():
        try:
            _, vals, dif = decode_asdf_line(text)
        except ValueError as exc:
            raise _fail(file, ln, f"##{label}: {exc}", block, title) from None
        if ended_in_dif and vals:
            if ys and abs(vals[0] - ys[-1]) > 1e-6 * max(1.0, abs(ys[-1])):
                raise _fail(file, ln, f"##{label}: the line's first value {vals[0]:g} does not repeat the last "
                            f"value {ys[-1]:g} of the line before (the Y check of the difference form)", block, title)
            vals = vals[1:]
        ys.extend(vals)
        ended_in_dif = dif
    if npoints is None:
        raise _fail(file, no, "an (X++(Y..Y)) table needs ##NPOINTS", block, title)
    if npoints != len(ys):
        raise _fail(file, no, f"##NPOINTS says {npoints} but the table holds {len(ys)} values", block, title)
    y = np.asarray(ys, dtype=np.float64) * yf
    mz = firstx + np.arange(len(y)) * ((lastx - firstx) / (len(y) - 1) if len(y) > 1 else 0.0)
    bad = np.flatnonzero(~(np.isfinite(y) & (y >= 0)))
    if len(bad):
        raise _fail(file, no, f"intensity {y[bad[0]]:g} at m/z {mz[bad[0]]:g} is negative or not finite", block, title)
    keep = y > 0
    mz, y = mz[keep], y[keep]
    if not np.all(np.isfinite(mz) & (mz >= 1) & (mz <= MAX_MZ)):
        raise _fail(file, no, f"m/z from ##FIRSTX={firstx:g} to ##LASTX={lastx:g} leaves 1 to {MAX_MZ}", block, title)
    order = np.argsort(mz, kind="stable")
    return mz[order], y[order]


def parse_jcamp(text: str, file: str = "<text>") -> list[JcampSpectrum]:
    """Every mass spectrum of a JCAMP-DX text (see module doc); :class:`InputError` on any damage."""
    recs = _records(text, file)
    out: list[JcampSpectrum] = []
    stack: list[dict] = []  # open blocks
    blocks = 0
    for rec in recs:
        label, key, value, no = rec[:4]
        if key == "TITLE":
            blocks += 1
            if blocks > MAX_BLOCKS:
                raise _fail(file, no, f"more than {MAX_BLOCKS} blocks")
            stack.append({"title": value, "line": no, "recs": [], "number": blocks})
            continue
        if not stack:
            raise _fail(file, no, f"##{label} stands outside a block (a block starts with ##TITLE=)")
        blk = stack[-1]
        if key == "END":
            stack.pop()
            sp = _finish(blk, file)
            if sp is not None:
                out.append(sp)
            continue
        blk["recs"].append(rec)
    if stack:
        blk = stack[-1]
        raise _fail(file, blk["line"], "the block has no ##END= record (the file is cut short?)", blk["number"], blk["title"])
    if not recs:
        raise InputError("no JCAMP-DX records (##TITLE= ... ##END=) in the file; nothing was imported", file=file)
    return out


def _finish(blk: dict, file: str) -> JcampSpectrum | None:
    title, number = blk["title"], blk["number"]
    got: dict[str, tuple] = {}
    for rec in blk["recs"]:
        got.setdefault(rec[1], rec)
    dtype = got.get("DATATYPE", (None, None, ""))[2].upper()
    if dtype == "LINK" or "BLOCKS" in got and not (_TABLES & set(got)):
        return None
    if "NTUPLES" in got:
        raise _fail(file, got["NTUPLES"][3], "##NTUPLES tables are not read; give one block per spectrum", number, title)
    tables = [r for r in blk["recs"] if r[1] in _TABLES]
    if not tables:
        raise _fail(file, blk["line"], "the block holds no ##PEAK TABLE=(XY..XY) or ##XYDATA=(XY..XY)", number, title)
    if len(tables) > 1:
        raise _fail(file, tables[1][3], "the block holds more than one data table", number, title)
    if dtype and "MASS" not in dtype:
        raise _fail(file, got["DATATYPE"][3], f"##DATA TYPE={got['DATATYPE'][2]} is not a mass spectrum", number, title)

    def factor(key):
        if key not in got:
            return 1.0
        v = _number(got[key][2], file, got[key][3], number, title)
        if not (math.isfinite(v) and v > 0):
            raise _fail(file, got[key][3], f"##{got[key][0]} must be a positive number", number, title)
        return v

    npoints = None
    if "NPOINTS" in got:
        v = _number(got["NPOINTS"][2], file, got["NPOINTS"][3], number, title)
        if not v.is_integer() or v < 0:
            raise _fail(file, got["NPOINTS"][3], "##NPOINTS must be a whole number", number, title)
        npoints = int(v)
    form = tables[0][2].replace(" ", "").upper()
    if form == "(X++(Y..Y))":  # an evenly spaced, ASDF-compressed table (a profile spectrum)
        def given(key):
            if key not in got:
                raise _fail(file, tables[0][3], f"an (X++(Y..Y)) table needs ##{key}", number, title)
            return _number(got[key][2], file, got[key][3], number, title)

        mz, y = _evenly_spaced(tables[0], file, number, title, given("FIRSTX"), given("LASTX"), factor("YFACTOR"),
                               npoints)
    else:
        mz, y = _table(tables[0], file, number, title, factor("XFACTOR"), factor("YFACTOR"), npoints)

    def full(rec) -> str:
        return "\n".join([rec[2]] + [t for _, t in rec.lines()]).strip()

    names = []
    if "NAMES" in got:
        names = [n.strip() for n in full(got["NAMES"]).splitlines() if n.strip()]
    kept = [(r[0], full(r)) for r in blk["recs"] if r[1] not in _OWN]
    sp = JcampSpectrum(
        title=title.strip(), mz=mz, intensity=y, names=names,
        cas=full(got["CASREGISTRYNO"]) if "CASREGISTRYNO" in got else "",
        molform=full(got["MOLFORM"]) if "MOLFORM" in got else "",
        origin=full(got["ORIGIN"]) if "ORIGIN" in got else "",
        owner=full(got["OWNER"]) if "OWNER" in got else "",
        records=kept, block=number, line=blk["line"],
    )
    return sp


def read_jcamp(path: str | Path) -> list[JcampSpectrum]:
    """Every mass spectrum of a JCAMP-DX file (strict: a damaged block refuses the whole file)."""
    from matcher.io.bounded import read_bytes

    data = read_bytes(path, what="JCAMP-DX file", limit=MAX_BYTES)
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        text = data.decode("latin-1")  # JCAMP-DX is ASCII; older files carry Latin-1 names
    spectra = parse_jcamp(text, str(path))
    if not spectra:
        raise InputError("the file holds no mass spectrum (no ##PEAK TABLE or ##XYDATA block); nothing was imported",
                         file=str(path))
    return spectra


def number_text(v: float) -> str:
    """The shortest text that reads back to the same float64 (whole numbers without a point).

    >>> number_text(100.0), number_text(0.1), number_text(1e-7)
    ('100', '0.1', '1e-07')
    """
    v = float(v)
    return str(int(v)) if v.is_integer() and abs(v) < 1e15 else repr(v)


def block_text(sp: JcampSpectrum) -> str:
    """One JCAMP-DX block for a spectrum (see module doc)."""
    one = lambda s: " ".join(str(s).split())  # noqa: E731  (values on one line, except multi-line records)
    lines = [f"##TITLE={one(sp.title)}", "##JCAMP-DX=5.01", "##DATA TYPE=MASS SPECTRUM", "##DATA CLASS=PEAK TABLE"]
    seen = {label_key(lbl) for lbl, _ in sp.records}
    if sp.origin and "ORIGIN" not in seen:
        lines.append(f"##ORIGIN={one(sp.origin)}")
    if sp.owner and "OWNER" not in seen:
        lines.append(f"##OWNER={one(sp.owner)}")
    if sp.names and "NAMES" not in seen:
        lines.append("##NAMES=" + "\n".join(one(n) for n in sp.names))
    if sp.cas and "CASREGISTRYNO" not in seen:
        lines.append(f"##CAS REGISTRY NO={one(sp.cas)}")
    if sp.molform and "MOLFORM" not in seen:
        lines.append(f"##MOLFORM={one(sp.molform)}")
    for lbl, val in sp.records:
        val = "\n".join(v.replace("##", "# #").replace("$$", "$ $") for v in str(val).splitlines())
        lines.append(f"##{lbl}={val}")
    lines += ["##XUNITS=M/Z", "##YUNITS=RELATIVE ABUNDANCE", f"##NPOINTS={len(sp.mz)}", "##PEAK TABLE=(XY..XY)"]
    lines += [f"{number_text(m)},{number_text(y)}" for m, y in zip(sp.mz, sp.intensity)]
    lines.append("##END=")
    return "\n".join(lines) + "\n"


def jcamp_text(spectra: list[JcampSpectrum]) -> str:
    """A JCAMP-DX file of one block per spectrum, one after the other."""
    return "".join(block_text(s) for s in spectra)


def write_jcamp(spectra: list[JcampSpectrum], path: str | Path) -> None:
    """Write :func:`jcamp_text` through the atomic writer."""
    from matcher.io.atomic import atomic_write

    with atomic_write(path, "w", encoding="utf-8", newline="\n") as fh:
        fh.write(jcamp_text(spectra))


__all__ = ["JcampSpectrum", "parse_jcamp", "read_jcamp", "write_jcamp", "jcamp_text", "block_text", "label_key",
           "number_text"]


def spectra_by_peak(path, peak_ids) -> list:
    """One spectrum (or None) per peak from a JCAMP-DX file whose blocks are titled by peak id.

    A title may also end in `` peak ID`` (as ``matcher peaks --spectra-out`` writes them); an empty block means
    no spectrum. A block whose title names no peak of the run, or a peak named twice, refuses the file (file,
    block, line).
    """
    blocks = read_jcamp(path)
    pos = {str(p).strip(): i for i, p in enumerate(peak_ids)}
    out: list = [None] * len(peak_ids)
    for b in blocks:
        title = b.title.strip()
        i = pos.get(title)
        if i is None and " peak " in title:
            i = pos.get(title.rsplit(" peak ", 1)[1].strip())
        if i is None:
            raise InputError(f"block {b.block} (line {b.line}): title {b.title[:60]!r} is not a peak id of the run "
                             "(each block of a run's spectra file is titled by its peak id)", file=os.fspath(path))
        if out[i] is not None:
            raise InputError(f"block {b.block} (line {b.line}): peak {b.title[:60]!r} has a spectrum already",
                             file=os.fspath(path))
        out[i] = b.spectrum if len(b.mz) else None
    return out
