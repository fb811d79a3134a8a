"""CSV tables: UTF-8, ISO 8601 UTC times, sensible rounding, empty cells for missing values, and text cells that
a spreadsheet cannot run as formulas.

Formula guard (on by default): a text cell (or column name) that starts with
``=``, ``+``, ``-``, ``@``, a tab, a carriage return (or, since line ends inside
a cell are written as ``\\n``, a line feed) is written with a leading
``'``, so that a spreadsheet shows it as text instead of evaluating it (a cell
that already starts with ``'`` before one of these gets one more, so reading back
is exact); this follows the OWASP
"CSV Injection" guidance (OWASP Foundation, https://owasp.org/www-community/attacks/CSV_Injection, read from
memory of the page, not re-checked). Numbers stay numbers: numeric columns are
never touched, nor is a text cell that is a plain number (``-12.5``, ``+3``).
dfkit's sheet reader removes the ``'`` again (:mod:`dfkit.io.sheet`), so its
own tables read back unchanged. ``guard_formulas=False`` (``--verbatim-csv``)
writes every cell exactly as it is.
"""

from __future__ import annotations

import csv
import io
import re

import numpy as np
import pandas as pd

from dfkit.export.atomic import atomic_write

_ROUNDING = {"lat": 7, "lon": 7, "true_bearing": 3, "declination": 3, "convergence": 4, "declination_sd": 3,
             "semi_major_m": 1, "semi_minor_m": 1, "orientation_deg": 1, "area_m2": 0, "sd_deg": 3,
             "crossing_deg": 1, "span_min": 1, "max_residual_deg": 2, "kappa": 1, "residual_deg": 3,
             "weight": 3, "range_m": 1, "region_area_m2": 0, "region_reach_m": 1, "cov_ee_m2": 2, "cov_en_m2": 2,
             "cov_nn_m2": 2}

#: First characters that make a spreadsheet treat a cell as a formula (OWASP CSV Injection guidance), plus the
#: line feed that a carriage return becomes when written.
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r", "\n")

# A cell a spreadsheet would run, or one that already looks guarded ('=x): both get one more ' so that reading
# back (which removes exactly one ') gives the cell as it was.
_FORMULA_START = re.compile("^'*[=+\\-@\t\r\n]")
_PLAIN_NUMBER = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$")


def _iso(series: pd.Series) -> pd.Series:
    """UTC times as ISO 8601 text ending in Z; '' where missing."""
    values = series.dt.tz_convert("UTC").dt.tz_localize(None).to_numpy(dtype="datetime64[s]")
    text = np.char.add(np.datetime_as_string(values, unit="s"), "Z")
    return pd.Series(np.where(np.isnat(values), "", text), index=series.index, dtype=object)


def neutralise_formulas(values: pd.Series, *, guard: bool = True) -> pd.Series:
    """Text cells a spreadsheet would run as a formula, prefixed with ``'``; other cells unchanged.

    Line ends inside a cell (``\\r\\n``, ``\\r``) are written as ``\\n`` whatever ``guard`` says: a bare
    carriage return would otherwise end the row for many readers.

    Parameters
    ----------
    values : pandas.Series
        A column; only its text cells can change.
    guard : bool
        Prefix the risky cells (False: only mend line ends).

    Returns
    -------
    pandas.Series
        The column with ``'`` before every text cell starting with ``=``, ``+``, ``-``,
        ``@``, tab or carriage return, except plain numbers (``-12.5``).

    >>> neutralise_formulas(pd.Series(["=1+2", "-12.5", "-x", "ok"])).tolist()
    ["'=1+2", '-12.5', "'-x", 'ok']
    """
    try:   # columns repeat a few values (labels, units): look at each distinct value once
        codes, uniques = pd.factorize(values.to_numpy(dtype=object))
    except TypeError:    # unhashable cells (lists): look at every cell
        codes, uniques = np.arange(len(values)), values.to_numpy(dtype=object)
    distinct = pd.Series(uniques, dtype=object)
    text = distinct.map(lambda v: isinstance(v, str)).to_numpy(dtype=bool)
    if not text.any():
        return values
    fixed = distinct.to_numpy(dtype=object).copy()
    cr = text & distinct.str.contains("\r", regex=False).fillna(False).to_numpy(dtype=bool)
    fixed[cr] = np.array([v.replace("\r\n", "\n").replace("\r", "\n") for v in fixed[cr]], dtype=object)
    risky = np.zeros(len(fixed), bool)
    if guard:
        mended = pd.Series(fixed, dtype=object)
        risky = text & mended.str.match(_FORMULA_START).fillna(False).to_numpy(dtype=bool)
        risky = risky & ~mended.str.match(_PLAIN_NUMBER).fillna(False).to_numpy(dtype=bool)
    if not (risky.any() or cr.any()):
        return values
    fixed[risky] = np.array(["'" + v for v in fixed[risky]], dtype=object)
    cells = values.to_numpy(dtype=object).copy()
    hit = codes >= 0
    cells[hit] = fixed[codes[hit]]
    return pd.Series(cells, index=values.index, name=values.name, dtype=object)


def _for_csv(df: pd.DataFrame, guard: bool) -> pd.DataFrame:
    out = df.copy()
    for c in out.columns:
        if isinstance(out[c].dtype, pd.DatetimeTZDtype):
            out[c] = _iso(out[c])
        elif c in _ROUNDING:
            out[c] = out[c].astype(float).round(_ROUNDING[c])
        elif out[c].dtype == object or pd.api.types.is_string_dtype(out[c].dtype):
            out[c] = neutralise_formulas(out[c], guard=guard)
    return out


def write_table(df: pd.DataFrame, path, *, guard_formulas: bool = True) -> None:
    """A table as UTF-8 CSV, written atomically.

    Parameters
    ----------
    df : pandas.DataFrame
        The table; timezone-aware times become ISO 8601 UTC text ending in ``Z``.
    path : str or os.PathLike
        The file to write (replaced whole, or left as it was on failure).
    guard_formulas : bool
        Prefix ``'`` to text cells a spreadsheet would run as formulas (see the
        module docstring). ``False`` writes text exactly as it is.
    """
    table = _for_csv(df, guard_formulas)
    header = neutralise_formulas(pd.Series([str(c) for c in table.columns], dtype=object),
                                 guard=guard_formulas).tolist()
    # dfkit's reader takes a line starting with '#' for a comment: quote text when the first column could start so.
    first = table.iloc[:, 0] if table.shape[1] else pd.Series([], dtype=object)
    hashed = (header[:1] and header[0].startswith("#")) or (
        (first.dtype == object or pd.api.types.is_string_dtype(first.dtype))
        and bool(first.astype(str).str.startswith("#").any()))
    quoting = csv.QUOTE_NONNUMERIC if hashed else csv.QUOTE_MINIMAL
    fast = quoting == csv.QUOTE_MINIMAL and table.shape[1] >= 2 and _formats_all(table)
    with atomic_write(path, newline="") as fh:
        if not fast:      # what the fast writer does not do: pandas writes it
            table.to_csv(fh, index=False, header=header, lineterminator="\n", quoting=quoting)
            return
        fh.write(",".join(_quoted(header)) + "\n")
        for start in range(0, len(table), _ROWS_PER_WRITE):
            cells = _text_columns(table.iloc[start:start + _ROWS_PER_WRITE])
            fh.write("\n".join(map(",".join, zip(*cells))))
            fh.write("\n")


#: Rows formatted into text at a time (bounds the memory a long table's text takes: about 2 MB per column).
_ROWS_PER_WRITE = 20_000

# What makes the csv module quote a cell under QUOTE_MINIMAL with ',' and '\n': the delimiter, the quote
# character and line-end characters (CPython's Modules/_csv.c, join_append_data; '\r' counted in too).
_NEEDS_QUOTES = re.compile('[,"\r\n]')


def _quoted(cells: list) -> list:
    """Cells as the csv module writes them under QUOTE_MINIMAL: the few that need quotes are handed to it."""
    out = list(cells)
    for k, v in enumerate(out):
        if _NEEDS_QUOTES.search(v):
            buf = io.StringIO()
            csv.writer(buf, lineterminator="\n").writerow([v, ""])
            out[k] = buf.getvalue()[:-2]      # the cell, without the empty neighbour and the line end
    return out


def _formats_all(table: pd.DataFrame) -> bool:
    """Whether :func:`_text_columns` formats every column: float64, integers, booleans, and text columns holding
    only str cells or missing values (anything else is left to pandas)."""
    for name in table.columns:
        col = table[name]
        if isinstance(col.dtype, np.dtype) and (col.dtype.kind in "iub" or col.dtype == np.float64):
            continue
        if not (col.dtype == object or pd.api.types.is_string_dtype(col.dtype)):
            return False
        values = col.to_numpy(dtype=object)
        if not set(map(type, values[~pd.isna(values)].tolist())) <= {str}:
            return False
    return True


def _text_columns(table: pd.DataFrame):
    """Every column as a list of the text pandas' ``to_csv`` writes for it (QUOTE_MINIMAL, ``na_rep=''``), for a
    table :func:`_formats_all` accepts.

    pandas turns float64 columns into text with numpy's ``astype(str)``, the shortest text that reads back
    as the same float, which is Python's ``repr`` (checked in tests/test_csv_writer.py against pandas
    itself); integers and booleans with ``str``; text as it is, missing values as ''."""
    out = []
    for name in table.columns:
        col = table[name]
        kind = col.dtype.kind
        if isinstance(col.dtype, np.dtype) and kind == "f" and col.dtype.itemsize == 8:
            values = col.to_numpy()
            # distinct by their bits, so that -0.0 and 0.0 (equal as numbers) keep their own text
            text = _per_value(values, repr, values.view(np.int64))
            if np.isnan(values).any():
                text = np.where(np.isnan(values), "", np.asarray(text, dtype=object)).tolist()
        elif isinstance(col.dtype, np.dtype) and kind in "iub":
            text = _per_value(col.to_numpy(), str)
        elif col.dtype == object or pd.api.types.is_string_dtype(col.dtype):
            values = col.to_numpy(dtype=object)
            missing = pd.isna(values)
            if missing.any():
                values = values.copy()
                values[missing] = ""
            text = values.tolist()
            if any(_NEEDS_QUOTES.search(v) for v in _distinct(values)):
                text = _per_value(values, lambda v: _quoted([v])[0])
        else:
            return None
        out.append(text)
    return out


def _distinct(values):
    return pd.unique(values) if len(values) else values


def _per_value(values: np.ndarray, fmt, keys=None) -> list:
    """``fmt`` of every cell, computed once per distinct value (or ``keys``) when a column repeats few values."""
    if len(values) > 1000:
        codes, uniques = pd.factorize(values if keys is None else keys, use_na_sentinel=False)
        if len(uniques) * 4 < len(values):
            first = np.zeros(len(uniques), np.int64)
            first[codes[::-1]] = np.arange(len(codes))[::-1]     # a cell of each distinct key
            return np.asarray([fmt(v) for v in values[first].tolist()], dtype=object)[codes].tolist()
    return list(map(fmt, values.tolist()))
