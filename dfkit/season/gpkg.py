"""Writing GeoPackage files with the standard library's sqlite3: the parts of the standard dfkit uses.

A GeoPackage is an SQLite database laid out as the OGC GeoPackage Encoding
Standard says (OGC 12-128r18, version 1.3.1, 2021; clause numbers below are of
that document):

* ``PRAGMA application_id`` = 0x47504B47 ('GPKG') and ``PRAGMA user_version`` =
  10300 for version 1.3 (clause 1.1.1.1.1, requirements 2 and 3);
* ``gpkg_spatial_ref_sys`` with the rows for EPSG:4326 and the two undefined
  systems (-1 Cartesian, 0 geographic) (clause 1.1.2, requirements 10 and 11);
* ``gpkg_contents``: one row per user table, ``features`` or ``attributes``
  (clause 1.1.3);
* ``gpkg_geometry_columns``: the geometry column of each feature table
  (clause 2.1.5);
* geometry values as GeoPackage binary: the header ``GP``, version 0, a flags
  byte (bit 0 byte order, bits 1-3 envelope kind, bit 4 empty), the ``srs_id``
  and an optional envelope, followed by ISO WKB (clause 2.1.3, table 6);
  coordinates are x = longitude, y = latitude for EPSG:4326.

Column types are those of table 1 of the standard (INTEGER, REAL, TEXT, BOOLEAN,
DATETIME, BLOB); DATETIME values are ISO 8601 UTC text ``YYYY-MM-DDTHH:MM:SS.SSSZ``.

Nothing here knows about fixes or bearings; :mod:`dfkit.season.store` does.
"""

from __future__ import annotations

import contextlib
import os
import sqlite3
import struct

import numpy as np
import pandas as pd

#: 'GPKG' as a 32-bit integer (requirement 2).
APPLICATION_ID = 0x47504B47
#: GeoPackage 1.3 (requirement 3: 1 03 00).
USER_VERSION = 10300
#: The only coordinate system dfkit writes: WGS84 longitude/latitude.
WGS84_SRS_ID = 4326

_WGS84_WKT = ('GEOGCS["WGS 84",DATUM["WGS_1984",SPHEROID["WGS 84",6378137,298.257223563,'
              'AUTHORITY["EPSG","7030"]],AUTHORITY["EPSG","6326"]],PRIMEM["Greenwich",0,'
              'AUTHORITY["EPSG","8901"]],UNIT["degree",0.0174532925199433,AUTHORITY["EPSG","9122"]],'
              'AUTHORITY["EPSG","4326"]]')

_CORE_DDL = """
CREATE TABLE gpkg_spatial_ref_sys (
  srs_name TEXT NOT NULL,
  srs_id INTEGER NOT NULL PRIMARY KEY,
  organization TEXT NOT NULL,
  organization_coordsys_id INTEGER NOT NULL,
  definition TEXT NOT NULL,
  description TEXT
);
CREATE TABLE gpkg_contents (
  table_name TEXT NOT NULL PRIMARY KEY,
  data_type TEXT NOT NULL,
  identifier TEXT UNIQUE,
  description TEXT DEFAULT '',
  last_change DATETIME NOT NULL DEFAULT (strftime('%Y-%m-%dT%H:%M:%fZ','now')),
  min_x DOUBLE, min_y DOUBLE, max_x DOUBLE, max_y DOUBLE,
  srs_id INTEGER,
  CONSTRAINT fk_gc_r_srs_id FOREIGN KEY (srs_id) REFERENCES gpkg_spatial_ref_sys(srs_id)
);
CREATE TABLE gpkg_geometry_columns (
  table_name TEXT NOT NULL,
  column_name TEXT NOT NULL,
  geometry_type_name TEXT NOT NULL,
  srs_id INTEGER NOT NULL,
  z TINYINT NOT NULL,
  m TINYINT NOT NULL,
  CONSTRAINT pk_geom_cols PRIMARY KEY (table_name, column_name),
  CONSTRAINT uk_gc_table_name UNIQUE (table_name),
  CONSTRAINT fk_gc_tn FOREIGN KEY (table_name) REFERENCES gpkg_contents(table_name),
  CONSTRAINT fk_gc_srs FOREIGN KEY (srs_id) REFERENCES gpkg_spatial_ref_sys (srs_id)
);
"""


@contextlib.contextmanager
def atomic_database(path):
    """A temporary file name beside ``path`` to build a database in; on success it replaces ``path``.

    A failure or a kill leaves at most a ``.<name>.<pid>.part`` file, never a half-written result.
    """
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    os.makedirs(folder, exist_ok=True)
    tmp = os.path.join(folder, f".{os.path.basename(path)}.{os.getpid()}.part")
    for leftover in (tmp, tmp + "-journal"):
        if os.path.exists(leftover):
            os.unlink(leftover)
    try:
        yield tmp
        os.replace(tmp, path)
    except BaseException:
        for leftover in (tmp, tmp + "-journal"):
            if os.path.exists(leftover):
                os.unlink(leftover)
        raise


def quote(name: str) -> str:
    """An SQL identifier, double-quoted (any text is a safe column name this way)."""
    return '"' + str(name).replace('"', '""') + '"'


def initialise(conn: sqlite3.Connection) -> None:
    """Make an empty SQLite database a GeoPackage (inside the caller's transaction)."""
    conn.execute(f"PRAGMA application_id = {APPLICATION_ID}")
    conn.execute(f"PRAGMA user_version = {USER_VERSION}")
    for stmt in _CORE_DDL.split(";"):
        if stmt.strip():
            conn.execute(stmt)
    conn.executemany(
        "INSERT INTO gpkg_spatial_ref_sys VALUES (?, ?, ?, ?, ?, ?)",
        [("Undefined cartesian SRS", -1, "NONE", -1, "undefined", "undefined Cartesian coordinate reference system"),
         ("Undefined geographic SRS", 0, "NONE", 0, "undefined", "undefined geographic coordinate reference system"),
         ("WGS 84 geodetic", WGS84_SRS_ID, "EPSG", 4326, _WGS84_WKT,
          "longitude/latitude coordinates in decimal degrees on the WGS 84 spheroid")])


def is_geopackage(conn: sqlite3.Connection) -> bool:
    """True when the database says it is a GeoPackage (application id 'GPKG')."""
    return conn.execute("PRAGMA application_id").fetchone()[0] == APPLICATION_ID


def create_features(conn, table: str, geometry_type: str, columns: dict[str, str], description: str = "") -> None:
    """Create a feature table with ``fid``, a ``geom`` column and ``columns`` (name -> GeoPackage type)."""
    cols = ", ".join(f"{quote(c)} {t}" for c, t in columns.items())
    conn.execute(f"CREATE TABLE {quote(table)} (fid INTEGER PRIMARY KEY AUTOINCREMENT NOT NULL, "
                 f"geom {geometry_type}{', ' + cols if cols else ''})")
    conn.execute("INSERT INTO gpkg_contents (table_name, data_type, identifier, description, srs_id) "
                 "VALUES (?, 'features', ?, ?, ?)", (table, table, description, WGS84_SRS_ID))
    conn.execute("INSERT INTO gpkg_geometry_columns VALUES (?, 'geom', ?, ?, 0, 0)",
                 (table, geometry_type, WGS84_SRS_ID))


def create_attributes(conn, table: str, columns: dict[str, str], description: str = "",
                      primary_key: str = "fid") -> None:
    """Create an attribute (non-spatial) table registered in ``gpkg_contents``."""
    cols = ", ".join(f"{quote(c)} {t}" for c, t in columns.items())
    conn.execute(f"CREATE TABLE {quote(table)} ({quote(primary_key)} INTEGER PRIMARY KEY AUTOINCREMENT NOT NULL"
                 f"{', ' + cols if cols else ''})")
    conn.execute("INSERT INTO gpkg_contents (table_name, data_type, identifier, description) "
                 "VALUES (?, 'attributes', ?, ?)", (table, table, description))


def table_columns(conn, table: str) -> list[str]:
    return [r[1] for r in conn.execute(f"PRAGMA table_info({quote(table)})")]


def touch(conn, table: str, bounds=None) -> None:
    """Record a change to ``table`` in ``gpkg_contents`` (time, and the bounding box of a feature table)."""
    if bounds is None:
        conn.execute("UPDATE gpkg_contents SET last_change = strftime('%Y-%m-%dT%H:%M:%fZ','now') "
                     "WHERE table_name = ?", (table,))
    else:
        conn.execute("UPDATE gpkg_contents SET last_change = strftime('%Y-%m-%dT%H:%M:%fZ','now'), "
                     "min_x = ?, min_y = ?, max_x = ?, max_y = ? WHERE table_name = ?",
                     (*(None if not np.isfinite(v) else float(v) for v in bounds), table))


# ------------------------------------------------------------------ values

def sql_type(series: pd.Series) -> str:
    """The GeoPackage column type for a pandas column."""
    dt = series.dtype
    if isinstance(dt, pd.DatetimeTZDtype) or pd.api.types.is_datetime64_any_dtype(dt):
        return "DATETIME"
    if pd.api.types.is_bool_dtype(dt):
        return "BOOLEAN"
    if pd.api.types.is_integer_dtype(dt):
        return "INTEGER"
    if pd.api.types.is_float_dtype(dt):
        return "REAL"
    return "TEXT"


def datetime_text(series: pd.Series) -> np.ndarray:
    """UTC times as GeoPackage DATETIME text (``2026-06-01T05:42:15.000Z``); None where missing."""
    s = pd.to_datetime(series, utc=True)
    values = s.dt.tz_localize(None).to_numpy(dtype="datetime64[ms]")
    text = np.char.add(np.datetime_as_string(values, unit="ms"), "Z").astype(object)
    text[np.isnat(values)] = None
    return text


def column_values(series: pd.Series) -> list:
    """A pandas column as Python values sqlite3 can bind (None for missing)."""
    kind = sql_type(series)
    if kind == "DATETIME":
        return datetime_text(series).tolist()
    if kind == "BOOLEAN":
        return series.astype(int).tolist()
    if kind == "INTEGER":
        return series.astype("int64").tolist()
    if kind == "REAL":
        arr = series.to_numpy(dtype=float)
        out = arr.astype(object)
        out[~np.isfinite(arr)] = None
        return out.tolist()
    return series.to_numpy(dtype=object, na_value=None).tolist()


# ------------------------------------------------------------------ geometry blobs

_POINT = np.dtype([("magic", "S2"), ("version", "u1"), ("flags", "u1"), ("srs", "<i4"),
                   ("order", "u1"), ("wkb_type", "<u4"), ("x", "<f8"), ("y", "<f8")])


def point_blobs(lon, lat, srs_id: int = WGS84_SRS_ID) -> list:
    """GeoPackage binary points (little-endian, no envelope, as requirement 19 allows); None where NaN."""
    lon = np.asarray(lon, float)
    lat = np.asarray(lat, float)
    rec = np.zeros(len(lon), _POINT)
    rec["magic"] = b"GP"
    rec["flags"] = 0b0000_0001          # little-endian, no envelope, not empty
    rec["srs"] = srs_id
    rec["order"] = 1                    # WKB little-endian
    rec["wkb_type"] = 1                 # Point
    rec["x"] = lon
    rec["y"] = lat
    buf = rec.tobytes()
    size = _POINT.itemsize
    ok = np.isfinite(lon) & np.isfinite(lat)
    return [buf[i * size:(i + 1) * size] if ok[i] else None for i in range(len(lon))]


def geometry_blobs(geoms, srs_id: int = WGS84_SRS_ID) -> list:
    """GeoPackage binary for shapely geometries (little-endian, with their [minx, maxx, miny, maxy]
    envelope); None for missing geometries."""
    import shapely

    geoms = np.asarray(geoms, dtype=object)
    out: list = [None] * len(geoms)
    present = np.array([g is not None for g in geoms], bool)
    if not present.any():
        return out
    sel = geoms[present]
    wkb = shapely.to_wkb(sel, byte_order=1, flavor="iso")
    bounds = shapely.bounds(sel)          # minx, miny, maxx, maxy
    empty = shapely.is_empty(sel)
    for k, i in enumerate(np.flatnonzero(present)):
        if empty[k]:
            out[i] = b"GP\x00" + bytes([0b0001_0001]) + struct.pack("<i", srs_id) + wkb[k]
        else:
            mnx, mny, mxx, mxy = bounds[k]
            out[i] = (b"GP\x00\x03" + struct.pack("<i4d", srs_id, mnx, mxx, mny, mxy) + wkb[k])
    return out


def blob_wkb(blob: bytes) -> bytes:
    """The WKB part of a GeoPackage geometry blob (after the header and envelope)."""
    flags = blob[3]
    env = (flags >> 1) & 0b111
    size = {0: 0, 1: 32, 2: 48, 3: 48, 4: 64}[env]
    return bytes(blob[8 + size:])


def geometries(blobs) -> np.ndarray:
    """Shapely geometries from GeoPackage blobs (None stays None)."""
    import shapely

    out = np.full(len(blobs), None, dtype=object)
    idx = [i for i, b in enumerate(blobs) if b is not None]
    if idx:
        out[idx] = shapely.from_wkb([blob_wkb(blobs[i]) for i in idx])
    return out
