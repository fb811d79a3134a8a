"""The shapes every output draws, built vectorised in chunks: fix points, regions, bearing lines, stations.

One place computes the geometry that GeoJSON, GeoPackage, KML, FlatGeobuf and the maps write, so that they
agree. Everything is on the WGS84 ellipsoid:

* a confidence ellipse is drawn in its fix's local azimuthal equidistant plane and mapped back exactly
  (a geodesic from the fix for each vertex, :func:`dfkit.geodesy.forward`);
* a bearing line is the geodesic from its station along the true bearing, a little past the fix
  (:func:`dfkit.geometry.bearing_line_length`), densified so that straight segments between vertices stay
  within a few metres of it;
* a *region* is the fix's likelihood region when :class:`~dfkit.locate.Fixes` carries one (attribute
  ``regions``: a table with ``fix_id``, ``geometry`` as a shapely (Multi)Polygon in longitude/latitude and,
  optionally, ``bounded``), otherwise its confidence ellipse.

Work is done ``chunk`` fixes or bearings at a time, so writers can stream a season of any size with bounded
memory.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterator

import numpy as np
import pandas as pd

from dfkit import geodesy, regions
from dfkit.geometry import bearing_line_length
from dfkit.locate import WITH_POSITION, Fixes

#: Vertices of a drawn confidence ellipse.
ELLIPSE_VERTICES = 72
#: Rows handled at a time by the streaming builders.
CHUNK = 20_000
#: Longest straight piece of a drawn bearing line [m]: the geodesic strays from the straight piece by
#: about L^2/(8 R) tan(lat) at most, 0.2 m for 10 km at 45 degrees.
BEARING_STEP_M = 10_000.0


@dataclass(frozen=True)
class Rings:
    """Closed rings of many shapes: ``lat``/``lon`` of shape (k, n) [°], longitudes unwrapped (continuous
    across the antimeridian); ``rows`` are the fix-table rows they belong to."""

    rows: np.ndarray
    lat: np.ndarray
    lon: np.ndarray


def has_position(table: pd.DataFrame) -> np.ndarray:
    """Rows of a fix table that carry a position."""
    return table["status"].isin(WITH_POSITION).to_numpy() & np.isfinite(table["lat"].to_numpy(float))


def ellipse_rows(table: pd.DataFrame) -> np.ndarray:
    """Rows of a fix table that have a confidence ellipse."""
    a = table["semi_major_m"].to_numpy(float)
    return np.flatnonzero(has_position(table) & np.isfinite(a) & (a > 0))


def ellipse_rings(table: pd.DataFrame, rows=None, n_vertices: int = ELLIPSE_VERTICES) -> Rings:
    """Confidence ellipses of fix-table ``rows`` (default: every row with one) as closed rings."""
    rows = ellipse_rows(table) if rows is None else np.asarray(rows, int)
    sub = table.iloc[rows]
    lat0 = sub["lat"].to_numpy(float)[:, None]
    lon0 = sub["lon"].to_numpy(float)[:, None]
    a = sub["semi_major_m"].to_numpy(float)[:, None]
    b = sub["semi_minor_m"].to_numpy(float)[:, None]
    az = np.radians(sub["orientation_deg"].to_numpy(float))[:, None]
    t = np.linspace(0.0, 2.0 * np.pi, int(n_vertices) + 1)[None, :]
    u, v = a * np.cos(t), b * np.sin(t)
    x = u * np.sin(az) + v * np.cos(az)
    y = u * np.cos(az) - v * np.sin(az)
    lat, lon = geodesy.forward(lat0, lon0, np.degrees(np.arctan2(x, y)), np.hypot(x, y))
    lon = lon0 + (lon - lon0 + 180.0) % 360.0 - 180.0
    lat[:, -1], lon[:, -1] = lat[:, 0], lon[:, 0]
    return Rings(rows, lat, lon)


def likelihood_regions(fixes: Fixes) -> pd.DataFrame | None:
    """The fixes' likelihood regions (``fix_id``, ``geometry``, ``bounded``) when they have them, else None."""
    reg = getattr(fixes, "regions", None)
    if reg is None or len(reg) == 0:
        return None
    reg = pd.DataFrame(reg)
    if "fix_id" not in reg.columns or "geometry" not in reg.columns:
        return None
    if "bounded" not in reg.columns:
        reg["bounded"] = True
    return reg


def bearing_lengths(bearings: pd.DataFrame) -> np.ndarray:
    """How far to draw each bearing line [m] (see :func:`dfkit.geometry.bearing_line_length`)."""
    if not len(bearings):
        return np.zeros(0)
    g = bearings["fix_id"].to_numpy(np.int64)
    lat = bearings["lat"].to_numpy(float)
    lon = bearings["lon"].to_numpy(float)
    m = int(g.max()) + 1
    spans = []
    for v in (lat, lon):
        lo = np.full(m, np.inf)
        hi = np.full(m, -np.inf)
        np.minimum.at(lo, g, v)
        np.maximum.at(hi, g, v)
        spans.append((hi - lo)[g] * 111_000.0)
    spread = np.maximum(spans[0], spans[1] * np.cos(np.radians(lat)))
    return bearing_line_length(bearings["range_m"].to_numpy(float), spread)


def bearing_paths(bearings: pd.DataFrame, step_m: float = BEARING_STEP_M) -> Iterator[tuple[np.ndarray, np.ndarray,
                                                                                            np.ndarray]]:
    """Bearing lines as geodesics, grouped by their number of vertices: yields (rows, lat, lon) with lat, lon of
    shape (k, n), longitudes unwrapped."""
    if not len(bearings):
        return
    length = bearing_lengths(bearings)
    n_pts = np.clip(np.ceil(length / step_m).astype(int) + 1, 2, 256)
    lat0 = bearings["lat"].to_numpy(float)
    lon0 = bearings["lon"].to_numpy(float)
    az = bearings["true_bearing"].to_numpy(float)
    for n in np.unique(n_pts):
        for rows in _chunks(np.flatnonzero(n_pts == n)):
            s = length[rows, None] * np.linspace(0.0, 1.0, n)[None, :]
            lat, lon = geodesy.forward(lat0[rows, None], lon0[rows, None], az[rows, None], s)
            lon = lon0[rows, None] + (lon - lon0[rows, None] + 180.0) % 360.0 - 180.0
            lon = np.degrees(np.unwrap(np.radians(lon), axis=1))
            yield rows, lat, lon


def error_polygons(fixes: Fixes) -> list[tuple[int, np.ndarray, np.ndarray]]:
    """(fix row, lat, lon) of the +/-1 SD error polygon of each fix that has one (no probability meaning).

    Bearings are matched to their fix by ``fix_id``, so two tags that use the same fix labels stay apart.
    """
    t = fixes.table
    b = fixes.bearings
    if not len(b):
        return []
    g = b["fix_id"].to_numpy(np.int64)
    order = np.argsort(g, kind="stable")
    starts = np.searchsorted(g[order], np.arange(len(t) + 1))
    sd_b = b["sd"].to_numpy(float)
    out = []
    for i in np.flatnonzero(has_position(t) & np.isfinite(t["sd_deg"].to_numpy(float))):
        sel = order[starts[i]:starts[i + 1]]
        if len(sel) < 2:
            continue
        sd = np.where(np.isfinite(sd_b[sel]), sd_b[sel], t["sd_deg"].iat[i])
        ring = regions.error_polygon(b["lat"].to_numpy(float)[sel], b["lon"].to_numpy(float)[sel],
                                     b["true_bearing"].to_numpy(float)[sel], sd, t["lat"].iat[i], t["lon"].iat[i])
        if ring is not None:
            out.append((int(i), np.asarray(ring[0]), np.asarray(ring[1])))
    return out


def crosses_antimeridian(lon: np.ndarray) -> np.ndarray:
    """Per ring (row of ``lon``, unwrapped): does it leave [-180, 180]?"""
    lon = np.atleast_2d(lon)
    return (np.nanmax(lon, axis=1) > 180.0) | (np.nanmin(lon, axis=1) < -180.0)


def _chunks(rows: np.ndarray, size: int = CHUNK):
    for k in range(0, len(rows), size):
        yield rows[k:k + size]
