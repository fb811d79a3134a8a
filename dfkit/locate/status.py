"""Each fix's status word and a plain reason that says what actually happened.

The solver reports how each fit ended (:data:`dfkit.estimators.ENDINGS`); this
module turns that, the geometry, the fit's consistency and the likelihood
region into one status (:data:`dfkit.locate.fixes.STATUS_MEANING`) and reasons
a user can act on, naming input lines.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from dfkit.estimators import ENDINGS
from dfkit.locate.fixes import has_position
from dfkit.locate.resolution import SHEPPARD
from dfkit.observations.cells import filled
from dfkit.policy import (ELLIPSE_MISMATCH, FIX_SPAN_WINDOWS, INCONSISTENT_P, NEAR_OBSERVER, ONE_SPOT_M, PLAUSIBLE_SD_DEG, REVERSED_DEG,
                          SHALLOW_CROSSING_DEG, WILD_SD)
from dfkit.regions import chi2_sf

_E = {name: i for i, name in enumerate(ENDINGS)}


@dataclass
class FixFacts:
    """Everything the classification looks at (arrays over fixes or bearings)."""

    sol: object                 # dfkit.estimators.Solution
    g: np.ndarray               # fix of each bearing
    counts: np.ndarray          # bearings per fix
    spread_m: np.ndarray        # largest distance of a station from the stations' centroid [m]
    span_min: np.ndarray        # time spanned by the bearings [min]
    gap_min: np.ndarray         # longest time between two successive bearings [min]
    window_min: float
    lines: np.ndarray           # input line of each bearing
    rejected: list              # rejected input lines per fix
    ellipse_area: np.ndarray    # covariance-ellipse area [m^2]
    ellipse_minor: np.ndarray   # semi-minor axis [m]
    regions: object             # dfkit.regions.LikelihoodRegions or None
    level: float
    hints: dict                 # fix index -> list of extra reason texts
    rivals: dict = None         # fix index -> dfkit.locate.rivals.Rival (competing explanations)
    step_deg: np.ndarray = None  # the step each fix's bearings were written to [°] (dfkit.locate.resolution)
    judged: object = None       # what classify worked out from the rest (kept for its later calls)


def _lines_text(lines):
    lines = list(lines)
    if not lines:
        return "no line"
    if len(lines) == 1:
        return f"line {lines[0]}"
    return "lines " + ", ".join(str(x) for x in lines[:-1]) + f" and {lines[-1]}"


def at_minimum(S, regions, method):
    """The misfit S of each fix, or the smallest S over all points (the likelihood region's S_min) where it is
    smaller, for the methods that do not down-weight (:func:`consistency`): least squares and Stansfield stop
    short of the angular minimum, so their own S overstates how much the bearings disagree."""
    if regions is None or method not in ("mle", "lsq", "stansfield"):
        return S
    return np.where(regions.has_region & np.isfinite(regions.s_min), np.minimum(S, regions.s_min), S)


def consistency(sol, g, m, regions=None):
    """Per fix with a known SD: S = sum (r/sd)^2 over the bearings the fit uses, at full weight, and its
    chi-square p-value on n_used - 2 degrees of freedom (NaN where the SD is estimated or dof < 1).

    S is the smallest value over all points (the likelihood region's S_min) when the regions are given
    and the method is not robust, so that an inefficient estimator (least squares) is not taken for
    disagreeing bearings. A bearing a robust fit merely down-weights still counts in full, at the fix:
    the question is whether the bearings behind the answer agree with their SD.
    """
    r = np.radians(sol.residual_deg)
    w = sol.weight
    with np.errstate(divide="ignore", invalid="ignore"):
        inv_var = np.where(w > 0, sol.region_weight / np.where(w > 0, w, 1.0), 0.0)
    S = at_minimum(np.bincount(g, inv_var * r * r, m), regions, sol.method)
    dof = sol.dof
    p = np.where(sol.sd_known & (dof >= 1), chi2_sf(S, np.maximum(dof, 1)), np.nan)
    return S, p


def classify(f: FixFacts, previous=None, redo=()):
    """Status word and reason of every fix: (status array, reason array), the reason the fix's texts joined by
    "; " ('' when none). With ``previous``, an earlier answer on the same facts, only the fixes ``redo`` are judged
    again (a fix's status and reasons rest on its own facts alone; its hints and rivals may have been added)."""
    m = len(f.counts)
    if previous is None:
        status = filled(m, "ok")
        reasons = filled(m, "")
    else:
        status, reasons = previous[0].copy(), previous[1].copy()
    if not m:
        return status, reasons
    a = _facts_of(f)
    rivals = f.rivals or {}
    if previous is None:
        todo = np.flatnonzero(a.attention | _listed(m, f.hints) | _listed(m, rivals))
    else:
        todo = np.unique(np.asarray(list(redo), dtype=np.int64))
        status[todo] = "ok"
        reasons[todo] = ""
    for i, v in zip(todo.tolist(), _per_fix(f, a, todo)):
        word, texts = _judge(f, a, i, rivals, v)
        if word is not None:
            status[i] = word
        reasons[i] = "; ".join(t for t in texts if t)
    # an SD estimated from three or four bearings: the region allows for it, but a measured SD gives a far smaller
    # one, and with four the bounded regions (the ok fixes) are the ones whose estimate came out small
    sol = f.sol
    mine = np.ones(m, bool) if previous is None else _listed(m, todo)
    pos, ok = np.ones(m, bool), np.ones(m, bool)          # a fix not judged above is ok
    said = status[todo]
    pos[todo] = has_position(said) & (said != "no_region")
    ok[todo] = said == "ok"
    with np.errstate(invalid="ignore"):
        few_dof = mine & ~sol.sd_known & pos
        three = mine & sol.sd_known & (sol.n_used == 3) & ok
    append_reason(reasons, np.flatnonzero(few_dof & (sol.dof == 1)), ONE_DOF_TEXT)
    append_reason(reasons, np.flatnonzero(few_dof & (sol.dof == 2)), TWO_DOF_TEXT)
    append_reason(reasons, np.flatnonzero(three & (f.counts == 3)), THREE_TEXT)
    append_reason(reasons, np.flatnonzero(three & (f.counts > 3)), THREE_LEFT_TEXT)
    return status, reasons


def p_values(facts: FixFacts) -> np.ndarray:
    """The consistency p-value of each fix: the one :func:`classify` worked out on these facts, if it has."""
    if facts.judged is not None:
        return facts.judged.p
    return consistency(facts.sol, facts.g, len(facts.counts), facts.regions)[1]


def append_reason(reasons, fixes, text):
    """Add ``text`` to the reasons (texts joined by "; ", '' when none) of ``fixes`` (indices, or one index)."""
    idx = np.atleast_1d(np.asarray(fixes, dtype=np.int64))
    if not len(idx):
        return
    empty = reasons[idx] == ""
    reasons[idx[empty]] = text
    rest = idx[~empty]
    if len(rest):
        reasons[rest] = reasons[rest] + ("; " + text)


def _listed(m, fixes):
    """A mask over m fixes, True at the indices ``fixes``."""
    out = np.zeros(m, bool)
    out[np.asarray(list(fixes), dtype=np.int64)] = True
    return out


@dataclass
class _Facts:
    """What :func:`classify` judges with that does not depend on hints or rivals (arrays per fix or bearing)."""

    S: np.ndarray
    p: np.ndarray
    order: np.ndarray
    starts: np.ndarray
    used: np.ndarray
    behind_b: np.ndarray
    wild_b: np.ndarray
    reversed_b: np.ndarray
    low_b: np.ndarray
    inconsistent: np.ndarray
    no_cov: np.ndarray
    near_b: np.ndarray
    near_obs: np.ndarray
    long_span: np.ndarray
    floored: np.ndarray
    ratio: np.ndarray
    mismatch: np.ndarray
    bounded: np.ndarray
    has_region: np.ndarray
    notable: np.ndarray       # fixes with a reversed, wild or down-weighted bearing
    attention: np.ndarray     # fixes that need a look whatever their hints and rivals


def _facts_of(f: FixFacts) -> _Facts:
    """:class:`_Facts` of ``f``, worked out on first use and kept with it."""
    if f.judged is None:
        f.judged = _work_out(f)
    return f.judged


def _work_out(f: FixFacts) -> _Facts:
    sol, g = f.sol, f.g
    m = len(f.counts)
    S, p = consistency(sol, g, m, f.regions)
    ending = sol.ending
    res = sol.residual_deg
    w = sol.weight
    used = w > 0
    sd_fix = sol.sd_deg
    with np.errstate(invalid="ignore"):
        wild_b = used & (np.abs(res) > WILD_SD * sd_fix[g])
        # "looks reversed" only where turned by 180° the line would fit: within WILD_SD of the fix's SD where it has
        # one (a line 160° off with SD 5° would still miss by 20° turned: that is a wild line, not a reversed one)
        turned = 180.0 - np.abs(res)
        reversed_b = (np.abs(res) > REVERSED_DEG) & ~(turned > WILD_SD * sd_fix[g])
        low_b = w < 0.5
    notable = np.bincount(g, wild_b | low_b | reversed_b, m) > 0
    regions = f.regions
    bounded = regions.bounded if regions is not None else np.ones(m, bool)
    has_region = regions.has_region if regions is not None else np.ones(m, bool)
    with np.errstate(invalid="ignore"):
        inconsistent = np.where(sol.sd_known, p < INCONSISTENT_P, sd_fix > PLAUSIBLE_SD_DEG) & (sol.dof >= 1)
        no_cov = ~(np.isfinite(sol.cov_en).all(axis=(1, 2)) & (f.ellipse_minor > 0) & (f.ellipse_area > 0))
        far = np.zeros(m)
        np.maximum.at(far, g, np.where(used, sol.range_m, 0.0))
        near_b = used & (sol.range_m < NEAR_OBSERVER * far[g])
        near_obs = np.bincount(g, near_b, m) > 0
        long_span = (f.gap_min > f.window_min) | (f.span_min > FIX_SPAN_WINDOWS * f.window_min)
        star = regions.star_shaped | ~regions.has_region if regions is not None else np.ones(m, bool)
        attention = (~star | near_obs | long_span | (f.counts < 2) | (f.spread_m < ONE_SPOT_M) | (ending != _E["optimum"])
                     | sol.behind | ~sol.converged | inconsistent | ~bounded | ~has_region | no_cov
                     | (sol.crossing_deg < SHALLOW_CROSSING_DEG) | notable)
    floored = _floored(sol)
    attention |= floored
    attention |= np.fromiter(map(len, f.rejected), np.int64, m) > 0
    if regions is not None:
        with np.errstate(invalid="ignore", divide="ignore"):
            ratio = regions.area_m2 / f.ellipse_area
        mismatch = np.isfinite(ratio) & ((ratio > ELLIPSE_MISMATCH) | (ratio < 1.0 / ELLIPSE_MISMATCH))
        attention |= mismatch
    else:
        ratio = np.full(m, np.nan)
        mismatch = np.zeros(m, bool)
    return _Facts(S=S, p=p, order=np.argsort(g, kind="stable"), starts=np.concatenate(([0], np.cumsum(f.counts))),
                  used=used, behind_b=used & (np.cos(np.radians(res)) <= 0), wild_b=wild_b, reversed_b=reversed_b,
                  low_b=low_b, inconsistent=inconsistent, no_cov=no_cov, near_b=near_b, near_obs=near_obs,
                  long_span=long_span, floored=floored, ratio=ratio, mismatch=mismatch, bounded=bounded,
                  has_region=has_region, notable=notable, attention=attention)


def _per_fix(f: FixFacts, a: _Facts, todo) -> list:
    """What :func:`_judge` reads per fix, for the fixes ``todo``: one tuple of Python numbers and booleans each
    (taken out of the arrays once for all of them: a numpy scalar read one by one costs several times a list's)."""
    sol, regions = f.sol, f.regions
    star = regions.star_shaped if regions is not None else np.ones(len(f.counts), bool)
    per_fix = (f.counts, sol.ending, f.spread_m, sol.behind, sol.converged, sol.n_used, a.inconsistent, sol.sd_known,
               a.near_obs, sol.crossing_deg, a.has_region, a.bounded, a.long_span, sol.dof, a.no_cov, a.notable,
               a.floored, star, a.mismatch)
    return list(zip(*(np.asarray(x)[todo].tolist() for x in per_fix)))


def _judge(f: FixFacts, a: _Facts, i: int, rivals: dict, v: tuple):
    """Fix ``i``'s status word (None: ok) and its reason texts (``v``: the fix's :func:`_per_fix`)."""
    sol, regions = f.sol, f.regions
    res, w, used = sol.residual_deg, sol.weight, a.used
    S, p, sd_fix, ratio = a.S, a.p, sol.sd_deg, a.ratio
    behind_b, wild_b, reversed_b, low_b, near_b = a.behind_b, a.wild_b, a.reversed_b, a.low_b, a.near_b
    (n, ending, spread, behind, converged, n_used, inconsistent, sd_known, near_obs, crossing, has_region, bounded,
     long_span, dof, no_cov, notable, floored, star, mismatch) = v
    word = None
    texts: list[str] = []
    sel = a.order[a.starts[i]:a.starts[i + 1]]
    end = ENDINGS[ending]
    flags: list[tuple[str, str]] = []
    if n < 2:
        flags.append(("too_few", f"{n} usable bearing{'s' if n != 1 else ''}; a fix needs at least 2"))
    elif spread < ONE_SPOT_M:
        flags.append(("one_spot", f"all {n} bearings were taken from one spot; bearings from one place "
                                  "cannot cross"))
    elif end == "parallel":
        flags.append(("parallel", _parallel_text(sol, sel)))
    elif end in ("runaway", "singular"):
        flags.append(("diverging", "the bearing lines do not meet in front of the observers within reach: "
                                   "the best point runs off along the bearings (they point apart, or are so "
                                   "nearly parallel that they meet only very far away)"))
    elif end == "at_station":
        near = sel[np.argmin(sol.range_m[sel])]
        flags.append(("on_station", f"the best point creeps onto the observer at line {f.lines[near]}: that "
                                    "bearing fits only if the transmitter sits on its station, so another "
                                    "bearing disagrees badly"))
    elif end == "stalled" and sol.method == "stansfield":
        flags.append(("no_convergence", "Stansfield's re-weighting comes to rest nowhere near these bearings "
                                        f"(it stalled from every start tried, {sol.iterations[i]} iterations): "
                                        "they disagree too much for this method; try --method andrews"))
    elif end == "stalled":
        flags.append(("no_convergence", "the fit stalled: no step from its last point improves it "
                                        f"({sol.iterations[i]} iterations, from every start tried)"))
    elif end == "max_iter":
        flags.append(("no_convergence", f"the estimate did not settle after {sol.iterations[i]} iterations"))
    elif end == "not_optimum":
        flags.append(("no_optimum", "the fit settled on a point that is not a maximum of the likelihood "
                                    "(a saddle or a flat valley): the bearings do not pin down a point"))
    elif end == "collapsed":
        kept = sel[used[sel]]
        dropped = sel[~used[sel]]
        flags.append(("collapsed", f"the robust weights kept only {_lines_text(f.lines[kept])} and dropped "
                                   f"{_lines_text(f.lines[dropped])}: too few bearings agree to fix a point"))
    elif behind:
        back = sel[behind_b[sel]]
        if n_used == 2:
            flags.append(("diverging", f"the two lines cross only behind the observer at "
                                       f"{_lines_text(f.lines[back])}: the bearings point apart"))
        else:
            j = back[np.argmax(np.abs(res[back]))]
            flags.append(("behind", f"the best point lies behind the observer at line {f.lines[j]}: its "
                                    f"bearing points away from it (misses by {res[j]:+.0f}°)"))
    elif not converged:
        flags.append(("no_convergence", f"the estimate did not settle after {sol.iterations[i]} iterations"))
    else:
        if inconsistent:
            if sd_known:
                flags.append(("inconsistent",
                              f"the bearings disagree more than their SD of {sd_fix[i]:.3g}° allows "
                              f"(chi-square {S[i]:.1f} on {dof} degree{'s' if dof != 1 else ''} "
                              f"of freedom, p = {p[i]:.1g}): a bearing is wild or the SD is too small"))
            else:
                flags.append(("inconsistent",
                              f"the bearings miss each other widely: their SD is estimated at "
                              f"{sd_fix[i]:.0f}°, more than the {PLAUSIBLE_SD_DEG:g}° a directional "
                              "antenna plausibly gives"))
        if near_obs:
            j = sel[near_b[sel]][0]
            flags.append(("near_observer", f"the fix lies {sol.range_m[j]:.0f} m from the observer at line "
                                           f"{f.lines[j]}, so close that this bearing hardly constrains it "
                                           "(near its own station a bearing fits almost any point): check "
                                           "that the transmitter is beside that observer, or take another "
                                           "bearing"))
        if crossing < SHALLOW_CROSSING_DEG:
            what = "the two bearings cross" if n_used == 2 else "the bearing lines spread only"
            flags.append(("shallow", f"{what} at {crossing:.0f}° (common-practice limit "
                                     f"{SHALLOW_CROSSING_DEG:.0f}°); the position is weak along the bearings"))
        if regions is not None and has_region and not bounded:
            flags.append(("unbounded", f"the {100 * f.level:g}% region is open: it reaches past "
                                       f"{_km(regions.draw_range_m[i])} along the bearings (drawn to "
                                       "there), so a transmitter far along them is not ruled out"))
        if long_span:
            what = (f"{f.gap_min[i]:.0f} min pass between two of its bearings, more than the "
                    f"{f.window_min:g}-min window" if f.gap_min[i] > f.window_min else
                    f"its bearings span {f.span_min[i]:.0f} min, more than {FIX_SPAN_WINDOWS:g} windows of "
                    f"{f.window_min:g} min")
            flags.append(("long_span", f"{what}; the transmitter may have moved (if it stays put, as in a "
                                       "hunt, give a longer --window)"))
        if i in rivals:
            flags.append(("ambiguous", _rival_text(rivals[i], f.lines, sol, i, f.level)))
        if not sd_known and dof <= 0:
            flags.append(("no_region", "two bearings and no known SD: a position but no confidence "
                                       "region (give sd in the sheet or --sd)"))
        elif no_cov or (regions is not None and not has_region):
            flags.append(("no_region", "the covariance of this fix is degenerate: no region can be sized"))
    if flags:
        word = flags[0][0]
        texts.extend(text for _, text in flags)
    # what each bearing says about the fix (only where the fix is a verified optimum: elsewhere the
    # residuals are taken at an arbitrary point); most fixes have no such bearing
    if n >= 2 and converged and notable:
        hinted = " ".join(f.hints.get(i, []))
        for j in sel[reversed_b[sel]][:3]:
            if "180°" in hinted:
                continue             # the hint weighed turning a line against the other explanations
            texts.append(f"line {f.lines[j]} looks reversed by 180°: it misses by {res[j]:+.0f}° "
                         "(read from the back of the antenna?); check it and enter it turned by 180°")
        shown = set(sel[reversed_b[sel]][:3].tolist())
        for j in sel[wild_b[sel] & ~reversed_b[sel]][:3]:
            if sd_known or dof >= 1:
                texts.append(f"line {f.lines[j]} misses by {res[j]:+.1f}° (more than {WILD_SD:g} SD)")
                shown.add(j)
        for j in sel[low_b[sel]][:3]:
            if w[j] <= 0:
                if j not in shown:
                    texts.append(f"line {f.lines[j]} dropped by the robust fit (misses by {res[j]:+.0f}°)")
                else:
                    texts.append(f"line {f.lines[j]} dropped by the robust fit")
            else:
                texts.append(f"line {f.lines[j]} down-weighted to {w[j]:.2f}")
    texts.extend(f.hints.get(i, []))
    if floored:
        texts.append(_floor_text(sol, i, f.step_deg))
    if regions is not None and has_region and not star:
        texts.append("the region is not star-shaped about its centre: a ray leaves it and comes back; "
                     "it is drawn as its outer envelope")
    if mismatch and (word or "ok") in ("ok", "shallow", "long_span", "inconsistent"):
        texts.append(f"the ellipse is a poor summary here: the likelihood region is {ratio[i]:.1f}x its "
                     "area (use the region)")
    rej = f.rejected[i]
    if rej:
        texts.append("rejected input line" + ("s " if len(rej) > 1 else " ")
                     + ", ".join(str(x) for x in rej[:8]) + (" ..." if len(rej) > 8 else ""))
    return word, texts


#: Said of every ok fix from three bearings with a known SD. Measured with benchmarks/coverage.py --n 3 --only
#: outlier --sd-kinds known --wild 30-60 (and 40-120) --geometries walk,random,spread,arc --fixes 2000, with the
#: wild risk weighed at the default share (DEVELOPERS.md; 4-9 % and 1-2 %; before it: 10-21 % and 2-9 %).
THREE_TEXT = ("three bearings check one another only weakly: one wild bearing that passes near where the other two "
              "cross goes unseen by any residual test (where wild_risk is given it weighs that chance; in "
              "simulations with one bearing 30-60° off in every fix, 4-9 % of such fixes still came out ok with the "
              "default share, 10-21 % without the weighing, none holding the transmitter); a fourth bearing from "
              "another direction makes the fix testable")


#: Said of an ok fix with a known SD that rests on three bearings after its fit dropped the others.
THREE_LEFT_TEXT = ("it rests on the three bearings the fit kept, and three check one another only weakly: one wild "
                   "bearing among them that passes near where the other two cross goes unseen by any residual test "
                   "(where wild_risk is given it weighs that chance, and the chance that the fit dropped a good line "
                   "and kept a wild one); another bearing from another direction makes the fix testable")

#: Said of every fix whose SD is estimated from its own three bearings.
ONE_DOF_TEXT = ("its SD is estimated from its own three bearings (one degree of freedom), so the region is sized with "
                "an F(2, 1) scale that allows for how little they tell; with the SD measured on beacon trials (dfkit "
                "calibrate, then --calibration) the region of such a fix is far smaller: in simulations at a 5° SD "
                "the median ok region covered 13-21 times the area of the same fixes' regions with the SD known "
                "(observers around the transmitter or in random directions), 7 times with the observers along one "
                "side")

#: The area figures are from benchmarks/coverage.py --areas (DEVELOPERS.md, coverage study).
#: Said of every fix whose SD is estimated from its own four bearings. The figures are from
#: benchmarks/coverage.py --n 4 --sd-kinds estimated --only clean --geometries random,arc at SD 5 and 10 degrees
#: (DEVELOPERS.md, coverage study).
TWO_DOF_TEXT = ("its SD is estimated from its own four bearings (two degrees of freedom): a region that comes out "
                "bounded often rests on an estimate on the small side, and in simulations with every observer on one "
                "side of the transmitter and a 10° bearing SD such regions held it only 90-92 % of the time; an SD "
                "measured on beacon trials (dfkit calibrate, then --calibration) makes the region dependable")


def _floored(sol):
    """Fixes whose estimated SD was raised to its floor (:mod:`dfkit.locate.resolution`)."""
    if sol.sd_floor_deg is None or sol.sd_estimate_deg is None:
        return np.zeros(len(sol.lat), bool)
    with np.errstate(invalid="ignore"):
        return ~sol.sd_known & (sol.dof >= 1) & (sol.sd_estimate_deg < sol.sd_floor_deg)


def _floor_text(sol, i, step_deg):
    """Why a fix's region uses a larger SD than its residuals give."""
    est, floor = sol.sd_estimate_deg[i], sol.sd_floor_deg[i]
    step = np.nan if step_deg is None else step_deg[i]
    said = f"the bearings agree more closely (estimated SD {est:.2g}°) than "
    if np.isfinite(step) and step * SHEPPARD >= floor * (1 - 1e-9):
        written = "whole degrees" if abs(step - 1.0) < 1e-12 else f"steps of {step:g}°"
        return (said + f"they were written: to {written} a bearing carries a rounding error of SD {floor:.2g}° "
                f"(the step over √12), and the region uses that")
    return (said + f"bearings taken by hand plausibly are; the region uses {floor:g}° (if yours are that good, "
            "give their SD: sd column, --sd or --calibration)")


def _rival_text(rv, lines, sol, i, level=0.95):
    """The reason of an ``ambiguous`` fix: both answers, and which lines decide between them."""
    where = f"{rv.lat:.5f}, {rv.lon:.5f} ({rv.distance_m:.0f} m away)"
    if rv.by_risk:
        return _wild_text(rv, lines, sol, i, level, where)
    fit = f"p = {rv.p:.2g}" if sol.sd_known[i] else f"SD {rv.sd_deg:.1f}°"
    if not np.isfinite(rv.p if sol.sd_known[i] else rv.sd_deg):
        fit = "two lines always cross, so nothing tests them"     # the other answer rests on two bearings
    tail = "" if sol.sd_known[i] else ("; with the bearing SD known (sheet sd, --sd or a calibration) dfkit can test "
                                       "the bearings more sharply")
    if rv.left_out >= 0 and rv.dropped:
        j, k = _lines_text(lines[rv.dropped]), lines[rv.left_out]
        return (f"two answers fit: this one, which leaves out {j}, and {where}, which leaves out line {k} instead "
                f"({fit}; line {k} misses it by {rv.miss_deg:+.0f}°); this region does not reach the other answer: "
                f"check {_lines_text(np.sort(np.append(lines[rv.dropped], k)))}, or take another bearing{tail}")
    if rv.left_out >= 0:
        k = lines[rv.left_out]
        return (f"two answers fit: this one, and {where}, where all bearings but line {k} agree ({fit}) and line "
                f"{k} misses by {rv.miss_deg:+.0f}°; this region does not reach the other answer, so if line {k} is "
                f"a reflection the region is wrong: check line {k}, or take another bearing{tail}")
    j = _lines_text(lines[rv.dropped])
    return (f"two answers fit: this one, which leaves out {j}, and {where}, where all the bearings agree together "
            f"({fit}); this region does not reach the other answer: {j} may be good; check it, or take another "
            f"bearing{tail}")


def _wild_text(rv, lines, sol, i, level, where):
    """The reason of a fix flagged by its wild risk: which line, where the others would put the transmitter, the
    chance, and what to do."""
    if rv.dropped:
        return _dropped_wild_text(rv, lines, sol, i, level, where)
    k = lines[rv.left_out]
    others = int(sol.n_used[i]) - 1
    if not rv.settled:
        alone = f"without it the other {others} bearings do not settle on one place within reach"
    elif others == 2:
        alone = (f"without it the other two lines cross at {where}, where line {k} misses by {rv.miss_deg:+.0f}°, "
                 f"{'outside this region' if rv.outside else 'inside this region, though most of what they allow lies outside it'}")
    else:
        alone = (f"without it the other {others} bearings agree on {where}, where line {k} misses by "
                 f"{rv.miss_deg:+.0f}°, {'outside this region' if rv.outside else 'inside this region, though most of what they allow lies outside it'}")
    return (f"it may rest on a wild line {k}: {alone}; with {_prior_words(rv)}, the chance that one of its "
            f"lines (most likely line {k}) is wild and this region misses the transmitter is {_percent(rv.chance)} "
            f"(wild_risk), at least the {_percent(1.0 - level)} of misses the region allows (set the share with "
            f"--wild-share): check line {k}, or take another bearing from another direction")


def _dropped_wild_text(rv, lines, sol, i, level, where):
    """:func:`_wild_text` for a fix whose fit dropped a line: the fit may have dropped a good line and kept the
    wild one, or dropped a good line that the others agree with."""
    j = _lines_text(lines[rv.dropped])
    miss = "outside this region" if rv.outside else "inside this region, though most of what they allow lies outside it"
    if rv.left_out >= 0:
        k = lines[rv.left_out]
        head = f"line {k} may be the wild one rather than {j}, which the fit dropped"
        both = _lines_text(np.sort(np.append(lines[rv.dropped], k)))
        if rv.strip:
            return (f"{head}: with {j} and without line {k} the other lines agree within their SDs but run nearly "
                    f"parallel, putting the transmitter somewhere along a strip that reaches beyond twice the farthest "
                    f"observer's range, far from this region; dfkit cannot weigh that chance (wild_risk leaves it out): "
                    f"check {both}, or take another bearing from across the strip")
        alone = (f"with {j} and without line {k} the bearings agree on {where}, where line {k} misses by "
                 f"{rv.miss_deg:+.0f}°, {miss}" if rv.settled else
                 f"with {j} and without line {k} the bearings do not settle on one place within reach")
        # one line is wild either way: the prior share cancels, only the bearings decide
        why = f"one of {both} is off and the bearings cannot tell which"
        check = f"check {both}"
    else:
        them = "them" if len(rv.dropped) > 1 else "it"
        head = f"{j}, which the fit dropped, may be good"
        alone = (f"with {them} all {int(sol.n_used[i]) + len(rv.dropped)} bearings agree on {where}, {miss}"
                 if rv.settled else f"with {them} the bearings do not settle on one place within reach")
        why = f"with {_prior_words(rv)} (set the share with --wild-share)"
        check = f"check {j}"
    return (f"{head}: {alone}; {why}: the chance that the fit kept a wild line or dropped a good one and this region "
            f"misses the transmitter is {_percent(rv.chance)} (wild_risk), at least the {_percent(1.0 - level)} of "
            f"misses the region allows: {check}, or take another bearing from another direction")


def _prior_words(rv):
    """The prior the wild risk was weighed with, in words."""
    if rv.sheet_rate:
        return (f"wild lines as common as this sheet's own fixes show them (see its notes; at least "
                f"{_share(rv.wild_share)})")
    return f"{_share(rv.wild_share)} wild"


def _share(q):
    """A prior share of wild bearings in words: 'one bearing in 20'."""
    return f"one bearing in {1.0 / q:.0f}" if q > 0 and abs(1.0 / q - round(1.0 / q)) < 0.05 else f"{100 * q:g} % of bearings"


def _percent(p):
    return f"{100 * p:.1f} %"


def _km(m_):
    return f"{m_ / 1000:.0f} km" if m_ >= 10_000 else f"{m_ / 1000:.1f} km"


def _parallel_text(sol, sel):
    # geometry about the stations' centroid (where a parallel fix stays): stations and observed directions
    az = np.radians(sol.azimuth_from_fix_deg[sel])
    d = sol.range_m[sel]
    sx, sy = d * np.sin(az), d * np.cos(az)
    obs = np.radians(sol.residual_deg[sel]) + az + np.pi
    c, s = np.cos(obs).mean(), np.sin(obs).mean()
    if np.hypot(c, s) < 0.5:       # they point opposite ways
        nx, ny = np.cos(obs[0]), -np.sin(obs[0])
        off = np.abs(nx * (sx - sx[0]) + ny * (sy - sy[0]))
        if off.max() <= 0.02 * max(np.hypot(sx - sx[0], sy - sy[0]).max(), 1e-9):
            return ("the bearings point at each other along one line: the transmitter could be anywhere on it; "
                    "take a bearing from another place")
        return "the bearing lines are parallel, pointing opposite ways: they do not cross"
    return "the bearing lines are parallel: they do not cross; take a bearing from another place"
