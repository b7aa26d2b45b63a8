"""Robust reading of the delimited text (and ``.xlsx``) files every reader uses.

Lab files are messy: instrument exports in odd encodings, decimal commas,
comment lines above the header. :func:`load_table` turns any of them into a
:class:`RawTable` whose cells are all text, and the helpers :func:`numbers`,
:func:`texts` and :func:`map_headers` turn columns into checked values. Every
problem becomes one :class:`~matcher.errors.InputError` naming the file, the
data row, the physical line and the column.

What is read, and how (documented behaviour):

* **Encoding**: UTF-8; UTF-8 with a byte-order mark; UTF-16 LE/BE with a
  byte-order mark; otherwise Latin-1, used only when the file holds no UTF-8
  multi-byte sequence at all (an old Latin-1 export). A UTF-8 file with an
  invalid byte is refused with its line (nothing is guessed). NUL bytes without a UTF-16 byte-order mark, or text that is mostly
  non-printable, are refused as binary.
* **Preamble**: leading blank lines and lines starting with ``#`` are skipped
  (and counted, so line numbers stay physical); so are leading one-field
  lines (``Sample: oil 7``) above a many-column table.
* **Delimiter**: comma, semicolon or tab, sniffed from the header and the
  first data lines. With semicolons, decimal commas (``5,23``) are accepted
  by :func:`numbers`.
* **Rows**: blank lines between rows are skipped. A row with *more*
  non-empty fields than the header is refused (trailing empty fields are
  ignored), and so is a row with *fewer* fields than the header: a missing
  field cannot be told from a shifted one (write an empty cell as ``,,``).
  A cell longer than :data:`MAX_CELL` characters is refused: no field of a
  peak table, ladder or library needs that, and it is nearly always a broken
  quote or a binary file read as text.
* **Header**: duplicate names are refused; an empty header cell is named
  ``(column N)``. A header-only file is a table with no rows (callers decide).

>>> import tempfile, os
>>> d = tempfile.mkdtemp()
>>> p = os.path.join(d, "run.csv")
>>> _ = open(p, "w", encoding="utf-8").write("# invented demo data\\npeak;RT (min)\\n1;5,25\\n2;7,5\\n")
>>> raw = load_table(p)
>>> raw.header, raw.delimiter, raw.first_line, raw.line_of(2)
(['peak', 'RT (min)'], ';', 2, 4)
>>> numbers(raw, "RT (min)").tolist()
[5.25, 7.5]
>>> map_headers(raw, {"rt": ["rt", "retention time"], "peak": ["peak", "no"]})
{'rt': 'RT (min)', 'peak': 'peak'}
"""

from __future__ import annotations

import csv
import io
import re
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

from matcher.errors import InputError

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np
    import pandas as pd

#: Longest cell text echoed back in an error message.
ECHO_LIMIT = 40
#: Longest cell accepted, in characters (declared in :mod:`matcher.limits`).
from matcher.limits import MAX_CELL  # noqa: E402

_DELIMITERS = (",", ";", "\t")
_SAMPLE_LINES = 50


def echo(text: str, limit: int = ECHO_LIMIT) -> str:
    """Cell text for an error message: one line, at most ``limit`` characters, quoted.

    >>> echo("abc")
    "'abc'"
    >>> echo("x" * 100)
    "'xxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxx...' (100 characters)"
    """
    s = " ".join(str(text).split())
    if len(s) > limit:
        return repr(s[:limit] + "...") + f" ({len(str(text))} characters)"
    return repr(s)


@dataclass
class RawTable:
    """A table read from a file; every cell is a ``str`` ('' when empty)."""

    path: str
    frame: "pd.DataFrame"
    header: list[str]
    first_line: int
    delimiter: str = ","
    decimal_comma: bool = False
    encoding: str = "utf-8"
    lines: list[int] = field(default_factory=list, repr=False)

    def __len__(self) -> int:
        return len(self.frame)

    def line_of(self, row: int) -> int:
        """Physical line (1-based) of the 1-based data row ``row``."""
        if self.lines and 1 <= row <= len(self.lines):
            return self.lines[row - 1]
        return self.first_line + row

    def fail(self, message: str, *, row: int | None = None, column: str | None = None) -> InputError:
        """An :class:`InputError` located in this table (returned, for ``raise``)."""
        line = self.line_of(row) if row is not None else None
        return InputError(message, file=self.path, row=row, line=line, column=column)


# --------------------------------------------------------------------------- bytes -> text


# a well-formed multi-byte UTF-8 sequence (two to four bytes)
_UTF8_MULTIBYTE = re.compile(rb"[\xc2-\xdf][\x80-\xbf]|[\xe0-\xef][\x80-\xbf]{2}|[\xf0-\xf4][\x80-\xbf]{3}")


def _decode(data: bytes, path: str, what: str) -> tuple[str, str]:
    if data.startswith(b"\xef\xbb\xbf"):
        enc, body = "utf-8-sig", data[3:]
        try:
            text = body.decode("utf-8")
        except UnicodeDecodeError:
            raise InputError("not valid UTF-8 although the file starts with a UTF-8 byte-order mark", file=path)
    elif data.startswith(b"\xff\xfe") or data.startswith(b"\xfe\xff"):
        enc = "utf-16-le" if data.startswith(b"\xff\xfe") else "utf-16-be"
        body = data[2:]
        if len(body) % 2:
            body = body[:-1]
        try:
            text = body.decode(enc)
        except UnicodeDecodeError:
            raise InputError(f"not valid {enc.upper()} text although the file starts with its byte-order mark", file=path)
    else:
        if b"\x00" in data:
            raise InputError(f"this is a binary file, not a {what} in text form (NUL bytes found)", file=path)
        try:
            enc, text = "utf-8", data.decode("utf-8")
        except UnicodeDecodeError as exc:
            if _UTF8_MULTIBYTE.search(data):
                line = data.count(b"\n", 0, exc.start) + 1
                raise InputError(
                    f"mixed encodings: the file is UTF-8 but byte {exc.start + 1} (0x{data[exc.start]:02x}) is not valid "
                    f"UTF-8; re-save the whole file as UTF-8 (nothing is guessed)", file=path, line=line) from None
            enc, text = "latin-1", data.decode("latin-1")  # no UTF-8 sequence at all: a Latin-1 export
    if "\x00" in text:
        raise InputError(f"this is a binary file, not a {what} in text form (NUL characters found)", file=path)
    sample = text[:20000]
    if sample:
        bad = sum(1 for ch in sample if (ord(ch) < 32 and ch not in "\t\n\r") or 0x7F <= ord(ch) <= 0x9F or ch == "\ufffd")
        if bad > max(2, 0.05 * len(sample)):
            raise InputError(f"this looks like a binary file, not a {what} in text form (mostly non-printable)", file=path)
    return text, enc


# --------------------------------------------------------------------------- text -> rows

_LINE_SPLIT = re.compile(r"\r\n|\r|\n")


def _fields(line: str, delim: str) -> list[str]:
    try:
        return next(csv.reader([line], delimiter=delim), [])
    except csv.Error:
        return line.split(delim)


def _sniff(lines: list[str]) -> str:
    """The delimiter giving most fields with the most consistent rows."""
    best, best_score = ",", (0, 0.0, 0)
    sample = [ln for ln in lines[:_SAMPLE_LINES] if ln.strip()]
    if not sample:
        return best
    for d in _DELIMITERS:
        counts = [len(_fields(ln, d)) for ln in sample]
        wide = [c for c in counts if c >= 2]
        if not wide:
            continue
        modal = max(set(wide), key=wide.count)
        agree = sum(1 for c in counts if c == modal) / len(counts)
        score = (1, agree, modal)
        if score > best_score:
            best, best_score = d, score
    return best


def _raise_csv_limit() -> None:
    limit = 2**31 - 1
    while True:
        try:
            if csv.field_size_limit() < limit:
                csv.field_size_limit(limit)
            return
        except OverflowError:  # pragma: no cover - platform dependent
            limit //= 2


def load_table(path, *, what: str = "table") -> RawTable:
    """Read a delimited text file (or the first sheet of an ``.xlsx``) into a :class:`RawTable`.

    ``what`` names the kind of file in messages ("peak table", "ladder", ...).
    """
    import pandas as pd

    from matcher.io.bounded import read_bytes

    path = str(path)
    data = read_bytes(path, what=f"{what} file")

    if data.startswith(b"PK\x03\x04"):
        if path.lower().endswith((".xlsx", ".xlsm")):
            return _load_xlsx(path, what)
        raise InputError(f"this is a ZIP archive, not a {what}; give a CSV or an .xlsx file", file=path)
    if not data.strip(b" \t\r\n\x00"):
        raise InputError(f"empty file (expected a {what} with a header line)", file=path)

    text, enc = _decode(data, path, what)
    lines = _LINE_SPLIT.split(text)
    if lines and lines[-1] == "":
        lines.pop()

    skip = 0
    while skip < len(lines) and (not lines[skip].strip() or lines[skip].lstrip().startswith("#")):
        skip += 1
    if skip >= len(lines):
        raise InputError(f"empty file: no header line, only comments or blank lines (expected a {what})", file=path)

    delim = _sniff(lines[skip:])
    # leading one-field lines above a many-column table are a preamble
    rest = lines[skip: skip + _SAMPLE_LINES]
    counts = [len(_fields(ln, delim)) if ln.strip() else 0 for ln in rest]
    wide_at = next((i for i, c in enumerate(counts) if c >= 2), None)
    if wide_at:
        after = [c for c in counts[wide_at:] if c]
        if sum(1 for c in after if c >= 2) >= 0.5 * len(after) and all(c <= 1 for c in counts[:wide_at]):
            skip += wide_at

    _raise_csv_limit()
    body = "\n".join(lines[skip:])
    reader = csv.reader(io.StringIO(body, newline=""), delimiter=delim)
    header: list[str] | None = None
    rows: list[list[str]] = []
    line_numbers: list[int] = []
    prev = 0
    try:
        for record in reader:
            start = skip + prev + 1
            prev = reader.line_num
            if header is None:
                header = [h.strip() for h in record]
                first_line = start
                continue
            if not record or all(not c.strip() for c in record):
                continue
            if len(record) > len(header):
                extra = record[len(header):]
                if any(c.strip() for c in extra):
                    at = len(header) + next(i for i, c in enumerate(extra) if c.strip()) + 1
                    raise InputError(
                        f"{len(record)} fields but the header has {len(header)} "
                        f"(delimiter {_DELIM_NAME[delim]}); a field may hold an unquoted delimiter",
                        file=path, row=len(rows) + 1, line=start, column=f"(column {at})",
                    )
                record = record[: len(header)]
            elif len(record) < len(header):
                missing = header[len(record)].strip() or f"(column {len(record) + 1})"
                raise InputError(
                    f"{len(record)} field{'s' if len(record) != 1 else ''} but the header has {len(header)} "
                    f"(delimiter {_DELIM_NAME[delim]}); a missing field cannot be told from a shifted one, "
                    f"so write an empty cell as an empty field",
                    file=path, row=len(rows) + 1, line=start, column=" ".join(missing.split()),
                )
            for i, c in enumerate(record):
                if len(c) > MAX_CELL:
                    raise InputError(
                        f"a cell of {len(c)} characters (at most {MAX_CELL} are accepted; "
                        f"a quote may be left open): {echo(c)}",
                        file=path, row=len(rows) + 1, line=start,
                        column=" ".join(header[i].split()) or f"(column {i + 1})",
                    )
            rows.append(record)
            line_numbers.append(start)
    except csv.Error as exc:
        raise InputError(f"cannot split the line into fields ({exc})", file=path, line=skip + prev + 1)

    assert header is not None
    header = _clean_header(header, path, first_line)
    frame = pd.DataFrame(rows, columns=header, dtype=object) if rows else pd.DataFrame({h: pd.Series([], dtype=object) for h in header})
    return RawTable(
        path=path, frame=frame, header=header, first_line=first_line, delimiter=delim,
        decimal_comma=(delim == ";"), encoding=enc, lines=line_numbers,
    )


_DELIM_NAME = {",": "comma", ";": "semicolon", "\t": "tab"}


def _clean_header(header: list[str], path: str, first_line: int) -> list[str]:
    # trailing empty header cells (a trailing delimiter) are dropped only if nothing needs them;
    # they are kept under a neutral name so that data rows still line up
    out = []
    for i, h in enumerate(header):
        if len(h) > MAX_CELL:
            raise InputError(f"header cell {i + 1} has {len(h)} characters (at most {MAX_CELL} are accepted): {echo(h)}",
                             file=path, line=first_line)
        h = " ".join(h.split())
        out.append(h if h else f"(column {i + 1})")
    seen: dict[str, int] = {}
    for i, h in enumerate(out):
        if h in seen:
            raise InputError(
                f"the header names column {h!r} twice (columns {seen[h] + 1} and {i + 1})",
                file=path, line=first_line,
            )
        seen[h] = i
    return out


def _xlsx_text(v) -> str:
    if v is None:
        return ""
    if isinstance(v, bool):
        return "TRUE" if v else "FALSE"
    if isinstance(v, float) and v.is_integer() and abs(v) < 1e15:
        return str(int(v))
    if hasattr(v, "isoformat"):
        return v.isoformat()
    return str(v)


def _first_sheet(path: str) -> str | None:
    """The ZIP member of the workbook's first sheet (from workbook.xml and its relationships), or None."""
    import posixpath
    import xml.etree.ElementTree as ET
    import zipfile

    try:
        with zipfile.ZipFile(path) as z:
            wb = ET.fromstring(z.read("xl/workbook.xml"))
            rels = ET.fromstring(z.read("xl/_rels/workbook.xml.rels"))
    except Exception:  # an unusual layout: openpyxl will say what is wrong
        return None
    ns_main = "{http://schemas.openxmlformats.org/spreadsheetml/2006/main}"
    ns_rel = "{http://schemas.openxmlformats.org/officeDocument/2006/relationships}"
    first = wb.find(f"{ns_main}sheets/{ns_main}sheet")
    rid = first.get(f"{ns_rel}id") if first is not None else None
    for r in rels:
        if r.get("Id") == rid:
            target = r.get("Target") or ""
            return target.lstrip("/") if target.startswith("/") else posixpath.normpath(posixpath.join("xl", target))
    return None


def _count_xlsx_rows(path: str, member: str | None, what: str) -> None:
    """Count the sheet's ``<row`` and ``<c`` elements in its decompressed XML, in chunks, before parsing:
    a sheet beyond the row or cell limit is refused in seconds and a few MB, whatever it declares."""
    import zipfile

    from matcher.limits import MAX_ROWS, MAX_XLSX_CELLS

    if not member:
        return
    rows = cells = 0
    tail = b""
    with zipfile.ZipFile(path) as z:
        try:
            fh = z.open(member.lstrip("/"))
        except KeyError:
            return
        with fh:
            while True:
                block = fh.read(1 << 20)
                if not block:
                    break
                data = tail + block
                rows += data.count(b"<row ") + data.count(b"<row>") - tail.count(b"<row ") - tail.count(b"<row>")
                cells += data.count(b"<c ") + data.count(b"<c>") - tail.count(b"<c ") - tail.count(b"<c>")
                tail = data[-5:]
                if rows > MAX_ROWS:
                    raise InputError(f"the workbook has more than {MAX_ROWS:,} rows (the most that is read; save the "
                                     f"{what} as CSV)", file=path)
                if cells > MAX_XLSX_CELLS:
                    raise InputError(f"the workbook has more than {MAX_XLSX_CELLS:,} cells (the most that is read; "
                                     f"save the {what} as CSV)", file=path)


def _xlsx_cells(path: str, what: str) -> list[list[str]]:
    """The first sheet's cells as text, streamed (openpyxl read-only) with the row, cell and size limits
    checked as rows arrive, so a huge or bomb-like workbook stops early instead of filling memory."""
    import zipfile

    from matcher.limits import MAX_FILE_BYTES, MAX_ROWS, MAX_XLSX_CELLS

    try:
        with zipfile.ZipFile(path) as z:
            unpacked = sum(i.file_size for i in z.infolist())
    except (zipfile.BadZipFile, OSError, ValueError) as exc:
        raise InputError(f"cannot read the workbook ({exc})", file=path) from None
    if unpacked > MAX_FILE_BYTES:
        raise InputError(f"the workbook unpacks to {unpacked:,} bytes; at most {MAX_FILE_BYTES:,} are read "
                         f"(save the {what} as CSV)", file=path)
    _count_xlsx_rows(path, _first_sheet(path), what)  # before openpyxl spends any time on it
    try:
        from openpyxl import load_workbook

        wb = load_workbook(path, read_only=True, data_only=True)
    except Exception as exc:  # openpyxl raises many kinds for damaged workbooks
        raise InputError(f"cannot read the workbook ({type(exc).__name__}: {exc})", file=path) from None
    out: list[list[str]] = []
    n_cells = 0
    try:
        ws = wb.worksheets[0] if wb.worksheets else None
        if ws is None:
            raise InputError(f"empty workbook (expected a {what} with a header row on the first sheet)", file=path)
        declared_rows, declared_cols = ws.max_row or 0, ws.max_column or 0  # the sheet's own <dimension>, if any
        if declared_rows > MAX_ROWS or declared_rows * declared_cols > MAX_XLSX_CELLS:
            raise InputError(f"the workbook declares {declared_rows:,} rows x {declared_cols:,} columns; at most "
                             f"{MAX_ROWS:,} rows and {MAX_XLSX_CELLS:,} cells are read (save the {what} as CSV)", file=path)
        for k, row in enumerate(ws.iter_rows(values_only=True), start=1):
            if k > MAX_ROWS:
                raise InputError(f"the workbook has more than {MAX_ROWS:,} rows (the most that is read)", file=path)
            rec = [_xlsx_text(v) for v in row]
            while rec and rec[-1] == "":
                rec.pop()
            n_cells += len(rec)
            if n_cells > MAX_XLSX_CELLS:
                raise InputError(f"the workbook has more than {MAX_XLSX_CELLS:,} cells (the most that is read; "
                                 f"save the {what} as CSV)", file=path, line=k)
            for j, c in enumerate(rec):
                if len(c) > MAX_CELL:
                    raise InputError(f"a cell of {len(c)} characters (at most {MAX_CELL} are accepted): {echo(c)}",
                                     file=path, line=k, column=f"(column {j + 1})")
            out.append(rec)
    except InputError:
        raise
    except Exception as exc:  # a damaged sheet inside a valid ZIP
        raise InputError(f"cannot read the workbook ({type(exc).__name__}: {exc})", file=path) from None
    finally:
        wb.close()
    width = max((len(r) for r in out), default=0)
    return [r + [""] * (width - len(r)) for r in out]


def _load_xlsx(path: str, what: str) -> RawTable:
    import pandas as pd

    cells = _xlsx_cells(path, what)
    skip = 0
    while skip < len(cells) and (
        all(not str(c).strip() for c in cells[skip]) or str(cells[skip][0]).lstrip().startswith("#")
    ):
        skip += 1
    if skip >= len(cells):
        raise InputError(f"empty workbook (expected a {what} with a header row on the first sheet)", file=path)
    raw_header = [str(c).strip() for c in cells[skip]]
    while raw_header and not raw_header[-1]:
        raw_header.pop()
    width = len(raw_header)
    header = _clean_header(raw_header, path, skip + 1)
    rows, line_numbers = [], []
    for i in range(skip + 1, len(cells)):
        rec = [str(c) for c in cells[i]]
        if all(not c.strip() for c in rec):
            continue
        if any(c.strip() for c in rec[width:]):
            raise InputError("a value lies right of the last named column", file=path, row=len(rows) + 1, line=i + 1)
        rec = rec[:width] + [""] * (width - len(rec[:width]))
        for j, c in enumerate(rec):
            if len(c) > MAX_CELL:
                raise InputError(f"a cell of {len(c)} characters (at most {MAX_CELL} are accepted): {echo(c)}",
                                 file=path, row=len(rows) + 1, line=i + 1, column=header[j])
        rows.append(rec)
        line_numbers.append(i + 1)
    frame = pd.DataFrame(rows, columns=header, dtype=object) if rows else pd.DataFrame({h: pd.Series([], dtype=object) for h in header})
    return RawTable(path=path, frame=frame, header=header, first_line=skip + 1, delimiter="xlsx",
                    decimal_comma=False, encoding="xlsx", lines=line_numbers)


# --------------------------------------------------------------------------- columns

# ASCII digits only, as on the command line: full-width or other scripts' digits are refused in both places
NUMBER_PATTERN = re.compile(r"[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?|[+-]?(?:nan|inf|infinity)", re.IGNORECASE)


def _column(raw: RawTable, column: str) -> list[str]:
    if column not in raw.frame.columns:
        raise InputError(
            f"no column {column!r}; the header has: {', '.join(raw.header) or '(nothing)'}",
            file=raw.path, line=raw.first_line,
        )
    return ["" if v is None else str(v) for v in raw.frame[column].tolist()]


def _fmt(x: float) -> str:
    return str(int(x)) if float(x).is_integer() and abs(x) < 1e15 else f"{x:g}"


def numbers(
    raw: RawTable,
    column: str,
    *,
    required: bool = True,
    finite: bool = True,
    positive: bool = False,
    nonnegative: bool = False,
    integer: bool = False,
    minimum: float | None = None,
    maximum: float | None = None,
) -> "np.ndarray":
    """Parse ``column`` into float64; empty cells are NaN unless ``required``.

    The first offending cell raises an :class:`InputError` with its row, line
    and column. ``minimum``/``maximum`` are inclusive bounds.

    >>> import pandas as pd
    >>> raw = RawTable("t.csv", pd.DataFrame({"x": ["1", " 2.5 ", ""]}, dtype=object), ["x"], 1)
    >>> numbers(raw, "x", required=False).tolist()
    [1.0, 2.5, nan]
    >>> numbers(raw, "x")
    Traceback (most recent call last):
    ...
    matcher.errors.InputError: t.csv, data row 3 (line 4), column 'x': empty cell; a number is required
    """
    import numpy as np

    cells = [c.strip().replace("\u2212", "-") for c in _column(raw, column)]
    if raw.decimal_comma:
        cells = [c.replace(",", ".") if ("," in c and "." not in c) else c for c in cells]
    n = len(cells)
    out = np.full(n, np.nan)
    for k, c in enumerate(cells):
        if not c:
            if required:
                raise raw.fail("empty cell; a number is required", row=k + 1, column=column)
            continue
        if not NUMBER_PATTERN.fullmatch(c):
            hint = " (write digits as ASCII 0-9)" if any(ch.isdigit() and not ch.isascii() for ch in c) else ""
            raise raw.fail(f"not a number: {echo(c)}{hint}", row=k + 1, column=column)
    filled = [c if c else "nan" for c in cells]
    if n:
        out = np.asarray(filled, dtype=object).astype(np.float64)
    checks = []
    present = np.array([bool(c) for c in cells], dtype=bool)
    if finite:
        # a literal 'nan'/'inf' is not a measurement; digits that overflow float64 are 'too large'
        literal = np.array([bool(c) and c.lstrip("+-")[:1].lower() in ("n", "i") for c in cells], dtype=bool)
        checks.append((present & literal & ~np.isfinite(out), lambda v: f"must be a finite number, got {v}"))
        checks.append((present & ~literal & ~np.isfinite(out),
                       lambda v: f"too large a number (beyond floating point), got {v}"))
    if positive:
        checks.append((present & ~(out > 0), lambda v: f"must be positive, got {v}"))
    if nonnegative:
        checks.append((present & ~(out >= 0), lambda v: f"must not be negative, got {v}"))
    if integer:
        with np.errstate(invalid="ignore"):
            checks.append((present & np.isfinite(out) & (out != np.round(out)), lambda v: f"must be a whole number, got {v}"))
    if minimum is not None:
        checks.append((present & ~(out >= minimum), lambda v: f"must be at least {_fmt(minimum)}, got {v}"))
    if maximum is not None:
        checks.append((present & ~(out <= maximum), lambda v: f"must be at most {_fmt(maximum)}, got {v}"))
    first_bad, message = n, ""
    for bad, msg in checks:
        idx = np.flatnonzero(bad)
        if idx.size and idx[0] < first_bad:
            first_bad = int(idx[0])
            message = msg(echo(_column(raw, column)[first_bad]))
    if first_bad < n:
        raise raw.fail(message, row=first_bad + 1, column=column)
    return out


def texts(raw: RawTable, column: str, *, required: bool = False) -> list[str]:
    """The text of ``column``, stripped at both ends and otherwise literal (a quoted newline stays).

    With ``required`` an empty cell is an error.
    """
    cells = [c.strip() for c in _column(raw, column)]
    if required:
        for k, c in enumerate(cells):
            if not c:
                raise raw.fail("empty cell; a value is required", row=k + 1, column=column)
    return cells


def normalize_header(text: str) -> str:
    """Header spelling reduced for matching: case, spaces and punctuation ignored.

    >>> normalize_header("Ret. Time"), normalize_header("M+"), normalize_header("Peak #")
    ('rettime', 'mplus', 'peaknum')
    """
    s = str(text).lower().replace("+", "plus").replace("#", "num").replace("%", "pct")
    return re.sub(r"[\W_]+", "", s)


def strip_units(text: str) -> str:
    """A header without its bracketed unit: ``'Retention time [s]'`` -> ``'Retention time'``.

    >>> strip_units("Ret. time (min)")
    'Ret. time'
    """
    return re.sub(r"\s*[\(\[\{][^\)\]\}]*[\)\]\}]\s*", " ", str(text)).strip()


def map_headers(
    raw: RawTable,
    aliases: dict[str, list[str]],
    overrides: dict[str, str] | None = None,
) -> dict[str, str]:
    """Canonical name -> actual header, for the canonical names found in the file.

    A header matches a canonical name when its normalised spelling (see
    :func:`normalize_header`), with or without a bracketed unit, equals the
    canonical name or one of its aliases. Two headers matching one name is an
    error (choose with ``--map name=header``). ``overrides`` win; an override
    naming a header not in the file is an :class:`InputError`.
    """
    overrides = dict(overrides or {})
    result: dict[str, str] = {}
    used: set[str] = set()
    for canon, header in overrides.items():
        if canon not in aliases:
            raise InputError(
                f"--map {canon}={header}: unknown column name {canon!r}; known: {', '.join(aliases)}",
                file=raw.path,
            )
        actual = header if header in raw.header else None
        if actual is None:
            hits = [h for h in raw.header if normalize_header(h) == normalize_header(header)]
            actual = hits[0] if len(hits) == 1 else None
        if actual is None:
            raise InputError(
                f"--map {canon}={header}: the file has no column {header!r}; it has: {', '.join(raw.header)}",
                file=raw.path, line=raw.first_line,
            )
        result[canon] = actual
        used.add(actual)
    keys_full = {h: normalize_header(h) for h in raw.header}
    keys_bare = {h: normalize_header(strip_units(h)) for h in raw.header}
    for canon, names in aliases.items():
        if canon in result:
            continue
        wanted = {normalize_header(canon)} | {normalize_header(a) for a in names}
        wanted.discard("")
        hits = [h for h in raw.header if h not in used and (keys_full[h] in wanted or keys_bare[h] in wanted)]
        if len(hits) > 1:
            exact = [h for h in hits if keys_full[h] == normalize_header(canon)]
            if len(exact) == 1:
                hits = exact
            else:
                raise InputError(
                    f"columns {', '.join(repr(h) for h in hits)} could all be {canon!r}; "
                    f"choose one with --map {canon}=HEADER",
                    file=raw.path, line=raw.first_line,
                )
        if hits:
            result[canon] = hits[0]
            used.add(hits[0])
    return result


__all__ = ["RawTable", "load_table", "numbers", "texts", "map_headers", "normalize_header", "strip_units", "echo",
           "from_frame", "as_table"]


# --------------------------------------------------------------------------- tables already in memory

#: How an in-memory table is named in messages when it has no name of its own.
FRAME_NAME = "<DataFrame>"


def _cell_text(value) -> str:
    """One in-memory cell as the text a file would hold (missing values as empty cells)."""
    if value is None or isinstance(value, str):
        return value or ""
    if type(value).__name__ in ("NAType", "NaTType"):
        return ""
    if isinstance(value, (list, tuple)):
        return " ".join(_cell_text(v) for v in value)
    if hasattr(value, "item") and not isinstance(value, (int, float)):
        value = value.item()  # a NumPy scalar
    if isinstance(value, float):
        if value != value:
            return ""
        return repr(value) if not value.is_integer() else str(int(value)) if abs(value) < 1e15 else repr(value)
    return str(value)


def from_frame(frame: "pd.DataFrame", *, name: str = FRAME_NAME) -> RawTable:
    """A pandas DataFrame as a :class:`RawTable`, so every reader accepts tables already in memory.

    Cells become the text a CSV would hold (NaN and ``None`` empty, whole
    floats without ``.0``, lists of ions joined by spaces); the readers then
    apply exactly the checks they apply to a file, and messages name the data
    row (from 1) and column of the frame.

    >>> import pandas as pd
    >>> raw = from_frame(pd.DataFrame({"peak": [1, 2], "RT (min)": [5.25, float("nan")]}))
    >>> raw.header, raw.frame["RT (min)"].tolist(), numbers(raw, "RT (min)", required=False).tolist()
    (['peak', 'RT (min)'], ['5.25', ''], [5.25, nan])
    """
    import pandas as pd

    header = _clean_header([str(c) for c in frame.columns], name, 1)
    data = {h: [_cell_text(v) for v in frame[c].tolist()] for h, c in zip(header, frame.columns)}
    cells = pd.DataFrame(data, columns=header, dtype=object) if len(frame) else pd.DataFrame(
        {h: pd.Series([], dtype=object) for h in header})
    return RawTable(path=name, frame=cells, header=header, first_line=1, lines=list(range(2, len(frame) + 2)))


def as_table(source, *, what: str = "table") -> RawTable:
    """A :class:`RawTable` from a file path, a pandas DataFrame or a :class:`RawTable`."""
    if isinstance(source, RawTable):
        return source
    if hasattr(source, "columns") and hasattr(source, "iloc"):
        return from_frame(source)
    return load_table(source, what=what)
