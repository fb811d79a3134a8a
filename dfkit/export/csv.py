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
    with atomic_write(path, newline="") as fh:
        table.to_csv(fh, index=False, header=header, lineterminator="\n", quoting=quoting)
