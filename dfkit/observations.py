"""Validate a sheet and convert every bearing to one convention.

Input: a :class:`~dfkit.io.sheet.RawSheet` (text cells with line numbers).
Output: :class:`Bearings`, a table with one row per *usable* bearing giving the
station's WGS84 ``lat``/``lon`` [°], the ``true_bearing`` [° clockwise from true
north], the bearing SD ``sd`` [°] when known, the UTC ``time`` and the fix label,
plus the corrections applied (``declination``, ``convergence`` [°]); and the list
of problems, each with line number, column and reason. No row disappears
silently: a row is either in the table or has at least one error.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from datetime import datetime, timezone

import numpy as np
import pandas as pd

from dfkit import coords, magnetic
from dfkit.conventions import (
    DEGREES_PER_UNIT,
    FULL_CIRCLE,
    NORTH_ALIASES,
    UNIT_ALIASES,
    wrap360,
)
from dfkit.io.gpx import Track, read_track
from dfkit.io.sheet import KNOWN_COLUMNS, RawSheet, read_sheet
from dfkit.policy import DEFAULT_TRACK_GAP_S, DEFAULT_WINDOW_MIN, POSITION_AGREEMENT_M
from dfkit.problems import Problem, SheetError

#: Columns of the normalized table, in order (carried columns follow).
NORMALIZED_COLUMNS = [
    "line", "fix_id", "fix", "tag", "time", "lat", "lon", "true_bearing", "sd", "sd_source", "declination", "convergence",
    "bearing", "unit", "north", "position_from", "grouped_by", "declination_sd",
]


@dataclass(frozen=True)
class ReadOptions:
    """Sheet-wide defaults and helpers; a value in the sheet always wins.

    Attributes
    ----------
    unit : {'deg', 'mil', 'grad'}
        Unit of bearings whose row has no ``unit``.
    north : {'true', 'magnetic', 'grid'}
        Reference of bearings whose row has no ``north``.
    sd : float, optional
        Bearing standard deviation for rows without ``sd``. [°]
    declination : float, optional
        Declination for magnetic rows without ``declination`` (instead of the model). [° east]
    tz : str, optional
        IANA time zone (``Europe/Vienna``) for times written without an offset.
    window_min : float
        Unlabelled bearings of one tag within this many minutes form one fix. [min]
    stations : path, optional
        A stations file: a ``station`` column plus the position columns of a sheet.
    track : path or Track, optional
        A GPX track giving positions to rows that have a time but no position.
    track_gap_s : float
        Largest time between a bearing and the nearest track point. [s]
    grid_crs : str, optional
        Projected CRS (``EPSG:27700``...) whose grid north ``north=grid`` refers to,
        for rows that are not given in UTM.
    """

    unit: str = "deg"
    north: str = "true"
    sd: float | None = None
    declination: float | None = None
    tz: str | None = None
    window_min: float = DEFAULT_WINDOW_MIN
    stations: object = None
    track: object = None
    track_gap_s: float = DEFAULT_TRACK_GAP_S
    grid_crs: str | None = None


@dataclass
class Bearings:
    """Usable bearings in one convention, and what could not be used.

    A fix is identified by its tag *and* its label: two tags that both number their
    fixes 1, 2, 3 ... have different fixes.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per usable bearing (columns :data:`NORMALIZED_COLUMNS`, then the
        sheet's own extra columns). ``fix_id`` is the row of :attr:`fix_index`
        the bearing belongs to.
    problems : list of Problem
        Every rejected row (severity 'error') and every warning.
    fix_index : pandas.DataFrame
        One row per fix of the input, indexed by ``fix_id`` (0, 1, ...), in order of
        first appearance, *including* fixes whose rows were all rejected: ``fix``
        (label), ``tag``, ``rejected_lines`` (list of line numbers).
    n_rows : int
        Data rows read from the sheet.
    notes : list of str
        What dfkit did that the user should know (grouping, models used).
    window_min : float
        The grouping window used [min]; :func:`dfkit.locate.locate` flags fixes
        that span more than it.
    """

    table: pd.DataFrame
    problems: list[Problem]
    fix_index: pd.DataFrame
    n_rows: int = 0
    notes: list[str] = field(default_factory=list)
    source: str = ""
    window_min: float = DEFAULT_WINDOW_MIN

    @property
    def n_rejected(self) -> int:
        return len({p.line for p in self.problems if p.severity == "error" and p.line})

    @property
    def labels(self) -> list[str]:
        """The fix label of every fix (a label may repeat across tags)."""
        return self.fix_index["fix"].tolist()

    def select(self, mask=None, *, tags=None, fixes=None) -> "Bearings":
        """A subset of these bearings, as a new :class:`Bearings`.

        Parameters
        ----------
        mask : array_like of bool, optional
            Rows of :attr:`table` to keep.
        tags : str or iterable of str, optional
            Keep the fixes of these tags (including their fixes with no usable bearing).
        fixes : str or iterable of str, optional
            Keep the fixes with these labels.

        Fix ids are renumbered; problems are kept for the lines of the kept fixes and
        for the sheet as a whole.
        """
        t = self.table
        keep_fix = np.ones(len(self.fix_index), bool)
        if tags is not None:
            tags = [tags] if isinstance(tags, str) else list(tags)
            keep_fix &= self.fix_index["tag"].isin(tags).to_numpy()
        if fixes is not None:
            fixes = [fixes] if isinstance(fixes, str) else list(fixes)
            keep_fix &= self.fix_index["fix"].isin(fixes).to_numpy()
        rows = keep_fix[t["fix_id"].to_numpy(dtype=np.int64)] if len(t) else np.zeros(0, bool)
        if mask is not None:
            rows &= np.asarray(mask, bool)
            has_rows = np.zeros(len(keep_fix), bool)
            has_rows[t["fix_id"].to_numpy(dtype=np.int64)[rows]] = True
            keep_fix &= has_rows
        old_ids = np.flatnonzero(keep_fix)
        new_id = np.full(len(keep_fix), -1, np.int64)
        new_id[old_ids] = np.arange(len(old_ids))
        table = t[rows].copy()
        table["fix_id"] = new_id[table["fix_id"].to_numpy(dtype=np.int64)]
        fix_index = self.fix_index.iloc[old_ids].reset_index(drop=True)
        fix_index.index.name = "fix_id"
        lines = set(table["line"].tolist())
        for rl in fix_index["rejected_lines"]:
            lines.update(rl)
        problems = [p for p in self.problems if p.line in lines or p.line <= 1 or p.source != self.source]
        return Bearings(table=table.reset_index(drop=True), problems=problems, fix_index=fix_index,
                        n_rows=len(table) + sum(len(r) for r in fix_index["rejected_lines"]), notes=list(self.notes),
                        source=self.source, window_min=self.window_min)


# --------------------------------------------------------------------------- helpers

class _Collector:
    """Collects problems and the per-row 'rejected' mask."""

    def __init__(self, lines: np.ndarray, source: str):
        self.lines = lines
        self.bad = np.zeros(len(lines), bool)
        self._by_column: dict[str, np.ndarray] = {}
        self.problems: list[Problem] = []
        self.source = source

    def reject(self, mask, column, messages):
        """Reject rows: each row gets at most one error per column (so a sheet can be
        mended in one pass without cascades), and row-level errors only on rows
        that have none yet."""
        done = self.bad if not column else self._by_column.setdefault(column, np.zeros(len(self.bad), bool))
        idx = np.flatnonzero(np.asarray(mask) & ~done)
        if not len(idx):
            return
        if column:
            done[idx] = True
        msgs = messages(idx) if callable(messages) else [messages] * len(idx)
        for i, msg in zip(idx, msgs):
            self.problems.append(Problem(int(self.lines[i]), column, msg, "error", self.source))
        self.bad[idx] = True

    def warn(self, mask, column, messages):
        idx = np.flatnonzero(np.asarray(mask) & ~self.bad)
        msgs = messages(idx) if callable(messages) else [messages] * len(idx)
        for i, msg in zip(idx, msgs):
            self.problems.append(Problem(int(self.lines[i]), column, msg, "warning", self.source))


def _col(table: pd.DataFrame, name: str) -> np.ndarray:
    if name in table.columns:
        return table[name].to_numpy(dtype=object)
    return np.full(len(table), "", dtype=object)


_DEC_COMMA = re.compile(r"^[+-]?\d*,\d+$")


def _numbers(cells: np.ndarray, decimal_comma: bool):
    """Parse text cells as floats. Returns (values, empty mask, unparseable mask, hint per cell)."""
    cells = np.asarray(cells, dtype=object)
    fast = pd.to_numeric(pd.Series(cells, dtype=object), errors="coerce").to_numpy(dtype=float, copy=True)
    empty = cells == ""
    slow = ~np.isfinite(fast) & ~empty
    if not slow.any():   # the common case: plain numbers and blanks, parsed in C
        return np.where(empty, np.nan, fast), empty, np.zeros(len(cells), bool), np.full(len(cells), "", object)
    vals, e2, bad, hints = _numbers_slow(cells[slow], decimal_comma)
    fast[slow] = vals
    unparseable = np.zeros(len(cells), bool)
    unparseable[slow] = bad
    empty[slow] = e2
    all_hints = np.full(len(cells), "", object)
    all_hints[slow] = hints
    return np.where(empty | unparseable, np.nan, fast), empty, unparseable, all_hints


def _numbers_slow(cells: np.ndarray, decimal_comma: bool):
    s = pd.Series(cells, dtype=object).astype(str).str.strip()
    s = s.str.replace("\u2212", "-", regex=False).str.rstrip("°").str.strip()
    empty = (s == "").to_numpy()
    is_dc = s.str.match(_DEC_COMMA).to_numpy()
    if decimal_comma:
        s = s.where(~is_dc, s.str.replace(",", ".", regex=False))
    vals = pd.to_numeric(s.where(~empty, None), errors="coerce").to_numpy(dtype=float)
    lowered = s.str.lower()
    spelled_nan = lowered.isin(["nan", "inf", "-inf", "+inf", "infinity", "-infinity"]).to_numpy()
    unparseable = (~empty & np.isnan(vals)) | spelled_nan | (~empty & ~np.isfinite(np.nan_to_num(vals, nan=0.0)))
    hints = np.where(is_dc & ~np.asarray(decimal_comma), " (a decimal comma: use a point, or a semicolon-"
                     "separated sheet)", "")
    return np.where(unparseable, np.nan, vals), empty, unparseable, hints


def _reject_unparseable(col: _Collector, mask, name, cells, hints):
    col.reject(mask, name, lambda idx: [f"'{cells[i]}' is not a finite number{hints[i]}" for i in idx])


def _parse_times(cells: np.ndarray, tz: str | None):
    """ISO 8601 text -> seconds since 1970 UTC; (values, error message per cell or '')."""
    zone = None
    if tz:
        from zoneinfo import ZoneInfo

        zone = ZoneInfo(tz)
    out = np.full(len(cells), np.nan)
    errs = np.full(len(cells), "", dtype=object)
    cache: dict[str, tuple[float, str]] = {}
    for i, text in enumerate(cells):
        if not text:
            continue
        hit = cache.get(text)
        if hit is None:
            hit = _parse_one_time(text, zone)
            cache[text] = hit
        out[i], errs[i] = hit
    return out, errs


def _parse_one_time(text: str, zone):
    t = text.strip()
    if t.endswith(("z", "Z")):
        t = t[:-1] + "+00:00"
    try:
        dt = datetime.fromisoformat(t)
    except ValueError:
        return np.nan, (f"'{text}' is not an ISO 8601 time; write it like 2026-05-03T06:12:00+02:00 "
                        "or 2026-05-03T04:12:00Z")
    if dt.tzinfo is None:
        if zone is None:
            return np.nan, (f"'{text}' has no UTC offset; add one (Z or +02:00) or name the time zone "
                            "with --tz (for example --tz Europe/Vienna)")
        dt = dt.replace(tzinfo=zone)
    return dt.timestamp(), ""


def _per_value(cells: np.ndarray, func):
    """Apply ``func`` once per distinct cell value (columns like unit or north repeat a few values)."""
    codes, uniques = pd.factorize(np.asarray(cells, dtype=object))
    mapped = np.empty(len(uniques), dtype=object)
    for k, u in enumerate(uniques):
        mapped[k] = func(u)
    out = mapped[codes] if len(codes) else np.zeros(0, dtype=object)
    return out


def _canon(cells: np.ndarray, aliases: dict, default: str):
    low = _per_value(cells, lambda u: str(u).strip().lower())
    canon = _per_value(low, lambda u: aliases.get(u, default if u == "" else None))
    unknown = pd.isna(canon).astype(bool) if len(canon) else np.zeros(0, bool)
    out = canon.copy()
    out[unknown] = default   # the row is rejected; keep a valid value so later checks stay quiet
    return out, unknown


def _parse_declination(cells: np.ndarray, decimal_comma: bool):
    """Declination cells: '3.5', '-3.5', '3.5E' or '3.5W' -> degrees east."""
    if not (np.asarray(cells, dtype=object) != "").any():
        n = len(cells)
        return np.full(n, np.nan), np.ones(n, bool), np.zeros(n, bool), np.full(n, "", object)
    s = pd.Series(cells, dtype=object).astype(str).str.strip().str.upper()
    west = s.str.endswith("W").to_numpy()
    east = s.str.endswith("E").to_numpy()
    stripped = s.str.rstrip("EW").str.strip().to_numpy(dtype=object)
    vals, empty, bad, hints = _numbers(stripped, decimal_comma)
    bad = bad | ((west | east) & (vals < 0) & ~np.isnan(vals))  # '-3W' is ambiguous
    vals = np.where(west, -vals, vals)
    return vals, empty, bad, hints


# --------------------------------------------------------------------------- positions

@dataclass
class _Positions:
    lat: np.ndarray
    lon: np.ndarray
    source: np.ndarray       # 'lat/lon', 'utm', 'mgrs', 'station', 'track' or ''
    zone: np.ndarray         # UTM zone of the row's own grid (0 when none)
    south: np.ndarray


def _positions(table: pd.DataFrame, decimal_comma: bool, col: _Collector, *, stations=None,
               track: Track | None = None, times=None, track_gap_s=DEFAULT_TRACK_GAP_S,
               allow_missing=False) -> _Positions:
    n = len(table)
    lat_c, lon_c = _col(table, "lat"), _col(table, "lon")
    zone_c, e_c, n_c = _col(table, "utm_zone"), _col(table, "easting"), _col(table, "northing")
    mgrs_c, st_c = _col(table, "mgrs"), _col(table, "station")
    lat = np.full(n, np.nan)
    lon = np.full(n, np.nan)
    source = np.full(n, "", dtype=object)
    zone = np.zeros(n, int)
    south = np.zeros(n, bool)

    # --- lat/lon
    la, la_empty, la_bad, la_h = _numbers(lat_c, decimal_comma)
    lo, lo_empty, lo_bad, lo_h = _numbers(lon_c, decimal_comma)
    has_ll = ~la_empty | ~lo_empty
    _reject_unparseable(col, la_bad, "lat", lat_c, la_h)
    _reject_unparseable(col, lo_bad, "lon", lon_c, lo_h)
    col.reject(has_ll & la_empty, "lat", "lat is missing (lon is given)")
    col.reject(has_ll & lo_empty, "lon", "lon is missing (lat is given)")
    swapped = has_ll & (np.abs(la) > 90) & (np.abs(lo) <= 90)
    col.reject(swapped, "lat", lambda idx: [f"{la[i]:g} is not a latitude, but {lo[i]:g} could be: "
                                            "lat and lon look swapped" for i in idx])
    col.reject(has_ll & (np.abs(la) > 90), "lat", lambda idx: [f"{la[i]:g} is outside -90..90" for i in idx])
    col.reject(has_ll & ((lo < -180) | (lo > 360)), "lon",
               lambda idx: [f"{lo[i]:g} is outside -180..180" for i in idx])
    over = has_ll & (lo > 180) & (lo <= 360)
    col.warn(over, "lon", lambda idx: [f"{lo[i]:g} read as {lo[i] - 360:g} (east of 180 written as 0..360)"
                                       for i in idx])
    lo = np.where(over, lo - 360.0, lo)
    col.reject(has_ll & (la == 0) & (lo == 0), "lat", "0, 0 is almost certainly a missing position (it is at sea)")
    ok = has_ll & ~col.bad
    lat[ok], lon[ok], source[ok] = la[ok], lo[ok], "lat/lon"

    # --- UTM
    has_utm = (zone_c != "") | (e_c != "") | (n_c != "")
    ea, ea_empty, ea_bad, ea_h = _numbers(e_c, decimal_comma)
    no, no_empty, no_bad, no_h = _numbers(n_c, decimal_comma)
    _reject_unparseable(col, has_utm & ea_bad, "easting", e_c, ea_h)
    _reject_unparseable(col, has_utm & no_bad, "northing", n_c, no_h)
    for name, empty in (("utm_zone", zone_c == ""), ("easting", ea_empty), ("northing", no_empty)):
        col.reject(has_utm & empty, name, f"{name} is missing (UTM needs utm_zone, easting and northing)")
    zparse = {}
    for z in set(zone_c[has_utm & ~col.bad].tolist()):
        zparse[z] = coords.parse_utm_zone(z)
    col.reject(has_utm & _per_value(zone_c, lambda z: zparse.get(z, ((0, 0), None))[1] is not None).astype(bool),
               "utm_zone",
               lambda idx: [zparse[zone_c[i]][1] for i in idx])
    e_swapped = has_utm & (ea > 1.0e6) & (no < 1.0e6)
    col.reject(e_swapped, "easting", lambda idx: [f"{ea[i]:.0f} is too large for an easting and {no[i]:.0f} too "
                                                  "small for this northing: easting and northing look swapped"
                                                  for i in idx])
    col.reject(has_utm & ((ea < 100_000) | (ea > 900_000)), "easting",
               lambda idx: [f"{ea[i]:.0f} m is outside the UTM easting range 100000..900000" for i in idx])
    col.reject(has_utm & ((no < 0) | (no > 10_000_000)), "northing",
               lambda idx: [f"{no[i]:.0f} m is outside the UTM northing range 0..10000000" for i in idx])
    ok = has_utm & ~col.bad
    if ok.any():
        zs = np.array([zparse[z][0][0] for z in zone_c[ok]], int)
        ss = np.array([zparse[z][0][1] for z in zone_c[ok]], bool)
        ulat, ulon = coords.utm_to_latlon(zs, ss, ea[ok], no[ok])
        idx = np.flatnonzero(ok)
        zone[idx], south[idx] = zs, ss
        first = source[idx] == ""
        lat[idx[first]], lon[idx[first]], source[idx[first]] = ulat[first], ulon[first], "utm"
        _cross_check(col, idx[~first], lat, lon, ulat[~first], ulon[~first], "easting", "UTM")

    # --- MGRS
    has_mgrs = mgrs_c != ""
    idx = np.flatnonzero(has_mgrs & ~col.bad)
    if len(idx):
        cache = {}
        mlat = np.full(len(idx), np.nan)
        mlon = np.full(len(idx), np.nan)
        for k, i in enumerate(idx):
            text = mgrs_c[i]
            if text not in cache:
                cache[text] = coords.parse_mgrs(text)
            res, msg = cache[text]
            if res is None:
                col.reject(np.arange(n) == i, "mgrs", msg)
                continue
            mlat[k], mlon[k], z, s, _prec = res
            if source[i] == "":
                zone[i], south[i] = z, s
        good = np.isfinite(mlat)
        first = good & (source[idx] == "")
        lat[idx[first]], lon[idx[first]], source[idx[first]] = mlat[first], mlon[first], "mgrs"
        later = good & ~first
        _cross_check(col, idx[later], lat, lon, mlat[later], mlon[later], "mgrs", "MGRS",
                     tolerance=max(POSITION_AGREEMENT_M, 0.0))

    # --- station label
    has_st = st_c != ""
    idx = np.flatnonzero(has_st & ~col.bad & (source == ""))
    if len(idx):
        if stations is None:
            col.reject(np.isin(np.arange(n), idx), "station",
                       lambda ii: [f"station '{st_c[i]}' given but no stations file (--stations FILE)" for i in ii])
        else:
            table_st = stations
            known = np.isin(st_c[idx], table_st.index.to_numpy(dtype=object))
            col.reject(np.isin(np.arange(n), idx[~known]), "station",
                       lambda ii: [f"station '{st_c[i]}' is not in the stations file" for i in ii])
            ok_idx = idx[known]
            rows = table_st.loc[st_c[ok_idx]]
            lat[ok_idx] = rows["lat"].to_numpy(float)
            lon[ok_idx] = rows["lon"].to_numpy(float)
            zone[ok_idx] = rows["zone"].to_numpy(int)
            south[ok_idx] = rows["south"].to_numpy(bool)
            source[ok_idx] = "station"

    # --- GPS track
    need = ~col.bad & (source == "")
    if track is not None and times is not None:
        idx = np.flatnonzero(need & np.isfinite(times))
        if len(idx):
            tlat, tlon, gap = _interpolate_track(track, times[idx])
            far = ~(gap <= track_gap_s)
            col.reject(np.isin(np.arange(n), idx[far]), "time",
                       lambda ii: [_track_message(track, times[i], track_gap_s) for i in ii])
            okk = idx[~far]
            lat[okk], lon[okk], source[okk] = tlat[~far], tlon[~far], "track"
    need = ~col.bad & (source == "")
    if not allow_missing:
        if track is not None:
            msg = "no position and no time to look up on the GPS track"
        else:
            msg = ("no position: give lat and lon, utm_zone/easting/northing, mgrs, a station label, "
                   "or a time with a GPS track (--track)")
        col.reject(need, "", msg)
    return _Positions(lat, lon, source, zone, south)


def _cross_check(col, idx, lat, lon, lat2, lon2, column, what, tolerance=POSITION_AGREEMENT_M):
    if not len(idx):
        return
    from pyproj import Geod

    _, _, dist = Geod(ellps="WGS84").inv(lon[idx], lat[idx], lon2, lat2)
    dist = np.asarray(dist)
    far = dist > tolerance
    mask = np.zeros(len(col.bad), bool)
    mask[idx[far]] = True
    d = dict(zip(idx[far].tolist(), dist[far].tolist()))
    col.reject(mask, column, lambda ii: [f"the {what} position disagrees with lat/lon by {d[i]:.0f} m; "
                                         "give one position or correct one" for i in ii])


def _interpolate_track(track: Track, t: np.ndarray):
    """Track position at times t; also the time to the nearest track point [s]."""
    tt = track.t
    j = np.clip(np.searchsorted(tt, t), 1, max(len(tt) - 1, 1))
    if len(tt) == 1:
        gap = np.abs(t - tt[0])
        return np.full(t.shape, track.lat[0]), np.full(t.shape, track.lon[0]), gap
    t0, t1 = tt[j - 1], tt[j]
    inside = (t >= tt[0]) & (t <= tt[-1])
    gap = np.where(inside, np.minimum(np.abs(t - t0), np.abs(t1 - t)), np.minimum(np.abs(t - tt[0]),
                                                                                    np.abs(t - tt[-1])))
    gap = np.where(inside, gap, np.inf)
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


def read_stations(path, *, decimal_comma=None) -> tuple[pd.DataFrame, list[Problem]]:
    """Read a stations file: a ``station`` column plus position columns.

    Returns a table indexed by station label with ``lat``, ``lon``, ``zone``,
    ``south``, and the problems found (rows that cannot be used).
    """
    raw = read_sheet(path)
    t = raw.table
    col = _Collector(t["line"].to_numpy(), raw.source)
    col.problems.extend(raw.problems)
    if "station" not in t.columns:
        raise SheetError(f"{raw.source}: a stations file needs a 'station' column")
    labels = _col(t, "station")
    col.reject(labels == "", "station", "station label is missing")
    dup = pd.Series(labels).duplicated(keep="first").to_numpy() & (labels != "")
    col.reject(dup, "station", lambda idx: [f"station '{labels[i]}' is listed twice; the first is used"
                                            for i in idx])
    pos = _positions(t, raw.decimal_comma if decimal_comma is None else decimal_comma, col)
    keep = ~col.bad
    out = pd.DataFrame({"lat": pos.lat[keep], "lon": pos.lon[keep], "zone": pos.zone[keep],
                        "south": pos.south[keep]}, index=pd.Index(labels[keep], name="station"))
    return out, col.problems


# --------------------------------------------------------------------------- main entry

def read_bearings(sheet, options: ReadOptions | None = None, **kwargs) -> Bearings:
    """Read, validate and convert a bearing sheet.

    Parameters
    ----------
    sheet : path, bytes, file-like or RawSheet
        The bearing sheet (see the README for its columns).
    options : ReadOptions, optional
        Sheet-wide defaults; keyword arguments override its fields
        (``read_bearings("s.csv", north="magnetic", sd=5)``).

    Returns
    -------
    Bearings

    Raises
    ------
    SheetError
        The sheet (or the stations file or the track) cannot be read at all.
    """
    opts = options or ReadOptions()
    if kwargs:
        from dataclasses import replace

        opts = replace(opts, **kwargs)
    _check_options(opts)
    raw = sheet if isinstance(sheet, RawSheet) else read_sheet(sheet)
    t = raw.table
    n = len(t)
    lines = t["line"].to_numpy()
    col = _Collector(lines, raw.source)
    col.problems.extend(raw.problems)
    # Rows already refused by the reader (too many fields).
    pre = {p.line for p in raw.problems if p.severity == "error" and p.line}
    col.bad |= np.isin(lines, list(pre))
    notes: list[str] = []

    stations = None
    if opts.stations is not None:
        stations, st_problems = read_stations(opts.stations)
        col.problems.extend(st_problems)
    track = opts.track
    if track is not None and not isinstance(track, Track):
        track = read_track(track)
    if track is not None:
        col.problems.extend(track.problems)

    fix_c = _col(t, "fix")
    tag_c = _col(t, "tag")

    # time
    time_c = _col(t, "time")
    times, terr = _parse_times(time_c, opts.tz)
    col.reject(terr != "", "time", lambda idx: [terr[i] for i in idx])

    # bearing, unit
    unit, unit_unknown = _canon(_col(t, "unit"), UNIT_ALIASES, opts.unit)
    ucells = _col(t, "unit")
    col.reject(unit_unknown, "unit", lambda idx: [f"unknown unit '{ucells[i]}'; use deg, mil or grad" for i in idx])
    b_c = _col(t, "bearing")
    b, b_empty, b_bad, b_h = _numbers(b_c, raw.decimal_comma)
    col.reject(b_empty, "bearing", "bearing is missing")
    _reject_unparseable(col, b_bad, "bearing", b_c, b_h)
    full = _per_value(unit, lambda u: FULL_CIRCLE.get(u, 360.0)).astype(float)
    col.reject((b < 0) & ~unit_unknown, "bearing", lambda idx: [f"{b[i]:g} is negative; bearings run 0 to {full[i]:g} clockwise "
                                              f"(write {full[i] + b[i]:g})" for i in idx])
    col.reject((b > full) & ~unit_unknown, "bearing", lambda idx: [_range_hint(b[i], unit[i]) for i in idx])
    bearing_deg = b * _per_value(unit, lambda u: DEGREES_PER_UNIT.get(u, 1.0)).astype(float)

    # north
    north, north_unknown = _canon(_col(t, "north"), NORTH_ALIASES, opts.north)
    ncells = _col(t, "north")
    col.reject(north_unknown, "north",
               lambda idx: [f"unknown north '{ncells[i]}'; use true, magnetic or grid" for i in idx])

    # sd
    sd_c = _col(t, "sd")
    sd, sd_empty, sd_bad, sd_h = _numbers(sd_c, raw.decimal_comma)
    _reject_unparseable(col, sd_bad, "sd", sd_c, sd_h)
    col.reject(~sd_empty & ~sd_bad & ((sd <= 0) | (sd >= 90)), "sd",
               lambda idx: [f"{sd[i]:g} is not a usable bearing SD; give degrees between 0 and 90" for i in idx])
    sd_from = np.where(sd_empty, "", "sheet").astype(object)
    if opts.sd is not None:
        sd = np.where(sd_empty, float(opts.sd), sd)
        sd_from = np.where(sd_empty, "option", sd_from).astype(object)

    # declination given
    d_c = _col(t, "declination")
    dec, dec_empty, dec_bad, dec_h = _parse_declination(d_c, raw.decimal_comma)
    col.reject(dec_bad, "declination",
               lambda idx: [f"'{d_c[i]}' is not a declination; write degrees east (-3.5) or 3.5W" for i in idx])
    col.reject(~dec_bad & (np.abs(np.nan_to_num(dec)) > 180), "declination",
               lambda idx: [f"{dec[i]:g} is outside -180..180" for i in idx])
    if opts.declination is not None:
        dec = np.where(dec_empty, float(opts.declination), dec)
        dec_empty = np.zeros(n, bool)
    magnetic_rows = north == "magnetic"
    col.warn(~dec_empty & ~magnetic_rows & (north != ""), "declination",
             "declination given for a bearing that is not magnetic; it was not applied")

    # positions (needs time for the track)
    pos = _positions(t, raw.decimal_comma, col, stations=stations, track=track, times=times,
                     track_gap_s=opts.track_gap_s)
    _swapped_outliers(col, pos)

    # magnetic -> true
    dec_used = np.where(magnetic_rows, dec, 0.0)
    dec_sd = np.zeros(n)
    need_model = magnetic_rows & dec_empty & ~col.bad
    col.reject(need_model & ~np.isfinite(times), "time",
               f"a magnetic bearing needs a time (for {magnetic.MODEL_NAME}) or a declination column")
    need_model &= ~col.bad
    if need_model.any():
        dy = magnetic.decimal_year(np.where(need_model, times, 1.7e9))
        outside = need_model & ~magnetic.in_model_life(dy)
        col.reject(outside, "time", lambda idx: [
            f"{time_c[i]} is outside the life of {magnetic.MODEL_NAME} ({magnetic.MODEL_START:.0f}-"
            f"{magnetic.MODEL_END:.0f}); give the declination for this date in a declination column"
            for i in idx])
        need_model &= ~col.bad
        if need_model.any():
            res = magnetic.declination(pos.lat[need_model], pos.lon[need_model], dy[need_model])
            dec_used[need_model] = res.declination_deg
            dec_sd[need_model] = res.sigma_deg
            hnt = np.full(n, np.inf)
            hnt[need_model] = res.h_nt
            col.warn(hnt < magnetic.BLACKOUT_H_NT, "north",
                     "the magnetic field here is too weak for a compass (WMM blackout zone); this bearing is "
                     "probably unreliable")
            col.warn((hnt >= magnetic.BLACKOUT_H_NT) & (hnt < magnetic.CAUTION_H_NT), "north",
                     "weak horizontal magnetic field (WMM caution zone); compass bearings are less reliable")
            notes.append(f"declination from {magnetic.MODEL_NAME} for {int(need_model.sum())} magnetic bearings")

    # grid -> true
    conv = np.zeros(n)
    grid_rows = (north == "grid") & ~col.bad
    if grid_rows.any():
        conv = _grid_convergence(grid_rows, pos, opts, col, conv)

    true_bearing = wrap360(bearing_deg + dec_used + conv)

    # grouping
    fix, grouped_by = _group(col, fix_c, tag_c, times, opts, notes, raw)

    keep = ~col.bad
    time_out = pd.to_datetime(pd.Series(np.where(keep, times, np.nan)[keep]), unit="s", utc=True)
    table = pd.DataFrame({
        "line": lines[keep],
        "fix": fix[keep],
        "tag": tag_c[keep],
        "time": time_out.to_numpy(),
        "lat": pos.lat[keep],
        "lon": pos.lon[keep],
        "true_bearing": true_bearing[keep],
        "sd": sd[keep],
        "sd_source": sd_from[keep],
        "declination": np.where(magnetic_rows, dec_used, np.nan)[keep],
        "convergence": np.where(north == "grid", conv, np.nan)[keep],
        "bearing": b[keep],
        "unit": unit[keep],
        "north": north[keep],
        "position_from": pos.source[keep],
        "grouped_by": grouped_by[keep],
        "declination_sd": np.where(magnetic_rows & dec_empty, dec_sd, np.nan)[keep],
    })
    table["time"] = pd.to_datetime(table["time"], utc=True)
    for c in raw.columns:
        if c not in KNOWN_COLUMNS or c in ("observer", "antenna", "note"):
            if c not in table.columns:
                table[c] = t[c].to_numpy(dtype=object)[keep]
    for c in ("observer", "antenna", "note"):
        if c not in table.columns:
            table[c] = ""
    table = table.reset_index(drop=True)

    fix_ids, fix_index = _fix_identities(fix, tag_c, col.bad, lines)
    table.insert(1, "fix_id", fix_ids[keep])
    problems = sorted(col.problems, key=lambda p: (p.source != raw.source, p.line, p.severity != "error"))
    return Bearings(table=table, problems=problems, fix_index=fix_index, n_rows=n, notes=notes,
                    source=raw.source, window_min=opts.window_min)


def _fix_identities(fix, tag, bad, lines):
    """Fix id of every row and the fix index: one fix per (tag, label), in order of first appearance.

    Rejected rows with a label still make their fix exist (so it is reported); rows
    with neither a label nor a group belong to no fix (id -1).
    """
    fix = np.asarray(fix, dtype=object)
    tag = np.asarray(tag, dtype=object)
    labelled = fix != ""
    key = pd.Series(tag, dtype=object).str.len().astype(str) + ":" + pd.Series(tag, dtype=object) + "|" + \
        pd.Series(fix, dtype=object)
    codes, _ = pd.factorize(key.where(labelled, None).to_numpy(dtype=object))
    ids = np.asarray(codes, np.int64)
    m = int(ids.max()) + 1 if len(ids) else 0
    first = np.full(m, -1, np.int64)
    valid = np.flatnonzero(ids >= 0)
    first_pos = pd.Series(valid).groupby(ids[valid]).first().to_numpy() if len(valid) else np.zeros(0, np.int64)
    first[: len(first_pos)] = first_pos
    rejected = [[] for _ in range(m)]
    for i in np.flatnonzero(bad & (ids >= 0)):
        rejected[ids[i]].append(int(lines[i]))
    fix_index = pd.DataFrame({"fix": fix[first] if m else [], "tag": tag[first] if m else [],
                              "rejected_lines": rejected})
    fix_index.index.name = "fix_id"
    return ids, fix_index


def _check_options(o: ReadOptions):
    if o.unit not in DEGREES_PER_UNIT:
        raise SheetError(f"unit '{o.unit}' is not one of deg, mil, grad")
    if o.north not in ("true", "magnetic", "grid"):
        raise SheetError(f"north '{o.north}' is not one of true, magnetic, grid")
    if o.sd is not None and not (0 < o.sd < 90):
        raise SheetError(f"--sd {o.sd} is not a usable bearing SD (degrees, between 0 and 90)")
    if o.window_min is None or not (o.window_min > 0):
        raise SheetError(f"--window {o.window_min} must be a positive number of minutes")
    if o.tz:
        try:
            from zoneinfo import ZoneInfo

            ZoneInfo(o.tz)
        except Exception:
            raise SheetError(f"--tz '{o.tz}' is not a known time zone (use a name like Europe/Vienna or UTC)") from None
    if o.grid_crs:
        try:
            import pyproj

            crs = pyproj.CRS.from_user_input(o.grid_crs)
        except Exception:
            raise SheetError(f"--grid-crs '{o.grid_crs}' is not a CRS PROJ knows (try EPSG:27700)") from None
        if not crs.is_projected:
            raise SheetError(f"--grid-crs '{o.grid_crs}' is not a projected CRS: it has no grid north")


def _range_hint(value, unit):
    if unit == "deg":
        if value <= 400:
            return f"{value:g} is out of range for degrees (grads? set unit to grad)"
        if value <= 6400:
            return f"{value:g} is out of range for degrees (mils? set unit to mil)"
        return f"{value:g} is out of range for degrees"
    return f"{value:g} is out of range for {unit}s (0 to {FULL_CIRCLE[unit]:g})"


def _swapped_outliers(col: _Collector, pos: _Positions):
    """Reject lat/lon rows that sit far from the rest but would fit if swapped."""
    ll = (pos.source == "lat/lon") & ~col.bad
    if ll.sum() < 3:
        return
    mlat, mlon = np.median(pos.lat[ll]), np.median(pos.lon[ll])
    d = np.hypot(pos.lat - mlat, (pos.lon - mlon) * np.cos(np.radians(mlat)))
    ds = np.hypot(pos.lon - mlat, (pos.lat - mlon) * np.cos(np.radians(mlat)))
    suspect = ll & (d > 5.0) & (ds < 0.5)
    col.reject(suspect, "lat", lambda idx: [f"{pos.lat[i]:g}, {pos.lon[i]:g} is far from the other stations, "
                                            "but swapped it fits them: lat and lon look swapped" for i in idx])


def _grid_convergence(grid_rows, pos: _Positions, opts: ReadOptions, col: _Collector, conv):
    import pyproj

    own = grid_rows & (pos.zone > 0)
    named = grid_rows & ~own & (opts.grid_crs is not None)
    guess = grid_rows & ~own & (opts.grid_crs is None)
    if own.any():
        conv[own] = coords.utm_convergence_deg(pos.zone[own], pos.south[own], pos.lat[own], pos.lon[own])
    if named.any():
        conv[named] = coords.convergence_deg(pyproj.CRS.from_user_input(opts.grid_crs),
                                             pos.lat[named], pos.lon[named])
    if guess.any():
        z, s = coords.standard_utm_zone(pos.lat[guess], pos.lon[guess])
        conv[guess] = coords.utm_convergence_deg(z, s, pos.lat[guess], pos.lon[guess])
        zz = np.zeros(len(conv), int)
        ss = np.zeros(len(conv), bool)
        zz[guess], ss[guess] = z, s
        col.warn(guess, "north", lambda idx: [f"grid north taken as that of UTM zone {zz[i]}{'S' if ss[i] else 'N'}"
                                              " (the zone of this position); use --grid-crs for another grid"
                                              for i in idx])
    return conv


def _group(col: _Collector, fix_c, tag_c, times, opts: ReadOptions, notes, raw: RawSheet):
    n = len(fix_c)
    fix = fix_c.copy()
    grouped_by = np.where(fix_c != "", "label", "").astype(object)
    unl = (fix_c == "") & ~col.bad
    if not unl.any():
        return fix, grouped_by
    any_time = np.isfinite(times[~col.bad]).any() if (~col.bad).any() else False
    any_label = (fix_c != "").any()
    if not any_time and not any_label:
        # A simple sheet with neither labels nor times: each tag's bearings are one fix.
        fix[unl] = np.where(tag_c[unl] != "", tag_c[unl], "fix")
        grouped_by[unl] = "sheet"
        notes.append("no fix labels and no times: all bearings of each tag were taken as one fix")
        col.warn(np.arange(n) == np.flatnonzero(unl)[0], "fix",
                 "no fix labels and no times in the sheet: all bearings of each tag form one fix")
        return fix, grouped_by
    col.reject(unl & ~np.isfinite(times), "fix",
               "no fix label and no time: dfkit cannot tell which bearings belong together")
    unl &= ~col.bad
    if not unl.any():
        return fix, grouped_by
    idx = np.flatnonzero(unl)
    order = idx[np.lexsort((times[idx], tag_c[idx]))]
    window_s = opts.window_min * 60.0
    used = set(x for x in fix_c if x)
    start_t = None
    cur_tag = None
    label = ""
    n_groups = 0
    for i in order:
        if cur_tag != tag_c[i] or times[i] - start_t > window_s:
            cur_tag, start_t = tag_c[i], times[i]
            stamp = datetime.fromtimestamp(start_t, timezone.utc).strftime("%Y-%m-%dT%H:%MZ")
            base = f"{cur_tag or 'untagged'} {stamp}"
            label, k = base, 2
            while label in used:
                label, k = f"{base} #{k}", k + 1
            used.add(label)
            n_groups += 1
        fix[i] = label
        grouped_by[i] = "window"
    notes.append(f"{len(idx)} unlabelled bearings grouped into {n_groups} {'fix' if n_groups == 1 else 'fixes'} by tag and a "
                 f"{opts.window_min:g}-minute window (--window)")
    return fix, grouped_by


def check_sheet(sheet, options: ReadOptions | None = None, **kwargs) -> tuple[pd.DataFrame, list[Problem]]:
    """The Python form of ``dfkit check``: the normalized table and the problems."""
    b = read_bearings(sheet, options, **kwargs)
    return b.table, b.problems
