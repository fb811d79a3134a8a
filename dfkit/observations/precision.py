"""How finely each observer position was written down: the step of its rounding, east and north, in metres.

A position written to a step s (latitude and longitude to 3 decimals: s = 0.001°, about 111 m north-south; an
MGRS reference of 6 digits: a 100 m square; a UTM easting and northing to the nearest 100 m) is somewhere in a
cell of that size around the point read, and its error is spread evenly over the cell: SD s / sqrt(12) per axis
(the variance of a uniform distribution over an interval of length s, as in W. F. Sheppard, Proc. London Math.
Soc. 29, 353-380, 1898 [from memory]; :mod:`dfkit.locate.resolution` uses the same for bearings).
:mod:`dfkit.locate.rounding` carries that into each bearing's SD.

The step of each row is read from what was written, per row (a sheet may mix forms and precisions):

* latitude/longitude in decimal degrees: the decimals written; degrees and minutes: the minutes' decimals (a step
  of 10^-k / 60 degrees); degrees, minutes and seconds: the seconds' decimals (10^-k / 3600 degrees); packed
  forms (``4751.6N``) likewise. A row takes the finer of its latitude's and longitude's steps, for both axes.
  Where the sheet reader kept a column as numbers (a plain CSV sheet) the step is that of the value, which keeps
  no trailing zeros, and then that of the cell as the file wrote it where the value alone gives a step that counts
  (:attr:`dfkit.io.sheet.RawSheet.number_decimals`: ``47.8700`` was written to 4 decimals). Written decimals
  beyond the value's are believed while the rows showing them are about as few as chance makes them (both
  coordinates end in 0 in 1 row in 100 of a sheet written to a fixed number of decimals); a sheet where nearly
  every row shows them pads values written more coarsely (a column formatted to 4 decimals of positions taken to
  3), and the values' steps stand, on either of the reader's paths. A spreadsheet's typed number has no text: it
  is read as its shortest text (``47.87`` for a cell showing 47.8700), so the trailing zeros its format shows are
  not seen, and the rules below judge it as a value. Where only the value is known, a position whose latitude and
  longitude both end in 0 (about 1 row in 100 at random) looks one decimal coarser. So a row takes the finest step of the other rows of its fix that came from lat/lon when that is
  exactly ten or a hundred times finer (1 row in 10,000 loses two zeros from both; a real mix of, say, 3 and 6
  decimals is kept, one of 3 and 4 or 5 decimals is not seen), and in a fix with a row of 5 or more decimals a
  row showing 4 decimals counts as not rounded (two lost zeros from 6 decimals: 1 row in 10,000; a real
  4-decimal row there is off by 11 m at most). Each of these rules holds only while the rows it would change are
  about as few as chance makes them (:func:`_believable`): a sheet that really mixes 3-decimal and GPS positions
  in its fixes keeps the 3-decimal steps (a user trial: `ok` regions of such sheets held the truth 86-91 % of the
  time when the rule took the coarse rows for exact, 95 % now). Degrees and minutes or seconds, written as text,
  lose no zeros and are never changed.
* UTM: the largest of 1, 10, 100 and 1000 m that both easting and northing are multiples of, judged with the
  other rows of the same observer (the sheet where there is no observer column): a position written to 100 m
  lands on whole kilometres in both by chance 1 row in 100, so rows on a coarser step than their unit's commonest
  take that commonest step while they are no more than chance gives (:func:`_utm_levels`); a unit written to 1 km
  stays 1 km.
* MGRS: the square its digits name (:func:`dfkit.grids.parse_mgrs`, which places the position at the square's
  centre).
* a station label or a GPS track: not rounded (0).

Steps finer than :data:`dfkit.policy.POSITION_STEP_IGNORED_M` count as not rounded (0): below a hand-held GPS
unit's own error, which dfkit does not model either.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd

from dfkit.conventions import WGS84_A, WGS84_F
from dfkit.observations.cells import per_value
from dfkit.policy import POSITION_STEP_IGNORED_M

#: Most decimals looked for in a value: finer than 1e-7 degrees (about 1 cm) is not rounding that matters.
MAX_DECIMALS = 7
#: Decimals looked for in values read as numbers (see :func:`_angle_steps`).
VALUE_DECIMALS = 5
_E2 = WGS84_F * (2.0 - WGS84_F)
_NUMBER = re.compile(r"\d+(?:\.\d*)?|\.\d+")
_DEGREE_DIGITS = {"lat": 2, "lon": 3}
_DEGREE_LIMIT = {"lat": 90.0, "lon": 360.0}


def metres_per_degree(lat):
    """Length of one degree of latitude (north-south) and of longitude (east-west) at latitude ``lat`` on WGS84
    [m]: pi/180 times the meridional radius of curvature M = a (1 - e^2) / (1 - e^2 sin^2 lat)^(3/2), and times
    N cos(lat) with the prime-vertical radius N = a / sqrt(1 - e^2 sin^2 lat) (any geodesy text; checked against
    pyproj's Geod in the tests)."""
    phi = np.radians(np.asarray(lat, float))
    w = 1.0 - _E2 * np.sin(phi) ** 2
    north = np.pi / 180.0 * WGS84_A * (1.0 - _E2) / w ** 1.5
    east = np.pi / 180.0 * WGS84_A / np.sqrt(w) * np.cos(phi)
    return north, east


def decimal_step(values, max_decimals: int = MAX_DECIMALS) -> np.ndarray:
    """The decimal step each value needs (1, 0.1, 0.01 ...; 0 where more than ``max_decimals`` are needed: not
    rounded; NaN where the value is not finite).

    >>> [float(s) for s in decimal_step([47.81, 47.816, -91.7, 12.0, 47.8165432, 47.81654321])]
    [0.01, 0.001, 0.1, 1.0, 1e-07, 0.0]
    """
    v = np.abs(np.asarray(values, float))
    step = np.where(np.isfinite(v), 0.0, np.nan)
    # one pass over every value first: those that need more than max_decimals are done (most GPS positions)
    rows = np.flatnonzero(_whole(v * 10.0**max_decimals))
    v = v[rows]
    for k in range(max_decimals + 1):
        if not len(rows):
            break
        whole = _whole(v * 10.0**k)
        step[rows[whole]] = 10.0**-k
        rows, v = rows[~whole], v[~whole]
    return step


def _whole(x):
    """Whether each (finite) value is a whole number, to the rounding of its decimal text."""
    with np.errstate(invalid="ignore"):
        return np.abs(x - np.round(x)) <= np.fmax(1e-6, 8.0 * np.finfo(float).eps * x)


def angle_text_step(text: str, axis: str, decimal_comma: bool = False) -> float:
    """The step an angle was written to, from its text [°] (NaN when the text shows none).

    >>> [round(angle_text_step(t, "lat") * 3600, 3) for t in ("47.810", "47 48.6", "48°58'07.4\\"N", "4751.60N")]
    [3.6, 6.0, 0.1, 0.6]
    """
    s = str(text).strip()
    if decimal_comma:
        s = s.replace(",", ".")
    parts = _NUMBER.findall(s)
    if not parts or len(parts) > 3:
        return np.nan
    last = parts[-1]
    decimals = len(last.split(".", 1)[1]) if "." in last else 0
    unit = (1.0, 60.0, 3600.0)[len(parts) - 1]
    if len(parts) == 1:
        whole = last.split(".", 1)[0]
        width = _DEGREE_DIGITS[axis]
        try:
            value = float(last)
        except ValueError:
            return np.nan
        if len(whole) > width or value > _DEGREE_LIMIT[axis]:
            # packed degrees and minutes (DDMM.m), or with seconds (DDMMSS.s) when the degrees cannot take the rest
            unit = 60.0 if 1 <= len(whole) - 2 <= width else 3600.0
    return 10.0**-decimals / unit


def _angle_steps(cells, axis, decimal_comma, rows):
    """Step of the angle cells ``rows`` [°], twice: as written, and as the value needs (trailing zeros left out).

    As written: from the text where the cells are text, from the values where the reader kept the column as
    numbers (trailing zeros lost; :func:`_as_written` looks at their text where it matters). As the value needs: the
    same without the trailing zeros of plain decimal numbers (degrees and minutes or seconds keep theirs). Returns
    (written, value)."""
    if isinstance(cells, np.ndarray) and cells.dtype.kind == "f":
        # finer than 5 decimals (1.1 m) is below the policy's limit anyway; 5 is looked for so that a position
        # of 5 decimals that lost a trailing zero is seen as one (the fix's step is exactly ten times finer)
        value = decimal_step(cells[rows], VALUE_DECIMALS)
        return value.copy(), value
    sub = np.asarray(cells, dtype=object)[rows]
    written = np.asarray(per_value(sub, lambda t: angle_text_step(t, axis, decimal_comma)), float)
    value = written.copy()
    zeros = np.flatnonzero(_trailing_zero(sub))
    if len(zeros):
        value[zeros] = np.asarray(per_value(sub[zeros], lambda t: angle_text_step(str(t).strip().rstrip("0"), axis,
                                                                                  decimal_comma)), float)
    return written, value


def _as_written(cells, texts, rows, steps):
    """The step [°] of the lat/lon rows ``rows`` with the cells the reader kept as numbers taken as written
    (``texts``: role -> a function giving the decimals the column's cells show on given rows, -1 where that says
    nothing, :attr:`dfkit.io.sheet.RawSheet.number_decimals`):
    a cell ``47.8700`` was written to 4 decimals though its value needs 2. ``steps``: (written, value) per role
    from :func:`_angle_steps`. Only rows whose values alone show a step are looked at (a GPS position's value needs
    6 or more decimals: not rounded, whatever its text), those of 5 decimals too: written to 6, such a row is not
    the finer row of its fix that the trailing-zero rules measure the others by. None where there is no text to
    look at."""
    held = [role for role in ("lat", "lon") if isinstance(cells[role], np.ndarray) and cells[role].dtype.kind == "f"
            and texts.get(role) is not None]
    need = np.flatnonzero(np.fmin(steps["lat"][1], steps["lon"][1]) > 0)
    if not held or not len(need):
        return None
    out = []
    for role in ("lat", "lon"):
        w = steps[role][0][need].copy()
        if role in held:
            shown = np.asarray(texts[role](rows[need]), np.int64)
            more = (shown > np.rint(-np.log10(w)).astype(int)) & (w > 0)
            # finer than VALUE_DECIMALS: 0, as a value's
            w[more] = np.where(shown[more] > VALUE_DECIMALS, 0.0, 10.0 ** -shown[more].astype(float))
        out.append(w)
    written = np.fmin(steps["lat"][0], steps["lon"][0])
    written[need] = np.fmin(*out)
    return written


def _trailing_zero(texts) -> np.ndarray:
    """Whether each text is a plain decimal number ending in a zero after its decimal point (``47.870``)."""
    s = pd.Series(texts, dtype=object).astype(str).str.strip()
    return s.str.fullmatch(r"[+-]?\d*\.\d*0").fillna(False).to_numpy(bool)


#: Share of rows whose latitude and longitude both lose one trailing zero by chance (each ends in 0 one time in ten).
_ONE_ZERO_LOST = 0.01
#: A pattern of lost zeros is believed only while the rows showing it are no more than this many times, plus
#: _LOST_SLACK, the rows chance would give: beyond that the sheet really mixes precisions (our choice).
_LOST_FACTOR = 3.0
_LOST_SLACK = 3.0


def _believable(n_showing, n_could, share):
    """Whether ``n_showing`` rows out of ``n_could`` that could have lost zeros by chance (each with probability
    ``share``) are few enough to be that chance, rather than rows written more coarsely."""
    return n_showing <= _LOST_FACTOR * share * n_could + _LOST_SLACK


def _lost_zeros(groups, all_rows, rows, step, plain=None):
    """The trailing-zero rules for lat/lon values read as numbers (module docstring): ``rows`` (with their ``step``,
    all > 0) among the lat/lon rows ``all_rows``; ``groups`` each row's fix (-1: none); ``plain`` (per row of
    ``rows``): whether its cells were plain decimal numbers (degrees and minutes, or seconds, keep their text and
    lose no zeros). Each rule holds only while the rows it would change are as few as chance makes them: a sheet
    that really mixes 3- and 5-decimal positions keeps its 3-decimal steps."""
    g = groups[rows]
    has = g >= 0 if plain is None else (g >= 0) & plain
    if not has.any():
        return step
    n_all = len(all_rows)
    # a fix with a row written finely (5 decimals or more): its rows showing 4 decimals lost
    # their zeros (1 row in 100 of 5 decimals, 1 in 10,000 of 6); a real 4-decimal row there is off by 11 m at most
    fine_fix = np.zeros(int(groups.max()) + 1 if len(groups) else 0, bool)
    fine = np.zeros(len(groups), bool)
    fine[all_rows] = True
    fine[rows] = False
    gf = groups[fine]
    fine_fix[gf[gf >= 0]] = True
    four = has & fine_fix[np.maximum(g, 0)] & (step <= 1.0001e-4)
    if _believable(four.sum(), n_all, _ONE_ZERO_LOST):
        step = np.where(four, 0.0, step)
    # one or two decimals fewer than the finest other row of the fix: trailing zeros lost from both coordinates
    keep = has & (step > 0)
    if keep.sum() > 1:
        codes, first = np.unique(g[keep], return_inverse=True)
        finest = np.full(len(codes), np.inf)
        np.minimum.at(finest, first, step[keep])
        f = np.full(len(step), np.nan)
        f[keep] = finest[first]
        for times, share in ((10.0, _ONE_ZERO_LOST), (100.0, _ONE_ZERO_LOST ** 2)):
            lost = keep & np.isclose(step, times * f, rtol=1e-9, atol=0.0)
            if _believable(lost.sum(), n_all, share):
                step = np.where(lost, f, step)
    return step


def _utm_levels(level, units=None):
    """UTM rows' steps judged with the other rows of their unit (an observer; the sheet where ``units`` is None).

    ``level`` per row: the largest power of ten (1: 10 m ... 3: 1000 m) that both its easting and northing are
    multiples of. A position written to a step s lands on multiples of 10 s in both by chance 1 time in 100, of
    100 s 1 time in 10,000: a few rows of a 100 m sheet read as 1 km. So rows at a level above the unit's commonest
    finer level take that level while they are no more than chance gives (:func:`_believable`) and fewer than the
    rows at that level; a unit whose rows mostly sit on 1 km stays 1 km."""
    level = level.copy()
    if not len(level):
        return level
    codes = np.zeros(len(level), np.int64) if units is None else pd.factorize(pd.Series(units, dtype=object))[0]
    counts = np.zeros((codes.max() + 1, 4), np.int64)
    np.add.at(counts, (codes, level), 1)
    out = level.copy()
    for u in range(len(counts)):
        c = counts[u]
        for top in (3, 2, 1):
            if not c[top] or not c[:top].any():
                continue
            base = int(np.argmax(c[:top]))          # the commonest finer level
            share = _ONE_ZERO_LOST ** (top - base)   # both coordinates on the coarser multiples by chance
            if c[top] < c[base] and _believable(c[top], int(c[base:].sum()), share):
                out[(codes == u) & (level == top)] = base
    return out


def _plain_decimal(cells, rows):
    """Whether the cells ``rows`` are plain decimal numbers (values read as numbers, or text of one number): the
    only ones that can have lost trailing zeros on the way."""
    if isinstance(cells, np.ndarray) and cells.dtype.kind == "f":
        return np.ones(len(rows), bool)
    sub = np.asarray(cells, dtype=object)[rows]
    return np.asarray(per_value(sub, lambda t: len(_NUMBER.findall(str(t))) == 1), bool)


def position_steps(cells: dict, kind: dict, lat, groups=None, *, decimal_comma: bool = False, mgrs_square_m=None,
                   texts=None, units=None):
    """Each row's position step east and north [m] (0: not rounded, or finer than the policy's limit).

    Parameters
    ----------
    cells : dict
        The parser's text cells by role (``lat``, ``lon``, ``easting``, ``northing``), as read.
    kind : dict
        Masks of the rows whose position came from ``'lat/lon'``, ``'utm'`` and ``'mgrs'``.
    lat : array_like
        Each row's latitude [°] (for the length of a degree).
    groups : array_like of int, optional
        Each row's fix (-1 for none), for the trailing-zero rule of values read as numbers.
    mgrs_square_m : array_like, optional
        The square each MGRS row names [m] (NaN elsewhere).
    texts : dict, optional
        For the roles ``lat`` and ``lon`` held as numbers: a function giving the decimals the column's cells show
        on given rows as written, or None when the reader has none (:attr:`dfkit.io.sheet.RawSheet.number_decimals`).
    units : array_like, optional
        Each row's unit (an observer), for the UTM rule: the rows of one unit are judged together (the whole sheet
        where not given).
    """
    lat = np.asarray(lat, float)
    n = len(lat)
    east = np.zeros(n)
    north = np.zeros(n)
    rows = np.flatnonzero(kind["lat/lon"])
    if len(rows):
        all_rows = rows
        w_lat, v_lat = _angle_steps(cells["lat"], "lat", decimal_comma, rows)
        some = v_lat != 0                       # a latitude written finely: the row is not rounded
        rows, w_lat, v_lat = rows[some], w_lat[some], v_lat[some]
        w_lon, v_lon = _angle_steps(cells["lon"], "lon", decimal_comma, rows)
        written = np.fmin(w_lat, w_lon)          # the finer of the two (0: not rounded; NaN: none shown)
        value = np.fmin(v_lat, v_lon)
        if texts:
            got = _as_written(cells, texts, rows, {"lat": (w_lat, v_lat), "lon": (w_lon, v_lon)})
            written = written if got is None else got
        # written with more decimals than the values need: both coordinates end in zeros (1 row in 100 by chance
        # in a sheet written to a fixed number of decimals). Few such rows: the writer meant those decimals, and
        # they lost none. Many: the zeros pad values written more coarsely (a column formatted to show 4 decimals
        # of positions taken to 3), and the values' steps stand, with the trailing-zero rules below
        padded = written < value
        meant = _believable(int(padded.sum()), len(all_rows), _ONE_ZERO_LOST)
        step = written if meant else value
        shown = np.flatnonzero(step > 0)         # (most GPS positions are not: only these are looked at further)
        rows, step, padded = rows[shown], step[shown], padded[shown]
        # (the rules hold for text too: a spreadsheet's typed numbers reach here as their shortest text, 47.81)
        if groups is not None and len(rows):
            plain = _plain_decimal(cells["lat"], rows) & _plain_decimal(cells["lon"], rows)
            step = _lost_zeros(np.asarray(groups, np.int64), all_rows, rows, step,
                               plain & ~padded if meant else plain)
        m_n, m_e = metres_per_degree(lat[rows])
        north[rows] = step * m_n
        east[rows] = step * m_e
    rows = np.flatnonzero(kind["utm"])
    if len(rows):
        from dfkit.observations.cells import numbers

        e = numbers(cells["easting"][rows], decimal_comma).values
        nn = numbers(cells["northing"][rows], decimal_comma).values
        level = np.zeros(len(rows), np.int64)       # 0: metres, 1: 10 m, 2: 100 m, 3: 1000 m
        for k, size in enumerate((10.0, 100.0, 1000.0), start=1):
            fits = (np.abs(e / size - np.round(e / size)) < 1e-9) & (np.abs(nn / size - np.round(nn / size)) < 1e-9)
            level = np.where(fits, k, level)
        level = _utm_levels(level, None if units is None else np.asarray(units, dtype=object)[rows])
        step = np.where(level > 0, 10.0 ** level.astype(float), 0.0)
        east[rows] = north[rows] = step
    if mgrs_square_m is not None:
        sq = np.asarray(mgrs_square_m, float)
        rows = np.flatnonzero(kind["mgrs"] & np.isfinite(sq))
        east[rows] = north[rows] = sq[rows]
    fine = np.fmax(east, north) < POSITION_STEP_IGNORED_M
    east[fine] = 0.0
    north[fine] = 0.0
    return east, north
