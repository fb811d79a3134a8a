"""Problems found in input: every rejected or doubtful row is reported, never dropped silently."""

from __future__ import annotations

from dataclasses import dataclass


class SheetError(Exception):
    """The input as a whole cannot be read (empty file, no header, duplicated column, ...).

    The CLI turns it into exit status 2 with the message; it is never a traceback.
    """


@dataclass(frozen=True)
class Problem:
    """One thing wrong (``severity='error'``: the row is not used) or worth knowing
    (``severity='warning'``: the row is used) about one row of a sheet.

    ``line`` counts physical lines of the file, the header being line 1; ``column``
    is the sheet's column name ('' when the problem concerns the whole row).
    """

    line: int
    column: str
    message: str
    severity: str = "error"
    source: str = ""

    def __str__(self) -> str:
        where = f"line {self.line}" if self.line else "sheet"
        if self.source:
            where = f"{self.source}: {where}"
        col = f", {self.column}" if self.column else ""
        tag = "" if self.severity == "error" else f" [{self.severity}]"
        return f"{where}{col}: {self.message}{tag}"


def errors(problems):
    """The problems that rejected a row."""
    return [p for p in problems if p.severity == "error"]


def rejected_lines(problems):
    """Sorted line numbers of rejected rows."""
    return sorted({p.line for p in problems if p.severity == "error" and p.line})
