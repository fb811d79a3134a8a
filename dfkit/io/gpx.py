"""Reading a GPS track (GPX 1.0/1.1) as arrays of time and position, every point checked like a sheet row.

The file is parsed with the standard library's expat parser, which honours the
encoding the file declares (UTF-8, UTF-16, ISO-8859-1, Windows-1252...) and
reports line numbers. Each track or route point is checked: a latitude or
longitude that is missing, not a finite number or out of range, the position
0, 0, or an unreadable time rejects the point (an error naming its line); points
with no time cannot be matched to a bearing and are counted in a note; two points
at one time in different places are both rejected; a time that runs backwards
within a segment, and a point that leaps away and back faster than
:data:`dfkit.policy.TRACK_MAX_SPEED_MS`, are reported (the leap is not used).
Entity declarations (the way XML "bombs" are built) are refused.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from xml.parsers import expat

import numpy as np
import pandas as pd

from dfkit.policy import TRACK_MAX_SPEED_MS
from dfkit.problems import Problem, SheetError

#: Mean Earth radius for the speed check [m] (IUGG mean radius R1 of WGS84, 6371008.8 m, from memory; a
#: spherical distance is within about 0.5 % of the ellipsoidal one, plenty for a plausibility check).
_EARTH_RADIUS_M = 6_371_008.8


@dataclass(frozen=True, eq=False)
class Track:
    """Usable track points sorted by time.

    Attributes
    ----------
    t : numpy.ndarray
        Times, seconds since 1970-01-01 UTC. [s]
    lat, lon : numpy.ndarray
        WGS84 positions. [°]
    source : str
        The file name (for messages).
    problems : tuple of Problem
        Rejected points (severity 'error') and warnings, with the GPX line number.
    lines : numpy.ndarray or None
        Line of each usable point in the GPX file.
    """

    t: np.ndarray
    lat: np.ndarray
    lon: np.ndarray
    source: str = ""
    problems: tuple = field(default=())
    lines: np.ndarray | None = None

    def __len__(self) -> int:
        return len(self.t)


class _NoEntities(Exception):
    pass


def _parse(data: bytes, name: str):
    """(line, lat text, lon text, time text or None, segment number) of every trkpt and rtept."""
    parser = expat.ParserCreate(namespace_separator=" ")
    points: list[list] = []
    state = {"depth": 0, "point": None, "in_time": False, "segment": 0, "root": None}

    def start(tag, attrs):
        local = tag.rsplit(" ", 1)[-1]
        if state["root"] is None:
            state["root"] = local
        if local in ("trkseg", "rte"):
            state["segment"] += 1
        if local in ("trkpt", "rtept"):
            state["point"] = [parser.CurrentLineNumber, attrs.get("lat"), attrs.get("lon"), None, state["segment"]]
        elif local == "time" and state["point"] is not None:
            state["in_time"] = True
            state["point"][3] = ""

    def end(tag):
        local = tag.rsplit(" ", 1)[-1]
        if local in ("trkpt", "rtept") and state["point"] is not None:
            points.append(state["point"])
            state["point"] = None
        elif local == "time":
            state["in_time"] = False

    def text(chars):
        if state["in_time"] and state["point"] is not None:
            state["point"][3] += chars

    def no_entities(*_args):
        raise _NoEntities

    parser.StartElementHandler = start
    parser.EndElementHandler = end
    parser.CharacterDataHandler = text
    parser.EntityDeclHandler = no_entities
    try:
        parser.Parse(data, True)
    except expat.ExpatError as err:
        raise SheetError(f"{name}: line {err.lineno}, column {err.offset + 1}: not a readable GPX file "
                         f"({expat.errors.messages[err.code]})") from None
    except _NoEntities:
        raise SheetError(f"{name}: line {parser.CurrentLineNumber}: the GPX file declares XML entities; dfkit "
                         "refuses them (a GPS track has no use for them)") from None
    except LookupError as err:    # an encoding Python does not know
        raise SheetError(f"{name}: not a readable GPX file ({err}); save it as UTF-8") from None
    if state["root"] != "gpx":
        raise SheetError(f"{name}: not a GPX file (its root element is <{state['root']}>, not <gpx>)")
    return points


def _numbers(texts) -> tuple[np.ndarray, np.ndarray]:
    """Attribute texts as floats; (values, readable) with NaN where missing or unreadable."""
    vals = pd.to_numeric(pd.Series(texts, dtype=object).str.strip(), errors="coerce").to_numpy(dtype=float)
    return vals, np.isfinite(vals)


def read_track(path) -> Track:
    """Read every timed point of every track and route in a GPX file, checking each.

    Parameters
    ----------
    path : str or os.PathLike
        The GPX file.

    Returns
    -------
    Track
        The usable points sorted by time, and the problems found (line numbers in the GPX).
        Times without a zone are taken as UTC, as GPX 1.1 requires.

    Raises
    ------
    SheetError
        The file cannot be read, is not GPX, or holds no usable point with a time.
    """
    name = os.fspath(path)
    try:
        with open(path, "rb") as fh:
            data = fh.read()
    except OSError as err:
        raise SheetError(f"{name}: cannot read the GPS track ({err.strerror or err})") from None
    pts = _parse(data, name)
    problems: list[Problem] = []
    n = len(pts)
    line = np.array([p[0] for p in pts], dtype=np.int64)
    seg = np.array([p[4] for p in pts], dtype=np.int64)
    lat_txt = [p[1] for p in pts]
    lon_txt = [p[2] for p in pts]
    time_txt = [p[3] for p in pts]
    lat, lat_ok = _numbers(lat_txt)
    lon, lon_ok = _numbers(lon_txt)
    bad = np.zeros(n, bool)

    def reject(mask, column, message):
        for i in np.flatnonzero(mask & ~bad):
            problems.append(Problem(int(line[i]), column, message(i), "error", name))
        bad[mask] = True

    reject(~lat_ok, "lat", lambda i: f"lat {_shown(lat_txt[i])} is not a finite number; the point is not used")
    reject(~lon_ok, "lon", lambda i: f"lon {_shown(lon_txt[i])} is not a finite number; the point is not used")
    reject(np.abs(np.nan_to_num(lat)) > 90, "lat", lambda i: f"lat {lat[i]:g} is outside -90..90; the point is not used")
    reject(np.abs(np.nan_to_num(lon)) > 180, "lon",
           lambda i: f"lon {lon[i]:g} is outside -180..180; the point is not used")
    reject((lat == 0) & (lon == 0), "lat", lambda i: "0, 0 is almost certainly a missing position; the point is "
                                                     "not used")
    has_time = np.array([s is not None and s.strip() != "" for s in time_txt], bool)
    stamps = pd.to_datetime(pd.Series([s.strip() if s else None for s in time_txt], dtype=object), utc=True,
                            format="ISO8601", errors="coerce")
    t = (stamps - pd.Timestamp(0, tz="UTC")).dt.total_seconds().to_numpy(dtype=float)
    reject(has_time & ~np.isfinite(t), "time",
           lambda i: f"'{time_txt[i].strip()[:40]}' is not a GPX time (like 2026-05-03T06:12:00Z); the point is "
                     "not used")
    no_time = ~has_time & ~bad
    if no_time.any():
        k = int(no_time.sum())
        problems.append(Problem(int(line[no_time][0]), "time", f"{k} track {'point has' if k == 1 else 'points have'}"
                                " no time and cannot be matched to a bearing (not used)", "note", name))
    use = ~bad & has_time
    _backwards(t, seg, line, use, problems, name)
    _same_time(t, lat, lon, line, use, bad, problems, name)
    use = ~bad & has_time
    _leaps(t, lat, lon, line, use, bad, problems, name)
    use = ~bad & has_time
    problems.sort(key=lambda p: p.line)
    if not use.any():
        n_bad = int(bad.sum())
        first = next((p for p in problems if p.severity == "error"), None)
        detail = f" ({n_bad} {'point' if n_bad == 1 else 'points'} rejected, e.g. line {first.line}: {first.message})" \
            if first else ""
        raise SheetError(f"{name}: the GPS track has no usable point with a time{detail}")
    idx = np.flatnonzero(use)
    order = idx[np.argsort(t[idx], kind="stable")]
    return Track(t[order], lat[order], lon[order], name, tuple(problems), line[order])


def _shown(text) -> str:
    return "is missing" if text is None else f"'{text[:40]}'"


def _backwards(t, seg, line, use, problems, name):
    """Within a segment, a time earlier than the point before it (a clock jump or merged logs)."""
    idx = np.flatnonzero(use)
    if len(idx) < 2:
        return
    same_seg = seg[idx][1:] == seg[idx][:-1]
    back = same_seg & (t[idx][1:] < t[idx][:-1])
    for k in np.flatnonzero(back):
        i, j = idx[k], idx[k + 1]
        problems.append(Problem(int(line[j]), "time", f"the time goes back {t[i] - t[j]:g} s from the point on line "
                                f"{line[i]} (a clock jump?); points are used in time order", "warning", name))


def _same_time(t, lat, lon, line, use, bad, problems, name):
    """Points sharing one time: a copy in the same place is ignored; different places reject them all."""
    idx = np.flatnonzero(use)
    if len(idx) < 2:
        return
    order = idx[np.argsort(t[idx], kind="stable")]
    _, first, counts = np.unique(t[order], return_index=True, return_counts=True)
    for s0, c in zip(first[counts > 1], counts[counts > 1]):
        group = order[s0:s0 + c]
        d = _distance_m(lat[group[0]], lon[group[0]], lat[group], lon[group])
        if np.nanmax(d) <= 1.0:
            bad[group[1:]] = True
            for i in group[1:]:
                problems.append(Problem(int(line[i]), "time", f"repeats the point on line {line[group[0]]} "
                                        "(same time and place); the copy is ignored", "warning", name))
        else:
            bad[group] = True
            where = ", ".join(str(int(v)) for v in line[group][:5])
            for i in group:
                problems.append(Problem(int(line[i]), "time", f"points on lines {where} share one time but lie "
                                        f"up to {np.nanmax(d):.0f} m apart; none of them is used", "error", name))


def _leaps(t, lat, lon, line, use, bad, problems, name):
    """A point that leaps away and straight back faster than TRACK_MAX_SPEED_MS is a GPS glitch (rejected);
    a single leap with no way back is reported (both sides may be right)."""
    idx = np.flatnonzero(use)
    if len(idx) < 2:
        return
    order = idx[np.argsort(t[idx], kind="stable")]
    dt = np.diff(t[order])
    d = _distance_m(lat[order][:-1], lon[order][:-1], lat[order][1:], lon[order][1:])
    fast = d > TRACK_MAX_SPEED_MS * np.maximum(dt, 1e-9)
    spikes = set()
    cand = np.flatnonzero(fast[:-1] & fast[1:]) + 1
    if len(cand):
        a, c = order[cand - 1], order[cand + 1]
        back = _distance_m(lat[a], lon[a], lat[c], lon[c]) <= TRACK_MAX_SPEED_MS * np.maximum(t[c] - t[a], 1e-9)
        spikes = set(cand[back].tolist())
    for k in sorted(spikes):
        i = order[k]
        bad[i] = True
        speed = d[k - 1] / max(dt[k - 1], 1e-9)
        problems.append(Problem(int(line[i]), "lat", f"leaps {d[k - 1]:.0f} m away from the point on line "
                                f"{line[order[k - 1]]} and back ({_speed(speed)}, more than "
                                f"{TRACK_MAX_SPEED_MS:g} m/s): a GPS glitch; the point is not used", "error", name))
    for k in np.flatnonzero(fast):
        if k in spikes or k + 1 in spikes:
            continue
        i, j = order[k], order[k + 1]
        speed = d[k] / max(dt[k], 1e-9)
        problems.append(Problem(int(line[j]), "lat", f"{d[k]:.0f} m from the point on line {line[i]} in {dt[k]:g} s "
                                f"({_speed(speed)}): a GPS jump? positions between the two are doubtful",
                                "warning", name))


def _speed(v) -> str:
    return f"{v * 3.6:.0f} km/h" if math.isfinite(v) and v < 1e7 else "no time between them"


def _distance_m(lat1, lon1, lat2, lon2):
    """Great-circle distance on a sphere of the mean Earth radius (haversine) [m]."""
    p1, p2 = np.radians(lat1), np.radians(lat2)
    dp = p2 - p1
    dl = np.radians(np.asarray(lon2) - np.asarray(lon1))
    h = np.sin(dp / 2) ** 2 + np.cos(p1) * np.cos(p2) * np.sin(dl / 2) ** 2
    return 2 * _EARTH_RADIUS_M * np.arcsin(np.sqrt(np.clip(h, 0.0, 1.0)))
