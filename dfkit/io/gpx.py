"""Reading a GPS track (GPX 1.0/1.1) as arrays of time and position."""

from __future__ import annotations

import os
from dataclasses import dataclass

import numpy as np

from dfkit.problems import SheetError


@dataclass(frozen=True)
class Track:
    """Track points sorted by time: ``t`` in seconds since 1970-01-01 UTC, ``lat``/``lon`` [°]."""

    t: np.ndarray
    lat: np.ndarray
    lon: np.ndarray
    source: str = ""

    def __len__(self) -> int:
        return len(self.t)


def read_track(path) -> Track:
    """Read every timed point of every track and route in a GPX file.

    Points without a time are ignored (they cannot be matched to a bearing).
    Times without a zone are taken as UTC, as GPX 1.1 requires.

    Raises
    ------
    SheetError
        The file cannot be read or holds no timed point.
    """
    import gpxpy
    import gpxpy.gpx

    name = os.fspath(path)
    try:
        with open(path, encoding="utf-8") as fh:
            gpx = gpxpy.parse(fh)
    except OSError as err:
        raise SheetError(f"{name}: cannot read the GPS track ({err.strerror or err})") from None
    except (gpxpy.gpx.GPXException, ValueError) as err:
        raise SheetError(f"{name}: not a readable GPX file ({err})") from None
    t, lat, lon = [], [], []
    points = [p for trk in gpx.tracks for seg in trk.segments for p in seg.points]
    points += [p for rte in gpx.routes for p in rte.points]
    for p in points:
        if p.time is None:
            continue
        ts = p.time.timestamp() if p.time.tzinfo else p.time.replace(tzinfo=_utc()).timestamp()
        t.append(ts)
        lat.append(p.latitude)
        lon.append(p.longitude)
    if not t:
        raise SheetError(f"{name}: the GPS track has no points with a time")
    order = np.argsort(t, kind="stable")
    return Track(np.asarray(t)[order], np.asarray(lat)[order], np.asarray(lon)[order], name)


def _utc():
    from datetime import timezone

    return timezone.utc
