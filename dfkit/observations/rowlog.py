"""The row log: which rows are rejected and why, so no row disappears silently."""

from __future__ import annotations

import numpy as np

from dfkit.problems import Problem


class RowLog:
    """Collects problems and the per-row 'rejected' mask for one table.

    Parameters
    ----------
    lines : array_like of int
        Line (or spreadsheet row) number of every row, as the user sees it.
    source : str
        Name of the input, used in messages.
    """

    def __init__(self, lines, source: str = ""):
        self.lines = np.asarray(lines)
        self.bad = np.zeros(len(self.lines), bool)
        self._by_column: dict[str, np.ndarray] = {}
        self.problems: list[Problem] = []
        self.source = source

    def __len__(self) -> int:
        return len(self.lines)

    def reject(self, mask, column: str, messages) -> None:
        """Reject rows: each row gets at most one error per column (so a sheet can be
        mended in one pass without cascades), and row-level errors (``column=''``)
        only on rows that have none yet.

        ``messages`` is one text for all rows, an array indexed by row, or a callable
        taking the row indices and returning one text per row.
        """
        done = self.bad if not column else self._by_column.setdefault(column, np.zeros(len(self.bad), bool))
        idx = np.flatnonzero(np.asarray(mask, bool) & ~done)
        if not len(idx):
            return
        if column:
            done[idx] = True
        msgs = self._texts(messages, idx)
        for i, msg in zip(idx, msgs):
            self.problems.append(Problem(int(self.lines[i]), column, msg, "error", self.source))
        self.bad[idx] = True

    def warn(self, mask, column: str, messages, *, rejected_too: bool = False) -> None:
        """A warning on rows that are used (and on rejected rows too when asked)."""
        m = np.asarray(mask, bool)
        idx = np.flatnonzero(m if rejected_too else m & ~self.bad)
        for i, msg in zip(idx, self._texts(messages, idx)):
            self.problems.append(Problem(int(self.lines[i]), column, msg, "warning", self.source))

    def sheet_warning(self, message: str, line: int = 0, column: str = "") -> None:
        """A warning about the table as a whole (line 0 unless given)."""
        self.problems.append(Problem(int(line), column, message, "warning", self.source))

    def mask(self, idx) -> np.ndarray:
        """A row mask from row indices."""
        m = np.zeros(len(self.bad), bool)
        m[np.asarray(idx, dtype=np.int64)] = True
        return m

    @staticmethod
    def _texts(messages, idx):
        if callable(messages):
            return messages(idx)
        if isinstance(messages, np.ndarray):
            return messages[idx]
        return [messages] * len(idx)
