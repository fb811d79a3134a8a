"""Writing results, chosen by the file's extension: CSV tables, GeoJSON (RFC 7946) and GPX 1.1.

Every writer writes atomically (:mod:`dfkit.export.atomic`). To add a format,
add a module here and an entry in :data:`WRITERS`.
"""

from __future__ import annotations

import os

from dfkit.export.csv import write_table
from dfkit.export.geojson import to_geojson, write_geojson
from dfkit.export.gpx import to_gpx, write_gpx
from dfkit.locate import Fixes


def _write_csv(fixes: Fixes, path, *, guard_formulas: bool = True) -> None:
    write_table(fixes.table, path, guard_formulas=guard_formulas)


#: File extension -> writer of a :class:`~dfkit.locate.Fixes`.
WRITERS = {".csv": _write_csv, ".geojson": write_geojson, ".json": write_geojson, ".gpx": write_gpx}


def output_kind(path) -> str | None:
    """The extension of ``path`` if dfkit can write fixes to it, else None."""
    ext = os.path.splitext(os.fspath(path))[1].lower()
    return ext if ext in WRITERS else None


def write_fixes(fixes: Fixes, path, *, guard_formulas: bool = True) -> None:
    """Write fixes by the file's extension (see :data:`WRITERS`); ``guard_formulas`` applies to CSV only."""
    ext = output_kind(path)
    if ext is None:
        raise ValueError(f"cannot write '{path}': use one of {', '.join(sorted(WRITERS))}")
    if ext == ".csv":
        WRITERS[ext](fixes, path, guard_formulas=guard_formulas)
    else:
        WRITERS[ext](fixes, path)


__all__ = ["WRITERS", "output_kind", "to_geojson", "to_gpx", "write_fixes", "write_geojson", "write_gpx",
           "write_table"]
