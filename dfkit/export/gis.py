"""GIS files through geopandas and pyogrio (GDAL): GeoPackage, KML and FlatGeobuf.

Layers, the same in every format (WGS84 longitude/latitude, EPSG:4326):

``fixes``
    Every fix of the input, with all columns of the fix table. A fix without a position keeps its row, with
    an empty (null) geometry and its status and reason.
``regions``
    The likelihood region of each fix when the fixes carry one, otherwise its confidence ellipse
    (``kind`` says which), with the fix's label, tag, status and the region's size.
``bearings``
    Each usable bearing as its geodesic line from the station, a little past the fix.
``stations``
    Where each bearing was taken.
``error_polygons``
    Only on request (no probability meaning).

A GeoPackage holds all layers in one file; KML holds them as folders of one document, each fix with a
readable description; FlatGeobuf holds one layer per file, so ``x.fgb`` gets the fixes and the other layers
go beside it as ``x.regions.fgb``, ``x.bearings.fgb`` and ``x.stations.fgb``. Files are written beside the
target and renamed into place, so a failed run leaves no partial file under the final name.
"""

from __future__ import annotations

import html
import os

import numpy as np
import pandas as pd

from dfkit.cautions import CAUTION
from dfkit.export import shapes
from dfkit.export.atomic import atomic_path
from dfkit.export.gpx import xml_text
from dfkit.geometry import split_line, split_ring
from dfkit.locate import Fixes

CRS = "EPSG:4326"
REGION_COLUMNS = ["fix", "tag", "status", "level", "semi_major_m", "semi_minor_m", "orientation_deg", "area_m2"]
STATION_COLUMNS = ["fix", "tag", "line", "time"]


def _polygon(lat, lon):
    from shapely.geometry import MultiPolygon, Polygon

    if shapes.crosses_antimeridian(lon)[0]:
        parts = [Polygon(r) for r in split_ring(lat, lon)]
        return parts[0] if len(parts) == 1 else MultiPolygon(parts)
    return Polygon(np.column_stack([lon, lat]))


def _line(lat, lon):
    from shapely.geometry import LineString, MultiLineString

    if shapes.crosses_antimeridian(lon)[0]:
        parts = split_line(lat, lon)
        return LineString(parts[0]) if len(parts) == 1 else MultiLineString(parts)
    return LineString(np.column_stack([lon, lat]))


def layers(fixes: Fixes, *, error_polygons: bool = False) -> dict:
    """The layers as GeoDataFrames: ``fixes``, ``regions``, ``bearings``, ``stations`` (and ``error_polygons``)."""
    import geopandas as gpd
    import shapely

    t = fixes.table
    pos = shapes.has_position(t)
    pts = shapely.points(t["lon"].to_numpy(float), t["lat"].to_numpy(float))
    pts = np.where(pos, pts, None)
    out = {"fixes": gpd.GeoDataFrame(t.copy(), geometry=list(pts), crs=CRS)}

    reg = shapes.likelihood_regions(fixes)
    if reg is not None:
        rows = reg["fix_id"].to_numpy(int)
        rt = t.iloc[rows][REGION_COLUMNS].reset_index(drop=True)
        rt.insert(0, "kind", "region")
        rt["bounded"] = reg["bounded"].to_numpy(bool)
        geoms = list(reg["geometry"])
    else:
        rings = shapes.ellipse_rings(t)
        rt = t.iloc[rings.rows][REGION_COLUMNS].reset_index(drop=True)
        rt.insert(0, "kind", "ellipse")
        geoms = [_polygon(la, lo) for la, lo in zip(rings.lat, rings.lon)]
    out["regions"] = gpd.GeoDataFrame(rt, geometry=geoms, crs=CRS)

    b = fixes.bearings
    parts, geoms = [], []
    for rows, lat, lon in shapes.bearing_paths(b):
        parts.append(rows)
        geoms.extend(_line(la, lo) for la, lo in zip(lat, lon))
    order = np.concatenate(parts) if parts else np.zeros(0, int)
    out["bearings"] = gpd.GeoDataFrame(b.iloc[order].reset_index(drop=True), geometry=geoms, crs=CRS)
    cols = [c for c in STATION_COLUMNS if c in b.columns]
    out["stations"] = gpd.GeoDataFrame(b[cols].reset_index(drop=True),
                                       geometry=list(shapely.points(b["lon"].to_numpy(float),
                                                                    b["lat"].to_numpy(float))), crs=CRS)
    if error_polygons:
        ep = shapes.error_polygons(fixes)
        et = t.iloc[[i for i, _, _ in ep]][["fix", "tag"]].reset_index(drop=True)
        et["note"] = "no probability meaning"
        out["error_polygons"] = gpd.GeoDataFrame(et, geometry=[_polygon(la, lo) for _, la, lo in ep], crs=CRS)
    return out


def _plain(gdf):
    """Columns GDAL writes everywhere: times as ISO 8601 UTC text, object columns as text."""
    gdf = gdf.copy()
    for c in gdf.columns:
        if c == gdf.geometry.name:
            continue
        col = gdf[c]
        if isinstance(col.dtype, pd.DatetimeTZDtype):
            gdf[c] = col.dt.strftime("%Y-%m-%dT%H:%M:%SZ").astype(object).where(col.notna(), None)
        elif col.dtype == object or pd.api.types.is_string_dtype(col.dtype):
            gdf[c] = col.astype(object).map(lambda v: None if v is None or (isinstance(v, float) and np.isnan(v)) else str(v))
    return gdf


def write_gpkg(fixes: Fixes, path, options=None) -> None:
    """A GeoPackage with layers ``fixes``, ``regions``, ``bearings``, ``stations`` (and ``error_polygons``)."""
    import pyogrio

    lay = layers(fixes, error_polygons=bool(getattr(options, "error_polygons", False)))
    with atomic_path(path) as tmp:
        for name, gdf in lay.items():
            pyogrio.write_dataframe(_plain(gdf), tmp, layer=name, driver="GPKG", promote_to_multi=name != "fixes"
                                    and name != "stations", layer_options={"DESCRIPTION": CAUTION})


def fix_description(r) -> str:
    """A fix's description for KML: plain text, HTML-escaped (viewers show a description as HTML)."""
    lines = [f"fix {r['fix']}" + (f", tag {r['tag']}" if r["tag"] else ""), f"status: {r['status']}"]
    if r["reason"]:
        lines.append(f"why: {r['reason']}")
    if pd.notna(r["time"]):
        lines.append(f"time (UTC): {r['time'].strftime('%Y-%m-%d %H:%M:%S')}")
    if np.isfinite(r["lat"]):
        lines.append(f"lat, lon: {r['lat']:.6f}, {r['lon']:.6f}")
    lines.append(f"bearings: {r['n_bearings']} ({r['n_used']} used), method {r['method']}")
    if np.isfinite(r["semi_major_m"]):
        lines.append(f"{r['level'] * 100:g}% ellipse: semi-axes {r['semi_major_m']:.0f} m and "
                     f"{r['semi_minor_m']:.0f} m, major axis {r['orientation_deg']:.0f} deg")
    lines.append(CAUTION)
    return "<br>".join(html.escape(xml_text(x)) for x in lines)


def write_kml(fixes: Fixes, path, options=None) -> None:
    """KML: one folder per layer; each fix a placemark named by its label with a readable description."""
    import pyogrio

    lay = layers(fixes, error_polygons=bool(getattr(options, "error_polygons", False)))
    t = fixes.table
    with atomic_path(path) as tmp:
        for name, gdf in lay.items():
            gdf = _plain(gdf)
            for c in gdf.columns:
                if c != gdf.geometry.name and (gdf[c].dtype == object or pd.api.types.is_string_dtype(gdf[c].dtype)):
                    gdf[c] = gdf[c].map(lambda v: None if v is None else xml_text(v))
            if name == "fixes":
                gdf.insert(0, "Name", [xml_text(v) for v in t["fix"]])
                gdf.insert(1, "Description", [fix_description(r) for _, r in t.iterrows()])
            elif name == "regions":
                gdf.insert(0, "Name", gdf["fix"])
                gdf.insert(1, "Description", [html.escape(f"{k} of fix {f}: status {s}") for k, f, s in
                                              zip(gdf["kind"], gdf["fix"], gdf["status"])])
            pyogrio.write_dataframe(gdf, tmp, layer=name, driver="KML", append=name != "fixes")


def write_fgb(fixes: Fixes, path, options=None) -> None:
    """FlatGeobuf: the fixes in ``path``; the other layers beside it as ``<stem>.<layer>.fgb``."""
    import pyogrio

    lay = layers(fixes, error_polygons=bool(getattr(options, "error_polygons", False)))
    stem = os.path.splitext(os.fspath(path))[0]
    for name, gdf in lay.items():
        target = path if name == "fixes" else f"{stem}.{name}.fgb"
        with atomic_path(target) as tmp:
            # FlatGeobuf's spatial index cannot hold null geometries (failed fixes): leave it out then
            nulls = bool(gdf.geometry.isna().any())
            pyogrio.write_dataframe(_plain(gdf), tmp, layer=name, driver="FlatGeobuf",
                                    promote_to_multi=name not in ("fixes", "stations"),
                                    layer_options={"SPATIAL_INDEX": "NO"} if nulls else None)
