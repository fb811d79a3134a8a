"""Geodesics on the WGS84 ellipsoid, vectorised.

Wraps PROJ's implementation of Karney's algorithms (C. F. F. Karney, "Algorithms
for geodesics", J. Geodesy 87, 43-55, 2013, doi:10.1007/s00190-012-0578-z)
through :class:`pyproj.Geod`, and adds the few helpers dfkit needs:

* a *local plane* about a point: the ellipsoidal azimuthal equidistant
  projection, built from the inverse and direct problems, so that distance and
  azimuth from the centre are exact (this is how PROJ defines ``+proj=aeqd``);
* centroids of groups of points (through 3-D unit vectors, so they work across
  the antimeridian and near the poles);
* densified geodesic lines for maps.
"""

from __future__ import annotations

import numpy as np
import pyproj

from dfkit.conventions import WGS84_A, remainder, wrap180  # noqa: F401 (remainder: used as geodesy.remainder)


#: The WGS84 geodesic engine (stateless; safe to share).
GEOD = pyproj.Geod(ellps="WGS84")


def inverse(lat1, lon1, lat2, lon2):
    """Geodesic inverse problem, vectorised.

    Returns
    -------
    azi1 : ndarray
        Forward azimuth at point 1 towards point 2. [°, 0..360)
    azi_back : ndarray
        Azimuth at point 2 pointing back towards point 1. [°, 0..360)
    dist : ndarray
        Geodesic distance. [m]
    """
    lat1, lon1, lat2, lon2 = np.broadcast_arrays(*(np.asarray(v, float) for v in (lat1, lon1, lat2, lon2)))
    az12, az21, dist = GEOD.inv(lon1.ravel(), lat1.ravel(), lon2.ravel(), lat2.ravel())
    shape = lat1.shape
    az12, az21, dist = (np.asarray(v).reshape(shape) for v in (az12, az21, dist))
    return remainder(az12, 360.0), remainder(az21, 360.0), np.asarray(dist)


def forward(lat, lon, azi_deg, dist_m):
    """Geodesic direct problem: the point ``dist_m`` from (lat, lon) along ``azi_deg``.

    Returns lat2, lon2 [°] (lon2 in [-180, 180)).
    """
    lat = np.asarray(lat, float)
    lon = np.asarray(lon, float)
    azi = np.broadcast_to(np.asarray(azi_deg, float), np.broadcast_shapes(lat.shape, np.shape(azi_deg),
                                                                          np.shape(dist_m)))
    shape = azi.shape
    lat_b = np.broadcast_to(lat, shape).ravel()
    lon_b = np.broadcast_to(lon, shape).ravel()
    dist = np.broadcast_to(np.asarray(dist_m, float), shape).ravel()
    lon2, lat2, _ = GEOD.fwd(lon_b, lat_b, azi.ravel(), dist)
    return np.asarray(lat2).reshape(shape), wrap180(np.asarray(lon2, float)).reshape(shape)


def to_local(lat0, lon0, lat, lon):
    """Points to the local plane (east x, north y [m]) centred at (lat0, lon0).

    Ellipsoidal azimuthal equidistant: distance and azimuth from the centre are exact.
    """
    az, _, d = inverse(lat0, lon0, lat, lon)
    a = np.radians(az)
    return d * np.sin(a), d * np.cos(a)


def from_local(lat0, lon0, x, y):
    """Local plane coordinates (east x, north y [m]) about (lat0, lon0) back to lat, lon [°]."""
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    return forward(lat0, lon0, np.degrees(np.arctan2(x, y)), np.hypot(x, y))


def group_centroid(lat, lon, group, n_groups, weights=None):
    """Centroid of each group of points, via the mean of unit vectors on the sphere.

    Good as a starting point and a plane centre; it handles the antimeridian and
    the poles, unlike averaging longitudes.
    """
    phi = np.radians(np.asarray(lat, float))
    lam = np.radians(np.asarray(lon, float))
    # w cos(phi) formed once for x and y; without weights w = 1, and 1 * v is v bit for bit (no product needed)
    if weights is None:
        wc, ws = np.cos(phi), np.sin(phi)
    else:
        w = np.asarray(weights, float)
        wc, ws = w * np.cos(phi), w * np.sin(phi)
    x = np.bincount(group, wc * np.cos(lam), n_groups)
    y = np.bincount(group, wc * np.sin(lam), n_groups)
    z = np.bincount(group, ws, n_groups)
    return np.degrees(np.arctan2(z, np.hypot(x, y))), np.degrees(np.arctan2(y, x))


def unit_vectors(lat, lon):
    """Unit vectors of points on the sphere [deg in]."""
    p, q = np.radians(np.asarray(lat, float)), np.radians(np.asarray(lon, float))
    cp = np.cos(p)
    return cp * np.cos(q), cp * np.sin(q), np.sin(p)


def chord_distance_m(lat1, lon1, lat2, lon2):
    """Straight-line (chord) distance on a sphere of radius WGS84 a [m]: cheap, within 0.5 % of the
    geodesic distance for short spans; for thresholds, not for results."""
    return chord_from_unit(unit_vectors(lat1, lon1), lat2, lon2)


def chord_from_unit(unit1, lat2, lon2):
    """:func:`chord_distance_m` from the first points' unit vectors (:func:`unit_vectors`), for points measured
    from again and again: the same arithmetic."""
    x1, y1, z1 = unit1
    x2, y2, z2 = unit_vectors(lat2, lon2)
    return WGS84_A * np.sqrt((x1 - x2) ** 2 + (y1 - y2) ** 2 + (z1 - z2) ** 2)


def group_spread_m(lat, lon, group, n_groups):
    """Largest chord distance [m] of a point from its group's centroid: :func:`chord_distance_m` from
    :func:`group_centroid`, the same arithmetic, with each point's unit vector worked out once."""
    return group_centroid_spread(lat, lon, group, n_groups)[2]


def group_centroid_spread(lat, lon, group, n_groups):
    """:func:`group_centroid` (without weights) and :func:`group_spread_m` of the same points at once: (centroid
    lat, lon, spread [m]) per group, each point's unit vector worked out once for both (the same arithmetic as
    each: the same bits)."""
    x, y, z = unit_vectors(lat, lon)
    X, Y, Z = (np.bincount(group, v, n_groups) for v in (x, y, z))
    c_lat, c_lon = np.degrees(np.arctan2(Z, np.hypot(X, Y))), np.degrees(np.arctan2(Y, X))
    cx, cy, cz = unit_vectors(c_lat, c_lon)
    d = WGS84_A * np.sqrt((cx[group] - x) ** 2 + (cy[group] - y) ** 2 + (cz[group] - z) ** 2)
    spread = np.zeros(n_groups)
    np.maximum.at(spread, group, d)
    return c_lat, c_lon, spread


def geodesic_path(lat, lon, azi_deg, length_m, n_points=64):
    """Densified geodesic from (lat, lon) along ``azi_deg`` for ``length_m``.

    Returns lat, lon arrays of shape (n_points,) (longitudes unwrapped so that the
    path is continuous; see :func:`dfkit.geometry.split_line` for splitting at the antimeridian).
    """
    s = np.linspace(0.0, float(length_m), int(n_points))
    lon2, lat2, _ = GEOD.fwd(np.full(s.shape, float(lon)), np.full(s.shape, float(lat)),
                             np.full(s.shape, float(azi_deg)), s)
    lon2 = np.degrees(np.unwrap(np.radians(np.asarray(lon2))))
    return np.asarray(lat2), lon2


def geodesic_between(lat1, lon1, lat2, lon2, n_points=32):
    """Densified geodesic between two points (unwrapped longitudes)."""
    az, _, d = inverse(lat1, lon1, lat2, lon2)
    return geodesic_path(lat1, lon1, float(az), float(d), n_points)
