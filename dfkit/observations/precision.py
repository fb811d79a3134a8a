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
  forms (``4751.6N``) likewise. A row takes the finer of its latitude's and longitude's steps, for both axes. Where
  the sheet reader kept a column as numbers (a plain CSV sheet) the text is gone and the step is that of the
  value, which keeps no trailing zeros: a position whose latitude and longitude both end in 0 (about 1 row in
  100 at random) looks one decimal coarser; such a row takes the finest step of the other rows of its fix that
  came from lat/lon when that is exactly ten times finer (a real mix of, say, 3 and 6 decimals is kept).
* UTM: the largest of 1, 10, 100 and 1000 m that both easting and northing are multiples of (a position to the
  metre lands on multiples of 100 in both by chance once in 10,000 rows).
* MGRS: the square its digits name (:func:`dfkit.grids.parse_mgrs`, which places the position at the square's
  centre).
* a station label or a GPS track: not rounded (0).

Steps finer than :data:`dfkit.policy.POSITION_STEP_IGNORED_M` count as not rounded (0): below a hand-held GPS
unit's own error, which dfkit does not model either.
"""

from __future__ import annotations

import re

import numpy as np

from dfkit.conventions import WGS84_A, WGS84_F
from dfkit.observations.cells import per_value
from dfkit.policy import POSITION_STEP_IGNORED_M

#: Most decimals looked for in a value: finer than 1e-7 degrees (about 1 cm) is not rounding that matters.
MAX_DECIMALS = 7
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
    todo = np.isfinite(v)
    step = np.where(todo, 0.0, np.nan)
    for k in range(max_decimals + 1):
        if not todo.any():
            break
        x = v * 10.0**k
        whole = todo & (np.abs(x - np.round(x)) <= np.fmax(1e-6, 8.0 * np.finfo(float).eps * x))
        step[whole] = 10.0**-k
        todo &= ~whole
    return step


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
    """Step of the angle cells ``rows`` [°]: from the text where the cells are text, from the values where the
    reader kept the column as numbers. Second value: whether it came from values (trailing zeros lost)."""
    if isinstance(cells, np.ndarray) and cells.dtype.kind == "f":
        return decimal_step(cells[rows]), True
    sub = np.asarray(cells, dtype=object)[rows]
    return np.asarray(per_value(sub, lambda t: angle_text_step(t, axis, decimal_comma)), float), False


def position_steps(cells: dict, source, lat, groups=None, *, decimal_comma: bool = False, mgrs_square_m=None):
    """Each row's position step east and north [m] (0: not rounded, or finer than the policy's limit).

    Parameters
    ----------
    cells : dict
        The parser's text cells by role (``lat``, ``lon``, ``easting``, ``northing``), as read.
    source : array_like of str
        Where each row's position came from ('lat/lon', 'utm', 'mgrs', 'station', 'track' or '').
    lat : array_like
        Each row's latitude [°] (for the length of a degree).
    groups : array_like of int, optional
        Each row's fix (-1 for none), for the trailing-zero rule of values read as numbers.
    mgrs_square_m : array_like, optional
        The square each MGRS row names [m] (NaN elsewhere).
    """
    source = np.asarray(source, dtype=object)
    n = len(source)
    east = np.zeros(n)
    north = np.zeros(n)
    lat = np.asarray(lat, float)
    rows = np.flatnonzero(source == "lat/lon")
    if len(rows):
        s_lat, from_values = _angle_steps(cells["lat"], "lat", decimal_comma, rows)
        s_lon, lon_values = _angle_steps(cells["lon"], "lon", decimal_comma, rows)
        step = np.fmin(s_lat, s_lon)             # the finer of the two (0: not rounded; NaN: none shown)
        if (from_values or lon_values) and groups is not None and len(rows) > 1:
            g = np.asarray(groups, np.int64)[rows]
            has = (g >= 0) & (step > 0)
            if has.any():
                finest = np.full(int(g.max()) + 1, np.inf)
                np.minimum.at(finest, g[has], step[has])
                f = np.where(has, finest[np.maximum(g, 0)], np.nan)
                lost_zero = has & np.isclose(step, 10.0 * f, rtol=1e-9, atol=0.0)
                step = np.where(lost_zero, f, step)
        m_n, m_e = metres_per_degree(lat[rows])
        north[rows] = np.nan_to_num(step * m_n)
        east[rows] = np.nan_to_num(step * m_e)
    rows = np.flatnonzero(source == "utm")
    if len(rows):
        from dfkit.observations.cells import numbers

        e = numbers(cells["easting"][rows], decimal_comma).values
        nn = numbers(cells["northing"][rows], decimal_comma).values
        step = np.zeros(len(rows))
        for size in (10.0, 100.0, 1000.0):
            fits = (np.abs(e / size - np.round(e / size)) < 1e-9) & (np.abs(nn / size - np.round(nn / size)) < 1e-9)
            step = np.where(fits, size, step)
        east[rows] = north[rows] = step
    if mgrs_square_m is not None:
        sq = np.asarray(mgrs_square_m, float)
        rows = np.flatnonzero((source == "mgrs") & np.isfinite(sq))
        east[rows] = north[rows] = sq[rows]
    fine = np.fmax(east, north) < POSITION_STEP_IGNORED_M
    east[fine] = 0.0
    north[fine] = 0.0
    return east, north
