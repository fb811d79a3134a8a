"""Candidate spots for the next bearing: read from a file (any position form of a sheet) or laid on a grid."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from dfkit import geodesy
from dfkit.io import read_table
from dfkit.io.sheet import KNOWN_COLUMNS
from dfkit.observations import read_stations
from dfkit.problems import Problem, SheetError

#: Largest number of candidate spots in one plan (a grid beyond it needs a coarser step).
#: Columns of :attr:`Plan.table`, in order (the spots file's own extra columns follow).
PLAN_COLUMNS = [
    "rank",
    "spot",
    "lat",
    "lon",
    "expected_area_m2",
    "area_ratio",
    "distance_m",
    "azimuth_true_deg",
    "expected_bearing_true_deg",
    "crossing_deg",
    "point_area_m2",
    "from_last_m",
    "from_last_true_deg",
    "east_m",
    "north_m",
    "line",
    "note",
    "fix",
    "tag",
    "fix_status",
    "basis",
    "level",
    "next_sd_deg",
]

MAX_SPOTS = 20_000

#: Column names a spots file cannot carry under their own name (they become ``spot_<name>``).
RESERVED_COLUMNS = set(PLAN_COLUMNS) | {"kind", "caution", "score", "declination_deg", "convergence_deg"} | {
    f"{d}_{n}_deg" for d in ("azimuth", "expected_bearing", "from_last") for n in ("magnetic", "grid")
}


@dataclass
class Spots:
    """Candidate spots: ``table`` (``spot``, ``lat``, ``lon``, ``line``, and the file's own extra
    columns), the rows that could not be used (``problems``, each with line, column and reason) and,
    of those, the ones with a label (``rejected``: ``spot``, ``line``, ``reason``), so that a plan
    can list them too."""

    table: pd.DataFrame
    problems: list[Problem] = field(default_factory=list)
    source: str = ""
    rejected: pd.DataFrame = field(
        default_factory=lambda: pd.DataFrame({"spot": [], "line": [], "reason": []})
    )


def read_spots(path, *, stations=None) -> Spots:
    """Read a spots file: a ``spot`` label (or ``name``) plus a position in any of the sheet's forms.

    Positions are lat/lon, UTM (``utm_zone``, ``easting``, ``northing``), ``mgrs``,
    or a ``station`` label from a stations file; every rejected row is reported with
    its line, column and reason, in the same words as for a bearing sheet.

    Parameters
    ----------
    path : str or path-like
        The spots file (CSV; delimiter, encoding and header rules as for a sheet).
    stations : str or path-like, optional
        A stations file, for spots given by a ``station`` label.

    Raises
    ------
    SheetError
        The file cannot be read, or has no ``spot`` (or ``name``) column.
    """
    raw = read_table(path)
    t = raw.table
    label_col = "spot" if "spot" in t.columns else ("name" if "name" in t.columns else None)
    if label_col is None:
        raise SheetError(
            f"{raw.source}: a spots file needs a 'spot' column (a label for each spot) and a "
            f"position; found columns {', '.join(raw.columns)}"
        )
    st_table, st_problems = (None, [])
    if stations is not None:
        st_table, st_problems = read_stations(stations)
    lat, lon, bad, problems = _validate_positions(raw, st_table)
    labels = t[label_col].to_numpy(dtype=object)
    lines = t["line"].to_numpy()
    extra: list[Problem] = []
    missing = labels == ""
    for i in np.flatnonzero(missing & ~bad):
        extra.append(Problem(int(lines[i]), label_col, f"{label_col} label is missing", "error", raw.source))
    bad = bad | missing
    dup = pd.Series(labels).duplicated(keep="first").to_numpy() & ~missing
    for i in np.flatnonzero(dup & ~bad):
        extra.append(
            Problem(
                int(lines[i]),
                label_col,
                f"spot '{labels[i]}' is listed twice; the first is used",
                "error",
                raw.source,
            )
        )
    bad = bad | dup
    keep = ~bad
    table = pd.DataFrame(
        {
            "spot": labels[keep].astype(str),
            "lat": lat[keep],
            "lon": lon[keep],
            "line": lines[keep].astype(int),
        }
    )
    position_cols = {"lat", "lon", "utm_zone", "easting", "northing", "mgrs", "station"}
    for c in raw.columns:
        if c in (label_col, "line") or c in position_cols or (c in KNOWN_COLUMNS and c != "note"):
            continue
        # the file's own columns are carried; names a plan uses itself get a 'spot_' prefix
        name = f"spot_{c}" if c in RESERVED_COLUMNS else c
        table[name] = t[c].to_numpy(dtype=object)[keep]
    problems = sorted(list(st_problems) + problems + extra, key=lambda p: (p.source != raw.source, p.line))
    first_error = {}
    for p in problems:
        if p.severity == "error" and p.source == raw.source and p.line not in first_error:
            first_error[p.line] = f"line {p.line}" + (f", {p.column}" if p.column else "") + f": {p.message}"
    out = bad & ~missing
    rejected = pd.DataFrame(
        {
            "spot": labels[out].astype(str),
            "line": lines[out].astype(int),
            "reason": [first_error.get(int(x), "rejected") for x in lines[out]],
        }
    )
    return Spots(table=table.reset_index(drop=True), problems=problems, source=raw.source, rejected=rejected)


def _validate_positions(raw, stations):
    """The sheet's own position rules, applied to a spots file (the public position parser of
    :mod:`dfkit.observations`): same forms, same checks and messages as a bearing sheet."""
    from dfkit.observations import parse_positions
    from dfkit.observations.rowlog import RowLog

    lines = raw.table["line"].to_numpy()
    log = RowLog(lines, raw.source)
    log.problems.extend(raw.problems)
    pre = {p.line for p in raw.problems if p.severity == "error" and p.line}
    skip = np.isin(lines, list(pre))
    log.bad |= skip
    pos = parse_positions(raw.table, source=raw.source, decimal_comma=raw.decimal_comma, stations=stations,
                          log=log, skip=skip)
    return pos.lat, pos.lon, log.bad.copy(), list(log.problems)


def grid_spots(lat0, lon0, around_m, step_m=None) -> pd.DataFrame:
    """Spots on a square grid within ``around_m`` of (lat0, lon0), laid in its local plane.

    The grid is laid in the exact azimuthal-equidistant plane about the centre
    (distance and azimuth from the centre are exact) and covers the disc of radius
    ``around_m``; the centre itself is a spot.

    Parameters
    ----------
    lat0, lon0 : float
        Centre, WGS84. [°]
    around_m : float
        Radius of the disc of spots. [m]
    step_m : float, optional
        Grid spacing; default ``around_m / 10``. [m]

    Returns
    -------
    pandas.DataFrame
        ``spot`` (``E+500 N-1000``: metres east and north of the centre), ``lat``,
        ``lon``, ``east_m``, ``north_m``.
    """
    if not (around_m is not None and np.isfinite(around_m) and around_m > 0):
        raise ValueError(f"around_m={around_m!r} must be a positive distance in metres")
    step = around_m / 10.0 if step_m is None else float(step_m)
    if not (np.isfinite(step) and step > 0):
        raise ValueError(f"step_m={step_m!r} must be a positive distance in metres")
    n = int(np.floor(around_m / step + 1e-9))
    rows = np.arange(-n, n + 1) * step  # columns within the disc, row by row
    count = (
        int(
            np.sum(2 * np.floor(np.sqrt(np.maximum(around_m**2 * (1 + 1e-9) ** 2 - rows**2, 0.0)) / step) + 1)
        )
        if n < 10**6
        else MAX_SPOTS + 1
    )
    if count > MAX_SPOTS:
        raise ValueError(
            f"step_m={step:g} gives {count} spots within {around_m:g} m (at most {MAX_SPOTS}); "
            "use a larger step_m"
        )
    k = np.arange(-n, n + 1) * step
    x, y = np.meshgrid(k, k[::-1])
    x, y = x.ravel(), y.ravel()
    inside = np.hypot(x, y) <= around_m * (1 + 1e-9)
    x, y = x[inside], y[inside]
    lat, lon = geodesy.from_local(lat0, lon0, x, y)
    labels = [f"E{xx:+.0f} N{yy:+.0f}" for xx, yy in zip(x, y)]
    return pd.DataFrame({"spot": labels, "lat": lat, "lon": lon, "east_m": x, "north_m": y})
