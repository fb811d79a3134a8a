"""When a fix fails because of one bearing, say which line, and what to do.

For every fix that failed or came out inconsistent, dfkit solves it again with
each bearing in turn turned by 180 degrees and, with four or more bearings,
left out, all in one vectorised solve. A variant that gives a verified optimum
with every bearing in front and residuals that agree with the SD names the
line: "line 12 looks reversed by 180°" or "without line 12 the other bearings
agree". With three bearings, leaving one out always "agrees" (two lines always
cross), so only reversals are named there.
"""

from __future__ import annotations

import numpy as np

from dfkit import estimators, geodesy
from dfkit.locate.status import consistency
from dfkit.policy import INCONSISTENT_P, PLAUSIBLE_SD_DEG, WILD_SD

#: Statuses worth a second look.
EXAMINED = ("diverging", "behind", "on_station", "inconsistent", "no_convergence", "no_optimum", "collapsed",
            "unbounded")
#: Most fixes examined per run (each costs about 2n extra solves of one fix).
MAX_EXAMINED = 20_000


def one_bearing_hints(lat, lon, bearing, sd, g, counts, lines, status, method, robust_c, sd_floor=None):
    """Extra reason texts per fix index: {fix: [text, ...]}. ``sd_floor``: each bearing's SD floor [°]."""
    m = len(counts)
    out: dict[int, list[str]] = {}
    look = np.flatnonzero(np.isin(status, EXAMINED) & (counts >= 2))[:MAX_EXAMINED]
    if not len(look):
        return out
    robust = estimators.REGISTRY[method].robust
    order = np.argsort(g, kind="stable")
    starts = np.concatenate(([0], np.cumsum(counts)))
    floor = np.zeros(len(g)) if sd_floor is None else np.asarray(sd_floor, float)
    v_lat, v_lon, v_b, v_sd, v_fl, v_g = [], [], [], [], [], []
    meta = []      # (fix, kind, bearing index)
    k = 0
    for i in look:
        sel = order[starts[i]:starts[i + 1]]
        n = len(sel)
        if n == 2:
            if status[i] == "diverging":
                out.setdefault(i, []).append("if one of the two bearings was read from the back of the antenna, "
                                             "turn it by 180°; otherwise take a third bearing")
            continue
        kinds = [("flip", j) for j in sel] + ([("drop", j) for j in sel] if n >= 4 else [])
        for kind, j in kinds:
            keep = sel if kind == "flip" else sel[sel != j]
            b = bearing[keep].copy()
            if kind == "flip":
                b[keep == j] = (b[keep == j] + 180.0) % 360.0
            v_lat.append(lat[keep])
            v_lon.append(lon[keep])
            v_b.append(b)
            v_sd.append(sd[keep])
            v_fl.append(floor[keep])
            v_g.append(np.full(len(keep), k))
            meta.append((i, kind, j))
            k += 1
    if not meta:
        return out
    vg = np.concatenate(v_g)
    sol = estimators.solve(np.concatenate(v_lat), np.concatenate(v_lon), np.concatenate(v_b), vg, k,
                           np.concatenate(v_sd), method=method, robust_c=robust_c, sd_floor_deg=np.concatenate(v_fl))
    S, p = consistency(sol, vg, k)
    with np.errstate(invalid="ignore"):
        agree = sol.converged & ~sol.behind & np.where(
            sol.sd_known, ~(p < INCONSISTENT_P), ~(sol.sd_deg > PLAUSIBLE_SD_DEG))
        misfit = np.where(sol.sd_known, S / np.maximum(sol.dof, 1), sol.sd_deg ** 2)
    by_fix: dict[int, list[tuple[float, str, int, int]]] = {}
    for v, (i, kind, j) in enumerate(meta):
        if agree[v]:
            by_fix.setdefault(i, []).append((float(misfit[v]), kind, int(j), v))
    vorder = np.argsort(vg, kind="stable")
    vstart = np.concatenate(([0], np.cumsum(np.bincount(vg, minlength=k))))
    known_g = np.bincount(g, np.isfinite(sd).astype(float), m) == counts
    for i in look:
        found = by_fix.get(int(i), [])
        flips = sorted(x for x in found if x[1] == "flip")
        drops = sorted(x for x in found if x[1] == "drop")
        tip = ("check it" if robust and known_g[i] else
               "check it, or give the bearing SD (sheet sd, --sd, or a calibration) so a robust method can drop it"
               if robust else "check it, or use --method andrews, which drops such bearings")
        said = False
        if flips:
            _, _, j, v = flips[0]
            sel_v = vorder[vstart[v]:vstart[v + 1]]
            r_new = sol.residual_deg[sel_v]
            if np.all(np.abs(r_new) <= max(WILD_SD * float(sol.sd_deg[v]), 1e-9)) or len(flips) == 1:
                out.setdefault(int(i), []).append(
                    f"line {lines[j]} looks reversed by 180°: with line {lines[j]} turned by 180° "
                    f"({(bearing[j] + 180.0) % 360.0:.1f}°) the bearings agree; check it (read from the back of "
                    "the antenna?) and enter it turned")
                said = True
        if not said and drops:
            best = drops[0]
            second = drops[1][0] if len(drops) > 1 else np.inf
            if best[0] <= 0.25 * second:
                _, _, j, v = best
                out.setdefault(int(i), []).append(
                    f"without line {lines[j]} the other bearings agree: line {lines[j]} looks wild; {tip}")
                said = True
            else:
                # two lines either of which could be the wild one: the bearings cannot tell, so say both
                (_, _, j, v), (_, _, k, w) = drops[0], drops[1]
                _, _, apart = geodesy.inverse(sol.lat[v], sol.lon[v], sol.lat[w], sol.lon[w])
                out.setdefault(int(i), []).append(
                    f"without line {lines[j]}, or without line {lines[k]}, the other bearings agree, at two places "
                    f"{float(apart):.0f} m apart: one of the two lines looks wild and the bearings cannot tell which; "
                    "check both, or take another bearing")
                said = True
        if not said and counts[i] == 3 and status[i] in ("inconsistent", "behind", "on_station", "diverging"):
            out.setdefault(int(i), []).append(
                "with three bearings dfkit cannot tell which one is wild; take another bearing")
    return out
