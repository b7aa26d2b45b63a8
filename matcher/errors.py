"""User-facing errors: one line that names the file, row and column.

Every problem a user can fix (a bad file, a wrong option, an unknown class)
is raised as :class:`MatcherError` or a subclass. The command line prints
``str(error)`` on one line and exits non-zero; no traceback is shown.

Row numbers: ``row`` counts *data rows* from 1 (the header is not a data
row); where the physical line in the file is known it is given as well.

>>> str(InputError("not a number: 'abc'", file="peaks.csv", row=3, line=4, column="rt"))
"peaks.csv, data row 3 (line 4), column 'rt': not a number: 'abc'"
"""

from __future__ import annotations


class MatcherError(Exception):
    """A problem the user can fix; shown as one line, exit code 2."""

    exit_code = 2


class InputError(MatcherError):
    """Bad content in an input file, located by file, row and column."""

    def __init__(
        self,
        message: str,
        *,
        file: str | None = None,
        row: int | None = None,
        line: int | None = None,
        column: str | None = None,
    ) -> None:
        self.message = message
        self.file = file
        self.row = row
        self.line = line
        self.column = column
        super().__init__(self.__str__())

    def __str__(self) -> str:
        where: list[str] = []
        if self.file:
            # a file name may hold a line break (legal on Linux): escape it so the message stays one line
            where.append("".join(c if c.isprintable() else repr(c)[1:-1] for c in str(self.file)))
        if self.row is not None:
            part = f"data row {self.row}"
            if self.line is not None:
                part += f" (line {self.line})"
            where.append(part)
        elif self.line is not None:
            where.append(f"line {self.line}")
        if self.column is not None:
            where.append(f"column {self.column!r}")
        text = " ".join(self.message.split())  # always one line
        return (", ".join(where) + ": " + text) if where else text


class LibraryError(MatcherError):
    """A problem with the house library (missing, locked, inconsistent, refused change)."""


class RefusedChange(LibraryError):
    """A library change refused by a guard (outlier, ambiguous name); nothing was written."""
