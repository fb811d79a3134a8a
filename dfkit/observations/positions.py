"""Positions as written: lat/lon (decimal or degrees-minutes-seconds), UTM, MGRS, a
station label, or a GPS track; each row converted to WGS84 lat/lon or refused.

The public entry is :func:`parse_positions`; it works on any column set through a
``prefix`` (``beacon_lat``, ``beacon_utm_zone``... with ``prefix='beacon_'``), so
calibration beacons and planning spots are read by the same rules and messages as
station positions. :func:`read_places` reads a whole file of labelled places
(stations, spots, beacons).

Rules that need evidence are judged against the row's **own fix** (``groups``) and
the GPS track, never against the whole sheet, which may span continents:

* lat and lon swapped: a lat/lon row far from the other positions of its fix (or
  the track at its time) that would fit them swapped is refused
  (:data:`dfkit.policy.SWAPPED_FAR_DEG`, :data:`~dfkit.policy.SWAPPED_NEAR_DEG`);
* a UTM zone letter that can be both a latitude band and a hemisphere (``S``) is
  read the way the row's fix, the track, an explicit ``utm_letters``, or the other
  zone letters of the sheet show; without evidence the row is refused with both
  readings;
* a UTM position outside its zone's strip is converted (with a warning) when the
  conversion is sound (:mod:`dfkit.grids`), unless the other rows of its fix sit
  inside the strip far away (a missing digit);
* a station far from the other stations of its own fix (more than
  :data:`dfkit.policy.FAR_STATION_KM` and :data:`~dfkit.policy.FAR_STATION_SPREADS`
  times the fix's own spread) is refused as a likely position mistake, naming the
  corrections that would bring it back (a sign, two digits swapped, a digit changed,
  missing or too many, the decimal point: :mod:`dfkit.observations.typos`).
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from datetime import datetime, timezone

import numpy as np
import pandas as pd

from dfkit import grids
from dfkit.io.gpx import Track
from dfkit.observations.cells import angles, column, filled, numbers, per_value, split_position
from dfkit.observations.groupstats import group_counts, group_medians, group_ranges
from dfkit.observations.precision import position_steps
from dfkit.observations.rowlog import RowLog
from dfkit.observations.typos import describe, variants
from dfkit.policy import (
    BAND_EDGE_MARGIN_DEG, DEFAULT_TRACK_GAP_S, FAR_STATION_KM, FAR_STATION_SPREADS, MGRS_REFUSED_SQUARE_M, MGRS_WARNED_SQUARE_M, OUT_OF_STRIP_TYPO_M,
    POSITION_AGREEMENT_M, SWAPPED_FAR_DEG, SWAPPED_NEAR_DEG,
)
from dfkit.problems import Problem

#: Position columns and the other spellings read for them (also after a prefix).
POSITION_COLUMNS = {
    "lat": ("lat", "latitude"),
    "lon": ("lon", "longitude", "long", "lng"),
    "utm_zone": ("utm_zone", "zone", "utm"),
    "utm_hemisphere": ("utm_hemisphere", "hemisphere"),
    "easting": ("easting", "east", "utm_easting", "x"),
    "northing": ("northing", "north_m", "utm_northing", "y"),
    "mgrs": ("mgrs", "usng"),
    "position": ("position", "coordinates", "coords", "latlon", "lat_lon", "lat/lon", "lat,lon"),
}

#: Where a row's position came from.
SOURCES = ("lat/lon", "utm", "mgrs", "station", "track")


@dataclass
class Positions:
    """Positions of the rows of a table.

    Attributes
    ----------
    lat, lon : ndarray
        WGS84 latitude and longitude [°]; NaN where the row has no usable position.
    source : ndarray of str
        'lat/lon', 'utm', 'mgrs', 'station', 'track' or ''.
    zone : ndarray of int
        UTM zone of the row's own grid (0 when none); ``south`` its hemisphere.
    rejected : ndarray of bool
        Rows refused (by this parser or before it, when a log was passed in).
    problems : list of Problem
        Errors (rejected rows) and warnings, with line numbers and columns.
    doubts : dict of int to str
        Rows (by position in the table) whose position rests on a reading the evidence does not settle, and why.
    step_east_m, step_north_m : ndarray
        The step each row's position was written to, east and north [m]; 0 where not rounded
        (:mod:`dfkit.observations.precision`).
    """

    lat: np.ndarray
    lon: np.ndarray
    source: np.ndarray
    zone: np.ndarray
    south: np.ndarray
    rejected: np.ndarray
    problems: list[Problem] = field(default_factory=list)
    doubts: dict = field(default_factory=dict)
    step_east_m: np.ndarray | None = None
    step_north_m: np.ndarray | None = None


def position_columns(columns, prefix: str = "", station_column: str | None = None) -> dict[str, str]:
    """Which columns of a table hold which position part: ``{'lat': 'beacon_latitude', ...}``."""
    cols = list(columns)
    found = {}
    for role, names in POSITION_COLUMNS.items():
        for n in names:
            if prefix + n in cols:
                found[role] = prefix + n
                break
    st = station_column if station_column is not None else (prefix.rstrip("_") if prefix else "station")
    if st in cols:
        found["station"] = st
    return found


def has_position_columns(columns, prefix: str = "", station_column: str | None = None) -> bool:
    """Whether a table has at least one complete way of giving a position."""
    f = position_columns(columns, prefix, station_column)
    return ({"lat", "lon"} <= set(f) or "mgrs" in f or "station" in f or "position" in f
            or {"utm_zone", "easting", "northing"} <= set(f) or ("utm_zone" in f and "easting" not in f))


def parse_positions(table: pd.DataFrame, *, prefix: str = "", station_column: str | None = None,
                    lines=None, source: str = "", decimal_comma: bool = False, stations: pd.DataFrame | None = None,
                    track: Track | None = None, times=None, track_gap_s: float = DEFAULT_TRACK_GAP_S,
                    utm_letters: str = "auto", groups=None, required: bool = True,
                    log: RowLog | None = None, skip=None, number_decimals=None) -> Positions:
    """Read the position of every row of a table of text cells.

    Parameters
    ----------
    table : pandas.DataFrame
        Text cells ('' when empty), e.g. ``RawSheet.table``; a ``line`` column gives
        the line numbers unless ``lines`` is given.
    prefix : str
        Column prefix: ``'beacon_'`` reads ``beacon_lat``/``beacon_lon``,
        ``beacon_utm_zone``/``beacon_easting``/``beacon_northing``, ``beacon_mgrs``.
    station_column : str, optional
        Column of station labels looked up in ``stations`` (default ``station``, or the
        prefix without its underscore: ``beacon``).
    lines : array_like of int, optional
        Line numbers for messages.
    source : str
        Input name for messages.
    decimal_comma : bool
        Whether numbers may use a decimal comma (semicolon- or tab-separated sheets).
    stations : pandas.DataFrame, optional
        Known places, indexed by label, with ``lat``, ``lon``, ``zone``, ``south``
        (from :func:`read_places`).
    track : Track, optional
        GPS track: rows with a time and no position get the track's position.
    times : array_like of float, optional
        Each row's time, seconds since 1970 UTC (NaN when none), for the track.
    track_gap_s : float
        Largest time from a row to the nearest track point. [s]
    utm_letters : {'auto', 'band', 'hemisphere'}
        How to read a UTM zone letter that can be both (see :mod:`dfkit.grids`).
    groups : array_like of int, optional
        The fix (or other group) of each row, -1 for none: evidence is taken from
        the row's own group.
    required : bool
        Whether a row without any position is an error.
    log : RowLog, optional
        Shared row log: this parser's problems are added to it, and its rejected rows
        stay rejected (positions are still read on them, as evidence for their fix).
    skip : array_like of bool, optional
        Rows not to read at all (already refused by the file reader).
    number_decimals : callable, optional
        For columns the reader held as numbers, their cells as written (:attr:`dfkit.io.sheet.RawSheet.number_decimals`):
        the step of a position written ``47.8700`` is judged from its text (:mod:`dfkit.observations.precision`).

    Returns
    -------
    Positions
    """
    n = len(table)
    if lines is None:
        lines = table["line"].to_numpy() if "line" in table.columns else np.arange(2, n + 2)
    shared = log
    # Positions are read on every row, even one refused for another column (a bad bearing), so that its position
    # still serves as evidence for the rest of its fix; rows the reader itself refused (``skip``) are left out.
    log = RowLog(lines, source)
    if skip is not None:
        log.bad |= np.asarray(skip, bool)
    cols = position_columns(table.columns, prefix, station_column)
    p = _State(n, log, {role: column(table, name) for role, name in cols.items()}, cols)
    groups = None if groups is None else np.asarray(groups, np.int64)
    times = None if times is None else np.asarray(times, float)
    # evidence (swapped lat/lon, UTM letters) may use the track anywhere within its time span: the readings it
    # decides between are hundreds of km apart; positions taken from the track keep the strict --track-gap
    track_ll = _track_at(track, times, np.inf, n) if track is not None and times is not None else None

    _combined(p, decimal_comma)
    _latlon(p, decimal_comma)
    _mgrs(p)
    _station(p, stations)
    _utm(p, decimal_comma, utm_letters, groups, track_ll)
    if groups is not None or track_ll is not None:
        _swapped(p, groups, track_ll)
    if groups is not None:
        _far_from_fix(p, groups)
    if track is not None and times is not None:
        _from_track(p, track, times, track_gap_s)
    if "station" in cols and stations is None:
        log.reject(~log.bad & p.none() & (p.cells["station"] != ""), cols["station"],
                   lambda idx: [f"{cols['station']} '{p.cells['station'][i]}' given but no stations file "
                                "(--stations FILE)" for i in idx])
    if required:
        need = ~log.bad & p.none()
        msg = ("no position and no time to look up on the GPS track" if track is not None else
               f"no position: give {prefix}lat and {prefix}lon, {prefix}utm_zone/easting/northing, {prefix}mgrs, "
               f"a station label, or a time with a GPS track (--track)")
        log.reject(need, "", msg)
    bad = log.bad.copy()
    if shared is not None:
        shared.problems.extend(log.problems)
        shared.bad |= bad
        bad = shared.bad.copy()
    lat = np.where(bad, np.nan, p.lat)
    lon = np.where(bad, np.nan, p.lon)
    source = p.source.copy()
    source[bad] = ""
    kind = np.where(bad, 0, p.kind)
    texts = ({role: (lambda rows, name=cols[role]: number_decimals(name, rows)) for role in ("lat", "lon")
              if role in cols} if number_decimals is not None else None)
    units = column(table, "observer") if not prefix and "observer" in table.columns else None
    step_e, step_n = position_steps(p.cells, {s: kind == SOURCES.index(s) + 1 for s in ("lat/lon", "utm", "mgrs")},
                                    lat, groups, decimal_comma=decimal_comma, mgrs_square_m=p.mgrs_square,
                                    texts=texts, units=units)
    return Positions(lat, lon, source, p.zone, p.south, bad, list(log.problems),
                     {i: text for i, text in p.doubts.items() if not bad[i]}, step_e, step_n)


class _State:
    def __init__(self, n, log, cells, cols):
        self.n = n
        self.log = log
        none = filled(n, "")       # one array of '' for the roles the sheet has no column for (never changed)
        self._no_column = none
        self.cells = {role: cells[role] if role in cells else none
                      for role in ("lat", "lon", "utm_zone", "utm_hemisphere", "easting", "northing", "mgrs",
                                   "station", "position")}
        self.cols = cols
        self.lat = np.full(n, np.nan)
        self.lon = np.full(n, np.nan)
        self.source = filled(n, "")
        self.kind = np.zeros(n, np.int8)    # the source as a number: 0 none, else 1 + its place in SOURCES
        self.zone = np.zeros(n, int)
        self.south = np.zeros(n, bool)
        # a zone letter S read as the southern hemisphere because band S does not fit: how it was read, and where
        # the northern reading puts the row (for the message if the row turns out far from its fix); by row, for
        # the few rows concerned rather than three arrays over every row
        self.letter_note: dict[int, str] = {}
        self.north_lat: dict[int, float] = {}
        self.north_lon: dict[int, float] = {}
        # rows whose position rests on a reading the evidence does not settle (a zone letter S read by how rows of
        # other zones write theirs): row -> why, for the fix's status (dfkit.locate marks such a fix ambiguous)
        self.doubts: dict[int, str] = {}
        self.reference = None       # (rows, medians) of the last fix reference (see _fix_reference)
        self.boxes = None           # (rows, loose fixes) of the last fix boxes (see _loose_fixes)
        self.mgrs_square = None     # the square each MGRS row names [m] (NaN elsewhere; None: no MGRS read)

    def written(self, *roles):
        """Whether the sheet has a column for any of these roles: without, their cells are '' on every row, known
        without a pass over them."""
        return any(self.cells[role] is not self._no_column for role in roles)

    def none(self):
        """Rows without a position yet."""
        return self.kind == 0

    def is_(self, what):
        """Rows whose position came from ``what`` (one of :data:`SOURCES`)."""
        return self.kind == SOURCES.index(what) + 1

    def name(self, role):
        return self.cols.get(role, role)

    def take(self, idx, lat, lon, what, zone=None, south=None):
        """Give rows ``idx`` this position unless they have one (then cross-check)."""
        idx = np.asarray(idx, np.int64)
        if len(idx) == self.n and self.n and idx[0] == 0 and idx[-1] == self.n - 1 and not self.kind.any():
            # every row (the indices callers pass are sorted and distinct), none taken yet
            self.lat[:], self.lon[:], self.source[:], self.kind[:] = lat, lon, what, SOURCES.index(what) + 1
            if zone is not None:
                self.zone[:], self.south[:] = zone, south
            return
        first = self.kind[idx] == 0
        f = idx[first]
        self.lat[f], self.lon[f], self.source[f] = np.asarray(lat)[first], np.asarray(lon)[first], what
        self.kind[f] = SOURCES.index(what) + 1
        if zone is not None:
            self.zone[f], self.south[f] = np.asarray(zone)[first], np.asarray(south)[first]
        later = idx[~first]
        if len(later):
            _cross_check(self, later, np.asarray(lat)[~first], np.asarray(lon)[~first], what)


def _combined(p: _State, decimal_comma):
    """A ``position`` cell holding latitude and longitude: split into the lat/lon cells of rows that have none."""
    if not p.written("position"):
        return
    cells = p.cells["position"]
    rows = np.flatnonzero((cells != "") & (p.cells["lat"] == "") & (p.cells["lon"] == ""))
    if not len(rows):
        return
    parts = per_value(cells[rows], lambda u: split_position(u, decimal_comma=decimal_comma))
    err = np.array([e for _, _, e in parts], dtype=object)
    full = filled(p.n, "")
    full[rows] = err
    p.log.reject(full != "", p.name("position"), full)
    ok = err == ""
    lat_c, lon_c = p.cells["lat"].copy(), p.cells["lon"].copy()
    lat_c[rows[ok]] = [a for a, _, _ in parts[ok]]
    lon_c[rows[ok]] = [b for _, b, _ in parts[ok]]
    p.cells["lat"], p.cells["lon"] = lat_c, lon_c
    if "lat" not in p.cols and "lon" not in p.cols:   # messages about these cells name the sheet's column
        p.cols = {**p.cols, "lat": p.cols["position"], "lon": p.cols["position"]}


def _latlon(p: _State, decimal_comma):
    log = p.log
    la_c, lo_c = p.cells["lat"], p.cells["lon"]
    cl, cn = p.name("lat"), p.name("lon")
    la = angles(la_c, "lat", decimal_comma)
    lo = angles(lo_c, "lon", decimal_comma)
    has = ~la.empty | ~lo.empty
    log.reject(la.bad, cl, la.error)
    log.reject(lo.bad, cn, lo.error)
    log.reject(has & la.empty, cl, f"{cl} is missing ({cn} is given)")
    log.reject(has & lo.empty, cn, f"{cn} is missing ({cl} is given)")
    a, o = la.values, lo.values
    for c, cells, name in ((la, la_c, cl), (lo, lo_c, cn)):
        _note_packed(log, c, cells, name)
    with np.errstate(invalid="ignore"):
        swapped = (f"{cl} and {cn} look swapped" if cl != cn else      # one cell holding both: its order
                   f"the {cl} looks written longitude first; write the latitude first")
        log.reject(has & (np.abs(a) > 90) & (np.abs(o) <= 90), cl,
                   lambda idx: [f"{a[i]:g} is not a latitude, but {o[i]:g} could be: {swapped}" for i in idx])
        log.reject(has & (np.abs(a) > 90), cl, lambda idx: [f"{a[i]:g} is outside -90..90" for i in idx])
        log.reject(has & ((o < -180) | (o > 360)), cn, lambda idx: [f"{o[i]:g} is outside -180..180" for i in idx])
        over = has & (o > 180) & (o <= 360)
    log.warn(over, cn, lambda idx: [f"{o[i]:g} read as {o[i] - 360:g} (east of 180 written as 0..360)" for i in idx])
    o = np.where(over, o - 360.0, o)
    log.reject(has & (a == 0) & (o == 0), cl, "0, 0 is almost certainly a missing position (it is at sea)")
    ok = np.flatnonzero(has & ~log.bad)
    p.take(ok, a[ok], o[ok], "lat/lon")


def _note_packed(log: RowLog, c, cells, name):
    """One warning per column whose cells were read as packed degrees-minutes(-seconds) (``4751.6N``)."""
    if c.packed is None:
        return
    rows = np.flatnonzero(c.packed & ~log.bad)
    if not len(rows):
        return
    i = rows[0]
    more = f" (and {len(rows) - 1} more {name} cells, to line {log.lines[rows[-1]]})" if len(rows) > 1 else ""
    log.warn(log.mask([i]), name, f"'{cells[i]}' read as a packed angle (degrees, minutes and maybe seconds without "
                                  f"separators, as NMEA 0183 and GPS exports write them): {c.values[i]:.6f}°{more}; "
                                  "check that this is what was meant")


def _mgrs(p: _State):
    if not p.written("mgrs"):
        return
    cells = p.cells["mgrs"]
    idx = np.flatnonzero((cells != "") & ~p.log.bad)
    if not len(idx):
        return
    parsed = per_value(cells[idx], grids.parse_mgrs)
    ok = np.array([r[0] is not None for r in parsed], bool)
    p.log.reject(p.log.mask(idx[~ok]), p.name("mgrs"), lambda ii: [parsed[np.searchsorted(idx, i)][1] for i in ii])
    square = np.array([r[0][4] if r[0] is not None else np.nan for r in parsed], float)
    coarse = ok & (square >= MGRS_REFUSED_SQUARE_M)
    p.log.reject(p.log.mask(idx[coarse]), p.name("mgrs"), lambda ii: [
        f"'{cells[i]}' names a {_square(square[_k(idx, i)])} square: its centre could be "
        f"{square[_k(idx, i)] / np.sqrt(2) / 1000:,.0f} km from the place meant, farther than bearings usually reach; "
        "give at least 6 digits (a 100 m square)" for i in ii])
    p.log.warn(p.log.mask(idx[ok & ~coarse & (square >= MGRS_WARNED_SQUARE_M)]), p.name("mgrs"), lambda ii: [
        f"'{cells[i]}' names a {_square(square[_k(idx, i)])} square: its centre was used, which may be up to "
        f"{square[_k(idx, i)] / np.sqrt(2):,.0f} m from the place meant (with a known SD the fix's region allows for it); "
        "give 6 digits or more (a 100 m square) where you can" for i in ii])
    keep = ok & ~coarse
    good = idx[keep]
    p.mgrs_square = np.full(p.n, np.nan)
    p.mgrs_square[good] = square[keep]
    res = [r[0] for r in parsed[keep]]
    if len(good):
        p.take(good, [r[0] for r in res], [r[1] for r in res], "mgrs", [r[2] for r in res], [r[3] for r in res])


def _square(size_m):
    return f"{size_m / 1000:g} km" if size_m >= 1000 else f"{size_m:g} m"


def _station(p: _State, stations):
    if not p.written("station"):
        return
    cells = p.cells["station"]
    idx = np.flatnonzero((cells != "") & ~p.log.bad & p.none())
    if not len(idx) or stations is None:
        return
    known = np.isin(cells[idx], stations.index.to_numpy(dtype=object))
    refused = stations.attrs.get("refused", {})

    def why(label):
        if label in refused:
            return f"{p.name('station')} '{label}' has no usable position in the stations file (its line {refused[label]})"
        return f"{p.name('station')} '{label}' is not in the stations file"

    p.log.reject(p.log.mask(idx[~known]), p.name("station"), lambda ii: [why(cells[i]) for i in ii])
    ok = idx[known]
    rows = stations.loc[cells[ok]]
    p.take(ok, rows["lat"].to_numpy(float), rows["lon"].to_numpy(float), "station",
           rows["zone"].to_numpy(int), rows["south"].to_numpy(bool))


# --------------------------------------------------------------------------- UTM

#: A whole UTM position in one cell, as GPS units and people write it: zone and letter (or hemisphere word), easting,
#: northing, separated by spaces or commas; the zone may be glued to the letter and the letter to the easting
#: (``16T 705900 5150600``, ``16T705900 5150600``, ``16 T 0705900 5150600``, ``33 north 435000 4137000``); an
#: easting may end in E or mE and a northing in N or mN.
_UTM_CELL = re.compile(r"\s*(\d{1,2})\s*([A-Za-z]+)\s*(\d{1,7}(?:\.\d*)?)\s*(?:m?E)?\s*[,;\s]\s*(\d{1,8}(?:\.\d*)?)"
                       r"\s*(?:m?N)?\s*")
#: A zone cell that is more than a zone: digits of an easting or a second word (a position written in one cell).
_MORE_THAN_ZONE = re.compile(r".*(\d{4}|\s\S+\s).*")


def _split_combined(p: _State) -> np.ndarray:
    """A zone cell holding the whole position (:data:`_UTM_CELL`) when easting/northing are empty: split into the
    three cells. A zone cell that holds more than a zone but is no such position is refused once, on the zone
    column, saying the form; the rows refused are returned (their easting and northing are not also missing)."""
    z = p.cells["utm_zone"]
    e, nn = p.cells["easting"], p.cells["northing"]
    refused = np.zeros(p.n, bool)
    _whole_beside_columns(p, z, e, nn, refused)
    cand = np.flatnonzero((z != "") & (e == "") & (nn == ""))
    if not len(cand):
        return refused
    for i in cand:
        m = _UTM_CELL.fullmatch(z[i])
        if m:
            z[i], e[i], nn[i] = f"{m.group(1)}{m.group(2)}", m.group(3), m.group(4)
        elif _MORE_THAN_ZONE.fullmatch(z[i]):
            refused[i] = True
    cz = p.name("utm_zone")
    p.log.reject(refused, cz, lambda idx: [
        f"'{z[i]}' is not a UTM position dfkit can read: write zone and letter, easting and northing in one cell "
        "('16T 705900 5150600', as a GPS shows it) or in utm_zone, easting and northing columns" for i in idx])
    return refused


def _whole_beside_columns(p: _State, z, e, nn, refused):
    """A whole position in the zone cell on a row that also fills easting or northing: the zone alone where the
    numbers agree (to 1 m), else refused naming both (it is a position, not a zone dfkit cannot read)."""
    rows = np.flatnonzero((z != "") & ((e != "") | (nn != "")))
    if not len(rows):
        return
    both = [i for i in rows if _MORE_THAN_ZONE.fullmatch(z[i])]
    cz = p.name("utm_zone")
    for i in both:
        m = _UTM_CELL.fullmatch(z[i])
        refused[i] = True
        if not m:
            p.log.reject(p.log.mask([i]), cz, (
                f"'{z[i]}' holds more than a UTM zone: with {p.name('easting')} and {p.name('northing')} in "
                "their own columns, the zone cell takes the zone and letter alone (like 33T)"))
            continue
        given = [(p.name(role), cell[i], float(m.group(g))) for role, cell, g in (("easting", e, 3),
                                                                                    ("northing", nn, 4)) if cell[i]]
        try:
            same = all(abs(float(text) - value) <= 1.0 for _, text, value in given)
        except ValueError:
            same = False
        if same:          # the same position twice: the zone cell gives the zone, the columns the rest
            z[i], e[i], nn[i] = f"{m.group(1)}{m.group(2)}", m.group(3), m.group(4)
            refused[i] = False
            continue
        said = " and ".join(f"{name} {_as_written(text)}" for name, text, _ in given)
        p.log.reject(p.log.mask([i]), cz, (
            f"'{z[i]}' is a whole UTM position, but this row also has {said}, which "
            f"{'say' if len(given) > 1 else 'says'} otherwise: keep the position in one place (the zone cell, or "
            "the three columns)"))


def _as_written(text: str) -> str:
    """A number cell as the user wrote it ('5309999', not the reader's '5309999.0')."""
    try:
        return f"{float(text):.10g}"
    except ValueError:
        return f"'{text}'"


def _zone_and_hemisphere(p: _State):
    """A zone number with its hemisphere in a column of its own (``utm_zone`` 56, ``utm_hemisphere`` south, as
    ``dfkit fix --utm`` writes it): read as the zone '56 south'."""
    z, h = p.cells["utm_zone"], p.cells["utm_hemisphere"]
    bare = pd.Series(z, dtype=object).str.fullmatch(r"\s*\d{1,2}\s*").to_numpy(bool)
    rows = np.flatnonzero((h != "") & bare)
    full = {"N": "north", "S": "south"}
    word = np.array([full.get(grids._WORDS.get(h[i].strip().lower(), ""), "") for i in rows], dtype=object)
    p.log.reject(p.log.mask(rows[word == ""]), p.name("utm_hemisphere"),
                 lambda ii: [f"'{h[i]}' is not a hemisphere: write north or south (N or S)" for i in ii])
    z[rows[word != ""]] = [f"{z[i].strip()} {w}" for i, w in zip(rows, word) if w]


def _utm(p: _State, decimal_comma, utm_letters, groups, track_ll):
    log = p.log
    if not p.written("utm_zone", "easting", "northing") or \
            not ((p.cells["utm_zone"] != "") | (p.cells["easting"] != "") | (p.cells["northing"] != "")).any():
        return
    p.cells = dict(p.cells)
    for k in ("utm_zone", "easting", "northing"):
        p.cells[k] = p.cells[k].copy()
    refused = _split_combined(p)
    _zone_and_hemisphere(p)
    zc, ec, nc = p.cells["utm_zone"], p.cells["easting"], p.cells["northing"]
    cz, ce, cn = p.name("utm_zone"), p.name("easting"), p.name("northing")
    has = ((zc != "") | (ec != "") | (nc != "")) & ~refused
    ea = numbers(ec, decimal_comma)
    no = numbers(nc, decimal_comma)
    log.reject(has & ea.bad, ce, ea.error)
    log.reject(has & no.bad, cn, no.error)
    for name, empty in ((cz, zc == ""), (ce, ea.empty), (cn, no.empty)):
        log.reject(has & empty, name, f"{name} is missing (UTM needs zone, easting and northing)")
    parsed = per_value(zc, lambda z: grids.parse_utm_zone(z) if z else (None, ""))
    zerr = np.array([r[1] or "" for r in parsed], dtype=object)
    log.reject(has & (zerr != ""), cz, zerr)
    E, N = ea.values, no.values
    with np.errstate(invalid="ignore"):
        log.reject(has & (E > 1.0e6) & (N < 1.0e6) & (N >= 0), ce,
                   lambda idx: [f"{E[i]:.0f} is too large for an easting and {N[i]:.0f} too small for this northing: "
                                "easting and northing look swapped" for i in idx])
        log.reject(has & (np.abs(E - 500_000.0) > grids.MAX_FROM_CM_M), ce,
                   lambda idx: [f"{E[i]:.0f} m is {abs(E[i] - 5e5) / 1000:.0f} km from the central meridian; UTM "
                                f"positions are read up to {grids.MAX_FROM_CM_M / 1000:.0f} km from it" for i in idx])
        log.reject(has & ((N < 0) | (N > 10_000_000)), cn,
                   lambda idx: [f"{N[i]:.0f} m is outside the UTM northing range 0..10000000" for i in idx])
    rows = np.flatnonzero(has & ~log.bad)
    if not len(rows):
        return
    zt = [parsed[i][0] for i in rows]
    zone = np.array([z.zone for z in zt], int)
    letter = np.array([z.letter for z in zt], dtype=object)
    can_band = np.array([z.band for z in zt], bool)
    hemi = np.array([z.hemisphere for z in zt], dtype=object)
    # both readings: the northern one (band letters N..X, hemisphere N, band S) and the southern one
    lat_n, lon_n = grids.utm_to_latlon(zone, np.zeros(len(rows), bool), E[rows], N[rows])
    lat_s, lon_s = grids.utm_to_latlon(zone, np.ones(len(rows), bool), E[rows], N[rows])
    band_south = np.full(len(rows), np.nan)
    band_north = np.full(len(rows), np.nan)
    single = np.array([len(x) == 1 for x in letter], bool)
    for k in np.flatnonzero(can_band & single):
        band_south[k], band_north[k] = grids.band_limits(letter[k])
    band_lat = np.where(np.isin(letter, list("CDEFGHJKLM")), lat_s, lat_n)
    with np.errstate(invalid="ignore"):
        fits_band = (band_lat >= band_south - BAND_EDGE_MARGIN_DEG) & (band_lat <= band_north + BAND_EDGE_MARGIN_DEG)
    is_s = letter == "S"
    is_n = letter == "N"
    pure_band = can_band & ~is_s & ~is_n        # C..X except N and S: only a band
    words = ~single
    # evidence of the writer's habit, row by row: 'band' or 'hemisphere'
    style = np.full(len(rows), "", dtype=object)
    style[pure_band] = "band"
    style[(is_n & ~fits_band) | (is_s & ~fits_band) | words] = "hemisphere"

    south = np.zeros(len(rows), bool)
    decided = np.zeros(len(rows), bool)
    why = np.full(len(rows), "", dtype=object)
    # letters that are only a band: the band must fit the northing
    bad_band = pure_band & ~fits_band
    if utm_letters == "hemisphere":
        log.reject(log.mask(rows[pure_band]), cz, lambda ii: [
            f"'{zc[i]}': {letter[_k(rows, i)]} is a latitude band, not a hemisphere (--utm-letters hemisphere)"
            for i in ii])
    log.reject(log.mask(rows[bad_band]), cz, lambda ii: [_band_mismatch(zc[i], letter[_k(rows, i)],
                                                                       band_lat[_k(rows, i)]) for i in ii])
    south[pure_band] = np.isin(letter[pure_band], list("CDEFGHJKLM"))
    decided |= pure_band | words | is_n
    south[words] = hemi[words] == "S"
    # 'S' that cannot be band S is the southern hemisphere
    s_hemi = is_s & ~fits_band
    south[s_hemi], decided[s_hemi] = True, True
    lo_s, hi_s = grids.band_limits("S")
    for k in np.flatnonzero(s_hemi).tolist():
        i = int(rows[k])
        p.letter_note[i] = (f"'{zc[i]}' was read as zone {zone[k]} of the southern hemisphere: as latitude band S "
                            f"({_lat(lo_s)} to {_lat(hi_s)}) this northing would lie at {_lat(lat_n[k])}, outside "
                            "that band")
        p.north_lat[i], p.north_lon[i] = lat_n[k], lon_n[k]
    if s_hemi.any() and utm_letters != "band":
        # said once for the sheet: a GPS-style '16S' typed for a northern place lands in the other hemisphere, and
        # nothing else would show it when every row is read the same way
        ks = np.flatnonzero(s_hemi)
        k0, i0 = ks[0], rows[ks[0]]
        band = grids.band_letter(float(lat_n[k0]))
        log.sheet_warning(
            f"{len(ks)} row{'s' if len(ks) > 1 else ''} with zone letter S (first '{zc[i0]}') "
            f"{'were' if len(ks) > 1 else 'was'} read as the southern hemisphere, because as latitude band S "
            f"({_lat(lo_s)} to {_lat(hi_s)}) the northing would lie at {_lat(lat_n[k0])}"
            + (f" (band {band})" if band else "") + "; if the stations are in the northern hemisphere, write "
            + (f"{band} (the band) or N" if band else "N"), line=int(log.lines[i0]), column=cz)
    if utm_letters == "band":
        log.reject(log.mask(rows[s_hemi]), cz, lambda ii: [_band_mismatch(zc[i], "S", band_lat[_k(rows, i)])
                                                           for i in ii])
    amb = is_s & fits_band & ~decided
    if amb.any():
        if utm_letters in ("band", "hemisphere"):
            south[amb] = utm_letters == "hemisphere"
            decided[amb] = True
        else:
            _resolve_s(p, rows, amb, (lat_n, lon_n, lat_s, lon_s), style, groups, track_ll, south, decided, why,
                       zone)
            undecided = amb & ~decided
            log.reject(log.mask(rows[undecided]), cz, lambda ii: [
                _both_readings(zc[i], lat_n[_k(rows, i)], lon_n[_k(rows, i)], lat_s[_k(rows, i)], lon_s[_k(rows, i)])
                for i in ii])
            told = np.flatnonzero(amb & decided)
            # one warning per distinct reason, on its first row, naming how many rows it covers
            texts = pd.Series(why[told])
            for text, ks in texts.groupby(texts, sort=False).groups.items():
                ks = told[np.asarray(ks)]
                more = f" (the same for {len(ks) - 1} more rows, to line {log.lines[rows[ks[-1]]]})" if len(ks) > 1 \
                    else ""
                log.warn(log.mask([rows[ks[0]]]), cz, text + more)
    keep = decided & ~log.bad[rows]
    r = rows[keep]
    lat = np.where(south, lat_s, lat_n)[keep]
    lon = np.where(south, lon_s, lon_n)[keep]
    z, s = zone[keep], south[keep]
    _strip_checks(p, r, z, s, E[r], N[r], lat, lon, groups)
    ok = ~log.bad[r]
    p.take(r[ok], lat[ok], lon[ok], "utm", z[ok], s[ok])


def _k(rows, i):
    return int(np.searchsorted(rows, i))


def _band_mismatch(text, letter, lat):
    lo, hi = grids.band_limits(letter)
    there = grids.band_letter(lat)
    return (f"'{text}': latitude band {letter} runs from {_lat(lo)} to {_lat(hi)}, but this northing is at "
            f"{_lat(lat)}{f', in band {there}' if there else ''}; check the band letter and the northing")


def _both_readings(text, lat_n, lon_n, lat_s, lon_s):
    return (f"'{text}' can be latitude band S ({_lat(lat_n)}, {_lon(lon_n)}) or the southern hemisphere "
            f"({_lat(lat_s)}, {_lon(lon_s)}), and nothing in this fix or sheet shows which: give --utm-letters band "
            "(zones written as a GPS shows them) or --utm-letters hemisphere")


def _lat(v):
    return f"{abs(v):.2f}°{'S' if v < 0 else 'N'}"


def _lon(v):
    return f"{abs(v):.2f}°{'W' if v < 0 else 'E'}"


def _resolve_s(p, rows, amb, readings, style, groups, track_ll, south, decided, why, zone_of):
    """Decide ambiguous 'S' zone letters from the fix's other positions, the track, then letter habits."""
    lat_n, lon_n, lat_s, lon_s = readings
    # 1. the other positions of the row's own fix (lat/lon, MGRS, stations: already read)
    if groups is not None:
        ref_lat, ref_lon, ref_n = _group_reference(groups, p.lat, p.lon, ~p.none() & ~p.log.bad)
        g = groups[rows]
        has_ref = amb & ~decided & (g >= 0) & (ref_n[np.maximum(g, 0)] > 0)
        for k in np.flatnonzero(has_ref):
            rl, ro = ref_lat[g[k]], ref_lon[g[k]]
            dn, ds = _km(rl, ro, lat_n[k], lon_n[k]), _km(rl, ro, lat_s[k], lon_s[k])
            south[k], decided[k] = ds < dn, True
            why[k] = (f"'{p.cells['utm_zone'][rows[k]]}' read as {'the southern hemisphere' if ds < dn else 'latitude band S'}"
                      f": the other positions of this fix are {min(dn, ds):,.0f} km away (the other reading would put "
                      f"it {max(dn, ds):,.0f} km away)")
    # 2. the GPS track at the row's time
    if track_ll is not None:
        tl, to = track_ll
        has_t = amb & ~decided & np.isfinite(tl[rows])
        for k in np.flatnonzero(has_t):
            i = rows[k]
            dn, ds = _km(tl[i], to[i], lat_n[k], lon_n[k]), _km(tl[i], to[i], lat_s[k], lon_s[k])
            south[k], decided[k] = ds < dn, True
            why[k] = (f"'{p.cells['utm_zone'][i]}' read as {'the southern hemisphere' if ds < dn else 'latitude band S'}"
                      f": the GPS track at this time is {min(dn, ds):,.0f} km away")
    # 3. how the other zone letters of the fix, then of the sheet in the same zone, then of the whole sheet, are
    # written; a sheet may span continents, so a habit seen only in other zones decides the reading but leaves a
    # doubt that the fix's status carries (dfkit.locate)
    levels = []
    if groups is not None:
        levels.append(("this fix", groups[rows]))
    zone = np.array([int(z) for z in zone_of], np.int64)
    levels.append(("this sheet, in the same zone,", zone))
    levels.append(("this sheet", np.zeros(len(rows), np.int64)))
    for where, g in levels:
        left = amb & ~decided
        if not left.any():
            break
        frame = pd.DataFrame({"g": g, "band": style == "band", "hemi": style == "hemisphere"})
        agg = frame[g >= 0].groupby("g")[["band", "hemi"]].any()
        for k in np.flatnonzero(left & (g >= 0)):
            if g[k] not in agg.index:
                continue
            b, h = bool(agg.at[g[k], "band"]), bool(agg.at[g[k], "hemi"])
            if b != h:
                south[k], decided[k] = h, True
                ex = np.flatnonzero((g == g[k]) & (style == ("band" if b else "hemisphere")))[0]
                text = p.cells['utm_zone'][rows[k]]
                seen = f"(line {p.log.lines[rows[ex]]}: '{p.cells['utm_zone'][rows[ex]]}')"
                why[k] = (f"'{text}' read as {'latitude band S' if b else 'the southern hemisphere'}"
                          f": {where} writes zone letters as {'latitude bands' if b else 'hemispheres'} {seen}")
                if where == "this sheet":
                    other = (lat_s[k], lon_s[k]) if b else (lat_n[k], lon_n[k])
                    took = (lat_n[k], lon_n[k]) if b else (lat_s[k], lon_s[k])
                    why[k] += (", but only in other zones, and a sheet can span continents: its fix is marked "
                               "ambiguous")
                    p.doubts[int(rows[k])] = (
                        f"its stations' UTM zone letter S (line {p.log.lines[rows[k]]}: '{text}') was read as "
                        f"{'latitude band S' if b else 'the southern hemisphere'} ({_lat(took[0])}, {_lon(took[1])}) "
                        f"only because rows of other zones write their letters as {'bands' if b else 'hemispheres'} "
                        f"{seen}; as {'the southern hemisphere' if b else 'latitude band S'} the fix would lie "
                        f"{float(_km(took[0], took[1], other[0], other[1])):,.0f} km away, at {_lat(other[0])}, "
                        f"{_lon(other[1])}: nothing in this fix shows which (write the zone with a hemisphere word, "
                        "such as '19 south', or give --utm-letters band or hemisphere)")


def _strip_checks(p, r, zone, south, E, N, lat, lon, groups):
    """UTM rows outside their zone's strip: refuse likely typos, check the conversion, warn."""
    log = p.log
    cz, ce = p.name("utm_zone"), p.name("easting")
    out = grids.outside_strip(zone, lat, lon)
    if not out.any():
        return
    with np.errstate(invalid="ignore"):
        beyond = out & ((lat > 84.0) | (lat < -80.0))
    log.warn(log.mask(r[beyond]), p.name("northing"), "this position is beyond UTM's latitudes (80°S to 84°N); "
                                                      "it was converted, but a polar grid (UPS) may have been meant")
    if groups is not None:
        g = groups[r]
        inside = ~out & (g >= 0)
        if inside.any():
            frame = pd.DataFrame({"g": g[inside], "z": zone[inside], "e": E[inside]})
            med = frame.groupby(["g", "z"])["e"].median()
            for k in np.flatnonzero(out & (g >= 0)):
                key = (g[k], zone[k])
                if key in med.index and abs(E[k] - med[key]) > OUT_OF_STRIP_TYPO_M:
                    log.reject(log.mask([r[k]]), ce,
                               f"easting {E[k]:.0f} puts this station {abs(E[k] - med[key]) / 1000:,.0f} km from the "
                               f"other stations of its fix (all inside zone {zone[k]}'s strip): a digit missing or "
                               "too many?")
    trip = grids.utm_round_trip_m(zone, south, E, N, lat, lon)
    unsound = out & ~(trip < 1e-3)
    log.reject(log.mask(r[unsound]), ce, lambda ii: [
        f"the conversion of this easting/northing does not return to itself (round trip "
        f"{trip[_k(r, i)]:.3g} m): the position is outside what UTM can represent" for i in ii])
    std, _ = grids.standard_utm_zone(lat, lon)
    warn = out & ~log.bad[r]
    log.warn(log.mask(r[warn]), cz, lambda ii: [
        f"easting {E[_k(r, i)]:.0f} is {abs(E[_k(r, i)] - 5e5) / 1000:,.0f} km "
        f"{'east' if E[_k(r, i)] > 5e5 else 'west'} of zone {zone[_k(r, i)]}'s central meridian, outside its 6° strip "
        f"(the position is in zone {std[_k(r, i)]}): read as given (the conversion holds far beyond the strip); "
        "check the zone unless you use a country-wide grid" for i in ii])


# --------------------------------------------------------------------------- cross checks and evidence

def _cross_check(p: _State, idx, lat2, lon2, what):
    from pyproj import Geod

    _, _, dist = Geod(ellps="WGS84").inv(p.lon[idx], p.lat[idx], lon2, lat2)
    dist = np.asarray(dist)
    far = dist > POSITION_AGREEMENT_M
    col = {"utm": p.name("easting"), "mgrs": p.name("mgrs"), "station": p.name("station")}.get(what, what)
    d = dict(zip(idx[far].tolist(), dist[far].tolist()))
    p.log.reject(p.log.mask(idx[far]), col, lambda ii: [
        f"the {what.upper() if what != 'station' else 'station'} position disagrees with the row's "
        f"{p.source[i]} position by {d[i]:,.0f} m (more than {POSITION_AGREEMENT_M:g} m); give one position or "
        "correct one" for i in ii])


def _km(lat1, lon1, lat2, lon2):
    """Great-circle distance on a sphere of radius 6371 km [km] (for evidence only)."""
    p1, p2 = np.radians(lat1), np.radians(lat2)
    dl = np.radians(np.asarray(lon2) - np.asarray(lon1))
    c = np.sin(p1) * np.sin(p2) + np.cos(p1) * np.cos(p2) * np.cos(dl)
    return 6371.0 * np.arccos(np.clip(c, -1.0, 1.0))


def _slots(groups) -> int:
    """Groups to hold, indexed by group id: at least one slot, since callers index group 0."""
    return max(int(groups.max()) + 1 if len(groups) else 0, 1)


def _group_reference(groups, lat, lon, valid):
    """Median lat/lon and count of the valid positions of each group (indexed by group id)."""
    m = _slots(groups)
    sel = valid & (groups >= 0)
    cnt, (ref_lat, ref_lon) = group_medians(groups[sel], m, lat[sel], lon[sel])
    return ref_lat, ref_lon, cnt


def _fix_reference(p: _State, groups, valid):
    """(median lat, median lon, count, loose) of the valid positions of the rows' own fixes (indexed by group id),
    kept on ``p`` while the rows it is taken from stay the same (the swapped-lat/lon check and the far-station
    check ask for it in turn). Medians are taken only for *loose* fixes (:func:`_loose_fixes`); they are NaN for the
    others, whose positions all lie so close together that neither check can find one of them far from the rest."""
    sel = valid & (groups >= 0)
    if p.reference is not None and np.array_equal(p.reference[0], sel):
        return p.reference[1]
    m = _slots(groups)
    loose = _loose_fixes(p, groups, sel, m)
    cnt = group_counts(groups[sel], m)
    use = sel & loose[np.maximum(groups, 0)]
    _, (ref_lat, ref_lon) = group_medians(groups[use], m, p.lat[use], p.lon[use])
    ref = (ref_lat, ref_lon, cnt, loose)
    p.reference = (sel, ref)
    return ref


#: How far apart the positions of one fix may lie, at most, and the fix still need no evidence check: its box
#: (the smallest and largest latitude and longitude of its positions) spans at most this many degrees in latitude
#: plus longitude, and at most this many km along a meridian plus a parallel. Any two points of the box, a row and
#: the fix's middle (a median lies within the box) among them, are then closer than half of what the checks look
#: for (a row far from its fix: SWAPPED_FAR_DEG, FAR_STATION_KM; two stations FAR_STATION_KM apart), so the checks
#: are run only on the other fixes. The factor two is a margin of ours (no source).
_TIGHT_DEG = SWAPPED_FAR_DEG / 2
_TIGHT_KM = FAR_STATION_KM / 4


def _loose_fixes(p: _State, groups, sel, m):
    """Which fixes (indexed by group id) have positions (rows ``sel``) farther apart than a tight box allows
    (:data:`_TIGHT_DEG`, :data:`_TIGHT_KM`): the few the evidence checks must look at. A box found on a set of
    rows holds for any of its subsets (rows refused since), so it is kept on ``p`` and reused for them."""
    if p.boxes is not None and len(p.boxes[1]) == m and not (sel & ~p.boxes[0]).any():
        return p.boxes[1]
    cnt, ((lat_lo, lat_hi), (lon_lo, lon_hi)) = group_ranges(groups[sel], m, p.lat[sel], p.lon[sel])
    d_lat, d_lon = lat_hi - lat_lo, lon_hi - lon_lo
    # nearest the equator the box reaches: where a degree of longitude is longest
    low = np.where((lat_lo <= 0) & (lat_hi >= 0), 0.0, np.minimum(np.abs(lat_lo), np.abs(lat_hi)))
    # along the meridian, then along the parallel: no shorter than the great circle between the two ends
    reach_km = 6371.0 * np.radians(d_lat + np.cos(np.radians(low)) * d_lon)
    with np.errstate(invalid="ignore"):
        tight = (d_lat + d_lon <= _TIGHT_DEG) & (reach_km <= _TIGHT_KM)
    loose = (cnt > 0) & ~tight        # NaN (a position missing) is never tight
    p.boxes = (sel, loose)
    return loose


def _mask(n, idx):
    """A row mask of ``n`` rows from row indices."""
    m = np.zeros(n, bool)
    m[idx] = True
    return m


def _deg_dist(lat1, lon1, lat2, lon2):
    return np.hypot(lat1 - lat2, ((lon1 - lon2 + 180.0) % 360.0 - 180.0) * np.cos(np.radians(lat2)))


def _swapped(p: _State, groups, track_ll):
    """Refuse lat/lon rows that sit far from their own fix (or the track) but fit it swapped."""
    log = p.log
    cand = p.is_("lat/lon") & ~log.bad
    if not cand.any():
        return
    lat, lon = p.lat, p.lon
    suspect = np.zeros(p.n, bool)
    by_track = np.zeros(p.n, bool)      # far from the track (else from the other positions of its fix)
    with np.errstate(invalid="ignore"):
        if track_ll is not None:
            tl, to = track_ll
            t_ok = cand & np.isfinite(tl)
            hit = t_ok & (_deg_dist(lat, lon, tl, to) > SWAPPED_FAR_DEG) & (_deg_dist(lon, lat, tl, to) < SWAPPED_NEAR_DEG)
            suspect |= hit
            by_track |= hit
            cand &= ~t_ok
        if groups is not None and cand.any():
            valid = ~p.none() & ~log.bad
            ref_lat, ref_lon, cnt, loose = _fix_reference(p, groups, valid)
            g = np.maximum(groups, 0)
            cand &= (groups >= 0) & loose[g]          # a row of a tight fix is near its middle
            big = np.flatnonzero(cand & (cnt[g] >= 3))
            gb = g[big]
            hit = _mask(p.n, big[(_deg_dist(lat[big], lon[big], ref_lat[gb], ref_lon[gb]) > SWAPPED_FAR_DEG) &
                                  (_deg_dist(lon[big], lat[big], ref_lat[gb], ref_lon[gb]) < SWAPPED_NEAR_DEG)])
            suspect |= hit
            pairs = cand & (groups >= 0) & (cnt[g] == 2)
            if pairs.any():
                _swapped_pairs(p, groups, valid, pairs)
    log.reject(suspect, p.name("lat"), lambda idx: [
        f"{lat[i]:g}, {lon[i]:g} is far from "
        f"{'the GPS track at this time' if by_track[i] else 'the other positions of its fix'}, but swapped it fits: "
        "lat and lon look swapped" for i in idx])


def _far_from_fix(p: _State, groups):
    """Refuse stations far from the other stations of their own fix (3 or more positions), naming the corrections
    of a typing slip that would bring them back; warn on both rows of a two-station fix that far apart."""
    log = p.log
    valid = ~p.none() & ~log.bad & (groups >= 0)
    if not valid.any():
        return
    ref_lat, ref_lon, cnt, loose = _fix_reference(p, groups, valid)
    g = np.maximum(groups, 0)
    sel = valid & (cnt[g] >= 2) & loose[g]      # a station of a tight fix is near its middle
    if not sel.any():
        return
    d = np.full(p.n, np.nan)
    d[sel] = _km(ref_lat[g[sel]], ref_lon[g[sel]], p.lat[sel], p.lon[sel])
    _, (spread,) = group_medians(groups[sel], len(cnt), d[sel])
    spread[np.isnan(spread)] = 0.0
    with np.errstate(invalid="ignore"):
        far = sel & (cnt[g] >= 3) & ~p.is_("track") & \
            (d > np.maximum(FAR_STATION_SPREADS * spread[g], FAR_STATION_KM))
        pair = sel & (cnt[g] == 2) & (2.0 * d > FAR_STATION_KM)
    for i in np.flatnonzero(far):
        near = valid & ~far & (groups == groups[i])
        others = _km(ref_lat[g[i]], ref_lon[g[i]], p.lat[near], p.lon[near])
        reach = float(others.max()) if len(others) else 0.0
        col, fits = _corrections(p, i, ref_lat[g[i]], ref_lon[g[i]], max(3.0 * reach, 2.0))
        fix = f" It would fit with {describe(fits)}." if fits else ""
        if p.letter_note.get(int(i)):
            col, fix = _letter_reading(p, i, near, ref_lat[g[i]], ref_lon[g[i]], max(3.0 * reach, 2.0), col, fix)
        log.reject(log.mask([i]), col,
                   f"this station is {d[i]:,.0f} km from the other stations of its fix (they lie within {reach:,.1f} km "
                   f"of their middle; a fix's bearings are taken within walking or driving reach): a position "
                   f"mistake? Not used.{fix}")
    if pair.any():
        order = np.flatnonzero(pair)
        first = {}
        for i in order:
            first.setdefault(groups[i], i)
        for i in order:
            j = first[groups[i]]
            if j == i:
                j = next(k for k in order if groups[k] == groups[i] and k != i)
            log.warn(log.mask([i]), _position_column(p, i),
                     f"this station and line {log.lines[j]}, the only other station of its fix, are {2 * d[i]:,.0f} km "
                     "apart: one of the two positions is probably mistyped")


def _letter_reading(p: _State, i, near, ref_lat, ref_lon, radius_km, col, fix):
    """The column to blame and the closing sentences for a row far from its fix whose zone letter S was read as the
    southern hemisphere: how it was read and, when the northern reading fits the fix, the letter that would."""
    i = int(i)
    text = f" {p.letter_note[i][0].upper()}{p.letter_note[i][1:]}."
    d = float(_km(ref_lat, ref_lon, p.north_lat[i], p.north_lon[i]))
    if not d <= radius_km:
        return col, text + fix
    band = grids.band_letter(p.north_lat[i])
    zone_cells = pd.Series(p.cells["utm_zone"][near & p.is_("utm")], dtype=object).str.strip()
    written = zone_cells[zone_cells != ""].value_counts()
    others = (f"; the other stations of this fix are written '{written.index[0]}'" if len(written) else "")
    return p.name("utm_zone"), (f"{text} In the northern hemisphere (latitude band {band}) it lies {d:,.1f} km from "
                                f"their middle{others}: a typo for {p.zone[i]}{band}?")


def _position_column(p: _State, i) -> str:
    src = p.source[i]
    if src == "utm":
        return p.name("easting")
    if src in ("mgrs", "station"):
        return p.name(src)
    return p.name("lat")


def _corrections(p: _State, i, ref_lat, ref_lon, radius_km):
    """(column to blame, [(column, corrected text, kind)...]) for a row whose position is far from its fix:
    the typing slips (one per cell) that bring the row within ``radius_km`` of the fix's reference, nearest first."""
    src = p.source[i]
    found = []
    if src == "lat/lon":
        for role, axis in (("lat", "lat"), ("lon", "lon")):
            text = p.cells[role][i]
            text = _float_text(text) if not isinstance(text, str) else text
            cands = variants(text)
            if not cands:
                continue
            vals = np.array([float(c) for c, _ in cands])
            ok = np.abs(vals) <= (90.0 if axis == "lat" else 180.0)
            la = np.where(ok, vals, np.nan) if axis == "lat" else np.full(len(vals), p.lat[i])
            lo = np.where(ok, vals, np.nan) if axis == "lon" else np.full(len(vals), p.lon[i])
            with np.errstate(invalid="ignore"):
                dist = _km(ref_lat, ref_lon, la, lo)
            found += [(dist[k], p.name(role), cands[k][0], cands[k][1]) for k in np.flatnonzero(dist <= radius_km)]
    elif src == "utm":
        e_t, n_t = p.cells["easting"][i], p.cells["northing"][i]
        e_t = _float_text(e_t) if not isinstance(e_t, str) else e_t
        n_t = _float_text(n_t) if not isinstance(n_t, str) else n_t
        try:
            e0, n0 = float(e_t), float(n_t)
        except ValueError:
            return _position_column(p, i), []
        for role, text in (("easting", e_t), ("northing", n_t)):
            cands = [(c, k) for c, k in variants(text, point=False) if k != "sign"]
            if not cands:
                continue
            vals = np.array([float(c) for c, _ in cands])
            E = vals if role == "easting" else np.full(len(vals), e0)
            N = vals if role == "northing" else np.full(len(vals), n0)
            ok = (np.abs(E - 5e5) <= grids.MAX_FROM_CM_M) & (N >= 0) & (N <= 1e7)
            if not ok.any():
                continue
            la, lo = grids.utm_to_latlon(np.full(ok.sum(), p.zone[i]), np.full(ok.sum(), p.south[i]), E[ok], N[ok])
            dist = np.full(len(vals), np.inf)
            dist[ok] = _km(ref_lat, ref_lon, la, lo)
            found += [(dist[k], p.name(role), cands[k][0], cands[k][1]) for k in np.flatnonzero(dist <= radius_km)]
    found.sort(key=lambda f: f[0])
    fits = [(col, text, kind) for _, col, text, kind in found]
    col = fits[0][0] if fits else _position_column(p, i)
    return col, fits


def _float_text(v) -> str:
    v = float(v)
    return str(int(v)) if v.is_integer() and abs(v) < 1e15 else repr(v)


def _swapped_pairs(p, groups, valid, pairs):
    """Fixes with two positions: if swapping one makes them meet, either may be the swapped one."""
    idx = np.flatnonzero(valid & (groups >= 0) & np.isin(groups, groups[pairs]))
    order = idx[np.argsort(groups[idx], kind="stable")]
    g = groups[order]
    firsts = order[:-1][g[:-1] == g[1:]]
    seconds = order[1:][g[:-1] == g[1:]]
    lat, lon = p.lat, p.lon
    with np.errstate(invalid="ignore"):
        far = _deg_dist(lat[firsts], lon[firsts], lat[seconds], lon[seconds]) > SWAPPED_FAR_DEG
        swap_a = far & (p.source[firsts] == "lat/lon") & \
            (_deg_dist(lon[firsts], lat[firsts], lat[seconds], lon[seconds]) < SWAPPED_NEAR_DEG)
        swap_b = far & (p.source[seconds] == "lat/lon") & \
            (_deg_dist(lon[seconds], lat[seconds], lat[firsts], lon[firsts]) < SWAPPED_NEAR_DEG)
    for k in np.flatnonzero(swap_a | swap_b):
        a, b = firsts[k], seconds[k]
        la, lb = p.log.lines[a], p.log.lines[b]
        if swap_a[k] and swap_b[k]:
            for i, other in ((a, lb), (b, la)):
                p.log.reject(p.log.mask([i]), p.name("lat"), f"{lat[i]:g}, {lon[i]:g} and line {other} of the same fix "
                             "are far apart, and swapping lat and lon of either makes them meet: one of the two has lat "
                             "and lon swapped; check both")
        else:
            i, other = (a, lb) if swap_a[k] else (b, la)
            p.log.reject(p.log.mask([i]), p.name("lat"), f"{lat[i]:g}, {lon[i]:g} is far from line {other} of the same "
                         "fix, but swapped it fits: lat and lon look swapped")


# --------------------------------------------------------------------------- GPS track

def _track_at(track: Track, times, gap_s, n):
    """Track position at each row's time (NaN where the track has no point within ``gap_s``)."""
    lat = np.full(n, np.nan)
    lon = np.full(n, np.nan)
    ok = np.isfinite(times)
    if ok.any():
        tl, to, gap = interpolate_track(track, times[ok])
        near = (gap <= gap_s) & np.isfinite(gap)
        idx = np.flatnonzero(ok)[near]
        lat[idx], lon[idx] = tl[near], to[near]
    return lat, lon


def _from_track(p: _State, track, times, gap_s):
    need = ~p.log.bad & p.none() & np.isfinite(times)
    if not need.any():
        return
    tl, to = _track_at(track, times, gap_s, p.n)
    far = need & ~np.isfinite(tl)
    p.log.reject(far, "time", lambda ii: [_track_message(track, times[i], gap_s) for i in ii])
    ok = np.flatnonzero(need & np.isfinite(tl))
    p.take(ok, tl[ok], to[ok], "track")


def interpolate_track(track: Track, t: np.ndarray):
    """Track position at times ``t`` [s since 1970 UTC], and the time to the nearest track point [s]
    (inf outside the track)."""
    tt = track.t
    t = np.asarray(t, float)
    if len(tt) == 1:
        return np.full(t.shape, track.lat[0]), np.full(t.shape, track.lon[0]), np.abs(t - tt[0])
    j = np.clip(np.searchsorted(tt, t), 1, len(tt) - 1)
    t0, t1 = tt[j - 1], tt[j]
    inside = (t >= tt[0]) & (t <= tt[-1])
    gap = np.where(inside, np.minimum(np.abs(t - t0), np.abs(t1 - t)), np.inf)
    w = np.where(t1 > t0, (t - t0) / np.where(t1 > t0, t1 - t0, 1.0), 0.0)
    lat = track.lat[j - 1] + w * (track.lat[j] - track.lat[j - 1])
    dlon = (track.lon[j] - track.lon[j - 1] + 180.0) % 360.0 - 180.0   # across the antimeridian
    lon = (track.lon[j - 1] + w * dlon + 180.0) % 360.0 - 180.0
    return lat, lon, gap


def _track_message(track: Track, t: float, gap_s: float) -> str:
    when = datetime.fromtimestamp(t, timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
    if t < track.t[0] or t > track.t[-1]:
        a = datetime.fromtimestamp(track.t[0], timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
        b = datetime.fromtimestamp(track.t[-1], timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
        return f"{when} is outside the GPS track ({a} to {b}); no position for this bearing"
    return (f"no GPS track point within {gap_s:g} s of {when}; the position would be a guess "
            "(raise --track-gap to accept)")


# --------------------------------------------------------------------------- files of places

def read_places(source, label_column: str = "station", *, prefix: str = "", worksheet: str | None = None,
                utm_letters: str = "auto", stations: pd.DataFrame | None = None,
                name: str | None = None) -> tuple[pd.DataFrame, list[Problem]]:
    """Read a file (CSV, spreadsheet) or DataFrame of labelled places: stations, spots, beacons.

    Parameters
    ----------
    source : path, bytes, file-like or pandas.DataFrame
        The file; a DataFrame's rows are numbered from 2 (as if its header were line 1).
    label_column : str
        Column with the place labels (``'station'``, ``'spot'``, ``'beacon'``).
    prefix : str
        Position column prefix (see :func:`parse_positions`).
    worksheet : str, optional
        Sheet of a spreadsheet file.
    utm_letters : {'auto', 'band', 'hemisphere'}
        See :func:`parse_positions`.
    stations : pandas.DataFrame, optional
        Places the rows may refer to by label.
    name : str, optional
        Name used in messages.

    Returns
    -------
    places : pandas.DataFrame
        Indexed by label: ``lat``, ``lon`` [°], ``zone``, ``south``, ``source``,
        ``line``. Only usable rows; a label listed twice keeps its first row.
        ``places.attrs['refused']`` maps labels whose rows were all refused to a line.
    problems : list of Problem
        Rejected rows and warnings, with line numbers.

    Raises
    ------
    SheetError
        The file cannot be read, or has no label or position column.
    """
    from dfkit.io import read_table
    from dfkit.problems import SheetError

    raw = read_table(source, worksheet=worksheet, name=name)
    t = raw.table
    log = RowLog(t["line"].to_numpy(), raw.source)
    log.problems.extend(raw.problems)
    pre = {p.line for p in raw.problems if p.severity == "error" and p.line}
    refused_by_reader = np.isin(log.lines, list(pre))
    log.bad |= refused_by_reader
    if label_column not in t.columns:
        raise SheetError(f"{raw.source or 'the file'}: no '{label_column}' column; found "
                         f"{', '.join(raw.columns) or 'no columns'}")
    st_default = prefix.rstrip("_") if prefix else "station"
    st_col = "\0" if st_default == label_column else st_default
    if not has_position_columns(t.columns, prefix, st_col):
        raise SheetError(f"{raw.source or 'the file'}: no position columns; found {', '.join(raw.columns)}; "
                         f"expected {prefix}lat and {prefix}lon, {prefix}utm_zone with {prefix}easting and "
                         f"{prefix}northing, or {prefix}mgrs")
    labels = column(t, label_column)
    log.reject(labels == "", label_column, f"{label_column} label is missing")
    dup = pd.Series(labels).duplicated(keep="first").to_numpy() & (labels != "")
    log.reject(dup, label_column, lambda idx: [f"{label_column} '{labels[i]}' is listed twice; the first is used"
                                               for i in idx])
    pos = parse_positions(t, prefix=prefix, station_column=st_col, source=raw.source,
                          decimal_comma=raw.decimal_comma, stations=stations, utm_letters=utm_letters, log=log,
                          skip=refused_by_reader)
    keep = ~pos.rejected
    out = pd.DataFrame({"lat": pos.lat[keep], "lon": pos.lon[keep], "zone": pos.zone[keep],
                        "south": pos.south[keep], "source": pos.source[keep], "line": log.lines[keep]},
                       index=pd.Index(labels[keep], name=label_column))
    kept = set(labels[keep].tolist())
    out.attrs["refused"] = {lab: int(ln) for lab, ln in zip(labels[~keep], log.lines[~keep])
                            if lab and lab not in kept}
    return out, log.problems


def read_stations(source, *, worksheet: str | None = None, utm_letters: str = "auto"):
    """A stations file (``station`` label + position columns): :func:`read_places` with ``label_column='station'``."""
    return read_places(source, "station", worksheet=worksheet, utm_letters=utm_letters)
