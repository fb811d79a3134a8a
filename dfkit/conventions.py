"""Conventions used everywhere in dfkit, stated once.

* Positions are WGS84 geodetic latitude and longitude in degrees (EPSG:4326 axis
  meaning, written ``lat``, ``lon``); longitudes are reported in [-180, 180).
* A *bearing* (azimuth) is in degrees clockwise from **true** north, in [0, 360).
  Magnetic and grid bearings are converted on reading (see :mod:`dfkit.observations`).
* Distances and ellipse axes are in metres; areas in square metres.
* Times are timezone-aware and reported in UTC.
* Angular units: a NATO mil is 1/6400 of a circle and a grad (gon) 1/400
  (US Army FM 21-26, *Map Reading and Land Navigation*, ch. 6, section 6-1).
* Declination D is the angle from true north to magnetic north, positive east:
  ``true = magnetic + D``. Meridian convergence gamma is the angle from true north
  to grid north, positive when grid north lies east of true north:
  ``true = grid + gamma`` (FM 21-26 ch. 6 declination diagram; sign pinned in
  ``tests/test_coords.py`` against geographiclib).
"""

from __future__ import annotations

import numpy as np

#: WGS84 semi-major axis [m] and flattening (NIMA TR8350.2, 3rd ed., 2000, table 3.1).
WGS84_A = 6378137.0
WGS84_F = 1.0 / 298.257223563

#: Degrees per unit for each angular unit accepted in a sheet.
DEGREES_PER_UNIT = {
    "deg": 1.0,
    "mil": 360.0 / 6400.0,   # NATO mil, FM 21-26 ch. 6 §6-1
    "grad": 360.0 / 400.0,   # grad / gon, FM 21-26 ch. 6 §6-1c
}
#: Full circle in each unit.
FULL_CIRCLE = {"deg": 360.0, "mil": 6400.0, "grad": 400.0}

#: Spellings accepted in the ``unit`` column, mapped to the canonical unit.
UNIT_ALIASES = {
    "deg": "deg", "degree": "deg", "degrees": "deg", "d": "deg", "°": "deg",
    "mil": "mil", "mils": "mil", "nato mil": "mil",
    "grad": "grad", "grads": "grad", "gon": "grad", "gons": "grad", "grade": "grad",
}

#: Words for each north, alone or followed by "north" ("grid", "grid north", "Mag. North"...).
_NORTH_WORDS = {
    "true": "true", "geographic": "true", "geographical": "true",
    "magnetic": "magnetic", "mag": "magnetic", "mag.": "magnetic", "compass": "magnetic",
    "grid": "grid",
}
#: Spellings accepted in the ``north`` column (compared in lower case): the words above with or without
#: "north" after them, and the usual abbreviations. "map north" is refused: a map may be drawn to grid or to
#: true north, so the words do not say which.
NORTH_ALIASES = {
    **_NORTH_WORDS,
    **{f"{w}{sep}north": n for w, n in _NORTH_WORDS.items() for sep in (" ", "-")},
    "t": "true", "tn": "true", "t.n.": "true",
    "m": "magnetic", "mn": "magnetic", "m.n.": "magnetic",
    "g": "grid", "gn": "grid", "g.n.": "grid",
}


def remainder(x, period):
    """``np.mod(x, period)`` of an array of floats, bit for bit, for a positive finite ``period``; about ten times
    faster where every x lies in (-period, 2 period), as angles from the geodesic routines do.

    numpy's float remainder calls the C library's fmod on each element (25-35 ns each here). On that range fmod
    is exact and returns x itself for |x| < period and x - period for x >= period (exact by Sterbenz's lemma);
    numpy then adds the period to a negative result (one rounding: x + period, formed here as period + x) and
    gives +0.0 for a zero, as 0.0 + x does to -0.0 (and to nothing else). A NaN stays that NaN either way (fmod
    and the addition both pass it on). Anything else (infinities, larger angles, only NaN) goes to np.mod itself."""
    x = np.asarray(x, float)
    if x.size == 0:
        return np.mod(x, period)
    lo, hi = np.fmin.reduce(x, axis=None), np.fmax.reduce(x, axis=None)       # NaN ignored (unless all are)
    if not (lo > -period and hi < 2.0 * period):
        return np.mod(x, period)
    out = (x < 0.0) * period          # period where x < 0, else 0.0
    out += x
    if hi >= period:
        out -= (x >= period) * period     # (not out >= period: a tiny negative x gives period itself)
    return out


def wrap360(angle_deg):
    """Wrap angles to [0, 360). [°]"""
    with np.errstate(invalid="ignore"):
        return np.mod(angle_deg, 360.0)


def wrap180(angle_deg):
    """Wrap angles to [-180, 180). [°] (np.mod bit for bit; arrays by :func:`remainder`)"""
    a = np.asarray(angle_deg, dtype=float) + 180.0
    return (np.mod(a, 360.0) if a.ndim == 0 else remainder(a, 360.0)) - 180.0


def to_degrees(value, unit):
    """Convert an angle in ``unit`` ('deg', 'mil' or 'grad') to degrees.

    >>> float(to_degrees(1600.0, "mil")), float(to_degrees(100.0, "grad"))
    (90.0, 90.0)
    """
    return np.asarray(value, dtype=float) * DEGREES_PER_UNIT[unit]
