"""Geometry for outputs and maps: bearing lines, rings split at the antimeridian, error polygons.

Longitudes are carried unwrapped (continuous) while drawing and split at the
antimeridian only when written, as RFC 7946 section 3.1.9 asks of GeoJSON.
"""

from __future__ import annotations

import numpy as np

from dfkit import geodesy, regions
from dfkit.locate import WITH_POSITION, Fixes


def split_line(lat, lon):
    """Split a line with continuous (unwrapped) longitudes at the antimeridian.

    Returns a list of [lon, lat] coordinate lists, each within [-180, 180].
    """
    lat = np.asarray(lat, float)
    lon = np.asarray(lon, float)
    parts = []
    shift = np.floor((lon + 180.0) / 360.0)   # which 360-degree copy each point lies in
    cur = [[_lon(lon[0] - 360 * shift[0]), lat[0]]]
    for i in range(1, len(lon)):
        if shift[i] != shift[i - 1]:
            edge = 180.0 + 360.0 * min(shift[i], shift[i - 1])
            f = (edge - lon[i - 1]) / (lon[i] - lon[i - 1])
            y = lat[i - 1] + f * (lat[i] - lat[i - 1])
            side = 180.0 if shift[i] > shift[i - 1] else -180.0
            cur.append([side, y])
            parts.append(cur)
            cur = [[-side, y]]
        cur.append([_lon(lon[i] - 360 * shift[i]), lat[i]])
    parts.append(cur)
    return [p for p in parts if len(p) >= 2]


def _lon(x):
    return float(((x + 180.0) % 360.0) - 180.0) if abs(x) > 180.0 else float(x)


split_ring = regions.split_ring     # lives with the regions it mostly splits (a fix's package uses it)


def bearing_line_length(range_m, spread_m):
    """Length to draw a bearing line [m]: a little past the fix when there is one,
    otherwise a few times the spread of the stations (at least 1 km)."""
    range_m = np.asarray(range_m, float)
    fallback = np.maximum(3.0 * np.asarray(spread_m, float), 1000.0)
    return np.where(np.isfinite(range_m), 1.3 * range_m, fallback)


def bearing_lines(fixes: Fixes, n_points=48):
    """Each usable bearing as a densified geodesic: list of (row, lat array, lon array)."""
    b = fixes.bearings
    if not len(b):
        return []
    spread = b.groupby("fix")["lat"].transform(lambda s: (s.max() - s.min()) * 111_000.0).to_numpy(float)
    spread_lon = b.groupby("fix")["lon"].transform(lambda s: (s.max() - s.min()) * 111_000.0).to_numpy(float)
    lengths = bearing_line_length(b["range_m"].to_numpy(float), np.maximum(spread, spread_lon))
    out = []
    for (_, row), length in zip(b.iterrows(), lengths):
        la, lo = geodesy.geodesic_path(row["lat"], row["lon"], row["true_bearing"], length, n_points)
        out.append((row, la, lo))
    return out


def error_polygon_rings(fixes: Fixes):
    """(fix label, (lat, lon)) of the +/-1 SD error polygon of each fix that has one."""
    out = []
    b = fixes.bearings
    g = b["fix_id"].to_numpy(np.int64)
    for i, (_, row) in enumerate(fixes.table.iterrows()):   # row i of the fix table is fix_id i
        if row["status"] not in WITH_POSITION or not np.isfinite(row["sd_deg"]):
            continue
        sel = b[g == i]
        sd = sel["sd"].to_numpy(float)
        sd = np.where(np.isfinite(sd), sd, row["sd_deg"])
        ring = regions.error_polygon(sel["lat"], sel["lon"], sel["true_bearing"], sd, row["lat"], row["lon"])
        if ring is not None:
            out.append((row["fix"], ring))
    return out




def ellipse_ring(row, n_vertices=72):
    """The confidence ellipse of one fix-table row as (lat, lon) arrays, or None when it has none."""
    if not (row["status"] in WITH_POSITION and np.isfinite(row["semi_major_m"])):
        return None
    return regions.ellipse_polygon(row["lat"], row["lon"], row["semi_major_m"], row["semi_minor_m"],
                                   row["orientation_deg"], n_vertices)
