"""Text cells to numbers and angles, as people write them.

Every parser here is vectorised: the common case (plain numbers) is parsed in C by
pandas, and only the cells that fail go through Python, once per distinct value.
Each returns :class:`Cells`: values, which cells were empty, and a message for each
cell that could not be read ('' when fine).

Angles (:func:`angles`) accept decimal degrees and sexagesimal forms with symbols
or spaces and a hemisphere letter before or after: ``48.9687``, ``-48.9687``,
``48.9687N``, ``N48.9687``, ``48°58'07.4"N``, ``48°58.123'N``, ``N48 58.123``,
``48 58 7.4 N``, ``48:58:07.4``, ``48d58'07.4"``. Minutes and seconds must be below
60 and only the last part may have decimals. These are the forms of the EPSG
units of measure 9116-9120 (degree-minute and degree-minute-second with a hemisphere
letter before or after; EPSG Geodetic Parameter Dataset: 9118 and 9119 checked on
the registry's pages, the others from memory) and of the examples
in GeographicLib's GeoConvert(1) manual ("33d18'N 44d24'E", "E44.4 N33.3",
"33:18 44:24"). The letter O is not read as west: it means west in Spanish (oeste)
and east in German (Ost).

**Packed** degrees and minutes (``4751.6N``, ``01509.6E``) and degrees, minutes and
seconds (``475136N``, ``0800512W``), without separators, as NMEA 0183 writes
positions (latitude ``ddmm.mmmm`` and longitude ``dddmm.mmmm``, the hemisphere in its
own field: NMEA 0183 v4.10, sentence GGA/RMC [from memory]), are read by
:func:`packed_angle`, never as decimal degrees: see its docstring for the rule.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

import numpy as np
import pandas as pd


class _Refused:
    """For parsed cells with ``error`` (a message per cell, '' where read) and ``known_bad`` (the mask of refused
    cells when already known, else None): :attr:`bad`, worked out at most once."""

    @property
    def bad(self) -> np.ndarray:
        """Cells refused (``error`` not '')."""
        if self.known_bad is None:
            self.known_bad = self.error != ""
        return self.known_bad


@dataclass
class Cells(_Refused):
    """Parsed cells: ``values`` (NaN where empty or unreadable), ``empty`` and ``error``
    (one message per cell, '' when the cell was read)."""

    values: np.ndarray
    empty: np.ndarray
    error: np.ndarray
    packed: np.ndarray | None = None    # angles only: cells read as packed degrees-minutes(-seconds)
    known_bad: np.ndarray | None = field(default=None, repr=False, compare=False)   # ``bad``, when already known


def column(table: pd.DataFrame, name: str) -> np.ndarray:
    """The text cells of a column, or '' everywhere when the table has no such column.

    A column the sheet reader already read as numbers (``RawSheet.numeric``: every cell a finite plain
    number) comes back as its float array; :func:`numbers` and :func:`angles` take it as it is, and it
    compares unequal to '' everywhere (no cell is empty).
    """
    if name in table.columns:
        col = table[name]
        if col.dtype.kind == "f":
            return col.to_numpy(dtype=float)
        return col.to_numpy(dtype=object)
    return filled(len(table), "")


def filled(n, value) -> np.ndarray:
    """An object array of ``n`` times the one string ``value`` (``np.full`` would make a string per row)."""
    out = np.empty(n, dtype=object)
    out[:] = value
    return out


#: Whether pandas copies a column on its first change when other columns share its array (copy-on-write, always on
#: from pandas 3): only then may table columns of one and the same value share one array.
SHARES_ON_WRITE = int(pd.__version__.split(".")[0]) >= 3


def text_column(cells: np.ndarray):
    """Text cells (str, or missing) as the column pandas makes of them in a table, made without inferring their type
    cell by cell: with pandas 3 its ``str`` array straight from the cells (sharing them, as the inferred one does;
    a third of the time for 400,000 labels, a fifth for one word repeated); with pandas 2, or no cells (an empty
    column is inferred as ``object``), the cells as they are. Only for cells known to be text: pandas would infer
    another type from, say, numbers among them."""
    if not SHARES_ON_WRITE or not len(cells):
        return cells
    return pd.Series(cells, dtype="str", copy=False)


def same_value_columns(n: int):
    """A maker of columns of ``n`` rows that all hold one value: ``make(value, dtype)`` gives a Series, the same one
    for the same value and dtype, so that a table whose columns take them (``pd.DataFrame({...})``,
    ``table[c] = ...``) keeps one array for all of them (8 bytes a row saved per further column: 3 MB per
    400,000 rows). pandas copies a shared column before its first change (copy-on-write), so a cell changed in one
    column changes no other. Without copy-on-write (pandas 2) every call gives a column of its own."""
    made: dict = {}

    def make(value, dtype) -> pd.Series:
        key = (type(value), value if value == value else "nan", str(dtype))     # the text "nan" is no NaN
        if key not in made or not SHARES_ON_WRITE:
            values = filled(n, value) if dtype == "str" else np.full(n, value, dtype=dtype)
            made[key] = pd.Series(values, dtype=dtype, copy=False)
        return made[key]
    return make


def pick(mask, yes, no) -> np.ndarray:
    """``np.where(mask, yes, no)`` for two strings, as an object array holding the two strings themselves
    (``np.where(...).astype(object)`` makes a new string per row: 20 MB per 400,000 rows)."""
    out = filled(len(mask), no)
    out[np.asarray(mask, bool)] = yes
    return out


def per_value(cells, func):
    """Apply ``func`` once per distinct cell value (columns like unit or north repeat a few values)."""
    codes, uniques = pd.factorize(np.asarray(cells, dtype=object))
    mapped = np.empty(len(uniques), dtype=object)
    for k, u in enumerate(uniques):
        mapped[k] = func(u)
    return mapped[codes] if len(codes) else np.zeros(0, dtype=object)


def canonical(cells, aliases: dict, default: str):
    """Map spellings to canonical words (``'Mag'`` -> ``'magnetic'``); returns (words, unknown mask).
    Empty cells take ``default``; unknown ones also get ``default`` (the row is rejected by the caller)."""
    cells = np.asarray(cells, dtype=object)
    if "" not in aliases and not (cells != "").any():        # an empty or absent column: the default everywhere
        return filled(len(cells), default), np.zeros(len(cells), bool)
    low = per_value(cells, lambda u: str(u).strip().lower())
    canon = per_value(low, lambda u: aliases.get(u, default if u == "" else None))
    unknown = pd.isna(canon).astype(bool) if len(canon) else np.zeros(0, bool)
    out = canon.copy()
    out[unknown] = default
    return out, unknown


_DEC_COMMA = re.compile(r"^[+-]?\d*,\d+$")
_SPELLED_NON_FINITE = {"nan", "inf", "-inf", "+inf", "infinity", "-infinity", "+infinity"}


def numbers(cells, decimal_comma: bool = False) -> Cells:
    """Text cells to floats: plain numbers in C, the rest once per distinct value.

    A trailing degree sign is allowed; a decimal comma is read in sheets that allow it
    (semicolon- or tab-separated) and explained elsewhere; NaN and infinity are refused.
    """
    return _fast_then_slow(cells, lambda u: _one_number(u, decimal_comma))


def _fast_then_slow(cells, one) -> Cells:
    """Plain numbers parsed in C; every other non-empty cell by ``one(text) -> (value, error)`` once per
    distinct value (``error`` None: the cell is empty after all). Cells already read as floats by the sheet
    reader (see :func:`column`) are taken as they are: NaN as empty, infinity refused."""
    if isinstance(cells, np.ndarray) and cells.dtype.kind == "f":
        values = cells.astype(float, copy=True)
        empty = np.isnan(values)
        error = filled(len(values), "")
        inf = np.isinf(values)
        error[inf] = [f"'{v}' is not a finite number" for v in values[inf]]
        values[inf] = np.nan
        return Cells(values, empty, error, known_bad=inf)
    cells = np.asarray(cells, dtype=object)
    fast = pd.to_numeric(pd.Series(cells, dtype=object), errors="coerce").to_numpy(dtype=float, copy=True)
    empty = cells == ""
    slow = ~np.isfinite(fast) & ~empty
    error = filled(len(cells), "")
    bad = np.zeros(len(cells), bool)
    if slow.any():
        res = per_value(cells[slow], one)
        fast[slow] = [v for v, _ in res]
        empty[slow] = [e is None for _, e in res]
        error[slow] = ["" if e is None else e for _, e in res]
        bad[slow] = error[slow] != ""
    return Cells(np.where(empty | bad, np.nan, fast), empty, error, known_bad=bad)


def _one_number(text, decimal_comma):
    s = str(text).strip().replace("\u2212", "-").rstrip("°º").strip()
    if s == "":
        return np.nan, None
    if s.lower() in _SPELLED_NON_FINITE:
        return np.nan, f"'{text}' is not a finite number"
    is_dc = bool(_DEC_COMMA.match(s))
    if is_dc and decimal_comma:
        s = s.replace(",", ".")
    try:
        v = float(s)
    except ValueError:
        hint = (" (a decimal comma: use a point, or a semicolon-separated sheet)" if is_dc and not decimal_comma
                else "")
        return np.nan, f"'{text}' is not a finite number{hint}"
    if not np.isfinite(v):
        return np.nan, f"'{text}' is not a finite number"
    return v, ""


# --------------------------------------------------------------------------- angles

_PRIMES = str.maketrans({"\u2032": "'", "\u2019": "'", "\u2018": "'", "\u02b9": "'", "`": "'", "\u00b4": "'",
                         "\u2033": '"', "\u201d": '"', "\u201c": '"', "\u02ba": '"',
                         "\u00ba": "°", "\u02da": "°", "\u2070": "°", "\u2212": "-"})
_HEMI_FIRST = re.compile(r"^([NSEWnsew])\s*(.+)$")
_HEMI_LAST = re.compile(r"^(.+?)\s*([NSEWnsew])$")
_PART = re.compile(r"\s*(\d+(?:\.\d*)?|\.\d+)\s*(°|d|deg|'|\"|:)?")
_MARK = {"°": 0, "d": 0, "deg": 0, "'": 1, '"': 2}
_SIGN = {"N": 1, "S": -1, "E": 1, "W": -1}
_AXIS = {"N": "lat", "S": "lat", "E": "lon", "W": "lon"}


def parse_angle(text: str, *, decimal_comma: bool = False):
    """One angle as written to ``(degrees, axis, error)``.

    ``axis`` is 'lat' for an N/S letter, 'lon' for E/W, '' without one; ``error`` is ''
    when the text was read. See the module docstring for the accepted forms.

    >>> deg, axis, _ = parse_angle("48°58'07.4\\"N")
    >>> round(deg, 9), axis        # 48 + 58/60 + 7.4/3600
    (48.968722222, 'lat')
    >>> deg, axis, _ = parse_angle("W 3 30.5")
    >>> round(deg, 9), axis        # -(3 + 30.5/60)
    (-3.508333333, 'lon')
    """
    raw = str(text)
    s = raw.strip().translate(_PRIMES).replace("''", '"')
    if decimal_comma:
        s = s.replace(",", ".")
    letter = ""
    m = _HEMI_FIRST.match(s)
    if m and not s[:1].isdigit():
        letter, s = m.group(1).upper(), m.group(2)
    m2 = _HEMI_LAST.match(s)
    if m2:
        if letter:
            return np.nan, "", f"'{raw}' has two hemisphere letters"
        letter, s = m2.group(2).upper(), m2.group(1)
    s = s.strip()
    sign = 1.0
    if s[:1] in "+-":
        sign = -1.0 if s[0] == "-" else 1.0
        s = s[1:]
    parts = []
    pos = 0
    while pos < len(s):
        pm = _PART.match(s, pos)
        if not pm or pm.end() == pos:
            return np.nan, "", _not_angle(raw)
        parts.append((pm.group(1), pm.group(2) or ""))
        pos = pm.end()
        if pos < len(s) and s[pos] in ",;":
            return np.nan, "", _not_angle(raw)
    if not parts or len(parts) > 3:
        return np.nan, "", _not_angle(raw)
    slots = [None, None, None]
    any_mark = any(mk in _MARK for _, mk in parts)
    last = -1
    for k, (num, mk) in enumerate(parts):
        slot = _MARK[mk] if mk in _MARK else (last + 1 if any_mark else k)
        if slot > 2 or slot <= last:
            return np.nan, "", _not_angle(raw)
        slots[slot] = num
        last = slot
    filled = [i for i in range(3) if slots[i] is not None]
    if filled != list(range(len(filled))):
        return np.nan, "", _not_angle(raw)
    if any("." in slots[i] for i in filled[:-1]):
        return np.nan, "", f"'{raw}': only the last part (degrees, minutes or seconds) may have decimals"
    d, mi, se = (float(slots[i]) if slots[i] is not None else 0.0 for i in range(3))
    if mi >= 60 or se >= 60:
        return np.nan, "", f"'{raw}': minutes and seconds must be below 60"
    if letter and sign < 0:
        return np.nan, "", f"'{raw}' has both a minus sign and a hemisphere letter; give one of them"
    value = sign * (d + mi / 60.0 + se / 3600.0) * _SIGN.get(letter, 1)
    return value, _AXIS.get(letter, ""), ""


def _not_angle(raw):
    return (f"'{raw}' is not a position angle; write decimal degrees (48.9687) or degrees, minutes, seconds "
            "(48°58'07.4\"N, 48°58.123'N, N48 58.123)")


def angles(cells, axis: str, decimal_comma: bool = False) -> Cells:
    """Latitude or longitude cells (``axis`` 'lat' or 'lon') to signed degrees.

    Plain numbers go the fast way; the common sexagesimal forms are read for the whole
    column at once (:func:`_common_angles`); the rest by :func:`parse_angle`, once per
    distinct value. A hemisphere letter of the other axis (E/W in a latitude) is
    refused: the columns are probably swapped. Packed degrees-minutes(-seconds)
    (:func:`packed_angle`) are found among all of them: a value beyond the degrees of
    its axis, or an integer part wider than degrees are written; ``Cells.packed`` marks
    the cells read that way.
    """
    is_float = isinstance(cells, np.ndarray) and cells.dtype.kind == "f"     # read as floats by the sheet reader
    if not is_float:
        cells = np.asarray(cells, dtype=object)
    out = _fast_then_slow(cells, lambda u: (np.nan, "?"))
    # floats from the sheet reader hold no text to read the slow way: every error is already final
    pending = np.zeros(len(out.error), bool) if is_float else out.error == "?"
    if not is_float and pending.any():
        vals, ok = _common_angles(cells[pending], axis, decimal_comma)
        idx = np.flatnonzero(pending)
        out.values[idx[ok]] = vals[ok]
        out.error[idx[ok]] = ""
        rest = idx[~ok]
        if len(rest):
            res = per_value(cells[rest], lambda u: _one_angle(u, axis, decimal_comma))
            out.values[rest] = [v for v, _, _ in res]
            out.empty[rest] = [e is None for _, e, _ in res]
            out.error[rest] = ["" if e is None else e for _, e, _ in res]
            out.packed = np.zeros(len(cells), bool)
            out.packed[rest] = [p for _, _, p in res]
        out.known_bad = None          # the errors changed
    # plain numbers that may be packed: beyond the degrees of the axis, or (text) wider than degrees are written
    bad = out.bad.copy()
    read = ~out.empty & ~bad
    with np.errstate(invalid="ignore"):
        cand = read & (np.abs(out.values) > _DECIMAL_LIMIT[axis])
    if not is_float and read.any():
        cand |= read & ~pending & (_integer_digits(cells, _DEGREE_DIGITS[axis]) > _DEGREE_DIGITS[axis])
    if cand.any():
        idx = np.flatnonzero(cand)
        text = cells[idx] if not is_float else np.array([_float_text(v) for v in cells[idx]], dtype=object)
        res = per_value(text, lambda u: packed_angle(u, axis, decimal_comma=decimal_comma))
        hit = np.array([r is not None for r in res], bool)
        k = idx[hit]
        out.values[k] = [r[0] for r in res[hit]]
        out.error[k] = [r[1] for r in res[hit]]
        if out.packed is None:
            out.packed = np.zeros(len(cells), bool)
        out.packed[k] = [r[1] == "" for r in res[hit]]
        bad[k] = out.error[k] != ""
    out.values[out.empty | bad] = np.nan
    out.known_bad = bad
    return out


#: Largest value read as decimal degrees (longitudes 180-360 are read as east of 180, with a warning).
_DECIMAL_LIMIT = {"lat": 90.0, "lon": 360.0}
#: Digits of whole degrees (latitude 0-90, longitude 0-180) as packed forms write them.
_DEGREE_DIGITS = {"lat": 2, "lon": 3}
_DEGREE_LIMIT = {"lat": 90.0, "lon": 180.0}


def _integer_digits(cells, at_most: int) -> np.ndarray:
    """How many digits each text cell's integer part has after an optional sign, counted up to ``at_most + 1``
    (vectorised: only the first characters of each cell are looked at, so a huge cell costs nothing)."""
    u = np.asarray(cells, dtype=object).astype(f"U{at_most + 2}")
    if not len(u):
        return np.zeros(0, int)
    codes = u.view(np.uint32).reshape(len(u), -1)
    lead = (codes[:, 0] == ord("+")) | (codes[:, 0] == ord("-"))
    digit = (codes >= ord("0")) & (codes <= ord("9"))
    digit[lead, 0] = True
    width = codes.shape[1]
    first_other = np.where(digit.all(axis=1), width, np.argmin(digit, axis=1))
    return first_other - lead.astype(int)


_PACKED = re.compile(r"^([NSEW])?\s*([+-])?(\d+)(\.\d*)?\s*,?\s*([NSEW])?$")


def packed_angle(text, axis: str, *, decimal_comma: bool = False):
    """A packed angle (degrees, minutes and maybe seconds written without separators) to ``(degrees, error)``,
    or None when the text is not one (decimal degrees or another form).

    Minutes and seconds always take two digits and the degrees the digits before them: latitude
    ``DDMM.m`` / ``DDMMSS.s``, longitude ``DDDMM.m`` / ``DDDMMSS.s``, as NMEA 0183 writes
    positions (``4751.6000`` = 47°51.6', ``01509.6000`` = 15°09.6'). Degrees may be written with fewer
    digits only without a leading zero (``751.6N`` = 7°51.6', ``1509.6E`` = 15°09.6'). A text is packed
    when its integer part is wider than degrees are written (2 digits for latitude, 3 for longitude) or
    its value is beyond them as decimal degrees (90 for latitude, 360 for longitude); a zero-padded
    latitude (``045.5``) stays decimal, and a bare latitude cell that could be a longitude (``147.5``) is
    left to the swapped-columns check. When both packings fit (``15036E``: 150°36' or 1°50'36") the text
    is refused with both readings. A packed angle needs its hemisphere letter (NMEA keeps it in its own
    field, so a bare ``4751.6`` has lost it) or a sign; without one it is refused with its reading.

    >>> packed_angle("4751.6N", "lat")     # 47 + 51.6/60
    (47.86, '')
    >>> round(packed_angle("0800512W", "lon")[0], 9)     # -(80 + 5/60 + 12/3600)
    -80.086666667
    >>> packed_angle("47.86", "lat") is None
    True
    """
    raw = str(text).strip()
    s = raw.upper().replace(",", ".") if decimal_comma and raw.count(",") == 1 and "." not in raw else raw.upper()
    m = _PACKED.match(s)
    if not m:
        return None
    h1, sign, digits, frac, h2 = m.groups()
    if h1 and h2:
        return None                     # parse_angle words it
    letter = h1 or h2 or ""
    frac = frac if frac and frac != "." else ""
    width, limit = _DEGREE_DIGITS[axis], _DEGREE_LIMIT[axis]
    k = len(digits)
    value = float(digits + frac)
    if k <= width and value <= _DECIMAL_LIMIT[axis]:
        return None
    if axis == "lat" and k == 3 and digits[0] == "0" and value <= 90.0:
        return None                     # zero-padded decimal degrees
    if axis == "lat" and not (letter or sign) and k <= 3 and value <= 180.0:
        return None                     # a longitude in the latitude column? the swap check words it
    readings = []
    for n_deg, with_seconds in ((k - 2, False), (k - 4, True)):
        if not 1 <= n_deg <= width or (n_deg < width and digits[0] == "0"):
            continue
        d = int(digits[:n_deg])
        if with_seconds:
            mi, se = float(digits[n_deg:n_deg + 2]), float(digits[n_deg + 2:] + frac)
        else:
            mi, se = float(digits[n_deg:] + frac), 0.0
        v = d + mi / 60.0 + se / 3600.0
        if mi >= 60 or se >= 60 or v > limit:
            continue
        readings.append((v, _shown(d, mi, se, with_seconds, digits[n_deg:], frac), with_seconds))
    if not readings:
        if k <= 3:
            return None                 # a number out of range (999): the range check words it
        return np.nan, (f"'{raw}' is neither decimal degrees (too many digits before the point) nor packed degrees "
                        f"and minutes ({_form(axis, False)}) or degrees, minutes and seconds ({_form(axis, True)}) "
                        "with minutes and seconds below 60")
    if len(readings) == 2:
        return np.nan, (f"'{raw}' can be packed degrees and minutes ({readings[0][1]}) or degrees, minutes and "
                        f"seconds ({readings[1][1]}); write it with symbols or spaces (like 48°58'07\")")
    v, shown, with_seconds = readings[0]
    form = _form(axis, with_seconds)
    if letter and _AXIS[letter] != axis:
        other = "E/W (a longitude)" if _AXIS[letter] == "lon" else "N/S (a latitude)"
        return np.nan, f"'{raw}' has the letter {other} in the {axis} column: lat and lon look swapped"
    if letter and sign:
        return np.nan, f"'{raw}' has both a sign and a hemisphere letter; give one of them"
    if not letter and not sign:
        pos, neg = ("N", "S") if axis == "lat" else ("E", "W")
        what = "degrees, minutes and seconds" if with_seconds else "degrees and minutes"
        nmea = "" if with_seconds else ", as NMEA 0183 writes positions"
        return np.nan, (f"'{raw}' looks like packed {what} ({form}{nmea}): {shown}, but its hemisphere letter is "
                        f"missing; write {raw}{pos} or {raw}{neg}")
    negative = sign == "-" or letter in ("S", "W")
    return (-v if negative else v), ""


def _float_text(v) -> str:
    """A number the sheet reader handed over as a float, as it was most likely written (shortest form)."""
    v = float(v)
    return str(int(v)) if v.is_integer() and abs(v) < 1e15 else repr(v)


def _form(axis, with_seconds):
    deg = "DD" if axis == "lat" else "DDD"
    return f"{deg}MMSS" if with_seconds else f"{deg}MM.mmm"


def _shown(d, mi, se, with_seconds, rest, frac):
    if with_seconds:
        return f"{d}°{rest[:2]}'{rest[2:]}{frac}\""
    return f"{d}°{rest}{frac}'"


# Degrees, then minutes, then seconds, each part marked (° ' ") or separated by a space or colon, with a
# hemisphere letter before or after: the forms GPS units and hand-typed sheets use. Digits that run on without a
# mark or separator are not split here (``075136N`` is packed, not 75°13'6"). Anything else is left to
# parse_angle, which also explains what is wrong.
_COMMON = re.compile(r"^(?P<h1>[NSEW])?\s*(?P<d>\d{1,3}(?:\.\d+)?)(?P<dm>\s*[°D])?"
                     r"(?:(?:(?<=[°D])\s*|\s+|:)(?P<m>\d{1,2}(?:\.\d+)?)(?P<mm>\s*')?)?"
                     r"(?:(?:(?<=')\s*|\s+|:)(?P<s>\d{1,2}(?:\.\d+)?)\s*\"?)?\s*(?P<h2>[NSEW])?$")


def _common_angles(cells, axis, decimal_comma):
    """Vectorised reading of the common sexagesimal forms: (values, read mask); unread cells go the slow way."""
    t = pd.Series(cells, dtype=object).astype(str).str.strip().str.translate(_PRIMES).str.replace("''", '"')
    if decimal_comma:
        t = t.str.replace(",", ".")
    parts = t.str.upper().str.extract(_COMMON)
    d = pd.to_numeric(parts["d"], errors="coerce").to_numpy(float)
    m = pd.to_numeric(parts["m"], errors="coerce").to_numpy(float)
    sec = pd.to_numeric(parts["s"], errors="coerce").to_numpy(float)
    h1 = parts["h1"].fillna("").to_numpy(dtype=object)
    h2 = parts["h2"].fillna("").to_numpy(dtype=object)
    letter = np.where(h1 != "", h1, h2)
    has_m, has_s = np.isfinite(m), np.isfinite(sec)
    frac_d = parts["d"].fillna("").str.contains(".", regex=False).to_numpy(bool)
    frac_m = parts["m"].fillna("").str.contains(".", regex=False).to_numpy(bool)
    want = "NS" if axis == "lat" else "EW"
    sign = np.where(np.isin(letter, ["S", "W"]), -1.0, 1.0)
    vals = sign * (d + np.nan_to_num(m) / 60.0 + np.nan_to_num(sec) / 3600.0)
    with np.errstate(invalid="ignore"):
        ok = (np.isfinite(d) & ((h1 == "") | (h2 == "")) & np.isin(letter, ["", *want])
              & (~has_s | has_m) & (~frac_d | ~has_m) & (~frac_m | ~has_s)
              & (np.nan_to_num(m) < 60) & (np.nan_to_num(sec) < 60)
              & (np.abs(vals) <= _DECIMAL_LIMIT[axis]))       # beyond: packed? (the slow path decides)
    return vals, ok


def _one_angle(text, axis, decimal_comma):
    """One cell to ``(degrees, error or None when empty, read as packed)``."""
    s = str(text).strip()
    if s == "":
        return np.nan, None, False
    v, err = _one_number(s, decimal_comma)
    if err == "":
        return v, "", False
    if s.lower() in _SPELLED_NON_FINITE or _DEC_COMMA.match(s):
        return np.nan, err, False
    packed = packed_angle(s, axis, decimal_comma=decimal_comma)
    if packed is not None:
        return packed[0], packed[1], packed[1] == ""
    v, got, err = parse_angle(s, decimal_comma=decimal_comma)
    if err:
        return np.nan, err, False
    if got and got != axis:
        other = "E/W (a longitude)" if got == "lon" else "N/S (a latitude)"
        return np.nan, f"'{s}' has the letter {other} in the {axis} column: lat and lon look swapped", False
    return v, "", False


def declinations(cells, decimal_comma: bool = False, n: int | None = None) -> Cells:
    """Declination cells: '3.5', '-3.5', '3.5E' or '3.5W' (also with a degree sign) -> degrees east. ``cells`` None:
    a sheet without the column, ``n`` empty cells (no pass over them)."""
    cells = None if cells is None else np.asarray(cells, dtype=object)
    if cells is None or not (cells != "").any():
        n = len(cells) if cells is not None else n
        return Cells(np.full(n, np.nan), np.ones(n, bool), filled(n, ""), known_bad=np.zeros(n, bool))
    s = pd.Series(cells, dtype=object).astype(str).str.strip().str.upper()
    west = s.str.endswith("W").to_numpy()
    east = s.str.endswith("E").to_numpy()
    stripped = s.str.rstrip("EW").str.strip().to_numpy(dtype=object)
    c = numbers(stripped, decimal_comma)
    bad = c.bad | ((west | east) & (c.values < 0))   # '-3W' is ambiguous
    err = np.full(len(cells), "", dtype=object)
    err[bad] = [f"'{x}' is not a declination; write degrees east (-3.5) or 3.5W" for x in cells[bad]]
    vals = np.where(west, -c.values, c.values)
    return Cells(np.where(bad, np.nan, vals), c.empty, err, known_bad=bad)


_NMEA_POSITION = re.compile(r"^(\d+(?:\.\d+)?)\s*,\s*([NSns])\s*,\s*(\d+(?:\.\d+)?)\s*,\s*([EWew])$")


def split_position(text: str, *, decimal_comma: bool = False):
    """One cell holding a whole position to ``(lat_text, lon_text, error)``.

    Latitude comes first unless hemisphere letters say otherwise, as in GeographicLib's
    GeoConvert(1) manual, whose examples "33.3 44.4", "E44.4 N33.3", "33d18'N 44d24'E",
    "44d24 33d18N" and "33:18 44:24" all name the same point. The two parts may be
    separated by a comma or semicolon (``47.8581, 15.1631``, as map apps copy a
    position) or by spaces; when more than one way of splitting the spaces reads as
    two angles, the cell is refused as ambiguous. The four fields of an NMEA 0183
    position (``4751.6000,N,01509.6000,E``) are read as packed angles.
    """
    raw = str(text).strip()
    nmea = _NMEA_POSITION.match(raw)
    if nmea:            # 4751.6000,N,01509.6000,E: the four fields of an NMEA 0183 position
        return _order(raw, nmea.group(1) + nmea.group(2), nmea.group(3) + nmea.group(4))
    for sep in (";", ","):
        if sep in raw and not (sep == "," and decimal_comma):
            parts = [x.strip() for x in raw.split(sep)]
            if len(parts) == 2 and all(parts):
                return _order(raw, parts[0], parts[1])
    tokens = raw.split()
    found = []
    for k in range(1, len(tokens)):
        a, b = " ".join(tokens[:k]), " ".join(tokens[k:])
        ra, rb = parse_angle(a, decimal_comma=decimal_comma), parse_angle(b, decimal_comma=decimal_comma)
        if not ra[2] and not rb[2]:
            found.append((a, b))
    if len(found) == 1:
        return _order(raw, *found[0])
    if not found:
        return "", "", (f"'{raw}' is not a position; write latitude and longitude in one cell like "
                        "'47.8581, 15.1631' or 'N47 51.486 E15 09.786', or use lat and lon columns")
    return "", "", (f"'{raw}' can be split into latitude and longitude in more than one way; separate them with a "
                    "comma or use lat and lon columns")


def _order(raw, a, b, decimal_comma=False):
    axis_a = parse_angle(a, decimal_comma=decimal_comma)[1]
    axis_b = parse_angle(b, decimal_comma=decimal_comma)[1]
    if axis_a == "lon" or axis_b == "lat":
        if axis_a == "lat" or axis_b == "lon":
            return "", "", f"'{raw}' has two latitudes or two longitudes"
        return b, a, ""
    return a, b, ""
