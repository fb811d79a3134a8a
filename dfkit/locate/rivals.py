"""Competing explanations: when another set of the bearings fits as well somewhere else.

A fix that looks consistent can still be wrong: a wild bearing can make a false
crossing where every line fits, or pull the answer towards its own station, and a
robust fit can drop a good bearing and keep the wild one. The bearings then hold two
explanations, "these bearings are good" and "those are", each with its own answer.
dfkit tries the alternatives of every fix that would be ``ok``:

* the fix without each bearing in turn ("that bearing is wild"), and
* all its bearings at full weight where the fit dropped one ("it is good"),

solves each with Lenth's likelihood (:mod:`dfkit.estimators`, one vectorised call)
and calls the fix ``ambiguous`` when an alternative is

1. *plausible* by the fix's own rule: known SD, its chi-square test passed at
   :data:`dfkit.policy.INCONSISTENT_P` (always, with no degree of freedom left);
   SD estimated, at least one degree of freedom and an SD within
   :data:`dfkit.policy.PLAUSIBLE_SD_DEG`;
2. *competitive*: with as many bearings as the fix, or one more, the fix's
   explanation is not :data:`EVIDENCE_RATIO` times as likely (profile likelihoods,
   the SD's too when it is estimated); one with fewer bearings always fits better and
   is judged by the next condition alone;
3. *incompatible*: its answer lies outside the fix's region and, for an alternative
   with fewer bearings and a known SD, the fix lies outside the alternative's region
   (likelihood-ratio regions at the same level, :func:`dfkit.regions.region_threshold`).

The two-sided test in 3 is a test of the left-out bearing that counts only when the
bearing matters. In a linear model with a known SD, with h the bearing's leverage in
the fit that uses it and T its externally studentised residual (R. D. Cook &
S. Weisberg, *Residuals and Influence in Regression*, Chapman & Hall, 1982, ch. 2
[from memory]), the fix lies outside the alternative's region exactly when h T^2
exceeds the region's bound (5.99 at 95 %), and the alternative outside the fix's when
h T^2 / (1 - h) does: so a clean fix is called ambiguous only when one bearing both
disagrees (|T| > 2.45 at the very least) and carries much of it. With the SD
estimated, the alternative's own region (an F region on n - 3 degrees of freedom) is
so wide that it holds nearly every nearby point, and only the fix's region is tested.
Measured on clean data (benchmarks/coverage.py, DEVELOPERS.md): 0.05-0.3 % of fixes
are called ambiguous with a known SD, up to 0.85 % with an estimated one.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from dfkit import estimators, geodesy
from dfkit.estimators import subsets
from dfkit.locate.status import consistency
from dfkit.locate.wild import dropped_risk, wild_risk
from dfkit.policy import INCONSISTENT_P, PLAUSIBLE_SD_DEG, WILD_SHARE
from dfkit.regions import region_threshold


#: An alternative with as many bearings as the fix (another bearing is the wild one), or one more (the dropped
#: bearing is good), competes when the fix's explanation is not at least this many times as likely: with equal
#: prior odds the alternative then has a posterior probability of at least 1/3. Our choice, by measured
#: coverage (benchmarks/coverage.py): with one wild bearing in four (SD known) a ratio of 1 left ok fixes
#: holding the truth 91.5 % of the time, 2 gave 94 %, and 8 (R. Royall, *Statistical Evidence*, Chapman &
#: Hall, 1997: "fairly strong" evidence [from memory]) 94.7 % but flagged 2.7 % of five-bearing fixes
#: instead of 1.5 %.
EVIDENCE_RATIO = 2.0


@dataclass
class Rival:
    """The strongest competing explanation of one fix.

    ``left_out``: index (into the bearings) of the bearing the alternative leaves out, or -1 when the
    alternative keeps every bearing; ``dropped``: bearings the fix itself left out; ``lat``, ``lon``
    the alternative's answer [°]; ``distance_m`` from the fix; ``miss_deg`` how far the left-out bearing
    misses the alternative's answer [°] (NaN when none is left out); ``p`` its chi-square p-value
    (known SD) or ``sd_deg`` its estimated SD; ``chance`` the fix's wild risk (NaN where not weighed);
    ``outside`` whether the alternative's answer lies outside the fix's region; ``wild_share`` the prior
    share of wild bearings the risk was weighed with; ``by_risk`` when only the wild risk flags the fix, and then
    ``settled`` whether the other bearings settle on one place within the prior's reach (else no answer is named);
    ``strip`` when it is flagged because a rival fits along a strip beyond the reach, whose chance is not weighed.
    """

    left_out: int
    dropped: list
    lat: float
    lon: float
    distance_m: float
    miss_deg: float
    p: float
    sd_deg: float
    chance: float = np.nan
    outside: bool = True
    wild_share: float = np.nan
    by_risk: bool = False
    settled: bool = True
    strip: bool = False
    #: whether the risk was weighed with the sheet's own wild lines (:mod:`dfkit.locate.wildlines`)
    sheet_rate: bool = False


def find_rivals(lat, lon, theta, sd, g, counts, sol, lik, level, examine, known_dof=None, sd_floor=None,
                wild_share=WILD_SHARE, wild_lines=None):
    """Competing explanations of the fixes ``examine`` (see the module docstring).

    Parameters
    ----------
    lat, lon, theta, sd : ndarray, shape (N,)
        Stations [°], observed true bearings [°] and bearing SDs [°, NaN when unknown].
    g, counts : ndarray
        Fix of each bearing; bearings per fix.
    sol : dfkit.estimators.Solution
        The fixes as solved.
    lik : dfkit.regions.LikelihoodRegions or None
        Their regions (when None, each fix's S_min is taken at its answer).
    level : float
        Probability of the regions.
    examine : ndarray of bool, shape (m,)
        Fixes to look at (those that would be ``ok``).
    known_dof : ndarray, optional
        Degrees of freedom of a measured known SD, per fix (inf: exact).
    sd_floor : ndarray, shape (N,), optional
        Each bearing's SD floor [°] (:mod:`dfkit.locate.resolution`).
    wild_lines : dfkit.locate.wildlines.WildLines, optional
        The sheet's own wild lines, weighed with the prior where they are more common.

    Returns
    -------
    rivals : dict
        fix index -> :class:`Rival`, for the fixes with a plausible, incompatible alternative, or whose wild risk
        reaches 1 - level.
    wild_risk : ndarray, shape (m,)
        Per fix, the chance that one of its bearings is wild and its region misses the transmitter because of it
        (:mod:`dfkit.locate.wild`), with the prior ``wild_share`` per bearing; NaN where it is not weighed (fewer
        than three bearings, the SD estimated, a fix that kept fewer than three, ``wild_share`` 0, or not
        examined).
    """
    m = len(counts)
    kdof = np.full(m, np.inf) if known_dof is None else np.asarray(known_dof, float)
    used = sol.weight > 0
    n_used = np.bincount(g, used.astype(float), m)
    look = examine & (counts >= 3)
    full = look & (n_used == counts)
    if not look.any():
        return {}, np.full(m, np.nan)
    region = _fix_region(g, m, sol, lik, level, kdof)
    with np.errstate(divide="ignore", invalid="ignore"):
        full_weight = 1.0 / np.radians(np.asarray(sd, float)) ** 2
    wild = wild_risk(g, m, sol, look & sol.sd_known, region, wild_share, wild_lines)
    chosen = _chosen(wild, level)
    picked_bearing = np.zeros(len(g), bool)
    picked_bearing[chosen[chosen >= 0]] = True
    # Alternatives: each fix without each bearing in turn (but not the one set the fit itself uses), and whole
    # where the fit dropped bearings. Where the fit uses every bearing, leaving one out gives an alternative with
    # fewer bearings; only those that could be incompatible (_could_conflict) or that carry most of a flagged
    # fix's wild risk are solved.
    could = _could_conflict(g, m, sol, used, level, kdof)
    alone = ~used & (n_used[g] == counts[g] - 1)
    var = subsets.variants(g, counts, np.flatnonzero(look), np.flatnonzero(look & (n_used < counts)),
                           skip=alone | (full[g] & ~(could | picked_bearing)))
    k = len(var)
    if not k:
        return {}, wild.risk
    v_fix, v_out, mo, mb = var.fix, var.left_out, var.owner, var.member
    fl = None if sd_floor is None else np.asarray(sd_floor, float)[mb]
    alt = estimators.solve(lat[mb], lon[mb], theta[mb], mo, k, sd[mb], method="mle", sd_floor_deg=fl)
    # fixes whose fit dropped a line: their wild risk, the alternatives' steps started at these exact answers
    one_out = look & sol.sd_known & (n_used < counts)
    if one_out.any():
        starts = _starts(sol, used, g, alt, v_fix, v_out, one_out)
        dropped_risk(g, m, sol, one_out, region, wild_share, full_weight, starts, wild, wild_lines)
        chosen = _chosen(wild, level)
    _, p = consistency(alt, mo, k)
    with np.errstate(invalid="ignore"):
        plausible = alt.converged & ~alt.behind & np.where(
            alt.sd_known, (alt.dof < 1) | (p >= INCONSISTENT_P), (alt.dof >= 1) & (alt.sd_deg <= PLAUSIBLE_SD_DEG))
    fewer = (v_out >= 0) & full[v_fix]          # a fix that uses all its bearings, without one of them
    c = chosen[v_fix]
    picked = np.flatnonzero(np.where(c == -2, v_out == -1, (c >= 0) & (v_out == c)))
    # the two-sided test, on the alternatives that could fail it (the others were solved for the wild risk alone,
    # and are tested so that the reason says whether the region reaches them)
    test = plausible & ~(fewer & ~could[np.maximum(v_out, 0)])
    test[picked] = alt.converged[picked]
    outside, conflict = _two_sided(lat, lon, theta, g, counts, sol, lik, level, kdof, alt, mo, mb, k, v_fix, n_used,
                                   used, test, region)
    by_risk = picked[~np.isin(v_fix[picked], v_fix[conflict])]
    conflict[by_risk] = True
    # where the exact alternative did not settle, no answer is named
    unsettled = picked[~alt.converged[picked]]
    if len(unsettled):      # not named in the reason (below); NaN keeps a runaway answer out of every sum
        alt.lat[unsettled], alt.lon[unsettled] = np.nan, np.nan
    rivals = _described(conflict, alt, p, v_fix, v_out, lat, lon, theta, g, counts, sol, used, wild.risk, outside,
                        wild_share)
    # the other bearings' answer is named only where it settled within the prior's reach (twice the farthest
    # observer's range: beyond it, lines that barely meet, or a solve that ran away, say nothing useful)
    reach = np.zeros(m)
    np.maximum.at(reach, g, np.where(used, 2.0 * sol.range_m, 0.0))
    for i in v_fix[by_risk].tolist():
        rv = rivals[i]
        rv.by_risk = True
        rv.settled = bool(np.isfinite(rv.distance_m) and rv.distance_m <= reach[i])
        rv.strip = bool(wild.strip[i] >= 0 and not wild.risk[i] >= 1.0 - float(level))
        rv.sheet_rate = bool(wild_lines is not None and wild_lines.raises)
    return rivals, wild.risk


def _chosen(wild, level):
    """Per fix, what carries most of a flagged fix's wild risk: a bearing (>= 0), -2 for all its bearings together,
    or -1 (not flagged)."""
    chosen = np.full(len(wild.risk), -1)
    with np.errstate(invalid="ignore"):
        risky = wild.risk >= 1.0 - float(level)
    chosen[risky] = wild.left_out[risky]
    # a rival that fits but runs off along a strip: not weighed, but not to be passed over either
    strip = ~risky & (wild.strip >= 0)
    chosen[strip] = wild.strip[strip]
    return chosen


def _starts(sol, used, g, alt, v_fix, v_out, fixes):
    """For the fixes ``fixes`` whose fit dropped lines, the alternatives' answers in each fix's plane [m]: per
    bearing k (NaN elsewhere) the answer without k, and per fix the answer of all its bearings."""
    start_x, start_y = np.full(len(g), np.nan), np.full(len(g), np.nan)
    whole_x, whole_y = np.full(len(sol.lat), np.nan), np.full(len(sol.lat), np.nan)
    j = np.flatnonzero(fixes[v_fix] & alt.converged & np.isfinite(alt.lat) & np.isfinite(alt.lon))
    if not len(j):
        return start_x, start_y, whole_x, whole_y
    f = v_fix[j]
    x, y = geodesy.to_local(sol.lat[f], sol.lon[f], alt.lat[j], alt.lon[j])
    out = v_out[j] >= 0
    start_x[v_out[j][out]], start_y[v_out[j][out]] = x[out], y[out]
    whole_x[f[~out]], whole_y[f[~out]] = x[~out], y[~out]
    return start_x, start_y, whole_x, whole_y


def _fix_region(g, m, sol, lik, level, kdof):
    """Each fix's region as the tests here use it: (S_min, bound, centre x, centre y [m] in the fix's plane)."""
    r_fix = np.radians(sol.residual_deg)
    s_min = np.bincount(g, sol.region_weight * r_fix * r_fix, m)
    cx, cy = np.zeros(m), np.zeros(m)
    if lik is not None:
        s_min = np.where(lik.has_region & np.isfinite(lik.s_min), np.minimum(lik.s_min, s_min), s_min)
        has = lik.has_region & np.isfinite(lik.centre_x) & np.isfinite(lik.centre_y)
        cx, cy = np.where(has, lik.centre_x, 0.0), np.where(has, lik.centre_y, 0.0)
    bound = region_threshold(s_min, sol.sd_known, sol.dof, level, kdof, _floor_rad(sol))
    return s_min, bound, cx, cy


def _two_sided(lat, lon, theta, g, counts, sol, lik, level, kdof, alt, mo, mb, k, v_fix, n_used, used, test,
               region):
    """Conditions 2 and 3 of the module docstring for the alternatives ``test``: (outside, conflict) per
    alternative, ``outside`` when its answer lies outside the fix's region."""
    outside = np.zeros(k, bool)
    conflict = np.zeros(k, bool)
    if not test.any():
        return outside, conflict
    s_min, bound, _, _ = region
    # The fix's S at each alternative's answer (exact geodesic residuals of all its bearings, weighted as in its
    # region), against the fix's bound: only for the alternatives tested (the geodesics of every bearing at every
    # alternative's answer cost more than the rest of this test).
    pv = np.flatnonzero(test)
    whole = subsets.variants(g, counts, [], v_fix[pv])
    ao, ab = whole.owner, whole.member
    az, _, _ = geodesy.inverse(lat[ab], lon[ab], alt.lat[pv][ao], alt.lon[pv][ao])
    r = np.radians(((theta[ab] - az + 180.0) % 360.0) - 180.0)
    S_fix_at_alt = np.zeros(k)
    S_fix_at_alt[pv] = np.bincount(ao, sol.region_weight[ab] * r * r, len(pv))
    T_fix = bound[v_fix]
    # The alternative's S at the fix against the alternative's bound: at the centre of the fix's region (its
    # minimum of S), which is the fix's answer for Lenth's fit but not for an inefficient one (least squares).
    r_fix = np.radians(sol.residual_deg)
    r_centre = r_fix
    if lik is not None:
        m = len(counts)
        tried = np.zeros(m, bool)
        tried[v_fix[pv]] = True         # the fixes with an alternative tested (the others cannot conflict)
        has = tried[g] & lik.has_region[g] & np.isfinite(lik.centre_x[g]) & np.isfinite(lik.centre_y[g])
        if has.any():
            clat, clon = geodesy.from_local(sol.lat[g[has]], sol.lon[g[has]], lik.centre_x[g[has]],
                                            lik.centre_y[g[has]])
            a_c, _, _ = geodesy.inverse(lat[has], lon[has], clat, clon)
            r_centre = r_fix.copy()
            r_centre[has] = np.radians(((theta[has] - a_c + 180.0) % 360.0) - 180.0)
    S_alt_at_fix = np.bincount(mo, alt.region_weight * r_centre[mb] ** 2, k)
    r_alt = np.radians(alt.residual_deg)
    S_alt_min = np.bincount(mo, alt.region_weight * r_alt * r_alt, k)
    T_alt = region_threshold(S_alt_min, alt.sd_known, alt.dof, level, kdof[v_fix], _floor_rad(alt))
    # An alternative with as many bearings as the fix, or one more, competes only when the fix's explanation is
    # not favoured by EVIDENCE_RATIO or more: -2 log of the likelihood ratio (estimated SD: of the profile
    # likelihoods, n log(S / dof), the SD no smaller than its floor) below 2 log EVIDENCE_RATIO. One with fewer
    # bearings always has the better likelihood; it competes through the conflict test alone.
    n_alt = np.bincount(mo, minlength=k)
    fix_floor = _floor_rad(sol)
    with np.errstate(invalid="ignore", divide="ignore"):
        S_fix_used = np.bincount(g, np.where(used, sol.region_weight * r_fix * r_fix, 0.0), len(counts))[v_fix]
        f2_alt, f2_fix = _floor_rad(alt) ** 2, (fix_floor ** 2)[v_fix]
        lr = np.where(alt.sd_known, S_alt_min - S_fix_used,
                      n_alt * np.log(np.fmax(S_alt_min / (n_alt - 2), f2_alt))
                      - n_used[v_fix] * np.log(np.fmax(S_fix_used / (n_used[v_fix] - 2), f2_fix)))
        close = ~(lr >= 2.0 * np.log(EVIDENCE_RATIO)) | (n_alt < n_used[v_fix])
        same = (n_alt == n_used[v_fix]) | ~sol.sd_known[v_fix]
        outside = test & (S_fix_at_alt > T_fix)
        conflict = outside & close & ((S_alt_at_fix > T_alt) | same)
    return outside, conflict


def _described(conflict, alt, p, v_fix, v_out, lat, lon, theta, g, counts, sol, used, risk, outside, wild_share):
    """One :class:`Rival` per fix with a conflicting alternative: the one that fits best (highest p, or
    smallest SD)."""
    score = np.where(alt.sd_known, -np.nan_to_num(p, nan=1.0), alt.sd_deg)
    cand = np.flatnonzero(conflict)
    cand = cand[np.lexsort((score[cand], v_fix[cand]))]
    first = np.ones(len(cand), bool)
    first[1:] = v_fix[cand[1:]] != v_fix[cand[:-1]]
    best = cand[first]
    fx, j = v_fix[best], v_out[best]
    _, _, dist = geodesy.inverse(sol.lat[fx], sol.lon[fx], alt.lat[best], alt.lon[best])
    jj = np.maximum(j, 0)
    a_j, _, _ = geodesy.inverse(lat[jj], lon[jj], alt.lat[best], alt.lon[best])
    miss = np.where(j >= 0, ((theta[jj] - a_j + 180.0) % 360.0) - 180.0, np.nan)
    order = np.argsort(g, kind="stable")
    offsets = np.concatenate(([0], np.cumsum(counts)))
    out = {}
    for k_, i in enumerate(fx.tolist()):
        sel = order[offsets[i]:offsets[i + 1]]
        v = best[k_]
        out[i] = Rival(left_out=int(j[k_]), dropped=sel[~used[sel]].tolist(), lat=float(alt.lat[v]),
                       lon=float(alt.lon[v]), distance_m=float(dist[k_]), miss_deg=float(miss[k_]),
                       p=float(p[v]), sd_deg=float(alt.sd_deg[v]), chance=float(risk[i]), outside=bool(outside[v]),
                       wild_share=float(wild_share))
    return out


#: With the SD estimated, a bearing is left out and the rest solved only when a linear model says its absence
#: could move the answer out of the fix's region, within a factor SCREEN_LINEAR (on the squared miss), or when
#: it carries so much of the fix (leverage above SCREEN_LEVERAGE) that the linear model is not to be trusted.
#: Our choice, by measurement: of the 92 incompatible alternatives found without the screen in six cells of
#: benchmarks/coverage.py with an estimated SD (n = 4-6, clean and with a wild bearing, 2000 fixes each), the
#: screen keeps 91 (the one lost, from a Huber fit, had a ratio of 0.19 and a leverage of 0.69), and it leaves
#: 11-18 % of the bearings to solve.
SCREEN_LINEAR = 0.3
SCREEN_LEVERAGE = 0.8


def _floor_rad(sol):
    """Each fix's SD floor [rad] (0 where the solution has none)."""
    return np.radians(np.zeros(len(sol.lat)) if sol.sd_floor_deg is None else sol.sd_floor_deg)


def _could_conflict(g, m, sol, used, level, kdof):
    """Per bearing: whether the fix without it could be an incompatible alternative (see find_rivals).

    Known SD, exact: the fix must lie outside the alternative's region, S_without(fix) - S_without(alt) above
    the region's bound, so S_without at the fix alone must exceed that bound. Estimated SD: the linear screen
    (SCREEN_LINEAR, SCREEN_LEVERAGE): in a linear model the bearing misses the leave-one-out answer by
    r / (1 - h) (r its residual at the fix, h its leverage), and the fix's S there exceeds its bound only if
    that squared miss exceeds the bound's gap plus r^2.
    """
    r = np.radians(sol.residual_deg)
    known_b = sol.sd_known[g]
    out = np.zeros(len(g), bool)
    if known_b.any():
        with np.errstate(divide="ignore", invalid="ignore"):
            # known SD: the alternative's bound over its minimum (chi-square, or F for a measured SD), with its
            # bearings at full weight 1/SD^2 (a robust fit's own weights may be smaller)
            gap_alt = region_threshold(np.zeros(m), np.ones(m, bool), sol.dof, level, kdof)
            full = np.where(used, sol.region_weight / np.where(used, sol.weight, 1.0), 0.0) * r * r
            out |= known_b & ((np.bincount(g, full, m)[g] - full) > gap_alt[g])
    if not known_b.all():
        out |= ~known_b & _linear_screen(g, m, sol, used, r, level, kdof)
    return out


def _linear_screen(g, m, sol, used, r, level, kdof):
    """Per bearing, with the SD estimated: the linear screen of :func:`_could_conflict`."""
    d = sol.range_m
    az = np.radians(sol.azimuth_from_fix_deg)
    gx, gy = -np.cos(az) / d, np.sin(az) / d          # gradient of the predicted bearing [rad/m]
    v = np.where(used, sol.region_weight, 0.0)
    S = np.bincount(g, v * r * r, m)
    j11, j12, j22 = (np.bincount(g, v * t, m) for t in (gx * gx, gx * gy, gy * gy))
    with np.errstate(divide="ignore", invalid="ignore"):
        h = v * (j22[g] * gx * gx - 2 * j12[g] * gx * gy + j11[g] * gy * gy) / (j11 * j22 - j12 * j12)[g]
        gap_fix = (region_threshold(S, sol.sd_known, sol.dof, level, kdof, _floor_rad(sol)) - S)[g]
        return (v * r * r / (1.0 - h) ** 2 > SCREEN_LINEAR * (gap_fix + v * r * r)) | (h > SCREEN_LEVERAGE)
