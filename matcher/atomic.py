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
import uuid
from pathlib import Path
from typing import IO, Iterator

from .errors import MatcherError


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


def _check_folder(target: Path) -> None:
    folder = target.parent
    if not folder.is_dir():
        raise MatcherError(f"cannot write {target}: folder {folder} does not exist")
    if target.is_dir():
        raise MatcherError(f"cannot write {target}: it is a folder")


@contextlib.contextmanager
def atomic_path(path: str | os.PathLike) -> Iterator[Path]:
    """Yield a temporary path next to ``path``; on success rename it to ``path``, else delete it.

    The body must create the file at the yielded path (or leave it absent,
    which is an error: nothing is renamed and :class:`MatcherError` is raised).
    """
    target = Path(path)
    _check_folder(target)
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
