"""GeoJSON (RFC 7946): WGS84 longitude/latitude, counter-clockwise exterior rings, and geometries that
cross the antimeridian split into parts on either side (RFC 7946 section 3.1.9)."""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd

from dfkit.cautions import CAUTION
from dfkit.export.atomic import atomic_write
from dfkit.geometry import bearing_lines, ellipse_ring, error_polygon_rings, split_line, split_ring
from dfkit.locate import WITH_POSITION, Fixes


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

    Every feature has a ``kind`` property: ``fix``, ``ellipse``, ``region`` (the
    likelihood-ratio region, with ``fix``, ``tag``, ``bounded``, ``area_m2``),
    ``bearing``, ``station`` or ``error_polygon``; the other properties are the table columns.
    """
    feats = []
    for _, row in fixes.table.iterrows():
        if row["status"] in WITH_POSITION:
            feats.append({"type": "Feature", "properties": _props(row, "fix"),
                          "geometry": {"type": "Point", "coordinates": [float(row["lon"]), float(row["lat"])]}})
        ring = ellipse_ring(row)
        if ring is not None:
            parts = split_ring(*ring)
            geom = ({"type": "Polygon", "coordinates": [parts[0]]} if len(parts) == 1 else
                    {"type": "MultiPolygon", "coordinates": [[p] for p in parts]})
            feats.append({"type": "Feature", "properties": _props(row, "ellipse"), "geometry": geom})
    for i, ring in fixes.region_rings():       # likelihood-ratio regions (dfkit.regions)
        row = fixes.table.iloc[i]
        parts = split_ring(*ring)
        geom = ({"type": "Polygon", "coordinates": [parts[0]]} if len(parts) == 1 else
                {"type": "MultiPolygon", "coordinates": [[p] for p in parts]})
        bounded = bool(row["region_bounded"])
        props = {"kind": "region", "fix": _clean(row["fix"]), "tag": _clean(row["tag"]), "status": row["status"],
                 "level": _clean(row["level"]), "bounded": bounded, "area_m2": _clean(row["region_area_m2"]),
                 "reach_m": _clean(row["region_reach_m"])}
        if not bounded:
            props["drawn_to_m"] = _clean(float(fixes.regions.draw_range_m[i]))
            props["note"] = "open region: it continues beyond the drawn range"
        feats.append({"type": "Feature", "properties": props, "geometry": geom})
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


def write_geojson(fixes: Fixes, path) -> None:
    """Write :func:`to_geojson` to ``path`` (atomically)."""
    with atomic_write(path) as fh:
        json.dump(to_geojson(fixes), fh, ensure_ascii=False, allow_nan=False)
