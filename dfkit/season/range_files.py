"""Writing home ranges: GeoJSON (RFC 7946), GeoPackage (layer ``home_ranges``) or CSV (no geometry)."""

from __future__ import annotations

import json
import os
import sqlite3

import numpy as np
import pandas as pd

from dfkit.cautions import CAUTION
from dfkit.export import RANGE_KINDS
from dfkit.export.atomic import atomic_write
from dfkit.export.csv import write_table
from dfkit.season import gpkg
from dfkit.season.rings import lonlat_parts



def write_ranges(ranges, path) -> None:
    """Write :class:`~dfkit.homerange.HomeRanges` by the file's extension (atomically)."""
    ext = os.path.splitext(os.fspath(path))[1].lower()
    if ext not in RANGE_KINDS:
        raise ValueError(f"cannot write home ranges to '{path}': use one of {', '.join(RANGE_KINDS)}")
    table = ranges.table
    attrs = table.drop(columns=["geometry"])
    if ext == ".csv":
        write_table(attrs, path)
        return
    geoms = [lonlat_parts(g) for g in table["geometry"]]
    if ext == ".gpkg":
        _write_gpkg(attrs, geoms, path)
        return
    import shapely

    feats = []
    for (_, row), g in zip(attrs.iterrows(), geoms):
        props = {k: (None if isinstance(v, float) and not np.isfinite(v) else
                     v.item() if isinstance(v, np.generic) else v) for k, v in row.items()}
        feats.append({"type": "Feature", "properties": props,
                      "geometry": None if g is None else json.loads(shapely.to_geojson(g))})
    with atomic_write(path) as fh:
        json.dump({"type": "FeatureCollection", "features": feats, "dfkit": {"caution": CAUTION}}, fh,
                  ensure_ascii=False, allow_nan=False)


def _write_gpkg(attrs: pd.DataFrame, geoms, path) -> None:
    with gpkg.atomic_database(path) as tmp:
        conn = sqlite3.connect(tmp, isolation_level=None)
        try:
            conn.execute("BEGIN")
            gpkg.initialise(conn)
            types = {c: gpkg.sql_type(attrs[c]) for c in attrs.columns}
            gpkg.create_features(conn, "home_ranges", "MULTIPOLYGON", types, "home ranges. " + CAUTION)
            cols = ["geom"] + list(types)
            values = [gpkg.geometry_blobs(geoms)] + [gpkg.column_values(attrs[c]) for c in types]
            conn.executemany(f"INSERT INTO home_ranges ({', '.join(gpkg.quote(c) for c in cols)}) VALUES "
                             f"({', '.join('?' * len(cols))})", zip(*values))
            present = [g for g in geoms if g is not None]
            if present:
                b = np.array([g.bounds for g in present])
                gpkg.touch(conn, "home_ranges", [b[:, 0].min(), b[:, 1].min(), b[:, 2].max(), b[:, 3].max()])
            conn.execute("COMMIT")
        finally:
            conn.close()
