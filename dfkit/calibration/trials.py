"""Reading a beacon-trials sheet: a bearing sheet plus the beacon's position."""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd

from dfkit import geodesy
from dfkit.conventions import wrap180
from dfkit.io import read_table
from dfkit.io.sheet import RawSheet
from dfkit.observations import Bearings, ReadOptions, read_bearings, read_stations
from dfkit.policy import (
    MIN_TRIAL_DISTANCE_M,
)
from dfkit.problems import Problem, SheetError

#: Beacon position columns of a trials sheet and the station-position column each one stands for.
BEACON_COLUMNS = {
    "beacon_lat": "lat",
    "beacon_lon": "lon",
    "beacon_utm_zone": "utm_zone",
    "beacon_easting": "easting",
    "beacon_northing": "northing",
    "beacon_mgrs": "mgrs",
    "beacon": "station",
}

#: Other spellings of the beacon columns, read as the canonical name (reported as a warning on the header).
BEACON_ALIASES = {
    "beacon_latitude": "beacon_lat",
    "beacon_longitude": "beacon_lon",
    "beacon_long": "beacon_lon",
    "beacon_lng": "beacon_lon",
    "beacon_zone": "beacon_utm_zone",
    "beacon_utm": "beacon_utm_zone",
}


@dataclass
class Trials:
    """Usable beacon trials with their errors, and what could not be used.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per usable trial: the columns of :attr:`dfkit.observations.Bearings.table`, then ``beacon``
        (name: the sheet's ``beacon`` label, else the position as text), ``beacon_lat``, ``beacon_lon`` [°],
        ``beacon_from`` (the form the position was given in), ``azimuth_to_beacon`` (geodesic, from the
        station [°]), ``distance_m`` (station to beacon [m]) and ``error_deg`` (observed true bearing minus
        ``azimuth_to_beacon``, wrapped to [-180, 180) [°]).
    bearings : Bearings
        The same trials as :class:`~dfkit.observations.Bearings` (rows aligned with :attr:`table`), to
        solve them.
    problems : list of Problem
        Every rejected row (bearing or beacon columns) and every warning.
    n_rows : int
        Data rows of the sheet.
    notes : list of str
    source : str
    """

    table: pd.DataFrame
    bearings: Bearings
    problems: list[Problem]
    n_rows: int = 0
    notes: list[str] = field(default_factory=list)
    source: str = ""

    @property
    def n_rejected(self) -> int:
        return len({p.line for p in self.problems if p.severity == "error" and p.line})


def _beacon_positions(raw: RawSheet, stations):
    """Beacon positions from the ``beacon_*`` columns, by the sheet's own position rules.

    Read by :func:`dfkit.observations.parse_positions` with ``prefix='beacon_'`` (and the ``beacon`` label
    looked up in the stations file), so a beacon position is read exactly like a station position: same forms,
    same checks, messages naming the beacon columns and the sheet's line numbers.

    Returns (lat, lon, source, rejected mask, problems), one entry per raw row.
    """
    from dfkit.observations import parse_positions

    pos = parse_positions(raw.table, prefix="beacon_", station_column="beacon", source=raw.source,
                          decimal_comma=raw.decimal_comma, stations=stations, required=False)
    problems = list(pos.problems)
    missing = ~pos.rejected & (pos.source == "")
    lines = raw.table["line"].to_numpy()
    for i in np.flatnonzero(missing):
        problems.append(Problem(int(lines[i]), "", "no beacon position: give beacon_lat and beacon_lon, "
                                "beacon_utm_zone/beacon_easting/beacon_northing, beacon_mgrs, or a beacon label from "
                                "the stations file (--stations)", "error", raw.source))
    return pos.lat, pos.lon, pos.source, pos.rejected | missing, problems


def _beacon_header(raw: RawSheet) -> RawSheet:
    """Canonical names for the beacon columns (other spellings are reported); SheetError if there is none."""
    header_line = int(raw.table["line"].min()) - 1 if len(raw.table) else 1
    renames = {}
    problems = list(raw.problems)
    for c in raw.columns:
        if c in BEACON_ALIASES and BEACON_ALIASES[c] not in raw.columns:
            renames[c] = BEACON_ALIASES[c]
            problems.append(
                Problem(max(header_line, 1), c, f"read as '{BEACON_ALIASES[c]}'", "warning", raw.source)
            )
    columns = [renames.get(c, c) for c in raw.columns]
    if not any(c in BEACON_COLUMNS for c in columns):
        raise SheetError(
            f"{raw.source or 'the sheet'}: a trials sheet needs the beacon's position: beacon_lat and "
            "beacon_lon, beacon_utm_zone/beacon_easting/beacon_northing, beacon_mgrs, or a beacon "
            "label with --stations"
        )
    return replace(raw, table=raw.table.rename(columns=renames), columns=columns, problems=problems)


def read_trials(sheet, options: ReadOptions | None = None, **kwargs) -> Trials:
    """Read a beacon-trials sheet: every bearing and beacon position checked, every error computed.

    Parameters
    ----------
    sheet : path, bytes, file-like or RawSheet
        A bearing sheet plus the beacon position columns (module docstring).
    options : ReadOptions, optional
        Reading options, as for :func:`dfkit.read_bearings` (unit, north, declination, tz, stations,
        track ...); keyword arguments override its fields.

    Returns
    -------
    Trials

    Raises
    ------
    SheetError
        The sheet cannot be read at all, or it has no beacon position column.
    """
    opts = options or ReadOptions()
    if kwargs:
        opts = replace(opts, **kwargs)
    raw = sheet if isinstance(sheet, RawSheet) else read_table(sheet, worksheet=opts.worksheet)
    raw = _beacon_header(raw)
    bearings = read_bearings(raw, opts)
    stations = read_stations(opts.stations)[0] if opts.stations is not None else None
    blat, blon, bsrc, bbad, bproblems = _beacon_positions(raw, stations)
    lines = raw.table["line"].to_numpy()
    row_of = pd.Series(np.arange(len(lines)), index=lines)

    t = bearings.table
    r = row_of.loc[t["line"].to_numpy()].to_numpy() if len(t) else np.zeros(0, np.int64)
    ok = ~bbad[r]
    slat, slon = t["lat"].to_numpy(float), t["lon"].to_numpy(float)
    az, _, dist = geodesy.inverse(slat, slon, blat[r], blon[r])
    az = np.where(ok, az, np.nan)
    dist = np.where(ok, dist, np.nan)
    near = ok & (dist < MIN_TRIAL_DISTANCE_M)
    for i in np.flatnonzero(near):
        bproblems.append(
            Problem(
                int(t["line"].iat[i]),
                "",
                f"the station is {dist[i]:.1f} m from the beacon "
                f"(under {MIN_TRIAL_DISTANCE_M:g} m): too close for a bearing to mean anything",
                "error",
                raw.source,
            )
        )
    ok &= ~near

    sel = bearings.select(ok)
    label = (
        raw.table["beacon"].to_numpy(dtype=object)
        if "beacon" in raw.columns
        else np.full(len(lines), "", object)
    )
    names = [lab if lab != "" else f"{a:.6f}, {b:.6f}" for lab, a, b in zip(label[r], blat[r], blon[r])]
    table = sel.table.copy()
    table["beacon"] = np.asarray(names, dtype=object)[ok] if len(names) else np.zeros(0, object)
    table["beacon_lat"] = blat[r][ok]
    table["beacon_lon"] = blon[r][ok]
    table["beacon_from"] = bsrc[r][ok]
    table["azimuth_to_beacon"] = az[ok]
    table["distance_m"] = dist[ok]
    table["error_deg"] = wrap180(table["true_bearing"].to_numpy(float) - az[ok])
    table = table.reset_index(drop=True)

    # Trials are not grouped into fixes: the reader's word on how it grouped a sheet without fix labels and
    # times ("all bearings of each tag form one fix") means nothing here.
    # Nor is the advice to name a beacon column 'fix' (the beacon label and position are read here).
    problems = sorted(
        [p for p in bearings.problems if not (p.column == "fix" and p.message.startswith(_ONE_FIX_WORDS))
         and not _beacon_column_as_labels(p.message)]
        + bproblems, key=lambda p: (p.source != raw.source, p.line, p.severity != "error")
    )
    notes = [n for n in bearings.notes if not n.startswith(_ONE_FIX_WORDS)]
    if "sd" in raw.columns or opts.sd is not None:
        notes.append("the sheet's sd (or --sd) is not used: the calibration measures the SD")
    sel = replace(sel, problems=problems, notes=notes, table=table)
    return Trials(
        table=table, bearings=sel, problems=problems, n_rows=len(lines), notes=notes, source=raw.source
    )


#: How :mod:`dfkit.observations.grouping` begins its word on a sheet without fix labels and times.
_ONE_FIX_WORDS = "no fix labels and no times"


def _beacon_column_as_labels(message: str) -> bool:
    """The reader's advice to read a beacon column (``beacon``, ``beacon_lat`` ...) as fix labels
    (:func:`dfkit.observations.columns.label_like_columns`)."""
    return message.startswith("column 'beacon") and "looks like fix labels" in message
