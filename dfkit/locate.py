"""From usable bearings to a table of fixes, each with a status and a plain reason.

This is where dfkit decides what is honest to report. Every fix label of the
input gets a row. A position is given only when it means something, and a
region only when its probability statement holds.

Statuses (``status`` column):

===============  =========  ==========================================================
status           position   meaning
===============  =========  ==========================================================
ok               yes        position and confidence region can be trusted as stated
no_region        yes        two bearings and no known SD: nothing to size a region with
shallow          yes        the bearing lines cross at less than 20 degrees (common
                            practice limit): the position is weak along the bearings
long_span        yes        two successive bearings are further apart than the window,
                            or the fix lasts more than 3 windows: the transmitter
                            may have moved between them
too_few          no         fewer than two usable bearings
one_spot         no         all bearings taken from one spot: they cannot cross
parallel         no         the bearings are (nearly) parallel and do not cross
diverging        no         the best point lies behind an observer
no_convergence   no         the estimate did not settle
===============  =========  ==========================================================
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from dfkit import estimators, geodesy, regions
from dfkit.observations import Bearings, ReadOptions, read_bearings
from dfkit.policy import FIX_SPAN_WINDOWS, ONE_SPOT_M, SHALLOW_CROSSING_DEG, WILD_SD
from dfkit.problems import Problem

STATUS_MEANING = {
    "ok": "position and confidence region can be trusted as stated",
    "no_region": "a position, but no known bearing SD to size a region with",
    "shallow": "the bearing lines cross at a shallow angle; the position is weak along them",
    "long_span": "the bearings are too far apart in time; the transmitter may have moved",
    "too_few": "fewer than two usable bearings",
    "one_spot": "all bearings were taken from one spot",
    "parallel": "the bearings are parallel and do not cross",
    "diverging": "the best point lies behind an observer",
    "no_convergence": "the estimate did not settle",
}
#: Statuses that come with a position.
WITH_POSITION = ("ok", "no_region", "shallow", "long_span")

FIX_COLUMNS = [
    "fix", "tag", "time", "lat", "lon", "n_bearings", "n_used", "method", "sd_deg", "sd_source", "level",
    "semi_major_m", "semi_minor_m", "orientation_deg", "area_m2", "status", "reason", "crossing_deg",
    "span_min", "max_residual_deg", "kappa", "iterations", "converged", "rejected_lines",
]


@dataclass
class Fixes:
    """Results of :func:`locate`.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per fix label of the input (columns :data:`FIX_COLUMNS`).
    bearings : pandas.DataFrame
        The usable bearings with ``residual_deg``, ``weight`` and ``range_m``
        against their fix (NaN where the fix has no position).
    problems : list of Problem
        The input problems (rejected rows and warnings).
    notes : list of str
    """

    table: pd.DataFrame
    bearings: pd.DataFrame
    problems: list[Problem] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    source: str = ""

    def summary(self) -> dict[str, int]:
        """Counts of fixes that are ok, flagged (position, with a caveat) and failed (no position)."""
        s = self.table["status"]
        return {"ok": int((s == "ok").sum()),
                "flagged": int((s.isin(WITH_POSITION) & (s != "ok")).sum()),
                "failed": int((~s.isin(WITH_POSITION)).sum())}


def locate(bearings: Bearings, *, method: str = "mle", level: float = 0.95,
           window_min: float | None = None, robust_c: float = estimators.ROBUST_C,
           progress=None) -> Fixes:
    """Solve every fix of a set of bearings.

    Parameters
    ----------
    bearings : Bearings
        From :func:`dfkit.read_bearings`.
    method : {'mle', 'huber', 'andrews', 'lsq', 'stansfield'}
        Estimator (see :mod:`dfkit.estimators`).
    level : float
        Probability of the confidence ellipses, in (0, 1).
    window_min : float, optional
        Fixes whose bearings span more than this are flagged ``long_span``; by
        default the window the bearings were grouped with. [min]
    progress : callable, optional
        Called with a short text at each stage (the CLI prints it).
    """
    if method not in estimators.METHODS:
        raise ValueError(f"method={method!r} is not one of {', '.join(repr(m) for m in estimators.METHODS)}")
    if not 0.0 < level < 1.0:
        raise ValueError(f"level={level!r} must be a probability between 0 and 1 (e.g. 0.95)")
    say = progress or (lambda text: None)
    if window_min is None:
        window_min = bearings.window_min
    b = bearings.table
    fix_index = bearings.fix_index
    labels = fix_index["fix"].tolist()
    rejected = fix_index["rejected_lines"].tolist()
    m = len(labels)
    g = b["fix_id"].to_numpy(dtype=np.int64) if len(b) else np.zeros(0, np.int64)
    counts = np.bincount(g, minlength=m)

    say(f"solving {m} fixes from {len(b)} bearings ({method})")
    lat = b["lat"].to_numpy(float)
    lon = b["lon"].to_numpy(float)
    sol = estimators.solve(lat, lon, b["true_bearing"].to_numpy(float), g, m, b["sd"].to_numpy(float),
                           method=method, robust_c=robust_c) if m else None

    say("regions and statuses")
    # one spot: largest distance of a station from the fix's centroid
    clat, clon = geodesy.group_centroid(lat, lon, g, m)
    spread = np.zeros(m)
    if len(b):
        dc = geodesy.chord_distance_m(clat[g], clon[g], lat, lon)   # only compared with ONE_SPOT_M
        np.maximum.at(spread, g, dc)
    epoch = pd.Timestamp("1970-01-01", tz="UTC")
    t_s = (b["time"] - epoch).dt.total_seconds().to_numpy(float) if len(b) else np.zeros(0)
    has_t = np.isfinite(t_s)
    tmin = np.full(m, np.inf)
    tmax = np.full(m, -np.inf)
    np.minimum.at(tmin, g[has_t], t_s[has_t])
    np.maximum.at(tmax, g[has_t], t_s[has_t])
    span_min = np.where(np.isfinite(tmin), (tmax - tmin) / 60.0, np.nan)
    # A fix goes on while each bearing follows the last within the window (dfkit.observations.grouping):
    # flag a gap longer than the window, or a chain lasting more than FIX_SPAN_WINDOWS windows.
    gap_min = bearings.fix_timing()["max_gap_min"].to_numpy(float) if m else np.zeros(0)
    with np.errstate(invalid="ignore"):
        long_span = (gap_min > window_min) | (span_min > FIX_SPAN_WINDOWS * window_min)
    with np.errstate(invalid="ignore"):
        tmid = np.where(np.isfinite(tmin), (tmin + tmax) / 2.0, np.nan)

    if m:
        # an SD measured on a finite number of beacon trials (sd_dof, dfkit.calibration) widens the region
        cal_dof = np.full(m, np.inf)
        np.minimum.at(cal_dof, g, b["sd_dof"].fillna(np.inf).to_numpy(float) if "sd_dof" in b else np.inf)
        known_dof = np.where(np.isfinite(cal_dof), cal_dof, 0)
        k = regions.scale_factor(level, np.where(sol.sd_known, known_dof, sol.dof))
        ell = regions.ellipse_axes(sol.cov_en, k)
    status = np.full(m, "ok", dtype=object)
    reasons: list[list[str]] = [[] for _ in range(m)]
    lines_arr = b["line"].to_numpy() if len(b) else np.zeros(0, int)

    # bearings of each fix, without scanning all bearings per fix
    order = np.argsort(g, kind="stable")
    starts = np.concatenate(([0], np.cumsum(counts)))
    abs_res = np.abs(sol.residual_deg) if m else np.zeros(0)
    wild_b = (abs_res > WILD_SD * sol.sd_deg[g]) if m else np.zeros(0, bool)
    low_b = (sol.weight < 0.5) if m else np.zeros(0, bool)
    behind_b = ((np.cos(np.radians(sol.residual_deg)) <= 0) & (sol.weight > 0)) if m else np.zeros(0, bool)
    notable = np.zeros(m, bool)
    if m:
        np.logical_or.at(notable, g, wild_b | low_b)

    # Only fixes with something to say need the (per-fix) wording below; the rest are plain 'ok'.
    attention = np.zeros(m, bool)
    if m:
        with np.errstate(invalid="ignore"):
            attention = ((counts < 2) | (spread < ONE_SPOT_M) | sol.parallel | ~sol.converged | sol.behind
                         | (sol.crossing_deg < SHALLOW_CROSSING_DEG) | long_span
                         | (~sol.sd_known & (sol.dof <= 0)) | notable)
        attention |= np.array([len(r) > 0 for r in rejected], bool)
    for i in np.flatnonzero(attention):
        rej = rejected[i]
        n = counts[i]
        flags = []
        if n < 2:
            flags.append(("too_few", f"{n} usable bearing{'s' if n != 1 else ''}; a fix needs at least 2"))
        elif spread[i] < ONE_SPOT_M:
            flags.append(("one_spot", f"all {n} bearings were taken from one spot; bearings from one place "
                                      "cannot cross"))
        elif sol.parallel[i]:
            flags.append(("parallel", "the bearings are parallel: they do not cross"))
        elif not sol.converged[i]:
            flags.append(("no_convergence", f"the estimate did not settle after {sol.iterations[i]} iterations"))
        elif sol.behind[i]:
            sel = order[starts[i]:starts[i + 1]]
            sel = sel[behind_b[sel]]
            where = ", ".join(f"line {lines_arr[j]}" for j in sel[:3])
            flags.append(("diverging", f"the best point lies behind the observer at {where}: "
                                       "the bearings diverge"))
        else:
            if sol.crossing_deg[i] < SHALLOW_CROSSING_DEG:
                what = "the two bearings cross" if sol.n_used[i] == 2 else "the bearing lines spread only"
                flags.append(("shallow", f"{what} at {sol.crossing_deg[i]:.0f}° (common-practice limit "
                                         f"{SHALLOW_CROSSING_DEG:.0f}°); the position is weak along the bearings"))
            if long_span[i]:
                what = (f"{gap_min[i]:.0f} min pass between two of its bearings, more than the {window_min:g}-min "
                        "window" if gap_min[i] > window_min else f"its bearings span {span_min[i]:.0f} min, more "
                        f"than {FIX_SPAN_WINDOWS:g} windows of {window_min:g} min")
                flags.append(("long_span", f"{what}; the transmitter may have moved"))
            if not sol.sd_known[i] and sol.dof[i] <= 0:
                flags.append(("no_region", "two bearings and no known SD: a position but no confidence "
                                           "region (give sd in the sheet or --sd)"))
        if flags:
            status[i] = flags[0][0]
            reasons[i].extend(text for _, text in flags)
        if m and notable[i] and status[i] in WITH_POSITION:
            sel = order[starts[i]:starts[i + 1]]
            for j in sel[wild_b[sel]][:3]:
                reasons[i].append(f"line {lines_arr[j]} misses by {sol.residual_deg[j]:+.1f}° "
                                  f"(more than {WILD_SD:g} SD)")
            low = sel[low_b[sel]]
            for j in low[:3]:
                reasons[i].append(f"line {lines_arr[j]} down-weighted to {sol.weight[j]:.2f}")
        if rej:
            reasons[i].append("rejected input line" + ("s " if len(rej) > 1 else " ")
                              + ", ".join(str(x) for x in rej[:8]) + (" ..." if len(rej) > 8 else ""))

    has_pos = np.isin(status, WITH_POSITION)
    has_region = has_pos & (status != "no_region") if m else has_pos
    table = pd.DataFrame({
        "fix": labels,
        "tag": fix_index["tag"].tolist(),
        "time": pd.to_datetime(tmid, unit="s", utc=True),
        "lat": np.where(has_pos, sol.lat, np.nan) if m else [],
        "lon": np.where(has_pos, sol.lon, np.nan) if m else [],
        "n_bearings": counts,
        "n_used": sol.n_used if m else [],
        "method": method,
        "sd_deg": np.where(has_pos, sol.sd_deg, np.nan) if m else [],
        "sd_source": np.where(~has_pos, "", np.where(sol.sd_known, np.where(  # every bearing calibrated?
            np.bincount(g, (b["sd_source"] == "calibration").to_numpy(float), m) == counts,
            "calibration", "given"),
                                                      np.where(sol.dof > 0, "estimated", ""))) if m else [],
        "level": level,
        "semi_major_m": np.where(has_region, ell.semi_major_m, np.nan) if m else [],
        "semi_minor_m": np.where(has_region, ell.semi_minor_m, np.nan) if m else [],
        "orientation_deg": np.where(has_region, ell.orientation_deg, np.nan) if m else [],
        "area_m2": np.where(has_region, ell.area_m2, np.nan) if m else [],
        "status": status,
        "reason": ["; ".join(r) for r in reasons],
        "crossing_deg": np.where(counts >= 2, sol.crossing_deg, np.nan) if m else [],
        "span_min": span_min,
        "max_residual_deg": _group_max_abs(sol.residual_deg, g, m) if m else [],
        "kappa": np.where(has_pos, sol.kappa, np.nan) if m else [],
        "iterations": sol.iterations if m else [],
        "converged": sol.converged if m else [],
        "rejected_lines": [" ".join(str(x) for x in rej) for rej in rejected],
    })
    table["max_residual_deg"] = np.where(has_pos, table["max_residual_deg"], np.nan) if m else []

    bt = b.copy()
    if len(b):
        pos_b = has_pos[g]
        bt["residual_deg"] = np.where(pos_b, sol.residual_deg, np.nan)
        bt["weight"] = np.where(pos_b, sol.weight, np.nan)
        bt["range_m"] = np.where(pos_b, sol.range_m, np.nan)
        bt["fix_status"] = status[g]
    else:
        for c in ("residual_deg", "weight", "range_m", "fix_status"):
            bt[c] = []
    return Fixes(table=table, bearings=bt, problems=list(bearings.problems), notes=list(bearings.notes),
                 source=bearings.source)


def _group_max_abs(values, g, m):
    out = np.full(m, np.nan)
    if len(values):
        tmp = np.zeros(m)
        np.maximum.at(tmp, g, np.abs(values))
        out = np.where(np.bincount(g, minlength=m) > 0, tmp, np.nan)
    return out


def locate_sheet(sheet, *, method="mle", level=0.95, options: ReadOptions | None = None, progress=None,
                 **read_kwargs) -> Fixes:
    """Read a sheet and solve its fixes: the Python form of ``dfkit fix``.

    ``read_kwargs`` are :class:`~dfkit.observations.ReadOptions` fields
    (``north='magnetic'``, ``sd=5``, ``window_min=30``, ``track='t.gpx'`` ...).
    """
    bearings = read_bearings(sheet, options, **read_kwargs)
    return locate(bearings, method=method, level=level, progress=progress)
