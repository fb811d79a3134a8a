"""Writing results: CSV tables, GeoJSON (RFC 7946) and GPX 1.1.

GeoJSON follows RFC 7946: WGS84 longitude/latitude, counter-clockwise exterior
rings, and geometries that cross the antimeridian split into parts on either
side (RFC 7946 section 3.1.9).
"""

from __future__ import annotations

import json
import math
import os
from xml.sax.saxutils import escape

import numpy as np
import pandas as pd

from dfkit import geodesy, regions
from dfkit.locate import WITH_POSITION, Fixes

#: Short caution carried in files meant for the field.
CAUTION = ("dfkit estimates; it is not for life-safety search. Respect licences, permits, private land "
           "and local rules; never take bearings while driving.")

_ROUNDING = {"lat": 7, "lon": 7, "true_bearing": 3, "declination": 3, "convergence": 4, "declination_sd": 3,
             "semi_major_m": 1, "semi_minor_m": 1, "orientation_deg": 1, "area_m2": 0, "sd_deg": 3,
             "crossing_deg": 1, "span_min": 1, "max_residual_deg": 2, "kappa": 1, "residual_deg": 3,
             "weight": 3, "range_m": 1}


def _iso(series: pd.Series) -> pd.Series:
    """UTC times as ISO 8601 text ending in Z; '' where missing."""
    values = series.dt.tz_convert("UTC").dt.tz_localize(None).to_numpy(dtype="datetime64[s]")
    text = np.char.add(np.datetime_as_string(values, unit="s"), "Z")
    return pd.Series(np.where(np.isnat(values), "", text), index=series.index, dtype=object)


def _for_csv(df: pd.DataFrame) -> pd.DataFrame:
    out = df.copy()
    for c in out.columns:
        if isinstance(out[c].dtype, pd.DatetimeTZDtype):
            out[c] = _iso(out[c])
        elif c in _ROUNDING:
            out[c] = out[c].astype(float).round(_ROUNDING[c])
    return out


def write_table(df: pd.DataFrame, path) -> None:
    """A table as UTF-8 CSV: ISO 8601 UTC times, sensible rounding, empty cells for missing values."""
    _for_csv(df).to_csv(path, index=False, lineterminator="\n")


def write_fixes(fixes: Fixes, path, *, bearings_path=None) -> None:
    """Write fixes by the file's extension: .csv, .geojson/.json or .gpx."""
    ext = os.path.splitext(os.fspath(path))[1].lower()
    if ext == ".csv":
        write_table(fixes.table, path)
    elif ext in (".geojson", ".json"):
        with open(path, "w", encoding="utf-8") as fh:
            json.dump(to_geojson(fixes), fh, ensure_ascii=False, allow_nan=False)
    elif ext == ".gpx":
        with open(path, "w", encoding="utf-8") as fh:
            fh.write(to_gpx(fixes))
    else:
        raise ValueError(f"cannot write '{path}': use a .csv, .geojson or .gpx file name")
    if bearings_path:
        write_table(fixes.bearings, bearings_path)


# --------------------------------------------------------------------------- geometry helpers

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


def split_ring(lat, lon):
    """Split a polygon ring with continuous longitudes at the antimeridian.

    Returns a list of rings ([lon, lat] lists, counter-clockwise, closed).
    """
    from shapely.geometry import Polygon, box
    from shapely.geometry.polygon import orient

    poly = Polygon(np.column_stack([lon, lat]))
    if not poly.is_valid:
        poly = poly.buffer(0)
    rings = []
    for k in range(-2, 3):
        part = poly.intersection(box(-180.0 + 360 * k, -90.0, 180.0 + 360 * k, 90.0))
        if part.is_empty:
            continue
        geoms = getattr(part, "geoms", [part])
        for gpart in geoms:
            if gpart.geom_type != "Polygon" or gpart.area == 0:
                continue
            gpart = orient(gpart, 1.0)
            coords = np.asarray(gpart.exterior.coords)
            coords[:, 0] -= 360 * k
            rings.append([[float(x), float(y)] for x, y in coords])
    return rings


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


def _clean(v):
    if isinstance(v, (float, np.floating)):
        return None if not math.isfinite(v) else float(v)
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, (np.bool_,)):
        return bool(v)
    if isinstance(v, pd.Timestamp):
        return None if pd.isna(v) else v.strftime("%Y-%m-%dT%H:%M:%SZ")
    if v is pd.NaT:
        return None
    return v


def _props(row: pd.Series, kind: str) -> dict:
    d = {"kind": kind}
    d.update({k: _clean(v) for k, v in row.items()})
    return d


def to_geojson(fixes: Fixes, *, lines=True, stations=True, error_polygons=False) -> dict:
    """Fixes, ellipses, bearing lines and stations as a GeoJSON FeatureCollection (RFC 7946).

    Every feature has a ``kind`` property: ``fix``, ``ellipse``, ``bearing``,
    ``station`` or ``error_polygon``; the other properties are the table columns.
    """
    feats = []
    for _, row in fixes.table.iterrows():
        if row["status"] in WITH_POSITION:
            feats.append({"type": "Feature", "properties": _props(row, "fix"),
                          "geometry": {"type": "Point", "coordinates": [float(row["lon"]), float(row["lat"])]}})
        ring = _ellipse_ring(row)
        if ring is not None:
            parts = split_ring(*ring)
            geom = ({"type": "Polygon", "coordinates": [parts[0]]} if len(parts) == 1 else
                    {"type": "MultiPolygon", "coordinates": [[p] for p in parts]})
            feats.append({"type": "Feature", "properties": _props(row, "ellipse"), "geometry": geom})
    if error_polygons:
        for fix_label, ring in error_polygon_rings(fixes):
            parts = split_ring(*ring)
            feats.append({"type": "Feature", "properties": {"kind": "error_polygon", "fix": fix_label,
                                                            "note": "no probability meaning"},
                          "geometry": {"type": "MultiPolygon", "coordinates": [[p] for p in parts]}})
    if lines:
        for row, la, lo in bearing_lines(fixes):
            parts = split_line(la, lo)
            geom = ({"type": "LineString", "coordinates": parts[0]} if len(parts) == 1 else
                    {"type": "MultiLineString", "coordinates": parts})
            feats.append({"type": "Feature", "properties": _props(row, "bearing"), "geometry": geom})
    if stations:
        for _, row in fixes.bearings.iterrows():
            feats.append({"type": "Feature", "properties": _props(row, "station"),
                          "geometry": {"type": "Point", "coordinates": [float(row["lon"]), float(row["lat"])]}})
    return {"type": "FeatureCollection", "features": feats,
            "dfkit": {"caution": CAUTION, "source": fixes.source}}


def _ellipse_ring(row):
    if not (row["status"] in WITH_POSITION and np.isfinite(row["semi_major_m"])):
        return None
    return regions.ellipse_polygon(row["lat"], row["lon"], row["semi_major_m"], row["semi_minor_m"],
                                   row["orientation_deg"])


def error_polygon_rings(fixes: Fixes):
    """(fix label, (lat, lon)) of the +/-1 SD error polygon of each fix that has one."""
    out = []
    b = fixes.bearings
    for _, row in fixes.table.iterrows():
        if row["status"] not in WITH_POSITION or not np.isfinite(row["sd_deg"]):
            continue
        sel = b[b["fix"] == row["fix"]]
        sd = sel["sd"].to_numpy(float)
        sd = np.where(np.isfinite(sd), sd, row["sd_deg"])
        ring = regions.error_polygon(sel["lat"], sel["lon"], sel["true_bearing"], sd, row["lat"], row["lon"])
        if ring is not None:
            out.append((row["fix"], ring))
    return out


def to_gpx(fixes: Fixes) -> str:
    """GPX 1.1 with one waypoint per fix that has a position (to walk to it with a hand-held GPS)."""
    out = ['<?xml version="1.0" encoding="UTF-8"?>',
           '<gpx version="1.1" creator="dfkit" xmlns="http://www.topografix.com/GPX/1/1">',
           f"<metadata><desc>{escape(CAUTION)}</desc></metadata>"]
    for _, r in fixes.table.iterrows():
        if r["status"] not in WITH_POSITION:
            continue
        desc = f"status {r['status']}; {r['n_bearings']} bearings; method {r['method']}"
        if np.isfinite(r["semi_major_m"]):
            desc += (f"; {r['level'] * 100:g}% ellipse {r['semi_major_m']:.0f} x {r['semi_minor_m']:.0f} m "
                     f"at {r['orientation_deg']:.0f} deg")
        if r["reason"]:
            desc += f"; {r['reason']}"
        out.append(f'<wpt lat="{r["lat"]:.7f}" lon="{r["lon"]:.7f}">')
        if pd.notna(r["time"]):
            out.append(f"<time>{r['time'].strftime('%Y-%m-%dT%H:%M:%SZ')}</time>")
        out.append(f"<name>{escape(str(r['fix']))}</name><desc>{escape(desc)}</desc>"
                   f"<type>{escape(r['status'])}</type></wpt>")
    out.append("</gpx>")
    return "\n".join(out) + "\n"
