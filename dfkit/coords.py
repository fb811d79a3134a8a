"""Map coordinates to WGS84 latitude/longitude: UTM, MGRS, grid north.

All conversions go through PROJ (via pyproj) with network access switched off,
so no datum grid is ever fetched. UTM is always on WGS84 (EPSG:326zz north,
EPSG:327zz south).
"""

from __future__ import annotations

import re
from functools import lru_cache

import numpy as np
import pyproj

pyproj.network.set_network_enabled(False)

_ZONE_RE = re.compile(r"^\s*(\d{1,2})\s*([A-Za-z]?)\s*$")


def parse_utm_zone(text: str):
    """Parse a zone like ``33N`` or ``17 S`` into ``(zone, south)``.

    The letter is the hemisphere (N or S), not a latitude band. Returns
    ``(None, message)`` when it cannot be read.
    """
    m = _ZONE_RE.match(text or "")
    if not m:
        return None, f"'{text}' is not a UTM zone; write it like 33N or 17S"
    zone, letter = int(m.group(1)), m.group(2).upper()
    if not 1 <= zone <= 60:
        return None, f"UTM zone {zone} does not exist (zones are 1 to 60)"
    if letter == "":
        return None, f"UTM zone '{text}' needs a hemisphere letter: {zone}N or {zone}S"
    if letter not in "NS":
        return None, (f"'{text}': give the hemisphere, N or S ({zone}N for the northern hemisphere); "
                      f"'{letter}' looks like an MGRS latitude band")
    return (zone, letter == "S"), None


@lru_cache(maxsize=128)
def utm_crs(zone: int, south: bool) -> pyproj.CRS:
    """The WGS84 UTM CRS of a zone."""
    return pyproj.CRS.from_epsg((32700 if south else 32600) + int(zone))


@lru_cache(maxsize=128)
def _to_geographic(crs_wkt: str) -> pyproj.Transformer:
    return pyproj.Transformer.from_crs(pyproj.CRS.from_wkt(crs_wkt), "EPSG:4326", always_xy=True)


@lru_cache(maxsize=128)
def _from_geographic(crs_wkt: str) -> pyproj.Transformer:
    return pyproj.Transformer.from_crs("EPSG:4326", pyproj.CRS.from_wkt(crs_wkt), always_xy=True)


def projected_to_latlon(crs: pyproj.CRS, x, y):
    """Projected coordinates (metres) in ``crs`` to WGS84 lat, lon [°]."""
    lon, lat = _to_geographic(crs.to_wkt()).transform(np.asarray(x, float), np.asarray(y, float))
    return np.asarray(lat), np.asarray(lon)


def latlon_to_projected(crs: pyproj.CRS, lat, lon):
    """WGS84 lat, lon [°] to projected x, y [m] in ``crs``."""
    x, y = _from_geographic(crs.to_wkt()).transform(np.asarray(lon, float), np.asarray(lat, float))
    return np.asarray(x), np.asarray(y)


def utm_to_latlon(zone, south, easting, northing):
    """UTM (per-row zone and hemisphere) to lat, lon [°]; vectorised by zone."""
    e = np.asarray(easting, float)
    n = np.asarray(northing, float)
    lat = np.full(e.shape, np.nan)
    lon = np.full(e.shape, np.nan)
    for crs, m in _zone_groups(zone, south):
        lat[m], lon[m] = projected_to_latlon(crs, e[m], n[m])
    return lat, lon


def _zone_groups(zone, south):
    """(UTM CRS, row mask) for each distinct zone and hemisphere among the rows."""
    zone = np.asarray(zone, int)
    south = np.asarray(south, bool)
    for z, s in set(zip(zone.tolist(), south.tolist())):
        yield utm_crs(z, s), (zone == z) & (south == s)


def standard_utm_zone(lat, lon):
    """The UTM zone (with the Norway and Svalbard exceptions) and hemisphere of points."""
    lat = np.asarray(lat, float)
    lon = np.asarray(lon, float)
    zone = (np.floor((np.mod(lon + 180.0, 360.0)) / 6.0).astype(int) % 60) + 1
    zone = np.where((lat >= 56) & (lat < 64) & (lon >= 3) & (lon < 12), 32, zone)
    for lo, hi, z in ((0, 9, 31), (9, 21, 33), (21, 33, 35), (33, 42, 37)):
        zone = np.where((lat >= 72) & (lat < 84) & (lon >= lo) & (lon < hi), z, zone)
    return zone, lat < 0


def convergence_deg(crs: pyproj.CRS, lat, lon):
    """Meridian convergence gamma [°] of a projected CRS at points: the angle from
    true north to grid north, positive when grid north is east of true north, so
    that ``true = grid + gamma``.

    Computed by PROJ's ``get_factors`` (the sign is pinned by a test against a
    geodesic computed with geographiclib).
    """
    lat = np.asarray(lat, float)
    lon = np.asarray(lon, float)
    factors = pyproj.Proj(crs).get_factors(lon, lat)
    return np.asarray(factors.meridian_convergence, float)


def utm_convergence_deg(zone, south, lat, lon):
    """Convergence [°] of each point in its own (given) UTM zone."""
    lat = np.asarray(lat, float)
    lon = np.asarray(lon, float)
    out = np.full(lat.shape, np.nan)
    for crs, m in _zone_groups(zone, south):
        out[m] = convergence_deg(crs, lat[m], lon[m])
    return out


_MGRS_RE = re.compile(r"^(\d{1,2})([C-HJ-NP-X])([A-HJ-NP-Z]{2})(\d*)$")


def parse_mgrs(text: str):
    """An MGRS reference to ``(lat, lon, zone, south, precision_m)`` or ``(None, message)``.

    The point returned is the *centre* of the square the reference names (a
    10-digit reference names a 1 m square, an 8-digit one a 10 m square, ...), not
    its south-west corner, so the position error is at most half the square.
    Polar (UPS) references are not accepted.
    """
    import mgrs as _mgrs

    s = re.sub(r"\s+", "", text or "").upper()
    m = _MGRS_RE.match(s)
    if not m:
        return None, (f"'{text}' is not an MGRS reference like 33UXP0500444997 "
                      "(zone, band, 100 km square, then an even number of digits)")
    digits = m.group(4)
    if len(digits) % 2 or len(digits) > 10:
        return None, f"'{text}': MGRS needs an even number of digits (up to 10) after the square letters"
    half = len(digits) // 2
    precision = 10.0 ** (5 - half)
    try:
        zone, hemi, e, n = _mgrs.MGRS().MGRSToUTM(s)
    except Exception:  # the C library raises its own error type
        return None, f"'{text}' is not a valid MGRS reference (square letters do not exist in that zone/band)"
    e = np.floor(e / precision) * precision + precision / 2.0
    n = np.floor(n / precision) * precision + precision / 2.0
    south = hemi.upper() == "S"
    lat, lon = projected_to_latlon(utm_crs(int(zone), south), e, n)
    return (float(lat), float(lon), int(zone), south, precision), None
