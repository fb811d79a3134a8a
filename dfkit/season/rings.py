"""Confidence-ellipse rings for many fixes at once, for the season store's ``regions`` layer, and
polygons split at the antimeridian for writing.

:func:`dfkit.geometry.ellipse_ring` draws one ellipse exactly (the fix's
azimuthal equidistant plane mapped back with the direct geodesic problem), at
about 60 us per ring. A season has 10^5 fixes, so here the small ellipses
(semi-major axis up to :data:`EXACT_ABOVE_M`) are mapped with the local radii
of curvature of the ellipsoid (meridian M and prime vertical N) and the
second-order terms of the azimuthal equidistant projection's inverse:

    lat = lat0 + y / M - x² tan(lat0) / (2 M N)
    lon = lon0 + x / (N cos lat0) + x y tan(lat0) / (M N cos lat0)

(the spherical series with R replaced by M along the meridian and N across it;
our derivation). What is left is of third order, d³ / R²: checked against the
exact drawing in tests/test_season.py (under 1 cm at 300 m, under 1e-4 of the
axis up to 5 km and 65° latitude). Larger ellipses, and ellipses
within 10° of a pole, are mapped exactly. Radii: e.g. Snyder, J. P. (1987), *Map Projections: A Working Manual*,
USGS Professional Paper 1395, eqs. 4-18 and 4-20.
"""

from __future__ import annotations

import numpy as np

from dfkit import geodesy
from dfkit.conventions import WGS84_A, WGS84_F

#: Ellipses with a larger semi-major axis are drawn exactly (geodesics) [m].
EXACT_ABOVE_M = 5000.0


def ellipse_rings(lat, lon, semi_major_m, semi_minor_m, orientation_deg, n_vertices: int = 36):
    """Closed rings of many ellipses: (lat, lon) arrays of shape (m, n_vertices + 1) [°].

    Longitudes are continuous about each centre (they may pass ±180); split them
    with :func:`dfkit.geometry.split_ring` before writing.
    """
    lat = np.asarray(lat, float)[:, None]
    lon = np.asarray(lon, float)[:, None]
    a = np.asarray(semi_major_m, float)[:, None]
    b = np.asarray(semi_minor_m, float)[:, None]
    az = np.radians(np.asarray(orientation_deg, float))[:, None]
    t = np.linspace(0.0, 2.0 * np.pi, int(n_vertices) + 1)[None, :]
    u = a * np.cos(t)            # along the major axis
    v = b * np.sin(t)
    x = u * np.sin(az) + v * np.cos(az)
    y = u * np.cos(az) - v * np.sin(az)
    e2 = WGS84_F * (2.0 - WGS84_F)
    phi = np.radians(lat)
    w = np.sqrt(1.0 - e2 * np.sin(phi) ** 2)
    n_rad = WGS84_A / w
    m_rad = WGS84_A * (1.0 - e2) / w**3
    tan = np.tan(phi)
    out_lat = lat + np.degrees(y / m_rad - x * x * tan / (2.0 * m_rad * n_rad))
    out_lon = lon + np.degrees(x / (n_rad * np.cos(phi)) + x * y * tan / (m_rad * n_rad * np.cos(phi)))
    big = np.flatnonzero((a[:, 0] > EXACT_ABOVE_M) | (np.abs(lat[:, 0]) > 80.0))
    if len(big):
        plat, plon = geodesy.from_local(np.repeat(lat[big], t.shape[1], axis=1),
                                        np.repeat(lon[big], t.shape[1], axis=1), x[big], y[big])
        out_lat[big] = plat
        out_lon[big] = lon[big] + (plon - lon[big] + 180.0) % 360.0 - 180.0
    out_lat[:, -1] = out_lat[:, 0]
    out_lon[:, -1] = out_lon[:, 0]
    return out_lat, out_lon


def lonlat_parts(geom):
    """A polygonal geometry with continuous longitudes as a MultiPolygon within ±180 (split at the
    antimeridian, RFC 7946 section 3.1.9), exterior rings counter-clockwise; None stays None."""
    import shapely
    from shapely.geometry.polygon import orient

    if geom is None or geom.is_empty:
        return None
    x0, y0, x1, y1 = geom.bounds
    if geom.geom_type == "Polygon" and -180.0 < x0 and x1 < 180.0 and -90.0 <= y0 and y1 <= 90.0 and geom.is_valid:
        return shapely.MultiPolygon([orient(geom, 1.0)]) if geom.area > 0 else None   # its own intersection
    parts = []
    for k in (-1, 0, 1):
        piece = shapely.intersection(geom, shapely.box(-180.0 + 360 * k, -90.0, 180.0 + 360 * k, 90.0))
        if piece.is_empty:
            continue
        piece = shapely.transform(piece, lambda xy, k=k: xy - np.array([360.0 * k, 0.0]))
        parts += [orient(p, 1.0) for p in getattr(piece, "geoms", [piece]) if p.geom_type == "Polygon" and p.area > 0]
    return shapely.MultiPolygon(parts) if parts else None


def lonlat_parts_many(geoms) -> list:
    """:func:`lonlat_parts` of many geometries: polygons strictly within (-180, 180) all at once, the rest one
    by one. A valid polygon strictly within the world box is its own intersection with the box, so it is only
    oriented (exterior counter-clockwise); an invalid one, or one reaching past a pole, goes through the box
    intersection as in :func:`lonlat_parts`, which mends what GEOS can."""
    import shapely

    geoms = np.asarray(list(geoms), dtype=object)
    out = np.full(len(geoms), None, dtype=object)
    if not len(geoms):
        return []
    have = np.array([g is not None for g in geoms], bool)
    poly = np.zeros(len(geoms), bool)
    poly[have] = shapely.get_type_id(geoms[have]) == 3
    idx = np.flatnonzero(poly)
    if len(idx):
        b = shapely.bounds(geoms[idx])
        idx = idx[(b[:, 0] > -180.0) & (b[:, 2] < 180.0) & ~shapely.is_empty(geoms[idx])]
        piece = geoms[idx].copy()
        b = shapely.bounds(piece)
        bad = ~shapely.is_valid(piece) | (b[:, 1] < -90.0) | (b[:, 3] > 90.0)     # the box cuts these
        piece[bad] = shapely.intersection(piece[bad], shapely.box(-180.0, -90.0, 180.0, 90.0))
        ok = (shapely.get_type_id(piece) == 3) & (shapely.area(piece) > 0)
        out[idx[ok]] = shapely.multipolygons(shapely.orient_polygons(piece[ok], exterior_cw=False)[:, None])
        poly[:] = False
        poly[idx[ok]] = True
    for i in np.flatnonzero(~poly):
        out[i] = lonlat_parts(geoms[i])
    return out.tolist()

