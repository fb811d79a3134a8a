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
        CSV: add ``utm_zone`` (number), ``utm_hemisphere`` (north/south), ``utm_band`` (letter), ``easting``
        and ``northing`` [m]: the fix's standard UTM position (see :func:`with_utm`).
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


#: Extensions :func:`dfkit.season.range_files.write_ranges` understands: here, where the ``ranges`` command's help
#: reads them without loading the season modules at every command's start-up.
RANGE_KINDS = (".geojson", ".json", ".gpkg", ".csv")

#: Columns :func:`with_utm` adds after ``lon``.
UTM_COLUMNS = ("utm_zone", "utm_hemisphere", "utm_band", "easting", "northing")


def with_utm(table: pd.DataFrame) -> pd.DataFrame:
    """The fix table with its standard UTM position after ``lon``, in columns no one can misread.

    ``utm_zone`` the zone number (1-60, with the Norway and Svalbard exceptions), ``utm_hemisphere``
    ``north`` or ``south`` (which false northing the northing has), ``utm_band`` the latitude band letter
    (C-X, as GPS receivers and MGRS write it: ``33T``), ``easting`` and ``northing`` [m]. A zone and one
    letter (``30S``) is not written: it reads as the southern hemisphere to some and as band S, north of the
    equator, to others. Fixes without a position (or beyond UTM's 80°S-84°N) have these cells empty. dfkit reads the
    columns back (a zone number with a ``utm_hemisphere`` column is a complete zone).
    """
    from dfkit import grids

    lat = table["lat"].to_numpy(float)
    lon = table["lon"].to_numpy(float)
    ok = np.isfinite(lat) & np.isfinite(lon) & (lat >= -80.0) & (lat <= 84.0)
    m = len(table)
    e = np.full(m, np.nan)
    n = np.full(m, np.nan)
    zone_no = pd.array([pd.NA] * m, dtype="Int64")
    hemi = np.full(m, "", dtype=object)
    band = np.full(m, "", dtype=object)
    if ok.any():
        zone, south = grids.standard_utm_zone(lat[ok], lon[ok])
        idx = np.flatnonzero(ok)
        for crs, sel in grids._zone_groups(zone, south):
            e[idx[sel]], n[idx[sel]] = grids.latlon_to_projected(crs, lat[ok][sel], lon[ok][sel])
        zone_no[idx] = zone
        hemi[idx] = np.where(south, "south", "north")
        k = np.clip(np.floor((lat[ok] + 80.0) / 8.0).astype(int), 0, len(grids.BAND_LETTERS) - 1)   # X: 72-84
        band[idx] = np.array(list(grids.BAND_LETTERS), dtype=object)[k]
    out = table.copy()
    at = list(out.columns).index("lon") + 1
    for name, values in zip(UTM_COLUMNS, (zone_no, hemi, band, np.round(e, 2), np.round(n, 2))):
        out.insert(at, name, values)
        at += 1
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


__all__ = ["UTM_COLUMNS", "WRITERS", "WriteOptions", "output_kind", "to_geojson", "to_gpx", "with_utm",
           "write_fixes",
           "write_geojson", "write_gpx", "write_table"]
