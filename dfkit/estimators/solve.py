"""Solve many fixes at once, exactly on the ellipsoid: the re-centred plane loop.

Each fix starts in the exact plane about its stations' centroid from the best
candidate start (:mod:`dfkit.estimators.starts`), is solved in that plane
(:mod:`dfkit.estimators.iterate`), carried back to the ellipsoid with the direct
geodesic problem, and the plane is re-centred there, until the planar answer
lies at the centre (typically two re-centrings). There the plane residuals are
the geodesic residuals, so the answer carries no projection error over any
baseline. At the end every fix is checked: a *verified optimum* is a point
where one more step from the exact plane moves less than :data:`VERIFY_M` and,
for the optimisers, the Newton matrix of the objective is positive definite
(a strict local minimum, not a saddle or a flat valley).
"""

from __future__ import annotations

from dataclasses import dataclass, fields

import numpy as np

from dfkit import geodesy
from dfkit.conventions import wrap180
from dfkit.estimators import iterate, registry, stansfield, subsets
from dfkit.estimators.covariance import position_covariance
from dfkit.estimators.groups import best_in_group, expand, group_min, gsum, solve2
from dfkit.estimators.lenth import kappa_from_sd
from dfkit.estimators.lsq import planar_point
from dfkit.estimators.plane import geometry, residuals, sin_cos_residuals
from dfkit.estimators.robust import MAX_SCALE, chord, start_scale
from dfkit.estimators.starts import choose, objective_score, trimmed_score
from dfkit.policy import PLAUSIBLE_SD_DEG

#: Observed bearing lines whose doubled-angle spread is below this are parallel [°]: two lines this close
#: to parallel would meet about 1/0.0035 = 290 station spreads away, beyond the runaway limit below (two
#: bearings of 0° taken 1.5 km apart at 47°N are parallel here, though their meridians meet at the pole).
#: Lines a little less parallel are solved, and end as far crossings (flagged) or as lines that do not meet
#: in front of the observers (diverging).
PARALLEL_DEG = 0.2
#: Smallest bearing SD accepted [°]: far below any direction finder, and keeps 1/SD^2 well inside floating
#: point range.
MIN_SD_DEG = 1e-4
#: An estimate farther than this many times the stations' spread from their centroid has run away
#: (the lines do not meet). A numerical limit, not a field rule: two lines at the 0.5-degree
#: parallel limit meet about 115 spreads away.
RUNAWAY_FACTOR = 300.0
#: Bounds of the runaway distance [m] (the upper one keeps the plane well inside a hemisphere).
RUNAWAY_MIN_M = 20_000.0
RUNAWAY_MAX_M = 5_000_000.0
#: A verified optimum moves less than this in one more step from its exact plane [m].
VERIFY_M = 0.01
#: A point closer to a station than this fraction of the stations' spread is "on the station": the
#: likelihood of a bearing grows without bound towards its own observer, so it is never an answer.
NEAR_STATION = 0.01
#: In the first plane (about the stations' centroid) a whole Newton step shorter than sqrt(tol_m x this) [m]
#: settles a fix. That plane's answer is only the start of the re-centred one, whose own Newton step (settled
#: only below tol_m, and applied) takes the rest: a settling step s leaves about s^2 / range = tol_m x this /
#: range, a quarter of tol_m for a station 400 m away (s = 0.1 m with the default tol_m), so the re-centred
#: plane nearly always settles in a single step; a fix whose step there is still tol_m or more takes one more
#: plane, as any fix did before. The answer is the re-centred plane's, whichever step settled the first.
FIRST_PLANE_RANGE_M = 100.0
#: At the least-squares start, a residual beyond this marks a fix whose candidate starts must be ranked [°].
CLEAN_START_DEG = 20.0
#: Starts tried per fix: the best candidate first, the next ones only when a fit fails.
MAX_STARTS = 3
#: Starts tried per fix by Stansfield's fixed point, whose re-weighting can stall at a point that is no fixed
#: point (a local minimum of |T(x) - x|) from a start that the optimisers would leave.
FIXED_POINT_STARTS = 6

#: The starts after a failed first one are run at once, each (fix, start) as a fix of its own
#: (:func:`_later_starts_together`); False runs them one after another: the same answers, bit for bit, in more
#: rounds.
STARTS_TOGETHER = True

#: How each fit ended (``Solution.ending``), as names.
ENDINGS = ("optimum", "too_few", "parallel", "runaway", "singular", "stalled", "max_iter", "not_optimum",
           "collapsed", "at_station")
(OPTIMUM, TOO_FEW, PARALLEL, RUNAWAY, SINGULAR, STALLED, MAX_ITER, NOT_OPTIMUM, COLLAPSED,
 AT_STATION) = range(len(ENDINGS))
_FROM_PLANAR = {iterate.RUNAWAY: RUNAWAY, iterate.SINGULAR: SINGULAR, iterate.STALLED: STALLED,
                iterate.MAX_ITER: MAX_ITER}


@dataclass
class Solution:
    """Raw numerical result for ``m`` fixes of ``N`` bearings (arrays).

    Per fix: ``lat``, ``lon`` [°]; ``cov_en`` (m, 2, 2) east/north covariance
    [m²] (NaN where it cannot be sized); ``sd_deg`` bearing SD used [°];
    ``sd_known`` (given, not estimated); ``dof`` residual degrees of freedom
    (n_used - 2); ``n_used`` bearings with non-zero weight; ``kappa`` von Mises
    concentration matching ``sd_deg``; ``iterations``; ``converged`` (a verified
    optimum: see :data:`ENDINGS` ``ending`` for how the others ended);
    ``parallel`` (the observed lines are parallel); ``behind`` (a used bearing
    points away from the fix: cos r <= 0); ``crossing_deg`` spread of the used
    lines of sight at the fix [°, 0..90] (for two bearings, their crossing
    angle); ``scale_deg`` the scale the robust weights were computed with [°]
    (the SD when known); ``station_spread_m`` the largest chord distance of a
    station from the stations' centroid [m] (:func:`dfkit.geodesy.group_spread_m`);
    ``method``.

    Per bearing: ``residual_deg`` observed minus geodesic azimuth [°],
    ``weight`` (robust weight, 1 for the other methods), ``range_m`` distance
    from the station to the fix [m], ``azimuth_from_fix_deg`` geodesic azimuth
    from the fix to the station [°], ``region_weight`` the weight of the bearing
    in the fix's likelihood [rad⁻²] (1/SD² times the robust weight; 1 for every
    kept bearing when the SD is unknown).
    """

    lat: np.ndarray
    lon: np.ndarray
    cov_en: np.ndarray
    sd_deg: np.ndarray
    sd_known: np.ndarray
    dof: np.ndarray
    n_used: np.ndarray
    kappa: np.ndarray
    iterations: np.ndarray
    converged: np.ndarray
    parallel: np.ndarray
    behind: np.ndarray
    crossing_deg: np.ndarray
    residual_deg: np.ndarray
    weight: np.ndarray
    range_m: np.ndarray
    ending: np.ndarray = None
    scale_deg: np.ndarray = None
    azimuth_from_fix_deg: np.ndarray = None
    region_weight: np.ndarray = None
    sd_floor_deg: np.ndarray = None
    sd_estimate_deg: np.ndarray = None
    station_spread_m: np.ndarray = None
    method: str = "mle"

    def ending_name(self, i) -> str:
        return ENDINGS[int(self.ending[i])]


def _check_inputs(lat, lon, theta, g, m, sd, floor):
    n = len(lat)
    for name, v in (("lon", lon), ("bearing_deg", theta), ("group", g), ("sd_deg", sd), ("sd_floor_deg", floor)):
        if len(v) != n:
            raise ValueError(f"{name}= has {len(v)} values but lat= has {n}")
    for name, v in (("lat", lat), ("lon", lon), ("bearing_deg", theta)):
        if n and not np.isfinite(v).all():
            raise ValueError(f"{name}= must be finite (found {v[~np.isfinite(v)][:3]})")
    if n and (np.abs(lat) > 90).any():
        raise ValueError("lat= must be within -90..90 degrees")
    if n and ((g < 0).any() or (g >= m).any()):
        raise ValueError(f"group= must hold fix indices 0..n_groups-1 (n_groups={m})")
    bad_sd = ~np.isnan(sd) & ~((sd >= MIN_SD_DEG) & np.isfinite(sd))
    if bad_sd.any():
        raise ValueError(f"sd_deg= must be positive and finite (at least {MIN_SD_DEG:g} degrees), or NaN where "
                         f"unknown (found {sd[bad_sd][:3]})")
    bad_floor = ~((floor >= 0) & (floor < 90))
    if bad_floor.any():
        raise ValueError(f"sd_floor_deg= must be at least 0 and below 90 degrees (found {floor[bad_floor][:3]})")


#: Most fixes solved together: a larger call solves its fixes in consecutive chunks of fix ids, so the solver's
#: working arrays (about 1.4 KB a fix with four bearings, more than the answers themselves) stay bounded on a
#: whole season. Every fix is solved from its own bearings alone, so the answers are those of one call, bit for
#: bit (tests/test_estimators.py). A choice of ours: chunks of this size cost no measurable time.
SOLVE_CHUNK_FIXES = 25_000
#: The :class:`Solution` fields with one value per bearing (the others have one per fix).
_PER_BEARING = ("residual_deg", "weight", "range_m", "azimuth_from_fix_deg", "region_weight")


def solve(lat, lon, bearing_deg, group, n_groups, sd_deg=None, *, method="mle", robust_c=None, sd_floor_deg=None,
          tol_m=1e-4, max_iter=100, max_outer=30) -> Solution:
    """Solve many fixes at once.

    Parameters
    ----------
    lat, lon : array_like, shape (N,)
        Station positions, WGS84. [°]
    bearing_deg : array_like, shape (N,)
        Observed bearings, clockwise from true north. [°]
    group : array_like of int, shape (N,)
        Fix index 0..n_groups-1 of each bearing.
    n_groups : int
        Number of fixes.
    sd_deg : array_like, shape (N,), optional
        Bearing SD; NaN where unknown. A fix uses given SDs only when all its
        bearings have one; otherwise its SD is estimated from its residuals. [°]
    method : str
        One of :data:`dfkit.estimators.METHODS` ('mle', 'huber', 'andrews', 'lsq', 'stansfield').
    robust_c : float, optional
        Tuning constant of the Huber and Andrews weights (default: the method's,
        :data:`dfkit.estimators.robust.ROBUST_C`).
    sd_floor_deg : array_like, shape (N,), optional
        Smallest SD an estimate from a fix's residuals may take; a fix takes the smallest
        floor of its bearings (default 0: none). It bounds the estimated SD behind the
        covariance and the scale of the robust weights; a known SD is used as given.
        (:mod:`dfkit.locate.resolution` gives each bearing its fix's floor.) [°]
    tol_m : float
        Convergence: the estimate moved less than this in the last step. [m]
    max_iter : int
        Planar iterations allowed per re-centring.
    max_outer : int
        Re-centrings of the exact local plane allowed.

    Returns
    -------
    Solution
    """
    spec = registry.get(method)
    c = float(spec.default_c if robust_c is None else robust_c) if spec.robust else 0.0
    if spec.robust and not (np.isfinite(c) and c > 0):
        raise ValueError(f"robust_c={robust_c!r} must be a positive number (e.g. 1.5)")
    lat = np.asarray(lat, float).ravel()
    lon = np.asarray(lon, float).ravel()
    with np.errstate(invalid="ignore"):
        theta = geodesy.remainder(np.asarray(bearing_deg, float).ravel(), 360.0)      # np.mod, bit for bit
    g = np.asarray(group).ravel().astype(np.int64, copy=False)      # (read only: no copy of int64 input)
    m = int(n_groups)
    N = len(lat)
    # (both only read: views of the input, no copies)
    sd = np.full(N, np.nan) if sd_deg is None else np.broadcast_to(np.asarray(sd_deg, float), (N,))
    floor_b = np.zeros(N) if sd_floor_deg is None else np.broadcast_to(np.asarray(sd_floor_deg, float), (N,))
    _check_inputs(lat, lon, theta, g, m, sd, floor_b)
    options = dict(spec=spec, c=c, tol_m=tol_m, max_iter=max_iter, max_outer=max_outer)
    if m > SOLVE_CHUNK_FIXES:
        return _in_chunks(lat, lon, theta, g, m, sd, floor_b, options)
    return _solve_checked(lat, lon, theta, g, m, sd, floor_b, **options)


def _solve_checked(lat, lon, theta, g, m, sd, floor_b, *, spec, c, tol_m, max_iter, max_outer) -> Solution:
    """:func:`solve` of inputs already converted and checked (:func:`_check_inputs`)."""
    N = len(lat)
    counts = np.bincount(g, minlength=m)
    floor_g = np.full(m, np.inf)
    np.minimum.at(floor_g, g, floor_b)
    floor_g = np.where(np.isfinite(floor_g), floor_g, 0.0)
    known_g = (gsum(g, np.isfinite(sd).astype(float), m) == counts) & (counts > 0)
    known_b = known_g[g]
    sd_rad = np.radians(np.where(known_b, sd, np.nan))
    del sd
    w = np.where(known_b, 1.0 / np.where(known_b, sd_rad, 1.0) ** 2, 1.0)
    w = w / (gsum(g, w, m) / np.maximum(counts, 1))[g]          # O(1) within each fix

    # the stations' centroid, and their spread about it that the statuses read (dfkit.locate.status)
    centre_lat, centre_lon, station_spread = geodesy.group_centroid_spread(lat, lon, g, m)
    geo0 = geometry(lat, lon, theta, centre_lat[g], centre_lon[g])
    spread = np.zeros(m)
    np.maximum.at(spread, g, geo0.d)
    r_run = np.clip(RUNAWAY_FACTOR * spread, RUNAWAY_MIN_M, RUNAWAY_MAX_M)

    # Parallel observed lines: the doubled-angle resultant of their directions is (nearly) 1.
    c2 = gsum(g, (geo0.cp - geo0.sp) * (geo0.cp + geo0.sp), m)        # cos 2 phi
    s2 = gsum(g, 2.0 * geo0.sp * geo0.cp, m)                            # sin 2 phi
    spread0 = np.degrees(np.arccos(np.clip(np.hypot(c2, s2) / np.maximum(counts, 1), 0, 1)))
    parallel = (spread0 < PARALLEL_DEG) & (counts >= 2)
    base = (counts >= 2) & ~parallel

    # Starts, and the scale of the robust weights: the SD when known, else the trimmed scale at the
    # start, held fixed from then on.
    # only the robust methods read the scale, and only they change it below; the others share sd_rad
    s_b = np.where(known_b, sd_rad, np.nan) if spec.robust else sd_rad
    k_starts = FIXED_POINT_STARTS if spec.kind == "fixed_point" else MAX_STARTS
    x0 = np.full((m, k_starts), np.nan)
    y0 = np.full((m, k_starts), np.nan)
    n_starts = np.where(base, 1, 0)
    searched = np.zeros(m, bool)            # fixes whose candidate starts were ranked
    if spec.kind != "closed":
        # The least-squares point is the start wherever it looks clean; elsewhere the candidates are
        # ranked (and for clean fixes too, later, should the first fit fail).
        lx, ly, ratio = planar_point(g, m, geo0.sx, geo0.sy, geo0.sp, geo0.cp, np.ones(N))
        has_lsq = base & np.isfinite(lx) & np.isfinite(ly) & (ratio > 1e-12)
        r_l = residuals(geo0.sp, geo0.cp, geo0.sx, geo0.sy, np.nan_to_num(lx[g]), np.nan_to_num(ly[g]))[0]
        clean = has_lsq & _looks_clean(r_l, g, m, counts, known_b, sd_rad)
        del r_l
        x0[clean, 0], y0[clean, 0] = lx[clean], ly[clean]
        starter = _Starter(spec, geo0, g, m, counts, w, s_b, c, spread, known_g)
        starter.fill(base & ~clean, x0, y0, n_starts, searched)
        if spec.robust:
            unknown = base & ~known_g
            if unknown.any():
                r_start = residuals(geo0.sp, geo0.cp, geo0.sx, geo0.sy, np.nan_to_num(x0[g, 0]), np.nan_to_num(y0[g, 0]))[0]
                # never below the floor: a bearing is not wild for missing by its own rounding
                s_b[:] = np.where(known_b, s_b, np.fmax(start_scale(r_start, g, m, counts), np.radians(floor_g))[g])
    else:
        starter = None

    ending = np.where(counts < 2, TOO_FEW, np.where(parallel, PARALLEL, OPTIMUM)).astype(np.int8)
    P_lat, P_lon = centre_lat.copy(), centre_lon.copy()
    iterations = np.zeros(m, np.int64)
    verified = np.zeros(m, bool)
    ctx = dict(spec=spec, c=c, g=g, m=m, lat=lat, lon=lon, theta=theta, floor_b=floor_b, floor_g=floor_g, w=w,
               s_b=s_b, r_run=r_run,
               spread=spread, centre_lat=centre_lat, centre_lon=centre_lon, geo0=geo0, tol_m=tol_m,
               station_spread=station_spread,
               max_iter=max_iter, max_outer=max_outer)
    # geo0 stays the first plane of every fix, for later starts; the state's geometry is the first solve's
    state = dict(P_lat=P_lat, P_lon=P_lon, ending=ending, iterations=iterations, geo=None, verified=verified)
    more = None if starter is None else (lambda which: starter.fill(which & ~searched, x0, y0, n_starts, searched))
    _attempts(ctx, state, base, n_starts, x0, y0, more)
    if state["geo"] is None:                # nothing to solve
        state["geo"] = geo0.copy()
    if (base & ~known_g).any():
        _settle_unknown_sd(ctx, state, base & ~known_g, counts, n_starts, x0, y0, more)
    return _finish(ctx, counts, state["geo"], state["P_lat"], state["P_lon"], state["ending"], state["verified"],
                   known_b, known_g, sd_rad, parallel, state["iterations"])


def _in_chunks(lat, lon, theta, g, m, sd, floor_b, options) -> Solution:
    """:func:`solve` of fixes [lo, hi) at a time (:data:`SOLVE_CHUNK_FIXES`), put back together: per-fix fields
    in fix order, per-bearing fields in the rows they came from (each chunk keeps its rows' order)."""
    parts, rows_of = [], []
    for lo in range(0, m, SOLVE_CHUNK_FIXES):
        hi = min(m, lo + SOLVE_CHUNK_FIXES)
        rows = np.flatnonzero((g >= lo) & (g < hi))
        if len(rows) and rows[-1] - rows[0] + 1 == len(rows):
            # a sheet's fixes in order (the common case): the chunk's rows are one run, taken as views of the
            # inputs (read only) and put back by slice, not gathered and scattered (the same values)
            rows = slice(int(rows[0]), int(rows[-1]) + 1)
        # the chunk's inputs as solve() made them (checked already, with the whole): the bearings taken modulo
        # 360 once more, as a call of its own did (a bearing a hair below 0 becomes 360 and then 0)
        with np.errstate(invalid="ignore"):
            theta_c = geodesy.remainder(theta[rows], 360.0)
        parts.append(_solve_checked(lat[rows], lon[rows], theta_c, g[rows] - lo, hi - lo, sd[rows], floor_b[rows],
                                    **options))
        rows_of.append(rows)
    joined = {}
    for f in fields(Solution):
        values = [getattr(p, f.name) for p in parts]
        if f.name == "method" or values[0] is None:
            joined[f.name] = values[0]
        elif f.name in _PER_BEARING:
            out = np.empty(len(lat), values[0].dtype)
            for rows, v in zip(rows_of, values):
                out[rows] = v
            joined[f.name] = out
        else:
            joined[f.name] = np.concatenate(values)
    return Solution(**joined)


def _attempts(ctx, state, which, n_starts, x0, y0, more=None):
    """Solve the fixes ``which`` from their first start, then from the next ones while a fit fails.

    ``more(mask)`` ranks candidate starts for fixes that have only their least-squares start.
    """
    g = ctx["g"]
    verified = state["verified"]
    k_starts = x0.shape[1]
    for attempt in range(k_starts):
        todo = which & ~verified & (n_starts > attempt)
        if attempt == 1 and more is not None:
            failed = which & ~verified & (n_starts == 1)
            if failed.any():
                more(failed)
                todo = which & ~verified & (n_starts > attempt)
        if not todo.any():
            break
        if STARTS_TOGETHER and attempt and (n_starts[todo] > attempt + 1).any():
            _later_starts_together(ctx, state, todo, attempt, n_starts, x0, y0)
            break
        # the first attempt's results are all taken: its geometry is built in the state's own arrays (the
        # very first one's becomes the state's)
        res = _run(ctx, todo, np.nan_to_num(x0[:, attempt]), np.nan_to_num(y0[:, attempt]),
                   into=state["geo"] if attempt == 0 else None)
        if state["geo"] is None:
            state["geo"] = res["geo"]
        ok = _verify(ctx, todo, res)
        take = todo & (ok | (attempt == 0))
        state["P_lat"][take], state["P_lon"][take] = res["lat"][take], res["lon"][take]
        state["ending"][take] = res["ending"][take]
        if attempt:
            tb = take[g]
            state["geo"].put(tb, res["geo"].take(tb))
        state["iterations"][todo] += res["iterations"][todo]
        verified |= todo & ok


#: Per-fix entries of the solver's context (the others are per bearing, or shared).
_CTX_PER_FIX = ("r_run", "spread", "centre_lat", "centre_lon", "floor_g")
_CTX_PER_BEARING = ("lat", "lon", "theta", "floor_b", "w", "s_b")
#: Entries read only by ``_finish`` (per fix, and per bearing): the stations' spread, and those set by the retries.
_CTX_FINISH_ONLY = ("station_spread", "soft", "forced", "forced_out")


def _later_starts_together(ctx, state, todo, first, n_starts, x0, y0):
    """Attempts ``first``, ``first`` + 1, ... of the fixes ``todo`` (their first start failed), all run at once,
    each (fix, start) as a fix of its own; each fix then takes its first start, in order, that ends at a verified
    optimum, with the iterations of the starts tried up to it: what running them one after another gives.

    A start's fit depends on that fix's bearings and start alone (every sum is within a fix, in bearing order),
    so its answer is the same bit for bit; running them together takes as many rounds as the slowest start
    instead of the sum of all of them (a fit creeping onto a station takes 15-20 rounds per start, mostly
    short of fixes, where each round costs its fixed overhead). The starts after one that succeeds are solved
    for nothing: after a failed first start the next one succeeds rarely (about 3 % of such fixes with a wild
    bearing), so little is spent."""
    g, m = ctx["g"], ctx["m"]
    fixes = np.flatnonzero(todo)
    tries = [(a, fixes[n_starts[fixes] > a]) for a in range(first, x0.shape[1])]
    tries = [(a, f) for a, f in tries if len(f)]
    v_fix = np.concatenate([f for _, f in tries])
    v_att = np.concatenate([np.full(len(f), a) for a, f in tries])
    mv = len(v_fix)
    # each virtual fix's bearings, in their original order (so every sum adds in the same order)
    order = np.argsort(g, kind="stable")
    counts = np.bincount(g, minlength=m)
    offsets = np.concatenate(([0], np.cumsum(counts)[:-1]))
    owner, rows = expand(counts[v_fix], offsets[v_fix], order)
    vctx = dict(ctx, g=owner, m=mv, geo0=ctx["geo0"].take(rows))
    for k in _CTX_FINISH_ONLY:      # sized for the real fixes and read only when they are finished: not carried
        vctx.pop(k, None)
    for k in _CTX_PER_FIX:
        vctx[k] = ctx[k][v_fix]
    for k in _CTX_PER_BEARING:
        vctx[k] = ctx[k][rows]
    every = np.ones(mv, bool)
    res = _run(vctx, every, np.nan_to_num(x0[v_fix, v_att]), np.nan_to_num(y0[v_fix, v_att]))
    ok = _verify(vctx, every, res)
    # per fix, the first start (in order) that succeeded: virtual fixes are laid out start by start
    okv = np.flatnonzero(ok)
    won = np.full(m, mv, np.int64)
    np.minimum.at(won, v_fix[okv], okv)
    won = np.where(won < mv, won, -1)
    win_att = np.full(m, x0.shape[1], np.int64)
    win_att[fixes] = np.where(won[fixes] >= 0, v_att[np.maximum(won[fixes], 0)], x0.shape[1])
    # the iterations of every start tried up to the one that succeeded (all of them where none did)
    tried = v_att <= win_att[v_fix]
    state["iterations"] += np.bincount(v_fix[tried], res["iterations"][tried], m).astype(np.int64)
    wv = won[fixes]
    take = fixes[wv >= 0]
    wv = wv[wv >= 0]
    if not len(take):
        return
    state["P_lat"][take], state["P_lon"][take] = res["lat"][wv], res["lon"][wv]
    state["ending"][take] = res["ending"][wv]
    state["verified"][take] = True
    winner = np.zeros(mv, bool)
    winner[wv] = True
    vb = winner[owner]
    state["geo"].put(rows[vb], res["geo"].take(vb))


def _looks_clean(r, g, m, counts, known_b, sd_rad):
    """Fixes whose residuals at the least-squares point show no wild bearing: none beyond CLEAN_START_DEG,
    none beyond 4 SDs (SD known), and (SD unknown, four or more bearings) no squared chord residual above
    nine times the mean of the others."""
    u2 = (2.0 * np.sin(0.5 * r)) ** 2
    with np.errstate(invalid="ignore", divide="ignore"):
        big = (np.abs(r) > np.radians(CLEAN_START_DEG)) | (known_b & (np.sqrt(u2) > 4.0 * sd_rad))
    bad = gsum(g, big, m) > 0
    known_g = np.zeros(m, bool)
    known_g[g[known_b]] = True
    check = ~known_g & (counts >= 4)
    if check.any():
        top = np.zeros(m)
        np.maximum.at(top, g, u2)
        rest = (gsum(g, u2, m) - top) / np.maximum(counts - 1, 1)
        bad |= check & (top > 9.0 * rest)
    return ~bad


class _Starter:
    """Ranks candidate starts (:mod:`dfkit.estimators.starts`) for chosen fixes, on demand."""

    def __init__(self, spec, geo0, g, m, counts, w, s_b, c, spread, known_g):
        self.args = (spec, geo0, g, m, counts, w, s_b, c, spread, known_g)

    def fill(self, which, x0, y0, n_starts, searched):
        spec, geo0, g, m, counts, w, s_b, c, spread, known_g = self.args
        if not which.any():
            return
        # ranked by the trimmed sum of squares (the worst bearing left out), or, for a robust method with
        # a known SD, by its own objective, which is already robust
        by_objective = which & known_g & spec.robust
        by_trim = which & ~by_objective
        for sel, score in ((by_trim, lambda: trimmed_score(w, counts, g)),
                           (by_objective, lambda: objective_score(spec.objective, w, s_b, c))):
            if sel.any():
                xs, ys = choose(geo0, g, m, counts, sel, score(), spread, x0.shape[1])
                had = np.isfinite(x0[:, 0]) & sel
                # keep a least-squares start already tried as the first; the candidates follow
                x0[sel] = np.where(had[sel, None], np.column_stack([x0[sel, :1], xs[sel, :-1]]), xs[sel])
                y0[sel] = np.where(had[sel, None], np.column_stack([y0[sel, :1], ys[sel, :-1]]), ys[sel])
        found = np.isfinite(x0[which]).sum(axis=1)
        n_starts[which] = np.maximum(found, 1)
        searched |= which


def _settle_unknown_sd(ctx, state, which, counts, n_starts, x0, y0, more):
    """Andrews' fits with the SD unknown: a bearing is dropped only where the bearings together cannot be right.

    The weights of a robust fit come from a scale estimated from the same few bearings; a drop confirmed
    by comparing a bearing with that scale (an outlier test) happens mostly when the kept bearings agree
    closely by chance, and the region drawn from them is then too small. dfkit decides instead by whether
    all the bearings together could be right, which does not lean on the kept bearings' spread:

    * a drop stands when the dropped bearings point away from the fix, or when Lenth's fit of *all* the
      bearings is implausible (estimated SD above :data:`dfkit.policy.PLAUSIBLE_SD_DEG`, or no verified
      optimum with every bearing in front); otherwise the fix falls back to Huber's weights at the same
      scale (the doubtful bearing is down-weighted, never dropped);
    * where the fit keeps every bearing but their spread is implausible, or the fit failed, the fix is
      solved without the one bearing whose absence leaves the most plausible rest (the smallest SD within
      the limit; four bearings or more), when there is one.
    """
    spec, g, m, s_b, c = ctx["spec"], ctx["g"], ctx["m"], ctx["s_b"], ctx["c"]
    if spec.name != "andrews":
        return
    limit = np.radians(PLAUSIBLE_SD_DEG)
    geo = state["geo"]
    ver = which & state["verified"]
    weight = spec.weights(geo.r, s_b, c)
    dropped = (weight <= 0) & ver[g]
    has_drop = np.zeros(m, bool)
    np.logical_or.at(has_drop, g, dropped)
    toward = np.zeros(m, bool)            # a dropped bearing that points towards the fix
    np.logical_or.at(toward, g, dropped & (np.cos(geo.r) > 0))
    check = has_drop & toward
    implausible = np.zeros(m, bool)
    if check.any():
        var = subsets.variants(g, counts, [], np.flatnonzero(check))
        alt = solve(ctx["lat"][var.member], ctx["lon"][var.member], ctx["theta"][var.member], var.owner, len(var),
                    None, method="mle", sd_floor_deg=ctx["floor_b"][var.member])
        implausible[var.fix] = ~_plausible(alt)
    undo = check & ~implausible
    force = (which & ~state["verified"]) | (ver & ~has_drop & (_spread(geo.r, g, m, counts) > limit))
    if undo.any():
        soft = registry.REGISTRY["huber"]
        ctx["soft"] = undo
        state["verified"][undo] = False
        state["iterations"][undo] = 0
        _attempts(dict(ctx, spec=soft, c=soft.default_c), state, undo, n_starts, x0, y0, more)
        # the soft fit's own spread may still be implausible (Lenth's fit had the smaller one), or it failed
        force |= undo & (~state["verified"] | (_spread(state["geo"].r, g, m, counts) > limit))
    force &= counts >= 4
    if force.any():
        _drop_the_worst(ctx, state, np.flatnonzero(force), counts)


def _spread(r, g, m, counts):
    """The classical scale of all of each fix's bearings, sqrt(sum r^2 / (n - 2)) [rad], as the covariance
    (:mod:`dfkit.estimators.covariance`) estimates it."""
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.sqrt(gsum(g, r * r, m) / (counts - 2))


def _plausible(sol):
    """Fits of Lenth's likelihood with an estimated SD that could be right: a verified optimum, every bearing
    in front, at least one degree of freedom and an SD within the plausible limit."""
    with np.errstate(invalid="ignore"):
        return sol.converged & ~sol.behind & (sol.dof >= 1) & (sol.sd_deg <= PLAUSIBLE_SD_DEG)


def _drop_the_worst(ctx, state, fixes, counts):
    """Solve ``fixes`` without the one bearing whose absence leaves the most plausible rest (Lenth's fit,
    SD estimated); fixes where no such rest is plausible are left as they are."""
    g, m = ctx["g"], ctx["m"]
    var = subsets.variants(g, counts, fixes)
    alt = solve(ctx["lat"][var.member], ctx["lon"][var.member], ctx["theta"][var.member], var.owner, len(var),
                None, method="mle", sd_floor_deg=ctx["floor_b"][var.member])
    score = np.where(_plausible(alt), alt.sd_estimate_deg, np.inf)
    best = best_in_group(var.fix, score, m)
    chosen = best[fixes]
    chosen = chosen[(chosen >= 0)]
    chosen = chosen[np.isfinite(score[chosen])]
    if not len(chosen):
        return
    fx = var.fix[chosen]
    out = np.zeros(len(g), bool)
    out[var.left_out[chosen]] = True
    state["P_lat"][fx], state["P_lon"][fx] = alt.lat[chosen], alt.lon[chosen]
    sel = np.isin(g, fx)
    state["geo"].put(sel, geometry(ctx["lat"][sel], ctx["lon"][sel], ctx["theta"][sel], state["P_lat"][g[sel]],
                                   state["P_lon"][g[sel]]))
    state["ending"][fx] = OPTIMUM
    state["verified"][fx] = True
    state["iterations"][fx] += alt.iterations[chosen]
    forced = np.zeros(m, bool)
    forced[fx] = True
    ctx["forced"] = forced
    ctx["forced_out"] = out


def _run(ctx, todo, x0, y0, into=None):
    """Solve the fixes ``todo`` from planar starts (x0, y0) in their first plane.

    The returned geometry (``geo``) holds, for the bearings of ``todo``, that of each fix's last centre and
    elsewhere the first plane's; ``into`` (a :class:`PlaneGeometry` of every bearing) is used for it in place
    of a new copy, and only its rows of ``todo`` are written."""
    spec, g, m, lat, lon, theta = ctx["spec"], ctx["g"], ctx["m"], ctx["lat"], ctx["lon"], ctx["theta"]
    w, s_b, c, r_run, tol_m = ctx["w"], ctx["s_b"], ctx["c"], ctx["r_run"], ctx["tol_m"]
    P_lat, P_lon = ctx["centre_lat"].copy(), ctx["centre_lon"].copy()
    ending = np.full(m, OPTIMUM, np.int8)
    iterations = np.zeros(m, np.int64)
    done = np.zeros(m, bool)
    failed = ~todo
    # ``last`` is made only when a round writes to it (or at the end): a copy of the first plane made at the
    # start would be alive, unused, through the first rounds, the largest ones
    if into is None:
        last = None
    else:
        last = into
        last.copy_rows(todo[g], ctx["geo0"])
    tol_in = tol_m / 100.0
    centre_unit = None          # the first centres' unit vectors, for the runaway test of every round
    for outer in range(ctx["max_outer"]):
        act = todo & ~done & ~failed
        if not act.any():
            break
        sel = act[g]
        fixes = np.flatnonzero(act)
        number = np.cumsum(act) - 1          # each active fix's number among them
        cg = number[g[sel]]
        # every bearing active (the common first rounds): the arrays themselves, not copies of all their rows
        rows = slice(None) if sel.all() else sel
        if outer:
            gs = geometry(lat[rows], lon[rows], theta[rows], P_lat[g[rows]], P_lon[g[rows]])
            sx0 = np.zeros(len(fixes))
            sy0 = np.zeros(len(fixes))
        else:
            gs = ctx["geo0"].take(rows)          # read only by the planar iterations
            sx0, sy0 = x0[fixes], y0[fixes]
        if spec.kind == "closed":
            px, py, end, its = iterate.closed_form(gs, cg, len(fixes), r_run[fixes])
        elif spec.kind == "fixed_point":
            px, py, end, its = iterate.fixed_point(gs, cg, len(fixes), sx0, sy0, w[rows], tol_in,
                                                   ctx["max_iter"], r_run[fixes])
        else:
            px, py, end, its = iterate.optimise(spec, gs, cg, len(fixes), sx0, sy0, w[rows],
                                                _scale_rows(spec, s_b, rows), c, tol_in, ctx["max_iter"],
                                                r_run[fixes],
                                                settle=np.sqrt(tol_m * FIRST_PLANE_RANGE_M) if outer == 0 else None)
        iterations[fixes] += its
        if outer:
            # the new centres' geometry, once the planar iterations (which only read it) are done with
            # their temporaries
            if rows is sel:
                if last is None:
                    last = ctx["geo0"].copy()
                last.put(sel, gs)
            elif last is None:
                last = gs                       # gs is only read from here on
            else:
                last.share(gs)
        bad = end != iterate.SETTLED
        for code, name in _FROM_PLANAR.items():
            ending[fixes[end == code]] = name
        if (end == iterate.SINGULAR).any():
            # a singular step next to a station: the fit crept onto the station
            sing = end == iterate.SINGULAR
            dmin = np.full(len(fixes), np.inf)
            dd = np.hypot(px[cg] - gs.sx, py[cg] - gs.sy)
            np.minimum.at(dmin, cg, dd)
            del dd
            on = sing & (dmin < NEAR_STATION * ctx["spread"][fixes])
            ending[fixes[on]] = AT_STATION
        del gs, sel, rows, cg                   # per-bearing arrays of this round, before the next round's
        failed[fixes[bad]] = True
        ok = ~bad
        mv = fixes[ok]
        step = np.hypot(px[ok], py[ok])
        P_lat[mv], P_lon[mv] = geodesy.from_local(P_lat[mv], P_lon[mv], px[ok], py[ok])
        if centre_unit is None:         # the fixes moved in later rounds are among those moved in the first
            centre_unit = [np.empty(m) for _ in range(3)]
            for u, part in zip(centre_unit, geodesy.unit_vectors(ctx["centre_lat"][mv], ctx["centre_lon"][mv])):
                u[mv] = part
        far = geodesy.chord_from_unit([u[mv] for u in centre_unit], P_lat[mv], P_lon[mv]) > r_run[mv]
        ending[mv[far]] = RUNAWAY
        failed[mv[far]] = True
        done[mv[~far & (step < tol_m)]] = True
    ending[todo & ~done & ~failed] = MAX_ITER
    if last is None:
        last = ctx["geo0"].copy()
    # Fixes that moved in their last round keep the geometry of their last centre, within tol_m of the answer.
    return dict(lat=P_lat, lon=P_lon, ending=ending, iterations=iterations, geo=last, done=done)


def _scale_rows(spec, s_b, rows):
    """The robust scale of the bearings ``rows``: a copy for the robust methods; the others never read it,
    so they are given a read-only NaN view of the right length instead of a copy."""
    if spec.robust:
        return s_b[rows]
    n = len(s_b) if isinstance(rows, slice) else int(np.count_nonzero(rows))
    return np.broadcast_to(np.nan, (n,))


def _gradients(geo):
    d = geo.d
    return -geo.sy / (d * d), geo.sx / (d * d)      # at the centre: point minus station = -S


def _verify(ctx, todo, res):
    """Whether each fix of ``todo`` ended at a verified optimum (updates ``res['ending']``); only the
    bearings of the fixes that finished are looked at."""
    spec, g, m, w, s_b, c = ctx["spec"], ctx["g"], ctx["m"], ctx["w"], ctx["s_b"], ctx["c"]
    ending = res["ending"]
    verified = todo & res["done"]
    fixes = np.flatnonzero(verified)
    if not len(fixes):
        return verified
    n = len(fixes)
    if n == m:
        geo, cg, n_bins, wr, sr = res["geo"], g, n, w, s_b
    elif 2 * n > m:
        # most fixes: every bearing is looked at in place (no copy of the geometry's rows), those of the
        # other fixes summed into one more group that is dropped (each fix's sums are the same: np.bincount
        # adds in bearing order within each group)
        geo, n_bins, wr, sr = res["geo"], n + 1, w, s_b
        cg = np.where(verified[g], (np.cumsum(verified) - 1)[g], n)
    else:
        rows = verified[g]
        geo, n_bins, wr, sr = res["geo"].take(rows), n, w[rows], _scale_rows(spec, s_b, rows)
        cg = (np.cumsum(verified) - 1)[g[rows]]
    with np.errstate(all="ignore"):     # the dropped group's bearings may be of fixes that failed
        good = _optimum_here(spec, geo, cg, n_bins, wr, sr, c)[:n]
    on_station = group_min(cg, geo.d, n_bins)[:n] < NEAR_STATION * ctx["spread"][fixes]
    ending[fixes[~good]] = NOT_OPTIMUM
    ending[fixes[on_station]] = AT_STATION
    out = np.zeros(m, bool)
    out[fixes] = good & ~on_station
    return out


def _optimum_here(spec, geo, g, m, w, s, c):
    """Whether one more step from each fix's plane centre moves less than :data:`VERIFY_M` and, for the
    optimisers, the Newton matrix there is positive definite."""
    if spec.kind == "optimiser":
        # with (dx, dy) = -(sx, sy), the point minus the station at the centre: gx = dy / d2, gy = -dx / d2,
        # k = f' / d2^2, kxy = 2 dx dy k, kd = (dx^2 - dy^2) k; computed in place, a few arrays at a time
        # (negation is exact, so the values are those of the formulas as written)
        if spec.sc_terms is not None:
            f1, a, f2 = spec.sc_terms(*sin_cos_residuals(geo.sp, geo.cp, geo.sx, geo.sy, 0.0, 0.0)[:2], w, s, c)
        else:
            f1, a, f2 = spec.terms(geo.r, w, s, c)[1:]
        d2 = geo.d * geo.d
        gx = np.negative(geo.sy)
        gx /= d2
        gy = geo.sx / d2
        t = f1 * gx
        b1 = gsum(g, t, m)
        np.multiply(f1, gy, out=t)
        b2 = gsum(g, t, m)
        k = np.multiply(d2, d2, out=d2)
        del d2
        np.divide(f1, k, out=k)
        del f1
        kxy = 2.0 * geo.sx
        kxy *= geo.sy
        kxy *= k
        kd = np.multiply(geo.sx, geo.sx, out=t)
        del t
        t = geo.sy * geo.sy
        kd -= t
        kd *= k
        del k
        t = np.multiply(f2, gx, out=t)
        t *= gx
        t += kxy
        h11 = gsum(g, t, m)
        np.multiply(f2, gx, out=t)
        t *= gy
        t -= kd
        h12 = gsum(g, t, m)
        del kd
        np.multiply(f2, gy, out=t)
        t *= gy
        t -= kxy
        h22 = gsum(g, t, m)
        del kxy, f2
        pd = (h11 > 0) & (h11 * h22 - h12 * h12 > 0)
        j = []
        for u, v in ((gx, gx), (gx, gy), (gy, gy)):
            np.multiply(u, v, out=t)
            t *= a                              # a * (u v)
            j.append(gsum(g, t, m))
        sx_, sy_, _ = solve2(*j, b1, b2)
        with np.errstate(invalid="ignore"):
            return pd & (np.hypot(sx_, sy_) < VERIFY_M)
    if spec.kind == "closed":
        sx_, sy_, ratio = planar_point(g, m, geo.sx, geo.sy, geo.sp, geo.cp, np.ones(len(geo.d)))
    else:
        sx_, sy_, ratio = stansfield.step(g, m, geo.sx, geo.sy, geo.sp, geo.cp, w, np.zeros(m), np.zeros(m))
    with np.errstate(invalid="ignore"):
        return (np.hypot(sx_, sy_) < VERIFY_M) & (ratio > iterate.SINGULAR_RATIO)


def _points_away(r):
    """cos r <= 0, per bearing (r [rad]): for r in [-pi, pi], as the geometry wraps it, that is |r| > pi/2 (the double
    np.pi / 2), without a cosine: no double is pi/2 itself and a cosine's sign is right to the last double.
    Outside that range, the cosine itself."""
    mag = np.abs(r)
    if np.fmax.reduce(mag, initial=0.0) <= np.pi:
        return mag > np.pi / 2
    return np.cos(r) <= 0


def _finish(ctx, counts, geo, P_lat, P_lon, ending, verified, known_b, known_g, sd_rad, parallel,
            iterations) -> Solution:
    spec, g, m, s_b, c = ctx["spec"], ctx["g"], ctx["m"], ctx["s_b"], ctx["c"]
    r, d = geo.r, geo.d
    gx, gy = _gradients(geo)
    weight = spec.weights(r, s_b, c) if spec.robust else np.ones(len(r))
    if "soft" in ctx:
        soft = registry.REGISTRY["huber"]
        weight = np.where(ctx["soft"][g], soft.weights(r, s_b, soft.default_c), weight)
    if "forced" in ctx:
        # solved without one bearing by Lenth's likelihood: the others at full weight
        weight = np.where(ctx["forced"][g], np.where(ctx["forced_out"], 0.0, 1.0), weight)
    weight = np.where(np.isfinite(weight), weight, 0.0)
    used = weight > 0
    n_used = gsum(g, used.astype(float), m).astype(int)
    # A robust fit must keep enough bearings to check them against each other: after dropping any it
    # keeps at least three (two bearings always "agree"). A fit of three or more whose steps turned singular
    # after its weights dropped bearings has collapsed the same way (not a question of lines that do not meet;
    # with two bearings it is: they diverge).
    collapsed = (verified | ((ending == SINGULAR) & (counts >= 3))) & (n_used < counts) & (n_used < 3)
    if spec.robust:
        ending[collapsed] = COLLAPSED
        verified = verified & ~collapsed
    floor_g = ctx["floor_g"]
    cov, sd_fix, dof, sd_est = position_covariance(spec.family, g, m, gx, gy, d, r, weight, known_b, known_g, sd_rad,
                                                   np.radians(floor_g))
    sd_fix_deg = np.degrees(sd_fix)
    dirs = geo.az                                     # line of sight at the fix (doubled angles ignore its sense)
    c2 = gsum(g, used * np.cos(2 * dirs), m)
    s2 = gsum(g, used * np.sin(2 * dirs), m)
    with np.errstate(invalid="ignore", divide="ignore"):
        crossing = np.degrees(np.arccos(np.clip(np.hypot(c2, s2) / n_used, 0, 1)))
    behind = gsum(g, (used & _points_away(r)).astype(float), m) > 0
    # The likelihood region weighs each bearing by 1/SD^2 times its robust weight when the SD is known;
    # with an estimated SD every kept bearing counts alike, as in the classical scale of the covariance.
    region_weight = np.where(known_b, weight / np.where(known_b, sd_rad, 1.0) ** 2, used.astype(float))
    scale = np.full(m, np.nan)
    if spec.robust:
        np.fmax.at(scale, g, np.degrees(s_b))
    else:
        scale = np.where(known_g, sd_fix_deg, np.nan)
    return Solution(
        lat=P_lat, lon=wrap180(P_lon), cov_en=cov, sd_deg=sd_fix_deg, sd_known=known_g, dof=dof, n_used=n_used,
        kappa=kappa_from_sd(sd_fix_deg), iterations=iterations, converged=verified, parallel=parallel,
        behind=behind, crossing_deg=crossing, residual_deg=np.degrees(r), weight=weight, range_m=d,
        ending=ending, scale_deg=scale, azimuth_from_fix_deg=geodesy.remainder(np.degrees(geo.az), 360.0),
        region_weight=region_weight, sd_floor_deg=np.where(known_g, 0.0, floor_g), sd_estimate_deg=np.degrees(sd_est),
        station_spread_m=ctx["station_spread"], method=spec.name,
    )
