"""Writing results, chosen by the file's extension: CSV tables, GeoJSON (RFC 7946), GPX 1.1, and GIS files
(GeoPackage, KML, FlatGeobuf) through geopandas and pyogrio.

Every writer writes atomically (:mod:`dfkit.export.atomic`) and takes ``(fixes, path, options)`` with a
:class:`WriteOptions`. To add a format, add a module here and an entry in :data:`WRITERS`.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

import numpy as np
import pandas as pd

from dfkit.export.csv import write_table
from dfkit.export.geojson import to_geojson, write_geojson
from dfkit.export.gpx import to_gpx, write_gpx
from dfkit.locate import Fixes


@dataclass(frozen=True)
class WriteOptions:
    """Choices that some formats honour (the others ignore them).

    Attributes
    ----------
    utm : bool
        CSV: add ``utm_zone``, ``easting`` and ``northing`` columns [m] (the fix's standard UTM zone).
    gpx_name_length : int, optional
        GPX: cut waypoint names to this many characters, unique (see :mod:`dfkit.export.gpx`).
    gpx_tz : str, optional
        GPX: write times in this IANA time zone (``Europe/Vienna``) instead of UTC.
    error_polygons : bool
        GeoJSON and GIS files: also write the +/-1 SD error polygons (no probability meaning).
    guard_formulas : bool
        CSV: prefix ``'`` to text cells a spreadsheet would run as formulas (see :mod:`dfkit.export.csv`).
    """

    utm: bool = False
    gpx_name_length: int | None = None
    gpx_tz: str | None = None
    error_polygons: bool = False
    guard_formulas: bool = True


def with_utm(table: pd.DataFrame) -> pd.DataFrame:
    """The fix table with ``utm_zone`` (e.g. ``33N``), ``easting`` and ``northing`` [m] after ``lon``."""
    from dfkit import grids as coords

    lat = table["lat"].to_numpy(float)
    lon = table["lon"].to_numpy(float)
    ok = np.isfinite(lat) & np.isfinite(lon)
    e = np.full(len(table), np.nan)
    n = np.full(len(table), np.nan)
    zone_text = np.full(len(table), "", dtype=object)
    if ok.any():
        zone, south = coords.standard_utm_zone(lat[ok], lon[ok])
        idx = np.flatnonzero(ok)
        for crs, m in coords._zone_groups(zone, south):
            e[idx[m]], n[idx[m]] = coords.latlon_to_projected(crs, lat[ok][m], lon[ok][m])
        zone_text[idx] = [f"{z}{'S' if s else 'N'}" for z, s in zip(zone, south)]
    out = table.copy()
    at = list(out.columns).index("lon") + 1
    out.insert(at, "utm_zone", zone_text)
    out.insert(at + 1, "easting", np.round(e, 2))
    out.insert(at + 2, "northing", np.round(n, 2))
    return out


def _write_csv(fixes: Fixes, path, options=None) -> None:
    table = with_utm(fixes.table) if getattr(options, "utm", False) else fixes.table
    write_table(table, path, guard_formulas=getattr(options, "guard_formulas", True))


def _gis(name):
    def write(fixes, path, options=None):
        from dfkit.export import gis

        getattr(gis, name)(fixes, path, options)
    write.__name__ = name
    return write


#: File extension -> writer of a :class:`~dfkit.locate.Fixes`.
WRITERS = {".csv": _write_csv, ".geojson": write_geojson, ".json": write_geojson, ".gpx": write_gpx,
           ".gpkg": _gis("write_gpkg"), ".kml": _gis("write_kml"), ".fgb": _gis("write_fgb")}


def output_kind(path) -> str | None:
    """The extension of ``path`` if dfkit can write fixes to it, else None."""
    ext = os.path.splitext(os.fspath(path))[1].lower()
    return ext if ext in WRITERS else None


def write_fixes(fixes: Fixes, path, options: WriteOptions | None = None) -> None:
    """Write fixes by the file's extension (see :data:`WRITERS`)."""
    ext = output_kind(path)
    if ext is None:
        raise ValueError(f"cannot write '{path}': use one of {', '.join(sorted(WRITERS))}")
    WRITERS[ext](fixes, path, options or WriteOptions())


__all__ = ["WRITERS", "WriteOptions", "output_kind", "to_geojson", "to_gpx", "with_utm", "write_fixes",
           "write_geojson", "write_gpx", "write_table"]
