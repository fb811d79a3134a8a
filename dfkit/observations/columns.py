"""Sheet-level checks of the columns: a sheet without a bearing or a position column is one
message (the whole input cannot be used), not one error per row."""

from __future__ import annotations

from dfkit.io.sheet import COLUMN_ALIASES
from dfkit.observations.positions import position_columns
from dfkit.problems import SheetError


def _aliases(canon: str) -> str:
    names = sorted(a for a, c in COLUMN_ALIASES.items() if c == canon)
    return f" (also read: {', '.join(names)})" if names else ""


def check_columns(columns, source: str, *, stations: bool, track: bool) -> None:
    """Raise :class:`SheetError` when the sheet cannot give a bearing and a position for any row.

    Parameters
    ----------
    columns : list of str
        The sheet's (canonical) column names.
    source : str
        Name of the sheet for the message.
    stations, track : bool
        Whether a stations file / a GPS track was given.
    """
    cols = list(columns)
    name = source or "the sheet"
    found = ", ".join(c for c in cols if not c.startswith("column_")) or "no named columns"
    if "bearing" not in cols:
        raise SheetError(f"{name}: no bearing column. Found: {found}. Expected a column named 'bearing'"
                         f"{_aliases('bearing')}; is the header row the first row?")
    pos = position_columns(cols)
    if ("lat" in pos) != ("lon" in pos):
        have, miss = ("lat", "lon") if "lat" in pos else ("lon", "lat")
        raise SheetError(f"{name}: a {have} column but no {miss} column. Found: {found}")
    utm = [k for k in ("utm_zone", "easting", "northing") if k in pos]
    if utm and ("easting" in pos) != ("northing" in pos) or (("easting" in pos) and "utm_zone" not in pos):
        raise SheetError(f"{name}: UTM positions need utm_zone, easting and northing columns; found {', '.join(utm)}")
    complete = {"lat", "lon"} <= set(pos) or "mgrs" in pos or "utm_zone" in pos or "position" in pos or \
        ("station" in pos and stations) or (track and "time" in cols)
    if complete:
        return
    if "station" in pos:
        raise SheetError(f"{name}: positions are given as station labels, but no stations file: add --stations FILE "
                         "(a station column plus lat/lon, UTM or MGRS)")
    if track:
        raise SheetError(f"{name}: a GPS track was given, but the sheet has no time column to look positions up. "
                         f"Found: {found}")
    raise SheetError(f"{name}: no position columns. Found: {found}. Expected lat and lon (or both in one position "
                     "column), utm_zone with easting and northing, mgrs, station (with --stations FILE), or time (with "
                     "--track FILE.gpx)")
