"""When a fix fails because of one bearing, say which line, and what to do.

For every fix that failed or came out inconsistent, dfkit solves it again with
each bearing in turn turned by 180 degrees and left out, all in one vectorised
solve. A variant that gives a verified optimum with every bearing in front and
residuals that agree with the SD is an *explanation*: "line 12 is reversed" or
"line 12 is wild".

Two explanations can name different lines: with three bearings, turning one by
180 degrees and leaving another out can both fit (two lines always cross). They are
weighed by their likelihoods: the turned bearing's normal density against a wild
bearing's density, uniform on the circle (1/(2 pi) per radian); with the SD
estimated, profile likelihoods with the SD no smaller than its floor
(:mod:`dfkit.locate.resolution`). A line is said to be reversed only when that
explanation is at least :data:`CLEAR_EVIDENCE` times as likely as each other one
tried: another line wild (that line too, with a known SD), and every bearing right as read (at the fix's own answer,
or with the transmitter beside one of the observers, where that observer's bearing
fits whatever it says and the others may pass close). Otherwise the hint
says both ("either line 2 is reversed, or line 3 is wild") with where each puts the
transmitter. With three bearings leaving one out always "agrees", so a wild line
alone is never named there.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from dfkit import estimators, geodesy
from dfkit.locate.fixes import status_in
from dfkit.locate.status import consistency
from dfkit.policy import INCONSISTENT_P, PLAUSIBLE_SD_DEG, WILD_SD

#: Statuses worth a second look.
EXAMINED = ("diverging", "behind", "on_station", "inconsistent", "no_convergence", "no_optimum", "collapsed",
            "unbounded")
#: Most fixes examined per run (each costs about 2n extra solves of one fix).
MAX_EXAMINED = 20_000
#: A line is said to be reversed only when turning it explains the bearings at least this many times better
#: (likelihood ratio) than leaving out any other line as wild. Royall (R. Royall, *Statistical Evidence*,
#: Chapman & Hall, 1997 [from memory]) calls a ratio of 8 "fairly strong" evidence; measured in
#: benchmarks/reversals.py (DEVELOPERS.md): false single-line hints on clean fixes and hits on real reversals.
CLEAR_EVIDENCE = 8.0


def one_bearing_hints(lat, lon, bearing, sd, g, counts, lines, status, method, robust_c, sd_floor=None, written=None,
                      *, fit):
    """Extra reason texts per fix index: {fix: [text, ...]}. ``sd_floor``: each bearing's SD floor [°];
    ``written``: each bearing as the sheet wrote it, (value, unit, north) arrays, so that a turned bearing is
    said as the user would enter it (:func:`turned_text`); ``fit``: the fixes' own solution (bearings as read),
    whose likelihood a turned bearing is weighed against."""
    m = len(counts)
    out: dict[int, list[str]] = {}
    look = np.flatnonzero(status_in(status, EXAMINED) & (counts >= 2))[:MAX_EXAMINED]
    if not len(look):
        return out
    robust = estimators.REGISTRY[method].robust
    order = np.argsort(g, kind="stable")
    starts = np.concatenate(([0], np.cumsum(counts)))
    floor = np.zeros(len(g)) if sd_floor is None else np.asarray(sd_floor, float)
    known_g = np.bincount(g, np.isfinite(sd).astype(float), m) == counts
    items = []     # (fix, kind, bearing index, the fix's bearings)
    for i in look:
        sel = order[starts[i]:starts[i + 1]]
        if len(sel) == 2:
            if status[i] == "diverging":
                out.setdefault(i, []).append("if one of the two bearings was read from the back of the antenna, "
                                             "turn it by 180°; otherwise take a third bearing")
            continue
        # each line turned, each line left out (with three bearings never named alone, but it may explain the
        # fix as well as a turn); the bearings as read are the fixes' own fit (``fit``)
        items += [(i, "flip", j, sel) for j in sel] + [(i, "drop", j, sel) for j in sel]
    if not items:
        return out
    meta = [(i, kind, j) for i, kind, j, _ in items]
    k = len(items)
    sol, vg, v_sd = _solve_variants(items, lat, lon, bearing, sd, floor, method, robust_c)
    S, p = consistency(sol, vg, k)
    with np.errstate(invalid="ignore"):
        agree = sol.converged & ~sol.behind & np.where(
            sol.sd_known, ~(p < INCONSISTENT_P), ~(sol.sd_deg > PLAUSIBLE_SD_DEG))
        misfit = np.where(sol.sd_known, S / np.maximum(sol.dof, 1), sol.sd_deg ** 2)
    deviance = _deviance(sol, vg, k, v_sd, np.array([kind == "drop" for _, kind, _ in meta]))
    by_fix: dict[int, list[tuple[float, str, int, int]]] = {}
    for v, (i, kind, j) in enumerate(meta):
        if agree[v]:
            by_fix.setdefault(int(i), []).append((float(misfit[v]), kind, int(j), v))
    vorder = np.argsort(vg, kind="stable")
    vstart = np.concatenate(([0], np.cumsum(np.bincount(vg, minlength=k))))
    # the best turn of each fix, when it makes the bearings agree
    best_flip = {}
    for i, found in by_fix.items():
        flips = sorted(x for x in found if x[1] == "flip")
        if flips:
            _, _, j, v = flips[0]
            r_new = sol.residual_deg[vorder[vstart[v]:vstart[v + 1]]]
            if np.all(np.abs(r_new) <= max(WILD_SD * float(sol.sd_deg[v]), 1e-9)) or len(flips) == 1:
                best_flip[i] = (j, v)
    beside = _beside_an_observer(best_flip, lat, lon, bearing, sd, floor, order, starts, known_g)
    as_read = _deviance_as_read(fit, g, m, sd, sorted(best_flip)) if best_flip else None
    for i in look:
        i = int(i)
        found = by_fix.get(i, [])
        drops = sorted(x for x in found if x[1] == "drop")
        tip = ("check it" if robust and known_g[i] else
               "check it, or give the bearing SD (sheet sd, --sd, or a calibration) so a robust method can drop it"
               if robust else "check it, or use --method andrews, which drops such bearings")
        if i in best_flip:
            j, v = best_flip[i]
            # with a known SD the turned line itself wild is a rival too: a line 160° off with SD 5° still misses by
            # 20° turned (with the SD estimated, the profile likelihood of one bearing fewer is biased upward, and
            # real reversals lost their single-line hint half the time: benchmarks/reversals.py)
            rivals = [(deviance[x[3]], "wild", x[3], x[2]) for x in drops if x[2] != j or known_g[i]]
            rivals += [(float(as_read[i]), "as read", -1, -1), (beside[i][0], "beside", -1, beside[i][1])]
            out.setdefault(i, []).append(_reversal_text(j, v, rivals, deviance, sol, lines, bearing, written))
        elif counts[i] >= 4 and drops:
            best = drops[0]
            second = drops[1][0] if len(drops) > 1 else np.inf
            if best[0] <= 0.25 * second:
                _, _, j, v = best
                out.setdefault(i, []).append(
                    f"without line {lines[j]} the other bearings agree: line {lines[j]} looks wild; {tip}")
            else:
                # two lines either of which could be the wild one: the bearings cannot tell, so say both
                (_, _, j, v), (_, _, kk, w) = drops[0], drops[1]
                _, _, apart = geodesy.inverse(sol.lat[v], sol.lon[v], sol.lat[w], sol.lon[w])
                out.setdefault(i, []).append(
                    f"without line {lines[j]}, or without line {lines[kk]}, the other bearings agree, at two places "
                    f"{float(apart):.0f} m apart: one of the two lines looks wild and the bearings cannot tell which; "
                    "check both, or take another bearing")
        elif counts[i] == 3 and status[i] in ("inconsistent", "behind", "on_station", "diverging"):
            out.setdefault(i, []).append(
                "with three bearings dfkit cannot tell which one is wild; take another bearing")
    return out


def _solve_variants(items, lat, lon, bearing, sd, floor, method, robust_c):
    """Solve the variants ``items`` (fix, kind, bearing index, the fix's bearings; kind "flip": that bearing
    turned by 180 degrees, "drop": without it) in one vectorised call: the solution, each
    variant bearing's variant number and SD."""
    v_lat, v_lon, v_b, v_sd, v_fl, v_g = [], [], [], [], [], []
    for k, (_, kind, j, sel) in enumerate(items):
        keep = sel[sel != j] if kind == "drop" else sel
        b = bearing[keep].copy()
        if kind == "flip":
            b[keep == j] = (b[keep == j] + 180.0) % 360.0
        v_lat.append(lat[keep])
        v_lon.append(lon[keep])
        v_b.append(b)
        v_sd.append(sd[keep])
        v_fl.append(floor[keep])
        v_g.append(np.full(len(keep), k))
    vg = np.concatenate(v_g)
    v_sd = np.concatenate(v_sd)
    sol = estimators.solve(np.concatenate(v_lat), np.concatenate(v_lon), np.concatenate(v_b), vg, len(items),
                           v_sd, method=method, robust_c=robust_c, sd_floor_deg=np.concatenate(v_fl))
    return sol, vg, v_sd


def _deviance(sol, vg, k, sd_deg, wild):
    """-2 log likelihood of each variant's explanation at its answer: its bearings normal about the answer
    (all at full weight), and, for a variant that leaves a bearing out (``wild``), that bearing uniform on the
    circle (density 1/(2 pi) per radian). With the SD estimated, the profile likelihood, the SD no smaller than
    its floor."""
    r = np.radians(sol.residual_deg)
    n = np.bincount(vg, minlength=k).astype(float)
    floor = np.radians(np.zeros(k) if sol.sd_floor_deg is None else sol.sd_floor_deg)
    dev = _normal_deviance(r, vg, k, n, sd_deg, sol.sd_known, floor)
    return np.where(np.isfinite(dev), dev, np.inf) + np.where(wild, 2.0 * np.log(2 * np.pi), 0.0)


def _deviance_as_read(fit, g, m, sd_deg, fixes):
    """:func:`_deviance` of the bearings as read at the fixes' own answers (``fit``), for the fixes ``fixes`` only:
    {fix: deviance}. Each fix's sums run over its own bearings in the sheet's order, as over the whole sheet (the
    same values; only the fixes with a turned bearing to weigh need it)."""
    wanted = np.asarray(fixes, dtype=np.int64)
    slot = np.full(m, -1)
    slot[wanted] = np.arange(len(wanted))
    rows = np.flatnonzero(slot[g] >= 0)
    floor = None if fit.sd_floor_deg is None else np.asarray(fit.sd_floor_deg)[wanted]
    sub = _AsRead(residual_deg=np.asarray(fit.residual_deg)[rows], sd_floor_deg=floor,
                  sd_known=np.asarray(fit.sd_known)[wanted])
    dev = _deviance(sub, slot[g[rows]], len(wanted), np.asarray(sd_deg)[rows], np.zeros(len(wanted), bool))
    return dict(zip(wanted.tolist(), dev))


@dataclass(frozen=True)
class _AsRead:
    """The parts of a solution :func:`_deviance` reads, for some of its fixes."""

    residual_deg: np.ndarray
    sd_floor_deg: np.ndarray | None
    sd_known: np.ndarray


def _normal_deviance(r, owner, k, n, sd_deg, known, floor_rad):
    """-2 log likelihood of residuals ``r`` [rad] grouped by ``owner``, each normal with its SD (``known`` per
    group) or, estimated, with the profile SD sqrt(S / n) held at least at ``floor_rad``."""
    with np.errstate(divide="ignore", invalid="ignore"):
        sd_rad = np.radians(sd_deg)
        S_known = np.bincount(owner, np.where(known[owner], (r / sd_rad) ** 2 + np.log(2 * np.pi * sd_rad ** 2),
                                              0.0), k)
        S_all = np.bincount(owner, r * r, k)
        s2 = np.maximum(np.fmax(S_all / n, floor_rad ** 2), 1e-300)
        S_est = n * np.log(s2) + S_all / s2 + n * np.log(2 * np.pi)
    return np.where(known, S_known, S_est)


def turned_text(j, bearing, written=None):
    """Bearing ``j`` turned by a half circle as the user would enter it: the value the sheet wrote plus half a
    circle in the row's own unit, with its north (``enter 351° instead of 171° (magnetic north)``: the old value is
    named as what to replace, not as an amount to turn by); the true bearing turned when the written form is not
    known."""
    from dfkit.conventions import FULL_CIRCLE

    if written is None:
        return (f"enter {_angle((bearing[j] + 180.0) % 360.0, 'deg')} instead of {_angle(bearing[j] % 360.0, 'deg')} "
                "(true north)")
    value, unit, north = (float(written[0][j]), str(written[1][j]), str(written[2][j]))
    full = FULL_CIRCLE.get(unit, 360.0)
    turned = (value + full / 2.0) % full
    return f"enter {_angle(turned, unit)} instead of {_angle(value, unit)} ({north} north)"


def _angle(v, unit):
    text = f"{v:.0f}" if abs(v - round(v)) < 1e-9 else f"{v:.6f}".rstrip("0").rstrip(".")
    return text + {"deg": "°", "mil": " mil", "grad": " grad"}.get(unit, "°")


def _reversal_text(j, v, rivals, deviance, sol, lines, bearing, written=None):
    """"line L looks reversed" when turning it explains the bearings CLEAR_EVIDENCE times better than each rival
    explanation (deviance, kind, variant, line index): another line wild ("wild"), every bearing as read at the
    fix's own answer ("as read") or beside an observer ("beside"); else the rivals that come close too."""
    enter = turned_text(j, bearing, written)
    margin = 2.0 * np.log(CLEAR_EVIDENCE)
    close = sorted(x for x in rivals if np.isfinite(x[0]) and x[0] - deviance[v] < margin)
    if not close:
        return (f"line {lines[j]} looks reversed by 180°: with line {lines[j]} turned by 180° the bearings agree; "
                f"check it (read from the back of the antenna?) and {enter}")
    said, check = [], {lines[j]}
    for _, kind, w, jj in close:
        if kind == "wild":
            _, _, apart = geodesy.inverse(sol.lat[v], sol.lon[v], sol.lat[w], sol.lon[w])
            said.append(f"line {lines[jj]} is wild (without it the others meet at {sol.lat[w]:.5f}, "
                        f"{sol.lon[w]:.5f}, {float(apart):.0f} m away)")
            check.add(lines[jj])
        elif kind == "beside" and not any("as read" in t for t in said):
            said.append(f"every bearing is right as read and the transmitter is close to the observer at line "
                        f"{lines[jj]}, where the other bearings pass")
        elif kind == "as read" and not any("as read" in t for t in said):
            said.append("every bearing is right as read (they fit nearly as well without turning any)")
    lines_ = sorted(check)
    what = f"line {lines_[0]}" if len(lines_) == 1 else "lines " + " and ".join(str(x) for x in lines_)
    return (f"either line {lines[j]} is reversed by 180° (with it turned the bearings agree at "
            f"{sol.lat[v]:.5f}, {sol.lon[v]:.5f}; to turn it, {enter}), or " + ", or ".join(said)
            + f"; the bearings cannot tell which: check {what}, or take another bearing")


def _beside_an_observer(fixes_, lat, lon, bearing, sd, floor, order, starts, known_g):
    """For each fix of ``fixes_``: -2 log likelihood (as :func:`_deviance`) of "every bearing as read, the
    transmitter beside one of the observers" at its most likely observer, and that observer's bearing index.
    Beside its own station a bearing fits whatever it says; the others are judged by their residuals at that
    station: this is the supremum of the likelihood near it, which a fit creeping onto a station approaches."""
    if not len(fixes_):
        return {}
    fixes = np.asarray(list(fixes_), np.int64)
    members = [order[starts[i]:starts[i + 1]] for i in fixes]
    # one group per (fix, station): every bearing of the fix, judged at that station
    groups = [(q, st, mem) for q, mem in enumerate(members) for st in mem]
    owner = np.concatenate([np.full(len(mem), t) for t, (_, _, mem) in enumerate(groups)])
    b_idx = np.concatenate([mem for _, _, mem in groups])
    at = np.array([st for _, st, _ in groups], np.int64)
    fix_of = np.array([q for q, _, _ in groups], np.int64)
    st = at[owner]
    az, _, _ = geodesy.inverse(lat[b_idx], lon[b_idx], lat[st], lon[st])
    r = np.where(b_idx == st, 0.0, np.radians(((bearing[b_idx] - az + 180.0) % 360.0) - 180.0))
    K = len(groups)
    dev = _normal_deviance(r, owner, K, np.bincount(owner, minlength=K).astype(float), sd[b_idx],
                           known_g[fixes][fix_of], np.radians(floor[at]))
    dev = np.where(np.isfinite(dev), dev, np.inf)
    out = {}
    for t in range(K):
        i = int(fixes[fix_of[t]])
        if i not in out or dev[t] < out[i][0]:
            out[i] = (float(dev[t]), int(at[t]))
    return out
