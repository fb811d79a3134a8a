"""File formats in: bearing sheets (CSV, spreadsheets, DataFrames) and GPS tracks (GPX).

:func:`read_table` is the one entry for any tabular input: it chooses the reader by
the file name's ending and by what the file really is (:mod:`dfkit.io.sniff`), so a
spreadsheet named ``.csv`` is still read as a spreadsheet, and a PDF or web page
gets one message instead of one error per line.
"""

from __future__ import annotations

import os

from dfkit.io.frame import read_frame
from dfkit.io.gpx import read_track
from dfkit.io.sheet import KNOWN_COLUMNS, RawSheet, read_sheet
from dfkit.io.sniff import NOT_A_SHEET, SPREADSHEET_KINDS, sniff
from dfkit.io.spreadsheet import SPREADSHEET_SUFFIXES, read_spreadsheet
from dfkit.problems import Problem, SheetError

__all__ = ["KNOWN_COLUMNS", "RawSheet", "read_frame", "read_sheet", "read_spreadsheet", "read_table", "read_track",
           "sniff"]


def read_table(source, *, worksheet: str | None = None, name: str | None = None, numeric=()) -> RawSheet:
    """Read any tabular input into text cells with line numbers.

    Parameters
    ----------
    source : path, bytes, binary file-like, pandas.DataFrame or RawSheet
        A CSV or spreadsheet file (.xlsx, .xlsm, .xls, .ods), its bytes, a DataFrame
        (rows numbered from 2), or an already-read sheet.
    worksheet : str, optional
        The sheet of a spreadsheet file to read (default: the first).
    name : str, optional
        Name used in messages.
    numeric : collection of str
        Columns a CSV sheet may hand over as floats when every cell is a finite plain number
        (see :func:`read_sheet`); spreadsheets and DataFrames are always read as text.

    Raises
    ------
    SheetError
        The input cannot be read as a sheet (missing, empty, not a sheet at all).
    """
    import pandas as pd

    if isinstance(source, RawSheet):
        return source
    if isinstance(source, pd.DataFrame):
        return read_frame(source, name=name or "DataFrame")
    if isinstance(source, (str, os.PathLike)):
        label = name or os.fspath(source)
        try:
            with open(source, "rb") as fh:
                data = fh.read()
        except OSError as err:
            raise SheetError(f"{label}: cannot read the file ({err.strerror or err})") from None
    elif isinstance(source, bytes):
        label, data = name or "", source
    else:
        got = source.read()
        label = name or getattr(source, "name", "") or ""
        if isinstance(got, str):
            return read_sheet(got.encode("utf-8"), name=label, numeric=numeric)
        data = got
    kind = sniff(data[:8192], data)
    suffix = os.path.splitext(os.fspath(source))[1].lower() if isinstance(source, (str, os.PathLike)) else ""
    if kind in SPREADSHEET_KINDS or (suffix in SPREADSHEET_SUFFIXES and kind not in ("text", "empty")):
        raw = read_spreadsheet(data, worksheet=worksheet, name=label)
        if suffix and suffix not in SPREADSHEET_SUFFIXES:
            raw.problems.insert(0, Problem(0, "", f"the file is a spreadsheet ({kind}) although its name ends in "
                                           f"'{suffix}'; it was read as a spreadsheet", "warning", raw.source))
        return raw
    if suffix in SPREADSHEET_SUFFIXES and kind == "text":
        raise SheetError(f"{label or 'the file'}: the name says spreadsheet ({suffix}) but the file is plain text; "
                         "if it is CSV, rename it to .csv")
    if kind in NOT_A_SHEET and kind != "empty":
        raise SheetError(f"{label or 'the input'} {NOT_A_SHEET[kind]}")
    if worksheet is not None:
        raise SheetError(f"{label or 'the input'}: --sheet names a worksheet, but this is a CSV file, not a spreadsheet")
    return read_sheet(data, name=label, numeric=numeric)
