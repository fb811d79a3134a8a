"""Typed cells (spreadsheet cells, DataFrame values) to the text cells every reader produces.

Numbers keep their shortest exact form (an integer-valued float is written as an
integer, so a fix label 1 stays '1'); dates and times become ISO 8601 text (without
an offset unless the value has one); empty cells, None and NaN/NaT become ''.
"""

from __future__ import annotations

import math
from datetime import date, datetime, time, timedelta

import numpy as np
import pandas as pd


def cell_text(v) -> str:
    """One typed value as text.

    >>> [cell_text(x) for x in (1.0, 0.25, None, True, datetime(2026, 5, 3, 6, 12))]
    ['1', '0.25', '', 'TRUE', '2026-05-03T06:12:00']
    """
    if v is None or v is pd.NaT:   # NaT is a datetime subclass: test it before the datetime branches
        return ""
    if isinstance(v, str):
        return v.strip()
    if isinstance(v, (bool, np.bool_)):
        return "TRUE" if v else "FALSE"
    if isinstance(v, (int, np.integer)):
        return str(int(v))
    if isinstance(v, (float, np.floating)):
        f = float(v)
        if math.isnan(f):
            return ""
        if math.isinf(f):
            return "inf" if f > 0 else "-inf"
        if f.is_integer() and abs(f) < 1e15:
            return str(int(f))
        return repr(f)
    if isinstance(v, pd.Timestamp):
        return "" if pd.isna(v) else v.isoformat()
    if isinstance(v, (datetime, date, time)):
        return v.isoformat()
    if isinstance(v, timedelta):
        return str(v)
    if not isinstance(v, (list, tuple, dict)) and pd.isna(v) is True:
        return ""
    return str(v).strip()


def column_text(values) -> np.ndarray:
    """A column of typed values (any pandas or numpy column) as an object array of text."""
    s = pd.Series(values)
    if pd.api.types.is_datetime64_any_dtype(s.dtype):
        out = np.array([cell_text(x) for x in s], dtype=object)
        return out
    if pd.api.types.is_float_dtype(s.dtype) or pd.api.types.is_integer_dtype(s.dtype):
        return np.array([cell_text(x) for x in s.to_numpy()], dtype=object)
    return np.array([cell_text(x) for x in s.to_numpy(dtype=object)], dtype=object)
