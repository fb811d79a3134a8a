"""A plan for the next bearing as GeoJSON (RFC 7946) and CSV.

The GeoJSON holds the fix as ``dfkit fix`` writes it (``fix``, ``ellipse``,
``bearing``, ``station`` features), plus one ``spot`` Point per candidate spot
with its rank and expected area, a ``cell`` Polygon per grid spot (for shading
a surface of expected area) and, when there is no estimate yet, a
``range_band`` LineString along each bearing over the ranges that were
considered. A spot the spots file gave but that was rejected keeps its
feature, with a null geometry and the reason in ``note`` (RFC 7946 section
3.2). The collection's ``dfkit`` member carries the plan's basis, notes and
cautions.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd

from dfkit import geodesy
from dfkit.cautions import CAUTION, PLAN_CAUTION
from dfkit.export.atomic import atomic_write
from dfkit.export.csv import write_table
from dfkit.export.geojson import to_geojson
from dfkit.geometry import split_line, split_ring
from dfkit.planning import Plan

#: Decimals kept in the CSV of a plan.
_ROUNDING = {
    "expected_area_m2": 0,
    "point_area_m2": 0,
    "area_ratio": 4,
    "distance_m": 1,
    "azimuth_true_deg": 1,
    "expected_bearing_true_deg": 1,
    "crossing_deg": 1,
    "from_last_m": 1,
    "from_last_true_deg": 1,
    "east_m": 1,
    "north_m": 1,
    "next_sd_deg": 3,
}


def _value(v):
    """A table cell as a JSON value: NaN, NA, NaT as null, numpy scalars as Python ones, times as ISO text."""
    if v is None or v is pd.NA or v is pd.NaT:
        return None
    if isinstance(v, (bool, np.bool_)):
        return bool(v)
    if isinstance(v, (int, np.integer)):
        return int(v)
    if isinstance(v, (float, np.floating)):
        return float(v) if np.isfinite(v) else None
    if isinstance(v, pd.Timestamp):
        return v.strftime("%Y-%m-%dT%H:%M:%SZ")
    return v if isinstance(v, str) else str(v)


def _props(row, kind):
    d = {str(k): _value(v) for k, v in row.items()}
    d["kind"] = kind
    return d


def plan_meta(plan: Plan) -> dict:
    """What the plan rests on, as plain JSON values."""
    r = plan.fix_row
    return {
        k: _value(v)
        for k, v in {
            "fix": r["fix"],
            "tag": r["tag"],
            "status": r["status"],
            "reason": r["reason"],
            "basis": plan.basis,
            "level": plan.level,
            "current_area_m2": plan.current_area_m2,
            "sd_deg": plan.sd_deg,
            "sd_source": plan.sd_source,
            "next_sd_deg": plan.next_sd_deg,
            "grid_step_m": plan.grid_step_m,
            "reference_lat": plan.reference_lat,
            "reference_lon": plan.reference_lon,
        }.items()
    } | {"norths": {k: float(v) for k, v in plan.norths.items()}, "notes": list(plan.notes)}


def cell_rings(plan: Plan):
    """(row position, [lon, lat] rings) of the grid cell around each grid spot; empty without a grid."""
    if not plan.grid_step_m or not len(plan.table):
        return []
    h = plan.grid_step_m / 2.0
    t = plan.table
    x = t["east_m"].to_numpy(float)
    y = t["north_m"].to_numpy(float)
    cx = np.stack([x - h, x + h, x + h, x - h, x - h], axis=1)
    cy = np.stack([y - h, y - h, y + h, y + h, y - h], axis=1)
    lat, lon = geodesy.from_local(plan.reference_lat, plan.reference_lon, cx, cy)
    lon = plan.reference_lon + (lon - plan.reference_lon + 180.0) % 360.0 - 180.0
    return [(i, split_ring(lat[i], lon[i])) for i in range(len(t))]


def plan_geojson(plan: Plan) -> dict:
    """The plan as a GeoJSON FeatureCollection (see the module docstring for the feature kinds)."""
    gj = to_geojson(plan.fixes)
    feats = gj["features"]
    t = plan.table
    for i, parts in cell_rings(plan):
        props = _props(t.iloc[i], "cell")
        geom = (
            {"type": "Polygon", "coordinates": [parts[0]]}
            if len(parts) == 1
            else {"type": "MultiPolygon", "coordinates": [[p] for p in parts]}
        )
        feats.append({"type": "Feature", "properties": props, "geometry": geom})
    for lat0, lon0, az, r0, r1 in plan.bands:
        la, lo = geodesy.geodesic_path(lat0, lon0, az, r1, 64)
        keep = np.linspace(0.0, r1, 64) >= r0
        parts = split_line(la[keep], lo[keep])
        geom = (
            {"type": "LineString", "coordinates": parts[0]}
            if len(parts) == 1
            else {"type": "MultiLineString", "coordinates": parts}
        )
        feats.append(
            {
                "type": "Feature",
                "properties": {
                    "kind": "range_band",
                    "fix": plan.fix_row["fix"],
                    "tag": plan.fix_row["tag"],
                    "from_m": r0,
                    "to_m": r1,
                },
                "geometry": geom,
            }
        )
    for _, row in t.iterrows():
        placed = np.isfinite(float(row["lat"])) and np.isfinite(float(row["lon"]))
        feats.append(
            {
                "type": "Feature",
                "properties": _props(row, "spot"),  # a rejected spot: null geometry
                "geometry": {"type": "Point", "coordinates": [float(row["lon"]), float(row["lat"])]}
                if placed
                else None,
            }
        )
    gj["dfkit"] = {
        "caution": CAUTION,
        "plan_caution": PLAN_CAUTION,
        "source": plan.fixes.source,
        "plan": plan_meta(plan),
    }
    return gj


def write_plan_geojson(plan: Plan, path) -> None:
    """Write :func:`plan_geojson` to ``path`` (atomically)."""
    with atomic_write(path) as fh:
        json.dump(plan_geojson(plan), fh, ensure_ascii=False, allow_nan=False)


def write_plan_csv(plan: Plan, path) -> None:
    """The ranked spots as CSV, with the plan's caution in a last column."""
    t = plan.table.copy()
    rounding = dict(_ROUNDING)
    for north in plan.norths:      # the directions in the sheet's own north, and the offset they took
        rounding.update({f"{d}_{north}_deg": 1 for d in ("azimuth", "expected_bearing", "from_last")})
        rounding["declination_deg" if north == "magnetic" else "convergence_deg"] = 2
    for c, nd in rounding.items():
        if c in t.columns:
            t[c] = t[c].astype(float).round(nd)
    t["caution"] = PLAN_CAUTION
    write_table(t, path)
