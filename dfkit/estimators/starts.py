"""Starting points that do not inherit a wild bearing.

The least-squares point of all bearings is pulled towards any wild one, and an
iteration started there can stay with it. So every fix gets several candidate
starts in its first plane, and the one the method itself likes best is used:

* the least-squares point of all bearings;
* the crossing of every pair of bearing lines that lies in front of both
  stations (all pairs up to :data:`MAX_ALL_PAIRS` bearings, neighbouring pairs
  beyond); a crossing of two good bearings is free of the wild one;
* with four or more bearings, the least-squares point without each bearing in turn.

Candidates are scored by the method's own objective (Lenth's likelihood, or the
M-estimator with a known SD). With the SD unknown a robust method scores them by
a trimmed sum of squared residuals (the worst bearing left out, see
:func:`dfkit.estimators.robust.trim_count`), in the spirit of least trimmed
squares (P. J. Rousseeuw, "Least median of squares regression", J. Amer.
Statist. Assoc. 79(388), 871-880, 1984 [from memory]).
"""

from __future__ import annotations

import numpy as np

from dfkit.estimators import lsq
from dfkit.estimators.groups import expand, group_min, gsum, solve2, top_in_group
from dfkit.estimators.plane import residuals
from dfkit.estimators.robust import trimmed_sum

#: Up to this many bearings every pair's crossing is a candidate; beyond, each bearing with its next four.
MAX_ALL_PAIRS = 8
#: Candidates closer to a station than this fraction of the stations' spread are not used as starts.
NEAR_STATION = 0.05
#: Lines closer to parallel than this do not give a crossing candidate [rad] (0.5 degrees).
MIN_PAIR_ANGLE = np.radians(0.5)


def _pairs(n):
    if n <= MAX_ALL_PAIRS:
        return np.triu_indices(n, 1)
    i = np.repeat(np.arange(n), 4)
    j = (i + np.tile(np.arange(1, 5), n)) % n
    return i, j


def candidates(geo, g, m, counts, active):
    """Candidate starts in the first plane: (fix index, x, y) arrays."""
    order = np.argsort(g, kind="stable")
    offsets = np.concatenate(([0], np.cumsum(counts)[:-1]))
    out_g, out_x, out_y = [], [], []
    ones = np.ones(len(g))
    sums = lsq.line_sums(g, m, geo.sx, geo.sy, geo.sp, geo.cp, ones)
    x, y, ratio = solve2(*sums)
    ok = active & np.isfinite(x) & np.isfinite(y) & (ratio > 1e-12)
    out_g.append(np.flatnonzero(ok))
    out_x.append(x[ok])
    out_y.append(y[ok])
    ux, uy = geo.sp, geo.cp
    for n in np.unique(counts[active]):
        fixes = np.flatnonzero(active & (counts == n))
        i, j = _pairs(int(n))
        bi = order[offsets[fixes][:, None] + i[None, :]].ravel()
        bj = order[offsets[fixes][:, None] + j[None, :]].ravel()
        cross = ux[bi] * uy[bj] - uy[bi] * ux[bj]
        ex, ey = geo.sx[bj] - geo.sx[bi], geo.sy[bj] - geo.sy[bi]
        with np.errstate(divide="ignore", invalid="ignore"):
            ti = (ex * uy[bj] - ey * ux[bj]) / cross
            tj = (ex * uy[bi] - ey * ux[bi]) / cross
        good = (np.abs(cross) > np.sin(MIN_PAIR_ANGLE)) & (ti > 0) & (tj > 0)
        out_g.append(g[bi][good])
        out_x.append((geo.sx[bi] + ti * ux[bi])[good])
        out_y.append((geo.sy[bi] + ti * uy[bi])[good])
    loo = active[g] & (counts[g] >= 4)
    if loo.any():
        own = lsq.per_bearing_terms(geo.sx[loo], geo.sy[loo], geo.sp[loo], geo.cp[loo], ones[loo])
        gl = g[loo]
        lx, ly, lr = solve2(*(s[gl] - t for s, t in zip(sums, own)))
        good = np.isfinite(lx) & np.isfinite(ly) & (lr > 1e-12)
        out_g.append(gl[good])
        out_x.append(lx[good])
        out_y.append(ly[good])
    return np.concatenate(out_g), np.concatenate(out_x), np.concatenate(out_y)


def choose(geo, g, m, counts, active, score, spread, k=1):
    """The ``k`` best candidate starts of each fix, best first.

    Parameters
    ----------
    score : callable
        ``score(owner, member, r, n_candidates)`` -> score per candidate (lower is better),
        given the residuals ``r`` [rad] of every bearing ``member`` of the candidate's fix at
        candidate ``owner``.
    spread : ndarray
        Largest distance of a station from the plane's centre, per fix [m]: candidates closer than
        :data:`NEAR_STATION` times this to a station are left out (the likelihood of a bearing grows
        without bound towards its own station).

    Returns
    -------
    x, y : ndarray, shape (m, k)
        Starts in the first plane [m]; NaN where a fix has fewer candidates.
    """
    cg, cx, cy = candidates(geo, g, m, counts, active)
    order = np.argsort(g, kind="stable")
    offsets = np.concatenate(([0], np.cumsum(counts)[:-1]))
    owner, member = expand(counts[cg], offsets[cg], order)
    r, dx, dy, d2 = residuals(geo.sp[member], geo.cp[member], geo.sx[member], geo.sy[member], cx[owner], cy[owner])
    s = score(owner, member, r, len(cg))
    near = group_min(owner, d2, len(cg)) < (NEAR_STATION * spread[cg]) ** 2
    s = np.where(near, np.inf, s)
    best = top_in_group(cg, s, m, k)
    has = best >= 0
    x = np.where(has, cx[np.maximum(best, 0)], np.nan)
    y = np.where(has, cy[np.maximum(best, 0)], np.nan)
    return x, y


def objective_score(objective, w, s, c):
    """Score candidates by the method's objective sum f(r)."""
    def score(owner, member, r, n):
        return gsum(owner, objective(r, w[member], s[member], c), n)
    return score


def trimmed_score(w, counts, g):
    """Score candidates by the trimmed sum of squared residuals (SD unknown, robust methods)."""
    def score(owner, member, r, n):
        cnt = counts[g[member]]
        per_owner = np.zeros(n, np.int64)
        per_owner[owner] = cnt
        u = 2.0 * np.sin(0.5 * r)
        return trimmed_sum(owner, w[member] * u * u, per_owner, n)
    return score
