"""Map grids to WGS84 latitude/longitude: UTM (with its zone letters), MGRS, grid north.

All conversions go through PROJ (via pyproj). UTM is always on WGS84 (EPSG:326zz
north, EPSG:327zz south); these transformations need no datum grid, so nothing is
ever fetched. dfkit does not change PROJ's network setting (it is off unless the
user turned it on).

**Zone letters.** A UTM zone is written with a hemisphere letter (``33N``, ``17S``)
or, as GPS units and MGRS do, with a latitude-band letter C-X (``33U``, ``30S``)
(bands of 8° from 80°S, X is 12° tall; I and O are not used: NGA.STND.0037 2.0.0,
*The Universal Grids and the Transverse Mercator and Polar Stereographic Map
Projections*, 2014, and DMA TM 8358.1, 1990, the MGRS latitude bands; both cited
from memory; the band latitudes are checked against the ``mgrs`` package in the tests). ``N`` means the
northern hemisphere both ways. ``S`` is either band S (32°N to 40°N) or the
southern hemisphere: :func:`parse_utm_zone` only reads the text;
:mod:`dfkit.observations.positions` decides with evidence it can state.

**Positions outside a zone's strip** (a national grid that puts a whole country in
one zone) are converted when the easting lies within :data:`MAX_FROM_CM_M` of the
central meridian: PROJ's default transverse Mercator (the Poder/Engsager 6th-order
Krueger series) gives "full double-precision accuracy within 3900 km of the
central meridian" (PROJ documentation, *Transverse Mercator*, citing C. F. F.
Karney, "Transverse Mercator with an accuracy of a few nanometers", J. Geodesy
85(8), 475-485, 2011). dfkit also checks each such conversion by a round trip
(:func:`utm_round_trip_m`).
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
import pyproj

#: Latitude bands of UTM/MGRS, south to north (NGA.STND.0037; DMA TM 8358.1). [°]
BAND_LETTERS = "CDEFGHJKLMNPQRSTUVWX"

#: Largest distance of an accepted UTM easting from the central meridian [m] (grid
#: metres, |easting - 500 000|): PROJ documents full double precision within 3900 km.
MAX_FROM_CM_M = 3_900_000.0

#: Half width of a standard UTM zone [°] (zones are 6° wide).
HALF_ZONE_DEG = 3.0


def band_limits(letter: str) -> tuple[float, float]:
    """South and north latitude of a UTM/MGRS latitude band [°].

    >>> band_limits("S"), band_limits("X")
    ((32.0, 40.0), (72.0, 84.0))
    """
    k = BAND_LETTERS.index(letter.upper())
    south = -80.0 + 8.0 * k
    return south, (84.0 if letter.upper() == "X" else south + 8.0)


def band_letter(lat: float) -> str:
    """The UTM/MGRS latitude band a latitude lies in ('' beyond 80°S..84°N).

    >>> band_letter(46.47), band_letter(-33.9), band_letter(80.0)
    ('T', 'H', 'X')
    """
    if not -80.0 <= lat <= 84.0:
        return ""
    return BAND_LETTERS[min(int((lat + 80.0) // 8.0), len(BAND_LETTERS) - 1)]


@dataclass(frozen=True)
class ZoneText:
    """A UTM zone as written: its number and what its letter can mean.

    ``letter`` is '' (none), a hemisphere word ('north'/'south'), or a single letter;
    ``band`` is True when the letter can be a latitude band, ``hemisphere`` is 'N' or
    'S' when it can be a hemisphere letter (``S`` and ``N`` can be both).
    """

    zone: int
    letter: str
    band: bool
    hemisphere: str


_ZONE_RE = re.compile(r"^\s*(\d{1,2})\s*([A-Za-z]*)\s*$")
_ZONE_FIRST_RE = re.compile(r"^\s*([A-Za-z])\s*(\d{1,2})\s*$")
_WORDS = {"north": "N", "n": "N", "south": "S", "s": "S", "nord": "N", "sud": "S", "süd": "S", "sur": "S"}


def parse_utm_zone(text: str):
    """Read a zone like ``33N``, ``17 S``, ``33U``, ``30S`` or ``33 north``.

    Returns ``(ZoneText, None)`` or ``(None, message)``. Which reading an ``S`` has is
    not decided here (see the module docstring).
    """
    t = (text or "").strip()
    m = _ZONE_RE.match(t) or _ZONE_FIRST_RE.match(t)
    if not m:
        return None, f"'{text}' is not a UTM zone; write it like 33N, 17S or 33U (zone and letter)"
    a, b = m.group(1), m.group(2)
    num, letter = (a, b) if a.isdigit() else (b, a)
    zone = int(num)
    if not 1 <= zone <= 60:
        return None, f"UTM zone {zone} does not exist (zones are 1 to 60)"
    low = letter.lower()
    if low == "":
        return None, (f"UTM zone '{text}' needs a letter: the hemisphere ({zone}N or {zone}S) or the latitude "
                      f"band (C to X, as a GPS shows it)")
    if len(low) > 1:
        if low in _WORDS:
            return ZoneText(zone, low, False, _WORDS[low]), None
        return None, f"'{text}': '{letter}' is neither a hemisphere (N, S, north, south) nor a latitude band (C-X)"
    up = letter.upper()
    if up in ("I", "O"):
        return None, f"'{text}': there is no latitude band {up} (bands run C to X without I and O)"
    if up not in BAND_LETTERS:
        return None, f"'{text}': '{letter}' is neither a hemisphere (N or S) nor a latitude band (C to X)"
    return ZoneText(zone, up, True, up if up in "NS" else ""), None


@lru_cache(maxsize=256)
def utm_crs(zone: int, south: bool) -> pyproj.CRS:
    """The WGS84 UTM CRS of a zone."""
    return pyproj.CRS.from_epsg((32700 if south else 32600) + int(zone))


@lru_cache(maxsize=256)
def _to_geographic(crs_wkt: str) -> pyproj.Transformer:
    return pyproj.Transformer.from_crs(pyproj.CRS.from_wkt(crs_wkt), "EPSG:4326", always_xy=True)


@lru_cache(maxsize=256)
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


def _zone_groups(zone, south):
    """(UTM CRS, row mask) for each distinct zone and hemisphere among the rows."""
    zone = np.asarray(zone, int)
    south = np.asarray(south, bool)
    for z, s in set(zip(zone.tolist(), south.tolist())):
        yield utm_crs(z, s), (zone == z) & (south == s)


def _per_zone(func, zone, south, a, b):
    """Apply ``func(crs, a, b) -> (c, d)`` zone by zone over rows with per-row zones."""
    a = np.asarray(a, float)
    b = np.asarray(b, float)
    c = np.full(a.shape, np.nan)
    d = np.full(a.shape, np.nan)
    for crs, m in _zone_groups(zone, south):
        c[m], d[m] = func(crs, a[m], b[m])
    return c, d


def utm_to_latlon(zone, south, easting, northing):
    """UTM (per-row zone and hemisphere) to lat, lon [°]; vectorised by zone."""
    return _per_zone(projected_to_latlon, zone, south, easting, northing)


def latlon_to_utm(zone, south, lat, lon):
    """lat, lon [°] to easting, northing [m] in the given (per-row) UTM zones."""
    return _per_zone(latlon_to_projected, zone, south, lat, lon)


def utm_round_trip_m(zone, south, easting, northing, lat, lon):
    """How far (grid metres) ``lat, lon`` lands from the easting/northing it came from."""
    e2, n2 = latlon_to_utm(zone, south, lat, lon)
    return np.hypot(e2 - np.asarray(easting, float), n2 - np.asarray(northing, float))


def central_meridian(zone):
    """Central meridian of UTM zones [°]."""
    return -183.0 + 6.0 * np.asarray(zone, float)


def standard_utm_zone(lat, lon):
    """The UTM zone (with the Norway and Svalbard exceptions) and hemisphere of points."""
    lat = np.asarray(lat, float)
    lon = np.asarray(lon, float)
    zone = (np.floor((np.mod(lon + 180.0, 360.0)) / 6.0).astype(int) % 60) + 1
    zone = np.where((lat >= 56) & (lat < 64) & (lon >= 3) & (lon < 12), 32, zone)
    for lo, hi, z in ((0, 9, 31), (9, 21, 33), (21, 33, 35), (33, 42, 37)):
        zone = np.where((lat >= 72) & (lat < 84) & (lon >= lo) & (lon < hi), z, zone)
    return zone, lat < 0


def outside_strip(zone, lat, lon):
    """True where a point lies outside its given zone's strip (6° wide, or the zone's
    wider Norway/Svalbard strip), i.e. where a map would use another zone."""
    d = np.abs((np.asarray(lon, float) - central_meridian(zone) + 180.0) % 360.0 - 180.0)
    std, _ = standard_utm_zone(lat, lon)
    return (d > HALF_ZONE_DEG + 1e-9) & (std != np.asarray(zone, int))


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
