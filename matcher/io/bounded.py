"""Bounded reading of input files: size checked before memory grows, JSON depth and number length limited.

Every input file goes through :func:`read_bytes` (a regular file, at most a
size limit, read in chunks so that ``/dev/zero`` or a huge file stops at the
limit instead of exhausting memory) and JSON documents through
:func:`load_json` (strict UTF-8, nesting at most
:data:`~matcher.limits.MAX_JSON_DEPTH`, numbers of at most
:data:`~matcher.limits.MAX_JSON_DIGITS` digits, no NaN/Infinity literals).
Every problem is one :class:`~matcher.errors.InputError` naming the file.

>>> import os, tempfile
>>> p = os.path.join(tempfile.mkdtemp(), "deep.json")
>>> _ = open(p, "w").write("[" * 200 + "]" * 200)
>>> load_json(p, what="calibration file")
Traceback (most recent call last):
...
matcher.errors.InputError: ...deep.json: not a calibration file: JSON nested deeper than 64 levels
"""

from __future__ import annotations

import json
import os
import stat
from typing import Any

from matcher.errors import InputError
from matcher.limits import MAX_FILE_BYTES, MAX_JSON_BYTES, MAX_JSON_DEPTH, MAX_JSON_DIGITS

CHUNK = 1 << 20


def read_bytes(path: str | os.PathLike, *, what: str = "file", limit: int = MAX_FILE_BYTES) -> bytes:
    """The whole file, refused (one line) when missing, a folder, a device or pipe, or larger than ``limit``."""
    p = os.fspath(path)
    try:
        st = os.stat(p)
    except FileNotFoundError:
        raise InputError(f"{what} not found", file=p) from None
    except OSError as exc:
        raise InputError(f"cannot read the {what} ({exc.strerror or exc})", file=p) from None
    if stat.S_ISDIR(st.st_mode):
        raise InputError(f"is a folder, not a {what}", file=p)
    if not stat.S_ISREG(st.st_mode) and not stat.S_ISFIFO(st.st_mode):
        raise InputError(f"is a device, not a {what} (give a regular file)", file=p)
    if st.st_size > limit:
        raise InputError(f"the {what} has {st.st_size:,} bytes; at most {limit:,} are read", file=p)
    parts: list[bytes] = []
    total = 0
    try:
        with open(p, "rb") as fh:
            while True:
                block = fh.read(CHUNK)
                if not block:
                    break
                total += len(block)
                if total > limit:
                    raise InputError(f"the {what} is larger than {limit:,} bytes (the most that is read)", file=p)
                parts.append(block)
    except OSError as exc:
        raise InputError(f"cannot read the {what} ({exc.strerror or exc})", file=p) from None
    return b"".join(parts)


def _too_long(kind: str, text: str):
    raise ValueError(f"a {kind} of {len(text)} characters (at most {MAX_JSON_DIGITS} digits are accepted)")


def _int(text: str) -> int:
    if len(text) > MAX_JSON_DIGITS:
        _too_long("number", text)
    return int(text)


def _float(text: str) -> float:
    if len(text) > MAX_JSON_DIGITS + 10:
        _too_long("number", text)
    v = float(text)
    if v in (float("inf"), float("-inf")):
        raise ValueError(f"the number {text[:30]} is beyond floating point")
    return v


def _constant(name: str):
    raise ValueError(f"{name} is not a number JSON allows")


def _depth(doc: Any) -> int:
    deepest, stack = 0, [(doc, 1)]
    while stack:
        node, d = stack.pop()
        if isinstance(node, (list, dict)):
            deepest = max(deepest, d)
            if deepest > MAX_JSON_DEPTH:
                return deepest
            stack.extend((v, d + 1) for v in (node.values() if isinstance(node, dict) else node))
    return deepest


def loads_json(data: bytes, *, path: str, what: str) -> Any:
    """Parse JSON bytes with the limits of the module notes."""
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError(f"not a {what}: not UTF-8 text (invalid byte at offset {exc.start})", file=path) from None
    # nesting: count brackets cheaply first, so a 200,000-deep file never reaches the parser's recursion
    depth = level = 0
    in_str = esc = False
    if text.count("[") + text.count("{") > MAX_JSON_DEPTH:
        for ch in text:
            if in_str:
                if esc:
                    esc = False
                elif ch == "\\":
                    esc = True
                elif ch == '"':
                    in_str = False
            elif ch == '"':
                in_str = True
            elif ch in "[{":
                level += 1
                if level > MAX_JSON_DEPTH:
                    raise InputError(f"not a {what}: JSON nested deeper than {MAX_JSON_DEPTH} levels", file=path)
            elif ch in "]}":
                level -= 1
    try:
        doc = json.loads(text, parse_int=_int, parse_float=_float, parse_constant=_constant)
    except json.JSONDecodeError as exc:
        raise InputError(f"not a {what} (invalid JSON: {exc.msg})", file=path, line=exc.lineno) from None
    except ValueError as exc:
        raise InputError(f"not a {what}: {exc}", file=path) from None
    except RecursionError:
        raise InputError(f"not a {what}: JSON nested too deeply", file=path) from None
    if _depth(doc) > MAX_JSON_DEPTH:
        raise InputError(f"not a {what}: JSON nested deeper than {MAX_JSON_DEPTH} levels", file=path)
    del depth
    return doc


def load_json(path: str | os.PathLike, *, what: str = "JSON file") -> Any:
    """:func:`read_bytes` then :func:`loads_json`."""
    p = os.fspath(path)
    return loads_json(read_bytes(p, what=what, limit=MAX_JSON_BYTES), path=p, what=what)


__all__ = ["read_bytes", "loads_json", "load_json"]
