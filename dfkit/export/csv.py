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
             "cov_nn_m2": 2, "wild_risk": 4, "region_level": 4}

#: First characters that make a spreadsheet treat a cell as a formula (OWASP CSV Injection guidance), plus the
#: line feed that a carriage return becomes when written.
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r", "\n")

# A cell a spreadsheet would run, or one that already looks guarded ('=x): both get one more ' so that reading
# back (which removes exactly one ') gives the cell as it was.
_FORMULA_START = re.compile("^'*[=+\\-@\t\r\n]")
# In cells joined after a NUL each (see _joined): a cell that starts with a formula character or a ', or a CR.
_GUARD_CANDIDATE = re.compile("\x00['=+\\-@\t\r\n]|\r")
# The characters in _GUARD_CANDIDATE (searched for one by one by _nothing_to_guard).
_GUARD_CHARS = "'=+-@\t\r\n"
_PLAIN_NUMBER = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$")


def _iso(series: pd.Series) -> pd.Series:
    """UTC times as ISO 8601 text ending in Z; '' where missing."""
    values = series.dt.tz_convert("UTC").dt.tz_localize(None).to_numpy(dtype="datetime64[s]")
    if np.isnat(values).all():
        return pd.Series(np.full(len(values), "", dtype=object), index=series.index, dtype=object)
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
    if _nothing_to_guard(values):
        return values
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


def _nothing_to_guard(values: pd.Series) -> bool:
    """Whether a column is all text in which no cell starts with a formula character or a ``'`` and none holds a
    carriage return (searches of the joined cells; False means: look cell by cell).

    What :data:`_GUARD_CANDIDATE` finds, found by plain substring searches: most columns (labels, words, empty
    cells) hold none of these characters anywhere, which one scan per character settles; only characters that
    occur are looked for after a NUL (a cell's start). The regular expression took about 14 ns a character."""
    joined = _joined(values.to_numpy(dtype=object))
    if joined is None:
        return False
    present = [ch for ch in _GUARD_CHARS if ch in joined]
    return "\r" not in present and not any("\x00" + ch in joined for ch in present)


def _for_csv(df: pd.DataFrame, guard: bool) -> pd.DataFrame:
    out = df.copy(deep=False)      # copy on write: the caller's table is not changed
    for c, dtype in zip(out.columns, out.dtypes):     # the dtypes once (a column looked up costs ~50 us)
        if isinstance(dtype, pd.DatetimeTZDtype):
            out[c] = _iso(out[c])
        elif c in _ROUNDING:
            out[c] = out[c].astype(float).round(_ROUNDING[c])
        elif dtype == object or pd.api.types.is_string_dtype(dtype):
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
    if len(df) > _ROWS_PER_WRITE and df.shape[1] >= 2 and _prepared_formats_all(df):
        _write_in_parts(df, path, guard_formulas)
        return
    table = _for_csv(df, guard_formulas)
    header = _header(table, guard_formulas)
    quoting = csv.QUOTE_NONNUMERIC if _hashed(header, table) else csv.QUOTE_MINIMAL
    fast = quoting == csv.QUOTE_MINIMAL and table.shape[1] >= 2 and _formats_all(table)
    with atomic_write(path, newline="") as fh:
        if not fast:      # what the fast writer does not do: pandas writes it
            table.to_csv(fh, index=False, header=header, lineterminator="\n", quoting=quoting)
            return
        fh.write(",".join(_quoted(header)) + "\n")
        tables = _DigitTables()
        for start in range(0, len(table), _ROWS_PER_WRITE):
            part = table.iloc[start:start + _ROWS_PER_WRITE]
            _write_rows(fh, _text_columns(part, tables), len(part))


def _write_in_parts(df: pd.DataFrame, path, guard: bool) -> None:
    """:func:`write_table` of a long table the fast writer formats whole: each part of _ROWS_PER_WRITE rows is
    prepared (:func:`_for_csv`: ISO times, rounding, formula guard) only when it is written, so that no prepared
    copy of the whole table is held (every cell's text depends on that cell alone: the same bytes)."""
    header = _header(df, guard)
    # the first column decides the quoting, as prepared for the whole table (one column)
    first = _for_csv(df.iloc[:, :1], guard)
    if _hashed(header, first):        # quoted throughout: pandas writes it
        table = _for_csv(df, guard)
        with atomic_write(path, newline="") as fh:
            table.to_csv(fh, index=False, header=header, lineterminator="\n", quoting=csv.QUOTE_NONNUMERIC)
        return
    del first
    with atomic_write(path, newline="") as fh:
        fh.write(",".join(_quoted(header)) + "\n")
        tables = _DigitTables()
        for start in range(0, len(df), _ROWS_PER_WRITE):
            part = _for_csv(df.iloc[start:start + _ROWS_PER_WRITE], guard)
            _write_rows(fh, _text_columns(part, tables), len(part))


def _header(table: pd.DataFrame, guard: bool) -> list:
    return neutralise_formulas(pd.Series([str(c) for c in table.columns], dtype=object), guard=guard).tolist()


def _hashed(header: list, table: pd.DataFrame) -> bool:
    """Whether the header's or the first column's text could start with '#' (dfkit's reader takes such a line
    for a comment: the table is then quoted throughout)."""
    first = table.iloc[:, 0] if table.shape[1] else pd.Series([], dtype=object)
    return bool((header[:1] and header[0].startswith("#")) or (
        (first.dtype == object or pd.api.types.is_string_dtype(first.dtype)) and _any_starts_with_hash(first)))


def _prepared_formats_all(df: pd.DataFrame) -> bool:
    """Whether :func:`_formats_all` accepts ``_for_csv(df)``, told from ``df`` itself: zone-aware times become
    text, numeric columns in _ROUNDING float64, and text columns keep their kind of cells (the formula guard
    turns text into text). False where the answer would need the prepared table (then it is prepared whole)."""
    for name in df.columns:
        col = df[name]
        if isinstance(col.dtype, pd.DatetimeTZDtype):
            continue
        if name in _ROUNDING:
            if isinstance(col.dtype, np.dtype) and col.dtype.kind in "iufb":
                continue
            return False
        if not _formats_all(df[[name]]):
            return False
    return True


def _any_starts_with_hash(col: pd.Series) -> bool:
    """Whether a cell of a text column starts with '#' as text (``str(cell)``; missing cells never do)."""
    values = col.to_numpy(dtype=object)
    joined = _joined(values)
    if joined is not None:
        return "\x00#" in joined and bool(pd.Series(values, dtype=object).str.startswith("#").fillna(False).any())
    return bool(col.astype(str).str.startswith("#").any())


def _joined(values):
    """The cells of an object array joined after a NUL each (``'\\x00a\\x00b'``), so that one substring search
    answers "does any cell start with (or hold) this"; None when a cell is not a str."""
    try:
        return "\x00" + "\x00".join(values.tolist())
    except TypeError:
        return None


#: Rows formatted into text at a time (bounds the memory a long table's text takes: about 2 MB per column).
_ROWS_PER_WRITE = 20_000

# What makes the csv module quote a cell under QUOTE_MINIMAL with ',' and '\n': the delimiter, the quote
# character and line-end characters (CPython's Modules/_csv.c, join_append_data; '\r' counted in too).
_NEEDS_QUOTES = re.compile('[,"\r\n]')


def _quoted(cells: list) -> list:
    """Cells as the csv module writes them under QUOTE_MINIMAL: a cell holding a comma, a quote or a line feed in
    quotes with its quotes doubled, as that module's writer does (Modules/_csv.c, join_append_data); the rare
    cells holding a carriage return or a NUL are handed to it."""
    out = list(cells)
    for k, v in enumerate(out):
        if not _NEEDS_QUOTES.search(v):
            continue
        if "\r" not in v and "\x00" not in v:
            # the csv module's quoting of such a cell (default dialect, lineterminator "\n"): in quotes, each quote
            # doubled (tests/test_csv_writer.py compares the two)
            out[k] = '"' + v.replace('"', '""') + '"'
        else:
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
        if isinstance(col.dtype, pd.StringDtype):     # str cells or missing values by its definition
            continue
        if not (col.dtype == object or pd.api.types.is_string_dtype(col.dtype)):
            return False
        values = col.to_numpy(dtype=object)
        if _joined(values) is None and not set(map(type, values[~pd.isna(values)].tolist())) <= {str}:
            return False
    return True


#: Rows joined into one text at a time out of the formatted pieces of a part (bounds the list of pieces' cells
#: that str.join takes and the text; the formatting itself is done per part of _ROWS_PER_WRITE rows).
_ROWS_PER_JOIN = 2_500


def _write_rows(fh, columns, n: int) -> None:
    """Write the CSV rows of ``n`` rows from the columns' pieces (:func:`_text_columns`), joined a few thousand
    rows at a time: the pieces of a row are its text in order. Pieces that are one text for every row and stand
    next to each other are joined first (each piece costs a list per join)."""
    pieces = []
    for p in (p for column in columns for p in column):
        if isinstance(p, str) and pieces and isinstance(pieces[-1], str):
            pieces[-1] += p
        else:
            pieces.append(p)
    width = len(pieces)
    for start in range(0, n, _ROWS_PER_JOIN):
        stop = min(n, start + _ROWS_PER_JOIN)
        cells = [None] * ((stop - start) * width)
        for k, p in enumerate(pieces):
            cells[k::width] = [p] * (stop - start) if isinstance(p, str) else p[start:stop].tolist()
        fh.write("".join(cells))


def _text_columns(table: pd.DataFrame, tables: _DigitTables | None = None):
    """Every column as the text pandas' ``to_csv`` writes for it (QUOTE_MINIMAL, ``na_rep=''``) followed by the
    delimiter (a line end after the last column), for a table :func:`_formats_all` accepts: per column a list of
    pieces (object arrays, or one str for every row), a cell's text being its pieces one after the other.

    pandas turns float64 columns into text with numpy's ``astype(str)``, the shortest text that reads back
    as the same float, which is Python's ``repr`` (checked in tests/test_csv_writer.py against pandas
    itself): see :func:`_float_pieces`; integers and booleans with ``str``; text as it is, missing values as ''.
    A column whose cells are all the same (:func:`_all_same`: a method, an SD source, an empty column) is its
    first cell's text, one str for every row (a cell's text depends on that cell alone)."""
    tables = tables or _DigitTables()
    out = []
    for j, name in enumerate(table.columns):
        end = "\n" if j == table.shape[1] - 1 else ","
        col = table[name]
        if len(col) > 1 and _all_same(col):
            one = _column_pieces(col.iloc[:1], tables, end)
            pieces = None if one is None else ["".join(p if isinstance(p, str) else p[0] for p in one)]
        else:
            pieces = _column_pieces(col, tables, end)
        if pieces is None:
            return None
        out.append(pieces)
    return out


def _column_pieces(col: pd.Series, tables: _DigitTables, end: str):
    """One column's pieces for :func:`_text_columns` (None for a kind it does not format)."""
    kind = col.dtype.kind
    if isinstance(col.dtype, np.dtype) and kind == "f" and col.dtype.itemsize == 8:
        return _float_pieces(col.to_numpy(), tables, end)
    if isinstance(col.dtype, np.dtype) and kind == "b":
        return [np.array(["False" + end, "True" + end], dtype=object)[col.to_numpy().astype(np.intp)]]
    if isinstance(col.dtype, np.dtype) and kind in "iu" and _small_ints(col.to_numpy()):
        return _int_pieces(col.to_numpy().astype(np.int64), tables, suffix=end)
    if isinstance(col.dtype, np.dtype) and kind in "iu":
        return [np.array([str(v) + end for v in col.to_numpy().tolist()], dtype=object)]
    if col.dtype == object or pd.api.types.is_string_dtype(col.dtype):
        return [_plain_text(col.to_numpy(dtype=object)), end]
    return None


def _all_same(col: pd.Series) -> bool:
    """Whether every cell of a column is written as the same text: numbers of the same bits (so that -0.0 and
    0.0, equal as numbers, differ; NaNs of other bits too, which only costs the shortcut), or text cells that are
    all the same str. A middle and the last cell are compared with the first before the whole column, so most
    columns are told at once."""
    dtype = col.dtype
    numbers = isinstance(dtype, np.dtype) and dtype.kind in "fiub"
    if numbers:
        values = col.to_numpy()
        if dtype.kind == "f":
            if dtype.itemsize not in (2, 4, 8):
                return False
            values = values.view(f"i{dtype.itemsize}")
    elif dtype == object or pd.api.types.is_string_dtype(dtype):
        values = col.to_numpy(dtype=object)
        if not isinstance(values[0], str):
            return False
    else:
        return False
    n = len(values)
    first = values[0]
    if numbers:
        return bool(values[n // 2] == first and values[n - 1] == first and (values == first).all())
    if not all(isinstance(v, str) and v == first for v in (values[n // 2], values[n - 1])):   # pd.NA: no bool
        return False
    joined = _joined(values)
    return joined is not None and joined == ("\x00" + first) * n


def _plain_text(values: np.ndarray) -> np.ndarray:
    """A text column's cells, missing ones as '', quoted as the csv module quotes them where needed."""
    joined = _joined(values)
    if joined is None:     # missing cells
        values = values.copy()
        values[pd.isna(values)] = ""
        joined = _joined(values)
    if any(ch in joined for ch in ',"\r\n'):
        return np.asarray(_per_value(values, lambda v: _quoted([v])[0]), dtype=object)
    return values


class _DigitTables:
    """Texts of the numbers 0 to 10**digits - 1 in the forms the writer pieces cells from, built once per table
    written and shared by its columns."""

    def __init__(self):
        self._made = {}

    def get(self, digits: int, form: str, suffix: str = "") -> np.ndarray:
        """Texts indexed by the number, each followed by ``suffix``. ``form``: 'plain' (``str``), 'minus'
        (``'-' + str``), 'padded' (zero-padded to ``digits``), 'decimals' ('.' and the zero-padded digits),
        'short' ('.' and the digits without trailing zeros, '.0' for none), 'rest' (the zero-padded digits
        without trailing zeros, '' for none)."""
        key = (digits, form, suffix)
        if key not in self._made:
            n = range(10 ** digits)
            texts = {"plain": lambda: map(str, n), "minus": lambda: ("-" + str(f) for f in n),
                     "padded": lambda: (str(f).zfill(digits) for f in n),
                     "decimals": lambda: ("." + str(f).zfill(digits) for f in n),
                     "short": lambda: ("." + (str(f).zfill(digits).rstrip("0") or "0") for f in n),
                     "rest": lambda: (str(f).zfill(digits).rstrip("0") for f in n)}[form]()
            self._made[key] = np.array([t + suffix for t in texts], dtype=object)
        return self._made[key]

    def group(self, suffix: str = "") -> np.ndarray:
        """One table of a three-digit group's texts, each followed by ``suffix``: 'plain' at 0-999, 'minus' at
        1000-1999, 'padded' at 2000-2999 and '' at 3000 (a group not written)."""
        key = (3, "group", suffix)
        if key not in self._made:
            self._made[key] = np.concatenate([self.get(3, "plain", suffix), self.get(3, "minus", suffix),
                                              self.get(3, "padded", suffix), np.array([""], dtype=object)])
        return self._made[key]

    def both(self, digits: int) -> np.ndarray:
        """'decimals' of ``digits`` digits at 0 to 10**digits - 1, then 'short' (no suffix)."""
        key = (digits, "both", "")
        if key not in self._made:
            self._made[key] = np.concatenate([self.get(digits, "decimals"), self.get(digits, "short")])
        return self._made[key]


def _int_pieces(values: np.ndarray, tables: _DigitTables, negative=None, suffix: str = "") -> list:
    """``str`` of every integer as pieces of three digits each (``12345`` -> ``'12'``, ``'345'``), taken from
    tables; ``negative`` marks cells written with a '-' (by default those below 0; it may mark zeros: ``'-0'``);
    the last piece ends in ``suffix``. Each piece is one lookup in the group table (:meth:`_DigitTables.group`)
    at an index worked out in integers."""
    negative = values < 0 if negative is None else negative
    size = np.abs(values)
    top = int(size.max()) if len(size) else 0
    groups = max(1, (len(str(top)) + 2) // 3)
    digits = [(size // 1000 ** (groups - 1 - k)) % 1000 for k in range(groups)]
    lead = np.full(len(values), groups - 1)       # the first group written (the last one for a zero)
    for k in range(groups - 2, -1, -1):
        lead[digits[k] != 0] = k
    signed = np.where(negative, 1000, 0)           # the 'minus' block of the group table
    pieces = []
    for k, g in enumerate(digits):
        table = tables.group(suffix if k == groups - 1 else "")
        if groups == 1:
            index = g + signed
        else:    # the first group written plain or signed, later ones padded, earlier ones empty
            index = np.where(lead == k, g + signed, np.where(lead < k, g + 2000, 3000))
        pieces.append(table[index])
    return pieces


#: Most decimals :func:`_float_pieces` writes from digit tables (the fix table's coordinates have 7).
_MAX_DECIMALS = 7
#: Cells of a column (its first ones) whose fewest decimals :func:`_decimals` finds before the whole column's.
_SAMPLE = 2048


def _decimals(values: np.ndarray):
    """The fewest decimals ``d`` (up to :data:`_MAX_DECIMALS`) that every float written in positional form
    (finite, ``1e-4 <= |v| < 1e16`` or 0) has: ``(d, the cells that have it, the cells as integers of
    10**-d)``, or None."""
    with np.errstate(invalid="ignore", over="ignore"):
        usable = np.isfinite(values) & ((np.abs(values) >= 1e-4) | (values == 0))
        # the fewest decimals of a sample of the usable cells first: the column needs at least as many (a cell that
        # does not fit d decimals in the sample does not in the column), so the column is tried from there on
        start = 0
        sample = values[np.flatnonzero(usable[:_SAMPLE])]
        for d in range(_MAX_DECIMALS + 1):
            scaled = np.rint(sample * 10.0 ** d)
            if ((scaled / 10.0 ** d == sample) & (np.abs(scaled) < 2.0 ** 52)).all():
                break
            start = d + 1
        for d in range(start, _MAX_DECIMALS + 1):
            scaled = np.rint(values * 10.0 ** d)
            fits = usable & (scaled / 10.0 ** d == values) & (np.abs(scaled) < 2.0 ** 52)
            if np.array_equal(fits, usable):
                return d, fits, np.abs(np.where(fits, scaled, 0.0)).astype(np.int64)
    return None


def _float_pieces(values: np.ndarray, tables: _DigitTables, suffix: str = "") -> list:
    """``repr`` of every float ('' for NaN) as pieces, the last ending in ``suffix``, without calling ``repr`` per
    cell where it can be avoided.

    A float ``v`` with ``rint(v * 10**d) / 10**d == v`` (computed in floating point, which rounds correctly) is
    the float nearest the decimal ``i / 10**d``; when ``|i| < 2**52`` no other decimal of ``d`` places, nor
    any shorter one, reads back as ``v`` (the gap between floats near ``v`` is below ``10**-d``), so that decimal
    is ``v``'s shortest round-tripping text, which ``repr`` writes in positional form for
    ``1e-4 <= |v| < 1e16`` (and for 0), with at least one decimal (``'12.0'``) and ``-`` for a set sign bit
    (``'-0.0'``). The smallest such ``d`` is found for the whole column (:func:`_decimals`); a cell's text is
    then its integer part (:func:`_int_pieces`), the first digits of its fraction and the last three (trailing
    zeros dropped), each taken from a table. Other cells (NaN, infinities, tiny or huge values) get ``repr``.
    """
    found = _decimals(values)
    if found is None:
        return [_float_repr(values, suffix)]
    d, fits, ints = found
    whole, frac = np.divmod(ints, 10 ** d)
    pieces = _int_pieces(whole, tables, negative=np.signbit(values) & fits)
    if d <= 4:
        pieces.append(tables.get(d, "short", suffix)[frac])
    else:       # fraction tables of d digits would be too long: its first d - 3 digits, then the last 3
        high, low = np.divmod(frac, 1000)
        both = tables.both(d - 3)    # 'decimals' and then 'short': the latter where the last three are zeros
        pieces.append(both[high + np.where(low != 0, 0, 10 ** (d - 3))])
        pieces.append(tables.get(3, "rest", suffix)[low])
    other = np.flatnonzero(~fits)
    if len(other):
        pieces[0][other] = _float_repr(values[other], suffix if len(pieces) == 1 else "")
        for p in pieces[1:]:
            p[other] = suffix if p is pieces[-1] else ""
    return pieces


def _float_repr(values: np.ndarray, suffix: str = "") -> np.ndarray:
    """``repr`` of every float, '' for NaN (once per distinct value when the column repeats few), then ``suffix``."""
    # distinct by their bits, so that -0.0 and 0.0 (equal as numbers) keep their own text
    text = np.asarray(_per_value(values, lambda v: repr(v) + suffix, values.view(np.int64)), dtype=object)
    text[np.isnan(values)] = suffix
    return text


def _per_value(values: np.ndarray, fmt, keys=None) -> list:
    """``fmt`` of every cell, computed once per distinct value (or ``keys``) when a column repeats few values."""
    if len(values) > 1000:
        codes, uniques = pd.factorize(values if keys is None else keys, use_na_sentinel=False)
        if len(uniques) * 4 < len(values):
            first = np.zeros(len(uniques), np.int64)
            first[codes[::-1]] = np.arange(len(codes))[::-1]     # a cell of each distinct key
            return np.asarray([fmt(v) for v in values[first].tolist()], dtype=object)[codes].tolist()
    return list(map(fmt, values.tolist()))


def _small_ints(v) -> bool:
    """Whether every integer lies within +-2**62 (no absolute value: that of int64's minimum overflows)."""
    return bool(len(v) == 0 or (-(2 ** 62) < int(v.min()) and int(v.max()) < 2 ** 62))
