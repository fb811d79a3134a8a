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


#: A column "looks like fix labels" when nearly every row has a short cell, its values repeat, and equal values
#: come in runs of a fix's length: at least :data:`LABEL_RUN_MIN` and at most :data:`LABEL_RUN_MAX` rows on
#: average (a fix has 2 to a few dozen bearings; our own rule for a warning's wording, common practice, no
#: source). An observer or weather column runs much longer, a measurement hardly repeats.
LABEL_RUN_MIN, LABEL_RUN_MAX = 2.0, 30.0
#: Longest cell of such a column [characters] and the share of rows that must have one.
LABEL_MAX_CHARS, LABEL_FILLED = 20, 0.8


#: Endings of a position column of another place (``beacon_lat``, ``spot_easting``): never fix labels, however
#: their values run.
_PLACE_ENDINGS = ("_lat", "_lon", "_latitude", "_longitude", "_easting", "_northing", "_utm_zone", "_mgrs")


def label_like_columns(table, columns, used=()) -> list[str]:
    """Columns of a sheet without fix labels that look like them, each with a sentence saying why.

    Parameters
    ----------
    table : pandas.DataFrame
        The sheet's cells (text, or floats for columns read as numbers).
    columns : list of str
        The sheet's canonical column names.
    used : collection of str
        Columns read for something else (positions, dates) and never suggested.

    Returns
    -------
    list of str
        One sentence per such column, those whose name says "fix", "label", "id" or "no" first.
    """
    from dfkit.io.sheet import KNOWN_COLUMNS

    skip = set(KNOWN_COLUMNS) | set(used) | {"line", "line_in_sheet", "date"}
    found = []
    for c in columns:
        if c in skip or c not in table.columns or not len(table) or c.endswith(_PLACE_ENDINGS):
            continue
        cells = table[c].astype(str).str.strip().to_numpy(dtype=object)
        filled = cells != ""
        if filled.mean() < LABEL_FILLED:
            continue
        vals = cells[filled]
        if max(len(v) for v in vals) > LABEL_MAX_CHARS:
            continue
        distinct = len(set(vals.tolist()))
        runs = 1 + int((vals[1:] != vals[:-1]).sum())
        mean = len(vals) / runs
        if distinct < 2 or distinct * LABEL_RUN_MIN > len(vals) or not LABEL_RUN_MIN <= mean <= LABEL_RUN_MAX:
            continue
        first = list(dict.fromkeys(vals.tolist()))[:3]
        hinted = any(w in c for w in ("fix", "label", "id", "no", "nr", "#", "set", "group"))
        found.append((not hinted, f"column '{c}' looks like fix labels ({distinct} values such as "
                      f"{', '.join(repr(v) for v in first)}, each on a run of {mean:.1f} rows on average) but was not "
                      "read as them: name it 'fix' (or 'fix id') to group the bearings by it"))
    return [text for _, text in sorted(found, key=lambda f: f[0])]
