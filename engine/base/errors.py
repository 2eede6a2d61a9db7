"""Exceptions a person can act on.

Every bad-input error carries where it happened (file, row, column) so that the CLI
can print one line and the dashboard can show the same line.
"""

from __future__ import annotations


class QuietgradeError(Exception):
    """Base class of every error the engine raises on purpose."""


class InputError(QuietgradeError):
    """Bad input data: a file, a row or a cell that cannot be accepted.

    Parameters
    ----------
    message : str
        What is wrong and what would be accepted.
    file : str, optional
        File name as the user gave it.
    row : int, optional
        1-based data row as a spreadsheet shows it (header is row 1).
    column : str, optional
        Column header as written in the file.
    """

    def __init__(
        self,
        message: str,
        *,
        file: str | None = None,
        row: int | None = None,
        column: str | None = None,
    ) -> None:
        self.file = file
        self.row = row
        self.column = column
        self.reason = message
        super().__init__(self.one_line())

    def one_line(self) -> str:
        where = []
        if self.file:
            where.append(str(self.file))
        if self.row is not None:
            where.append(f"row {self.row}")
        if self.column is not None:
            where.append(f"column '{self.column}'")
        prefix = ", ".join(where)
        return f"{prefix}: {self.reason}" if prefix else self.reason


class CriteriaError(QuietgradeError):
    """Bad selection criteria: unknown index, empty window, inverted range, bad formula."""


class LibraryError(QuietgradeError):
    """The material library cannot be opened or does not hold what was asked for."""


class FitError(QuietgradeError):
    """A master curve cannot be built from the data at hand."""


def reject_unknown(data: dict, known, what: str) -> None:
    """Raise CriteriaError naming any keys of ``data`` outside ``known``."""
    unknown = set(data) - set(known)
    if unknown:
        raise CriteriaError(
            f"unknown {what} {', '.join(sorted(unknown))}; known: {', '.join(sorted(known))}"
        )
