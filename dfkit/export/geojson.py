"""GeoJSON (RFC 7946): WGS84 longitude/latitude, counter-clockwise exterior rings, and geometries that
cross the antimeridian split into parts on either side (RFC 7946 section 3.1.9).

Every fix of the input is a feature: a fix without a position (``too_few``, ``parallel`` ...) has a null
geometry (RFC 7946 section 3.2) and keeps its status and reason, so a GIS shows why it failed. Features are
written one chunk at a time, so a season of any size is written with bounded memory.

Feature kinds (property ``kind``): ``fix``, ``region`` (likelihood region, when the fixes carry one) or
``ellipse`` (confidence ellipse), ``error_polygon`` (on request; no probability meaning), ``bearing`` and
``station``.
"""

from __future__ import annotations

import json
from typing import Iterator

import numpy as np
import pandas as pd

from dfkit.cautions import CAUTION
from dfkit.export import shapes
from dfkit.export.atomic import atomic_write
from dfkit.geometry import split_line, split_ring
from dfkit.locate import WITH_POSITION, Fixes

#: Decimal places of written coordinates (1e-7 degree is about 1 cm).
COORD_DECIMALS = 7
#: Properties of an ellipse or region feature (the fix's own row is in its ``fix`` feature).
REGION_PROPERTIES = ["fix", "tag", "status", "level", "semi_major_m", "semi_minor_m", "orientation_deg", "area_m2"]
#: Properties of a station feature.
STATION_PROPERTIES = ["fix", "tag", "line", "time"]


def _records(df: pd.DataFrame) -> list[dict]:
    """Rows as JSON-ready dicts: times as ISO 8601 UTC text, NaN/NaT as null, numpy scalars as Python ones."""
    out = df.copy()
    for c in out.columns:
        col = out[c]
        if isinstance(col.dtype, pd.DatetimeTZDtype):
            text = col.dt.strftime("%Y-%m-%dT%H:%M:%SZ")
            out[c] = text.astype(object).where(col.notna(), None)
        elif col.dtype.kind == "f":
            out[c] = col.astype(object).where(np.isfinite(col.to_numpy(float)), None)
        elif col.dtype.kind in "iub":
            out[c] = col.astype(object)
        elif col.dtype == object or pd.api.types.is_string_dtype(col.dtype):
            out[c] = col.astype(object).where(col.notna(), None)
    return out.to_dict("records")


def _ring_geometry(lat: np.ndarray, lon: np.ndarray) -> dict:
    if shapes.crosses_antimeridian(lon)[0]:
        parts = split_ring(lat, lon)
        if len(parts) == 1:
            return {"type": "Polygon", "coordinates": [parts[0]]}
        return {"type": "MultiPolygon", "coordinates": [[p] for p in parts]}
    ring = np.round(np.column_stack([lon, lat]), COORD_DECIMALS)
    from shapely import LinearRing

    if not LinearRing(ring).is_ccw:
        ring = ring[::-1]
    return {"type": "Polygon", "coordinates": [ring.tolist()]}


def _line_geometry(lat: np.ndarray, lon: np.ndarray) -> dict:
    if shapes.crosses_antimeridian(lon)[0]:
        parts = split_line(lat, lon)
        if len(parts) == 1:
            return {"type": "LineString", "coordinates": parts[0]}
        return {"type": "MultiLineString", "coordinates": parts}
    return {"type": "LineString", "coordinates": np.round(np.column_stack([lon, lat]), COORD_DECIMALS).tolist()}


def _point(lat, lon) -> dict | None:
    if not (np.isfinite(lat) and np.isfinite(lon)):
        return None
    return {"type": "Point", "coordinates": [round(float(lon), COORD_DECIMALS), round(float(lat), COORD_DECIMALS)]}


def _feature(kind: str, props: dict, geometry: dict | None) -> dict:
    p = {"kind": kind}
    p.update(props)
    return {"type": "Feature", "properties": p, "geometry": geometry}


def iter_features(fixes: Fixes, *, lines: bool = True, stations: bool = True,
                  error_polygons: bool = False, chunk: int = shapes.CHUNK) -> Iterator[dict]:
    """Every feature of :func:`to_geojson`, built ``chunk`` rows at a time."""
    t = fixes.table
    for k in range(0, len(t), chunk):
        part = t.iloc[k:k + chunk]
        for rec, la, lo in zip(_records(part), part["lat"].to_numpy(float), part["lon"].to_numpy(float)):
            yield _feature("fix", rec, _point(la, lo) if rec["status"] in WITH_POSITION else None)
    reg = shapes.likelihood_regions(fixes)
    if reg is not None:
        from shapely.geometry import mapping

        props = _records(t[REGION_PROPERTIES[:3]])
        for fid, geom, bounded in zip(reg["fix_id"], reg["geometry"], reg["bounded"]):
            yield _feature("region", {**props[int(fid)], "bounded": bool(bounded)}, mapping(geom))
    else:
        rows = shapes.ellipse_rows(t)
        for k in range(0, len(rows), chunk):
            rings = shapes.ellipse_rings(t, rows[k:k + chunk])
            for rec, la, lo in zip(_records(t.iloc[rings.rows][REGION_PROPERTIES]), rings.lat, rings.lon):
                yield _feature("ellipse", rec, _ring_geometry(la, lo))
    if error_polygons:
        props = _records(t[["fix", "tag"]])
        for i, la, lo in shapes.error_polygons(fixes):
            yield _feature("error_polygon", {**props[i], "note": "no probability meaning"}, _ring_geometry(la, lo))
    b = fixes.bearings
    if lines and len(b):
        for rows, lat, lon in shapes.bearing_paths(b):
            for rec, la, lo in zip(_records(b.iloc[rows]), lat, lon):
                yield _feature("bearing", rec, _line_geometry(la, lo))
    if stations and len(b):
        cols = [c for c in STATION_PROPERTIES if c in b.columns]
        for k in range(0, len(b), chunk):
            part = b.iloc[k:k + chunk]
            for rec, la, lo in zip(_records(part[cols]), part["lat"].to_numpy(float), part["lon"].to_numpy(float)):
                yield _feature("station", rec, _point(la, lo))


def _collection_members(fixes: Fixes) -> dict:
    # a foreign member (RFC 7946 sect. 6.1): what the whole sheet showed (an observer reading off, an SD given too
    # small) travels with the file, beside the caution
    return {"dfkit": {"caution": CAUTION, "source": fixes.source, "warnings": list(getattr(fixes, "warnings", []))}}


def to_geojson(fixes: Fixes, *, lines: bool = True, stations: bool = True, error_polygons: bool = False) -> dict:
    """Fixes, regions, bearing lines and stations as a GeoJSON FeatureCollection (RFC 7946), in memory.

    Every feature has a ``kind`` property (see the module docstring); a fix's other properties are its
    table columns. For large seasons use :func:`write_geojson`, which streams.
    """
    feats = list(iter_features(fixes, lines=lines, stations=stations, error_polygons=error_polygons))
    return {"type": "FeatureCollection", "features": feats, **_collection_members(fixes)}


def write_geojson(fixes: Fixes, path, options=None) -> None:
    """Write the GeoJSON of :func:`to_geojson` to ``path`` atomically, one feature at a time."""
    err = bool(getattr(options, "error_polygons", False))
    dumps = json.JSONEncoder(ensure_ascii=False, allow_nan=False, separators=(",", ":")).encode
    with atomic_write(path) as fh:
        head = json.dumps(_collection_members(fixes), ensure_ascii=False)[1:-1]
        fh.write('{"type":"FeatureCollection",' + head + ',"features":[\n')
        first = True
        for feat in iter_features(fixes, error_polygons=err):
            if not first:
                fh.write(",\n")
            fh.write(dumps(feat))
            first = False
        fh.write("\n]}\n")
