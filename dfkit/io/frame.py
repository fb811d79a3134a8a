"""A pandas DataFrame as a bearing sheet: its columns as the header, each row as a data row.

Row numbers follow the CSV the frame would be saved as with ``to_csv(index=False)``:
the header is line 1, the frame's first row line 2, its i-th row (0-based position)
line i + 2, whatever the frame's index is. Values are turned into text cells as a
spreadsheet's are (:mod:`dfkit.io.typed`); a tz-aware datetime column keeps its offset.
"""

from __future__ import annotations

import pandas as pd

from dfkit.io.sheet import RawSheet, _resolve_header
from dfkit.io.typed import column_text
from dfkit.problems import Problem


def read_frame(df: pd.DataFrame, *, name: str = "DataFrame") -> RawSheet:
    """Text cells of a DataFrame, numbered as lines 2, 3, ... (header line 1)."""
    problems: list[Problem] = []
    header = [str(c) for c in df.columns]
    columns = _resolve_header(header, 1, name, problems)
    table = pd.DataFrame({"line": pd.array(range(2, len(df) + 2), dtype="int64")})
    for j, col in enumerate(columns):
        table[col] = pd.Series(column_text(df.iloc[:, j]), dtype=object)
    if not len(table):
        problems.append(Problem(1, "", "the table has columns but no rows", "warning", name))
    return RawSheet(table=table, columns=columns, delimiter="", decimal_comma=False, problems=problems,
                    skipped_lines=0, source=name)
