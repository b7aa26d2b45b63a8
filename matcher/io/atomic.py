"""Atomic file writes: a file is either written completely or not at all.

Everything is first written to a temporary file in the *same folder* as the
target (so the final step never crosses a file system), flushed to disk, and
then renamed over the target with :func:`os.replace`, which is atomic on
POSIX and Windows. On any error, the temporary file is removed and the
target is left as it was (absent, or its previous content).

>>> import os, tempfile
>>> folder = tempfile.mkdtemp()
>>> target = os.path.join(folder, "out.txt")
>>> with atomic_write(target) as fh:
...     _ = fh.write("peak,ri\\n")
>>> open(target).read()
'peak,ri\\n'
>>> try:
...     with atomic_write(os.path.join(folder, "broken.txt")) as fh:
...         _ = fh.write("half")
...         raise ValueError("stopped")
... except ValueError:
...     pass
>>> sorted(os.listdir(folder))
['out.txt']

For code that needs a *path* (a library that opens the file itself), use
:func:`atomic_path`, which yields the temporary path and renames it on success.
"""

from __future__ import annotations

import contextlib
import os
import re
import stat
import sys
import uuid
from pathlib import Path
from typing import IO, Iterable, Iterator

from matcher.errors import MatcherError


def _temp_name(target: Path) -> Path:
    return target.with_name(f".{target.name}.{uuid.uuid4().hex[:12]}.tmp")


def _fsync_folder(folder: Path) -> None:
    """Make the rename durable where the platform allows it (POSIX); best effort."""
    if os.name != "posix":
        return
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


#: What the temporary name adds to the target's name (``.NAME.<12 hex>.tmp``).
_TEMP_EXTRA = 18
_STREAM = re.compile(r"-|/dev/std(?:out|err)|/dev/fd/\d+|/proc/self/fd/\d+")
SQLITE_MAGIC = b"SQLite format 3\x00"


def is_stream(path: str | os.PathLike) -> bool:
    """True for ``-``, ``/dev/stdout``, ``/dev/stderr`` and ``/dev/fd/N``: written directly, never renamed over.

    >>> is_stream("-"), is_stream("/dev/stdout"), is_stream("/dev/null"), is_stream("out.csv")
    (True, True, False, False)
    """
    return _STREAM.fullmatch(os.fspath(path)) is not None


def _kind(mode: int) -> str:
    return ("a character device" if stat.S_ISCHR(mode) else "a block device" if stat.S_ISBLK(mode)
            else "a named pipe (FIFO)" if stat.S_ISFIFO(mode) else "a socket" if stat.S_ISSOCK(mode)
            else "not a regular file")


def is_sqlite_file(path: str | os.PathLike) -> bool:
    """True when the file starts with the SQLite header (a house library or another database)."""
    try:
        with open(path, "rb") as fh:
            return fh.read(16) == SQLITE_MAGIC
    except OSError:
        return False


def library_files(db: str | None) -> list[str]:
    """The SQLite library of ``--db`` (or ``$MATCHER_DB``/the default) and its companions; [] for a server."""
    from matcher.location import resolve

    try:
        url = resolve(db)
    except MatcherError:
        return []
    if not url.startswith("sqlite:///"):
        return []
    path = url[len("sqlite:///"):].split("?", 1)[0]
    if not path or path == ":memory:":
        return []
    return [path] + [path + suffix for suffix in ("-wal", "-shm", "-journal")]


def guard_output(path: str | os.PathLike, *, inputs: Iterable[tuple[str, str | os.PathLike | None]] = (),
                 db: str | None | bool = False, option: str = "-o", allow_stream: bool = False,
                 allow_sqlite: bool = False) -> None:
    """Refuse (one line, :class:`MatcherError`) an output that would destroy something.

    Refused: an output that is the same file (device and inode, through
    symlinks) as one of ``inputs`` (``(what, path)`` pairs), as the house
    library of ``db`` or its ``-wal``/``-shm``/``-journal`` companions (pass
    ``db=None`` for ``$MATCHER_DB``/the default library, ``False`` to skip);
    an existing SQLite file (unless ``allow_sqlite``); a folder; anything that
    is not a regular file (devices, pipes, sockets), except ``-`` and
    ``/dev/stdout``-like names when ``allow_stream`` (those are written
    directly); a name too long for the file system.
    """
    p = os.fspath(path)
    if not p:
        raise MatcherError(f"{option}: the output file name is empty")
    if is_stream(p):
        if allow_stream:
            return
        raise MatcherError(f"{option} {p}: this output must be a regular file (it is renamed into place)")
    if "\x00" in p:
        raise MatcherError(f"{option}: a file name cannot hold a NUL character")
    name = os.path.basename(p)
    if len(os.fsencode(name)) + _TEMP_EXTRA > 255 or len(os.fsencode(os.path.abspath(p))) + _TEMP_EXTRA > 4000:
        raise MatcherError(f"{option} {p[:60]}...: the file name is too long ({len(name)} characters; "
                           f"at most {255 - _TEMP_EXTRA} for the name)")
    try:
        st = os.stat(p)
    except FileNotFoundError:
        return
    except OSError as exc:
        raise MatcherError(f"cannot write {p}: {exc.strerror or exc}") from None
    if stat.S_ISDIR(st.st_mode):
        raise MatcherError(f"cannot write {p}: it is a folder")
    if not stat.S_ISREG(st.st_mode):
        hint = "; write to '-' for standard output" if allow_stream else ""
        raise MatcherError(f"{option} {p} is {_kind(st.st_mode)}, not a regular file; refusing to replace it{hint}")
    me = (st.st_dev, st.st_ino)
    candidates = [(what, q) for what, q in inputs if q is not None]
    if db is not False:
        lib = library_files(db)
        candidates += [("the house library" if k == 0 else f"the house library's {f[len(lib[0]):]} file", f)
                       for k, f in enumerate(lib)]
    for what, q in candidates:
        try:
            other = os.stat(q)
        except (OSError, ValueError):
            continue
        if (other.st_dev, other.st_ino) == me:
            clash = f"{what} itself" if what == "the house library" else f"the same file as {what}"
            raise MatcherError(f"{option} {p} is {clash} ({os.fspath(q)}); nothing written; choose another output file")
    if not allow_sqlite and is_sqlite_file(p):
        raise MatcherError(f"{option} {p} is a SQLite database (a house library?); refusing to overwrite it; "
                           f"choose another output file")


def guard_outputs(outputs: Iterable[tuple[str, str | os.PathLike | None]], *,
                  inputs: Iterable[tuple[str, str | os.PathLike | None]] = (), db: str | None | bool = False,
                  allow_stream: bool = False) -> None:
    """:func:`guard_output` for each of several outputs, which must also differ from each other."""
    outs = [(opt, o) for opt, o in outputs if o is not None]
    ins = list(inputs)
    for k, (opt, o) in enumerate(outs):
        guard_output(o, inputs=ins + [(f"the output {po}", q) for po, q in outs[:k]], db=db, option=opt,
                     allow_stream=allow_stream)
        if any(os.path.abspath(os.fspath(o)) == os.path.abspath(os.fspath(q)) for _, q in outs[:k]) and not is_stream(o):
            raise MatcherError(f"{opt} {o} is also another output of this command; choose two different files")


def _check_folder(target: Path, allow_sqlite: bool = False) -> None:
    guard_output(target, option="output", allow_sqlite=allow_sqlite)
    folder = target.parent
    if not folder.is_dir():
        raise MatcherError(f"cannot write {target}: folder {folder} does not exist")


@contextlib.contextmanager
def atomic_path(path: str | os.PathLike, *, allow_sqlite: bool = False) -> Iterator[Path]:
    """Yield a temporary path next to ``path``; on success rename it to ``path``, else delete it.

    The body must create the file at the yielded path (or leave it absent,
    which is an error: nothing is renamed and :class:`MatcherError` is raised).
    Devices, pipes, folders and existing SQLite files (unless ``allow_sqlite``)
    are refused (:func:`guard_output`).
    """
    target = Path(path)
    _check_folder(target, allow_sqlite)
    temp = _temp_name(target)
    try:
        yield temp
        if not temp.exists():
            raise MatcherError(f"nothing was written for {target}")
        os.replace(temp, target)
    except BaseException:
        with contextlib.suppress(OSError):
            temp.unlink()
        raise
    _fsync_folder(target.parent)


@contextlib.contextmanager
def atomic_write(
    path: str | os.PathLike,
    mode: str = "w",
    *,
    encoding: str | None = "utf-8",
    newline: str | None = None,
) -> Iterator[IO]:
    """Open a temporary file for writing; it becomes ``path`` only if the block ends without error.

    ``mode`` is ``"w"`` (text, ``encoding`` and ``newline`` as for :func:`open`;
    pass ``newline=""`` for the :mod:`csv` module) or ``"wb"`` (bytes).
    A file that cannot be created raises :class:`MatcherError` (one line).
    """
    if mode not in ("w", "wb"):
        raise ValueError(f"atomic_write mode must be 'w' or 'wb', not {mode!r}")
    if is_stream(path):  # standard output asked for by name: written directly, never renamed over
        with _stream(os.fspath(path), mode, encoding, newline) as fh:
            yield fh
        return
    target = Path(path)
    _check_folder(target)
    temp = _temp_name(target)
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0)
    try:
        fd = os.open(temp, flags, 0o666)  # the user's umask applies, as for a normal file
    except OSError as exc:
        raise MatcherError(f"cannot write {target}: {exc.strerror or exc}") from None
    try:
        if mode == "wb":
            fh = os.fdopen(fd, "wb")
        else:
            fh = os.fdopen(fd, "w", encoding=encoding, newline=newline)
    except BaseException:
        os.close(fd)
        with contextlib.suppress(OSError):
            temp.unlink()
        raise
    try:
        with fh:
            yield fh
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(temp, target)
    except BaseException:
        with contextlib.suppress(OSError):
            temp.unlink()
        raise
    _fsync_folder(target.parent)


@contextlib.contextmanager
def _stream(name: str, mode: str, encoding: str | None, newline: str | None) -> Iterator[IO]:
    if name == "-":
        base = sys.stdout
        if mode == "wb":
            fh = getattr(base, "buffer", None)
            if fh is None:  # a text-only stdout (tests capturing it)
                raise MatcherError("binary output to '-' needs a real standard output")
            yield fh
            fh.flush()
            return
        yield base
        base.flush()
        return
    try:
        fh = open(name, mode, encoding=encoding if mode == "w" else None, newline=newline if mode == "w" else None)
    except OSError as exc:
        raise MatcherError(f"cannot write {name}: {exc.strerror or exc}") from None
    with fh:
        yield fh
