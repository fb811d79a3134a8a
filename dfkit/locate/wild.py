"""Wild risk: could the fix rest on one wild bearing that its fit absorbed?

A wild bearing (a reflection, a misread, a bearing on the wrong signal) that passes near where the
other bearings cross is absorbed by the fit: every residual looks fine, the fix moves, and its region
no longer holds the transmitter. No residual test can see it when that bearing carries most of the fix
(in a linear model, its leverage h near 1: its studentised residual says nothing). What can be said is
how *likely* it is, given how often bearings are wild, and what it would cost the region.

For a fix solved from all its n >= 3 bearings with a known SD, the hypotheses "every bearing is good"
(H0) and "bearing k is wild, the others good" (Hk) are weighed by Bayes' rule (H. Jeffreys, *Theory of
Probability*, 3rd ed., Oxford, 1961, ch. V [from memory]):

* a wild bearing is equally likely in every direction, density 1 / (2 pi) (the uniform component of a
  contaminated model), and each bearing is wild with prior probability ``wild_share``, independently;
* the evidence of each hypothesis is its Gaussian likelihood integrated over the transmitter's position
  with a flat prior, by Laplace's method: exp(-S_min / 2) 2 pi / sqrt(det J), J the Fisher information
  of the position at the minimum of S. So

      BF_k = exp((S0 - Sk) / 2) sqrt(det J0 / det Jk) SD_k / sqrt(2 pi),

  SD_k the left-out bearing's SD [rad] (in a linear model, exp(T^2 / 2) SD_k / sqrt(2 pi (1 - h)), T
  its studentised residual: R. D. Cook & S. Weisberg, *Residuals and Influence in Regression*, 1982,
  ch. 2 [from memory]). The flat prior is bounded: the transmitter lies within twice the farthest
  observer's range of the fix (our choice), and each evidence counts only the share of its Gaussian inside
  that disc, so that two nearly parallel lines, or lines that meet far away, do not make an alternative's
  evidence boundless;
* an alternative is counted only when it is plausible by the fix's own rule: in front of its observers,
  within the prior's reach, and, with three or more bearings, its chi-square test passed at
  :data:`~dfkit.policy.INCONSISTENT_P`.

The chance of Hk is its posterior probability over H0 and every plausible Hk. What it costs the region:
under Hk the transmitter lies about Hk's answer with covariance Jk^-1; the share of that Gaussian outside
the fix's region (linearised about the region's centre, measured on fixed points) times the chance of
Hk, summed over k (within the disc), is the fix's **wild risk**: the chance that the region misses the transmitter because
one of its bearings is wild. :func:`dfkit.locate.rivals.find_rivals` calls a fix ``ambiguous`` when it
reaches 1 - level, the share of misses the region itself allows.

A fix whose robust fit dropped one bearing d is weighed too (:func:`_dropped_risk`): it is the answer of Hd, and
its rivals are H0 ("d is good after all") and each other Hk ("the fit dropped a good line and kept the wild one").

Hk's answer is solved in the fix's exact local plane (:mod:`dfkit.estimators.plane`: stations at their
geodesic distance and azimuth from the fix, each bearing a plane direction through its geodesic residual),
by Gauss-Newton steps from the linear leave-one-out answer; within a few kilometres of the fix the plane's
directions are within 1e-7 rad of the geodesic ones. All fixes and all their bearings at once, in chunks.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from dfkit.estimators.plane import wrap_pi
from dfkit.policy import INCONSISTENT_P
from dfkit.regions import chi2_sf

#: Gauss-Newton steps for each leave-one-out answer, from the linear one. On the 100,000-fix bench sheet two steps
#: and four flag the same fixes but for 5 of about 2,470 (the risks summed over the sheet 866.2 and 866.6), at
#: 0.85 against 1.4 s CPU; one step lost 2 % of the flags.
STEPS = 2

#: Gauss-Newton steps for the answers weighed for a fix whose fit dropped a line (few fixes): its answers lie
#: farther from the linear ones (H0's answer is not the fix). With 2, a simulated five-bearing fix (Andrews' fit
#: dropped a line 1.5 SD off and kept one 42° off) lost the answer without the wild line; with 6 it was found.
DROPPED_STEPS = 6

#: Halvings of a Gauss-Newton step that would raise S, for the answers of a fix whose fit dropped a line.
HALVINGS = 8

#: Pairs (left-out bearing, other bearing) per chunk: bounds the transient memory (about 200 bytes a pair, so
#: about 12 MB a chunk).
CHUNK_PAIRS = 60_000


def _normal_points(rings, directions):
    """Standard bivariate normal points, equally likely: ``rings`` radii at the chi-square(2) quantiles
    (i + 1/2) / rings, ``directions`` each; shape (2, rings * directions). The mass of a Gaussian inside a region
    is the share of these points, mapped, that fall in it. With 32: against 100,000 random draws on 300 random
    pairs of a Gaussian and an ellipse, an absolute error of 0.014 at the median and under 0.05 for 90 % (0.115
    at most; a reviewer's measurement, Dec 2026); the wild risk of a fix moved by 0.2 % or less for 99 % of the
    bench sheet's fixes against 256 points."""
    rho = np.sqrt(-2.0 * np.log1p(-(np.arange(rings) + 0.5) / rings))
    phi = (np.arange(directions) + 0.5) * (2.0 * np.pi / directions)
    return np.stack([np.outer(rho, np.cos(phi)).ravel(), np.outer(rho, np.sin(phi)).ravel()])


_POINTS = _normal_points(4, 8)
#: The farthest of _POINTS from the centre, in SDs.
RING_REACH = float(np.hypot(*_POINTS).max())


@dataclass
class WildRisk:
    """Per fix: ``risk`` (NaN where not weighed), and ``left_out`` the bearing that carries most of it (index
    into the bearings, -1 where none)."""

    risk: np.ndarray
    left_out: np.ndarray
    #: per fix whose fit dropped a line, a bearing k (index) whose rival "k is wild" fits within the chi-square
    #: rule but whose answer runs beyond the prior's reach (lines nearly parallel: a strip, not a point), so that
    #: its chance cannot be weighed; -1 where none
    strip: np.ndarray = None

    def __post_init__(self):
        if self.strip is None:
            self.strip = np.full(len(self.left_out), -1)


def wild_risk(g, m, sol, weigh, region, wild_share, lines=None) -> WildRisk:
    """The wild risk of the fixes ``weigh`` (bool, shape (m,)) solved with a known SD from every bearing.

    Parameters
    ----------
    g : ndarray, shape (N,)
        Fix of each bearing.
    sol : dfkit.estimators.Solution
        The fixes as solved (residuals, ranges and azimuths at the fix; weights).
    region : tuple of ndarray
        Per fix (S_min, bound, centre x, centre y [m]) of its likelihood-ratio region.
    wild_share : float
        Prior probability that a bearing is wild.
    lines : dfkit.locate.wildlines.WildLines, optional
        The sheet's own wild lines, which raise the prior's density where they are more common.

    Returns
    -------
    WildRisk
        NaN (and -1) for the fixes not weighed; :func:`dropped_risk` fills in those whose fit dropped a line.
    """
    used = sol.weight > 0
    whole = weigh & (np.bincount(g, used, minlength=m) == np.bincount(g, minlength=m))
    # with no prior share nothing is weighed
    out = WildRisk(np.where(whole & (wild_share > 0), 0.0, np.nan), np.full(m, -1))
    if wild_share > 0 and whole.any():
        _weigh_chunks(whole[g] & used, g, m, sol, region, _prior(wild_share, lines), out, _chunk_risk)
    return out


def dropped_risk(g, m, sol, weigh, region, wild_share, full_weight, starts, out, lines=None):
    """The wild risk of the fixes ``weigh`` (bool, shape (m,)) solved with a known SD from three or more of their
    bearings, leaving one or more out, four or more bearings a fix (:func:`_dropped_risk`), into ``out`` (a
    :class:`WildRisk`).

    ``full_weight`` (N,): each bearing's full weight 1 / SD^2 [1/rad^2] (the fit's weight of a dropped one is 0).
    ``starts`` = (x, y per bearing k: the answer of the fix without k; x, y per fix: the answer of all its
    bearings), in each fix's plane [m], NaN where none is known: where each alternative's steps start. dfkit passes
    the exact answers of :mod:`dfkit.locate.rivals` (Lenth's fit of each subset, from several starts): from a
    linear start about a far answer, Gauss-Newton steps can run away from a minimum that exists. ``lines``: as
    :func:`wild_risk`'s.
    """
    used = sol.weight > 0
    counts = np.bincount(g, minlength=m)
    n_used = np.bincount(g, used, minlength=m)
    some_out = weigh & (n_used < counts) & (n_used >= 3) & (counts >= 4)
    if wild_share <= 0 or not some_out.any():
        return out
    out.risk[some_out], out.left_out[some_out] = 0.0, -1
    _weigh_chunks(some_out[g], g, m, sol, region, _prior(wild_share, lines), out, _dropped_risk, full_weight,
                  *starts)
    return out


@dataclass(frozen=True)
class _Prior:
    """Log prior odds of a bearing being wild (``odds``), and the sheet's wild lines (``lines``, or None) that
    raise them at some misses."""

    odds: float
    lines: object = None

    def at(self, miss_rad):
        """The log prior odds, with the wild line's density against the uniform one's, at each miss [rad] of the
        wild line from its answer."""
        return self.odds if self.lines is None else self.odds + self.lines.log_raise(miss_rad)


def _prior(wild_share, lines=None):
    """The prior of a bearing being wild (:class:`_Prior`)."""
    return _Prior(float(np.log(wild_share / (1.0 - wild_share))), lines if lines is not None and lines.raises
                  else None)


def _weigh_chunks(take, g, m, sol, region, prior, out, chunk_risk, *extra):
    """Run ``chunk_risk`` over the bearings ``take`` (whole fixes) in chunks of fixes of one size."""
    sel = np.flatnonzero(take)
    if not len(sel):
        return
    n_of = np.bincount(g[sel], minlength=m)
    # bearings by (number of bearings, fix): the fixes of each size lie together, so that a chunk of whole fixes
    # of one size is a block of rows of equal length (sums along rows instead of grouped sums), and every array
    # but the answers lives one chunk at a time
    order = sel[np.lexsort((g[sel], n_of[g[sel]]))]
    del sel
    for lo, hi, n in _chunks(n_of[g[order]]):
        chunk_risk(order[lo:hi], n, g, sol, region, prior, out, *extra)


def _chunk_risk(idx, n, g, sol, region, prior, out):
    """The wild risk of the fixes of the bearings ``idx`` (whole fixes of n bearings each, fix by fix), into
    ``out``."""
    fid = g[idx[::n]]
    nf = len(fid)
    rows = lambda a: a.reshape(nf, n)  # noqa: E731
    v = sol.region_weight[idx] / sol.weight[idx]              # full weights 1 / SD^2 [1/rad^2]
    d = sol.range_m[idx]
    az = np.radians(sol.azimuth_from_fix_deg[idx])
    sx, sy = d * np.sin(az), d * np.cos(az)                   # stations in the fix's plane
    phi = wrap_pi(np.arctan2(-sx, -sy) + np.radians(sol.residual_deg[idx]))   # each bearing's plane direction
    reach = 2.0 * rows(d).max(1)
    del d, az
    zero = np.zeros(nf)
    # H0: the minimum of S with full weights (one Gauss-Newton step from the fix: the fix itself for Lenth's)
    s0, _, _, (j11, j12, j22), _ = _minimum(None, nf, v, sx, sy, phi, zero, zero, row=n)
    det0 = j11 * j22 - j12 * j12
    j_reg = _information_rows(n, sol.region_weight[idx], sx, sy)
    x0, y0 = _linear_start(n, (j11, j12, j22), v, sx, sy, phi)
    s_min, bound, cx, cy = region
    fixes = (s0, det0, reach, j_reg, s_min[fid], bound[fid], cx[fid], cy[fid])
    k, i = _pairs(len(idx), n)
    log_odds, lost, _ = _left_out(k, i, n - 1, np.repeat(np.arange(nf), n), v, sx, sy, phi, x0, y0, prior,
                                          fixes)
    with np.errstate(over="ignore", invalid="ignore"):
        odds = rows(np.where(np.isfinite(log_odds), np.exp(np.minimum(log_odds, 700.0)), 0.0))
        chance = odds / (1.0 + _rows_added(odds))[:, None]
    share = chance * rows(lost)
    out.risk[fid] = _rows_added(share)
    # per fix, the bearing with the largest share (the first of equals)
    top = np.argmax(share, axis=1)
    at = np.arange(nf) * n + top
    has = share[np.arange(nf), top] > 0
    f = fid[has]
    out.left_out[f] = idx[at[has]]


def _dropped_risk(idx, n, g, sol, region, prior, out, full_weight, start_x, start_y, whole_x, whole_y):
    """The wild risk of the fixes of the bearings ``idx`` (whole fixes of n bearings each) whose fit left one
    bearing d out (or a set D of them), into ``out``.

    The fix is the answer of "d is wild" (Hd). Its rivals are "every bearing is good" (H0: the fit need not have
    dropped d) and "bearing k is wild" for each k != d (the fit dropped a good line and kept the wild one); where
    the fit dropped two or more lines, "only bearing k is wild" for every k, the dropped ones included, and the
    fix's own HD (each line of D wild: its prior odds and missing densities once per line) is weighed at the fix by
    Laplace's method with the lines it kept. They are
    weighed as in :func:`_chunk_risk`, against H0's evidence by Laplace's method at the minimum of S over all n
    bearings, which here is not the fix. Each answer's steps start at ``start_x``, ``start_y`` where given (else H0's
    at the fix, each Hk at its linear leave-one-out answer about H0's); H0's start at the fix too, and the lower S
    of the two is kept. Hd always counts (it is the answer given); a rival counts when it is plausible by the
    chi-square rule, or fits at least as well as Hd (when Hd itself fails the rule, a one-sided cut would
    favour it). The region is drawn for Hd, so Hd costs nothing; the risk is the chance of H0 and of each other
    Hk times the share of its Gaussian outside the region.
    """
    fid = g[idx[::n]]
    nf = len(fid)
    rows = lambda a: a.reshape(nf, n)  # noqa: E731
    w = sol.weight[idx]
    with np.errstate(divide="ignore", invalid="ignore"):
        v = np.where(w > 0, sol.region_weight[idx] / np.where(w > 0, w, 1.0), full_weight[idx])
    dropped = w <= 0
    single = np.repeat(_rows_added(rows(dropped.astype(float))) == 1, n)      # one dropped line in the fix
    own = dropped & single                    # the left-out bearing whose answer is the fix
    d = sol.range_m[idx]
    az = np.radians(sol.azimuth_from_fix_deg[idx])
    sx, sy = d * np.sin(az), d * np.cos(az)
    phi = wrap_pi(np.arctan2(-sx, -sy) + np.radians(sol.residual_deg[idx]))
    reach = 2.0 * rows(d).max(1)
    del d, az
    r_at = wrap_pi(phi - np.arctan2(-sx, -sy))               # residuals at the fix
    s_fix = _rows_added(rows(np.where(dropped, 0.0, v * r_at * r_at)))     # Hd's S, at its answer
    ex, ey = start_x[idx], start_y[idx]
    # H0: the minimum of S over all n bearings, from the fix and from the given start; the lower S is kept
    zero = np.zeros(nf)
    h0 = _minimum(None, nf, v, sx, sy, phi, zero, zero, steps=DROPPED_STEPS, row=n, settle=True)
    gx0, gy0 = whole_x[fid], whole_y[fid]
    given = np.isfinite(gx0) & np.isfinite(gy0)
    if given.any():
        h0 = _lower(h0, _minimum(None, nf, v, sx, sy, phi, np.where(given, gx0, 0.0), np.where(given, gy0, 0.0),
                                 steps=DROPPED_STEPS, row=n, settle=True), n)
    s0, hx, hy, J0, res0 = h0
    det0 = J0[0] * J0[2] - J0[1] * J0[1]
    # where H0's steps ran away (a line far off pulls them), H0 does not count and its terms at the fix serve as
    # the reference the odds are taken against (any finite one cancels)
    with np.errstate(invalid="ignore"):
        lost_h0 = ~(np.isfinite(s0) & np.isfinite(det0) & (det0 > 0) & np.isfinite(hx) & np.isfinite(hy))
    if lost_h0.any():
        at = _information_rows(n, v, sx, sy)
        s_at = _rows_added(rows(v * r_at * r_at))
        s0, hx, hy = np.where(lost_h0, s_at, s0), np.where(lost_h0, 0.0, hx), np.where(lost_h0, 0.0, hy)
        J0 = tuple(np.where(lost_h0, a, b) for a, b in zip(at, J0))
        det0 = J0[0] * J0[2] - J0[1] * J0[1]
        res0 = np.where(np.repeat(lost_h0, n), r_at, res0)
    j_reg = _information_rows(n, sol.region_weight[idx], sx, sy)
    # each Hk from its given start, else from the linear leave-one-out answer about H0's; Hd from the fix itself
    hxr, hyr = np.repeat(hx, n), np.repeat(hy, n)
    lx, ly = _linear_start(n, J0, v, sx - hxr, sy - hyr, phi)
    has = np.isfinite(ex) & np.isfinite(ey)
    x0 = np.where(own, 0.0, np.where(has, ex, lx + hxr))
    y0 = np.where(own, 0.0, np.where(has, ey, ly + hyr))
    also = (np.where(own, 0.0, lx + hxr), np.where(own, 0.0, ly + hyr)) if has.any() else None
    s_min, bound, cx, cy = region
    fixes = (s0, det0, reach, j_reg, s_min[fid], bound[fid], cx[fid], cy[fid])
    k, i = _pairs(len(idx), n)
    log_odds, lost, far = _left_out(k, i, n - 1, np.repeat(np.arange(nf), n), v, sx, sy, phi, x0, y0, prior,
                                    fixes, always=own, steps=DROPPED_STEPS, settle=True, at_least=s_fix,
                                    also=also)
    far = rows(far & ~own & ~np.isfinite(log_odds))
    strip = far.any(1)
    out.strip[fid[strip]] = idx[np.arange(nf)[strip] * n + np.argmax(far[strip], axis=1)]
    # H0's evidence inside the prior's disc, and its share outside the region
    area = (j_reg[0], j_reg[1], j_reg[2], (bound - s_min)[fid], cx[fid], cy[fid])
    in_disc0, in_both0 = inside_shares(hx, hy, J0, [_disc(reach), area])
    behind0 = rows(np.abs(res0) > np.pi / 2).any(1)
    with np.errstate(divide="ignore", invalid="ignore"):
        limit0 = np.fmax(_chi2_bound(n - 2), s_fix)
        ok0 = ~lost_h0 & ~behind0 & (det0 > 0) & (s0 <= limit0) & (in_disc0 > 0)
        lo0 = np.where(ok0, np.log(in_disc0), -np.inf)
        lost0 = np.where(in_disc0 > 0, 1.0 - in_both0 / in_disc0, 1.0)
    lo = rows(log_odds)
    lost = np.where(rows(own), 0.0, rows(lost))
    lod = _several_dropped(n, rows, dropped, single, v, sx, sy, s0, det0, s_fix, reach, prior, r_at)
    top = np.fmax(np.fmax(lo0, lo.max(1)), lod)
    fin = np.isfinite(top)
    top = np.where(fin, top, 0.0)
    with np.errstate(invalid="ignore"):
        p, p0 = np.exp(lo - top[:, None]), np.exp(lo0 - top)
        total = p0 + _rows_added(p) + np.exp(lod - top)         # HD costs nothing (0 where one line was dropped)
        share, share0 = p * lost / total[:, None], p0 * lost0 / total
    out.risk[fid] = np.where(fin, _rows_added(share) + share0, np.nan)
    # the hypothesis with the largest share: a bearing, or -2 for "every bearing is good"
    top_k = np.argmax(share, axis=1)
    best = share[np.arange(nf), top_k]
    pick = np.where(share0 > best, -2, idx[np.arange(nf) * n + top_k])
    has = fin & (np.fmax(share0, best) > 0)
    out.left_out[fid[has]] = pick[has]


def _several_dropped(n, rows, dropped, single, v, sx, sy, s0, det0, s_fix, reach, prior, r_at):
    """Per fix of a chunk, the log odds of HD (every line the fit dropped is wild) against H0 where it dropped two
    or more lines (-inf elsewhere: there Hd is one of the left-out answers): Laplace's method at the fix with the
    lines it kept, S there, and for each dropped line its prior odds and the density its Gaussian would have had,
    as in :func:`_left_out`."""
    nf = len(s0)
    lod = np.full(nf, -np.inf)
    many = ~rows(single)[:, 0]
    if not many.any():
        return lod
    kept_v = np.where(dropped, 0.0, v)
    jd = _information_rows(n, kept_v, sx, sy)
    det_d = jd[0] * jd[2] - jd[1] * jd[1]
    zero = np.zeros(nf)
    (in_disc,) = inside_shares(zero, zero, jd, [_disc(reach)])
    lines = rows(np.where(dropped, -0.5 * np.log(2.0 * np.pi * v) + prior.at(r_at), 0.0))
    with np.errstate(divide="ignore", invalid="ignore"):
        odds = (0.5 * (s0 - s_fix) + 0.5 * np.log(det0 / det_d) + _rows_added(lines) + np.log(in_disc))
    lod[many] = np.where(np.isfinite(odds[many]) & (det_d[many] > 0), odds[many], -np.inf)
    return lod


def _disc(reach):
    """The prior's disc about each fix, radius ``reach`` [m], as a form of :func:`inside_shares`."""
    one, zero = np.ones(len(reach)), np.zeros(len(reach))
    return one, zero, one, reach * reach, zero, zero


def _lower(a, b, n):
    """Of two results of :func:`_minimum` (rows of n terms), per row the one with the lower finite S, one with no
    line pointing away (more than 90° off) before one with."""
    def key(r):
        with np.errstate(invalid="ignore"):
            fine = np.isfinite(r[0]) & np.isfinite(r[1]) & np.isfinite(r[2])
            away = (np.abs(r[4]) > np.pi / 2).reshape(-1, n).any(1)
        return np.where(fine, r[0] + np.where(away, np.inf, 0.0), np.nan), fine
    ka, _ = key(a)
    kb, fine_b = key(b)
    with np.errstate(invalid="ignore"):
        take_b = fine_b & ~(ka <= kb) & ~(np.isinf(kb) & np.isfinite(a[0]) & (a[0] <= b[0]))
    pick = lambda x, y: np.where(take_b, y, x)  # noqa: E731
    return (pick(a[0], b[0]), pick(a[1], b[1]), pick(a[2], b[2]), tuple(pick(x, y) for x, y in zip(a[3], b[3])),
            np.where(np.repeat(take_b, n), b[4], a[4]))


def _chunks(n_bearings):
    """(lo, hi, n): ranges of the bearings (sorted by fix size, then fix) of whole fixes of n bearings each, about
    CHUNK_PAIRS pairs or fewer a range. ``n_bearings``: each bearing's fix size."""
    out = []
    edges = np.flatnonzero(np.r_[True, n_bearings[1:] != n_bearings[:-1], True]) if len(n_bearings) else []
    for lo, hi in zip(edges[:-1], edges[1:]):
        n = int(n_bearings[lo])
        step = max(n, CHUNK_PAIRS // max(n - 1, 1) // n * n)       # whole fixes
        out += [(int(a), int(min(a + step, hi)), n) for a in range(int(lo), int(hi), step)]
    return out


def _pairs(size, n):
    """For ``size`` bearings of fixes of n bearings each (fix by fix): every (left-out bearing k, other bearing i
    of its fix), k ascending, n - 1 pairs each."""
    others = np.array([[j for j in range(n) if j != o] for o in range(n)], np.int64).reshape(n, max(n - 1, 0))
    k = np.arange(size)
    i = (k - k % n)[:, None] + others[k % n]
    return np.repeat(k, n - 1), i.ravel()


def _minimum(gk, m, v, sx, sy, phi, x, y, steps=1, row=None, settle=False):
    """Gauss-Newton steps on S = sum v (phi - direction(x, y))^2 per group from (x, y).

    Groups are ``gk`` (m of them); or, with ``row``, consecutive runs of ``row`` terms (then gk is not used).
    Returns S after the last step as its linear prediction (S less the Gauss-Newton decrement: exact at a
    minimum), the point after it, and what the last step was taken with: the Fisher information (j11, j12, j22)
    and each term's residual [rad]. With ``settle``, S, the information and the residuals are those at the point
    after the last step: where the steps did not settle (lines that do not meet), the linear prediction can be far
    below any S the lines allow.
    """
    if row:
        add = lambda a: _rows_added(a.reshape(-1, row))  # noqa: E731
        spread = lambda a: np.repeat(a, row)  # noqa: E731
    else:
        add = lambda a: np.bincount(gk, a, m)  # noqa: E731
        spread = lambda a: a[gk]  # noqa: E731
    if settle:
        def s_at(px, py):
            r = wrap_pi(phi - np.arctan2(spread(px) - sx, spread(py) - sy))
            return add(v * r * r)

        s = s_at(x, y)
        for _ in range(steps):
            # each step halved until S falls (up to HALVINGS times): a full step can jump past an observer close to
            # the answer, where the directions turn fast, and run away
            _, nx, ny, _, _ = _minimum(gk, m, v, sx, sy, phi, x, y, steps=1, row=row)
            dx, dy = nx - x, ny - y
            t, taken = np.ones(len(s)), np.zeros(len(s), bool)
            for _ in range(HALVINGS):
                with np.errstate(invalid="ignore"):
                    s_try = s_at(x + t * dx, y + t * dy)
                    now = ~taken & (s_try < s)
                x, y, s = np.where(now, x + t * dx, x), np.where(now, y + t * dy, y), np.where(now, s_try, s)
                taken |= now
                if taken.all():
                    break
                t = np.where(taken, t, 0.5 * t)
        _, _, _, J, res = _minimum(gk, m, v, sx, sy, phi, x, y, steps=1, row=row)
        return s, x, y, J, res
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):   # a fix whose lines run away
        for step in range(steps):
            X, Y = spread(x) - sx, spread(y) - sy
            d2 = X * X + Y * Y
            gx, gy = Y / d2, -X / d2
            vx, vy = v * gx, v * gy
            j11, j12, j22 = add(vx * gx), add(vx * gy), add(vy * gy)
            res = wrap_pi(phi - np.arctan2(X, Y))
            b1, b2 = add(vx * res), add(vy * res)
            det = j11 * j22 - j12 * j12
            with np.errstate(divide="ignore", invalid="ignore"):
                dx, dy = (j22 * b1 - j12 * b2) / det, (j11 * b2 - j12 * b1) / det
                ok = np.isfinite(dx) & np.isfinite(dy)
            x, y = np.where(ok, x + dx, x), np.where(ok, y + dy, y)
        s = add(v * res * res)
        with np.errstate(invalid="ignore"):
            drop = np.where(ok, dx * b1 + dy * b2, 0.0)
        return np.fmax(s - drop, 0.0), x, y, (j11, j12, j22), res


def _rows_added(a):
    """Each row's sum, column by column (faster than a sum along short rows)."""
    out = a[:, 0].copy()
    for j in range(1, a.shape[1]):
        out += a[:, j]
    return out


@lru_cache(maxsize=None)
def _chi2_bound(dof):
    """Largest S whose chi-square p-value on ``dof`` (an integer) degrees of freedom is at least INCONSISTENT_P (inf
    for no degree of freedom), by bisection on :func:`dfkit.regions.chi2_sf`; remembered, as every chunk of fixes
    of one size asks it again."""
    d = int(dof)
    if d < 1:
        return np.inf
    lo, hi = 0.0, 10.0 * d + 100.0
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if chi2_sf(np.array([mid]), np.array([d]))[0] >= INCONSISTENT_P else (lo, mid)
    return lo


def _information_rows(n, v, sx, sy):
    """Fisher information (j11, j12, j22) at each fix (the plane's origin) of its n bearings, rows of equal length."""
    d2 = sx * sx + sy * sy
    gx, gy = -sy / d2, sx / d2
    return tuple(_rows_added((v * a).reshape(-1, n)) for a in (gx * gx, gx * gy, gy * gy))


def _linear_start(n, J, v, sx, sy, phi):
    """Each bearing's leave-one-out answer in a linear model about its fix (n bearings a fix, fix by fix): the fix
    moved by -J0^-1 g_k v_k r_k / (1 - h_k) (Cook & Weisberg, 1982, ch. 2 [from memory]) [m]."""
    j11, j12, j22 = (np.repeat(a, n) for a in J)
    d2 = sx * sx + sy * sy
    gx, gy = -sy / d2, sx / d2                                 # at the origin: X = -sx, Y = -sy
    res = wrap_pi(phi - np.arctan2(-sx, -sy))
    det = j11 * j22 - j12 * j12
    with np.errstate(divide="ignore", invalid="ignore"):
        h = v * (j22 * gx * gx - 2 * j12 * gx * gy + j11 * gy * gy) / det
        pull = v * res / (1.0 - h) / det
        x0 = -(j22 * gx - j12 * gy) * pull
        y0 = -(j11 * gy - j12 * gx) * pull
    return np.nan_to_num(x0), np.nan_to_num(y0)


def _left_out(k, i, row, f, v, sx, sy, phi, x0, y0, prior, fixes, always=None, steps=STEPS, settle=False,
              at_least=None, also=None):
    """For one chunk of bearings (whole fixes of row + 1 bearings; ``f`` their fixes) and its pairs (k, i) of
    chunk indices, ``row`` a bearing: per left-out bearing k, (log posterior odds of Hk against H0, share of Hk's
    position outside the fix's region). ``always`` (bool per bearing): the Hk counted whatever their fit or
    odds (the fix's own answer); ``settle``: as :func:`_minimum`'s; ``at_least`` (per fix of the chunk): an S
    that passes the chi-square rule whatever its bound; ``also`` (x, y per bearing): a second start for each answer's steps."""
    s0, det0, reach, j_reg, s_min, bound, cx, cy = fixes
    nb = len(f)
    # the answer after STEPS steps; its information and residuals are those of the last step's start, within a
    # step of it
    sk, xk, yk, (a11, a12, a22), res = _minimum(k, nb, v[i], sx[i], sy[i], phi[i], x0, y0, steps=steps, row=row,
                                                settle=settle)
    if also is not None:        # a second start: the lower S (with no line pointing away) is kept
        sk, xk, yk, (a11, a12, a22), res = _lower(
            (sk, xk, yk, (a11, a12, a22), res),
            _minimum(k, nb, v[i], sx[i], sy[i], phi[i], also[0], also[1], steps=steps, row=row, settle=True), row)
    detk = a11 * a22 - a12 * a12
    n_alt = np.full(nb, row)
    behind = (np.abs(res) > np.pi / 2).reshape(-1, row).any(1)
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        cut = _chi2_bound(row - 2)                          # one size a chunk: one bound
        limit = cut if at_least is None else np.fmax(cut, at_least[f])
        plausible = (n_alt >= 2) & ~behind & (detk > 0) & (sk <= limit)
        # the wild line's miss from its answer, where its density is taken
        miss = wrap_pi(phi - np.arctan2(xk - sx, yk - sy)) if prior.lines is not None else None
        log_odds = (0.5 * (s0[f] - sk) + 0.5 * np.log(det0[f] / detk) - 0.5 * np.log(2.0 * np.pi * v)
                    + prior.at(miss))
    # only chances above 1e-4 count (the disc below only lowers them)
    counted = plausible & (log_odds > np.log(1e-4))
    if always is not None:
        counted |= always & np.isfinite(log_odds)
    log_odds = np.where(counted, log_odds, -np.inf)
    with np.errstate(invalid="ignore", over="ignore"):
        # a rival that fits but whose steps ran beyond the reach (its information may have underflowed to 0)
        far = (n_alt >= 3) & ~behind & (sk <= limit) & ~(np.hypot(xk, yk) <= reach[f])
    lost = np.ones(nb)
    w = np.flatnonzero(np.isfinite(log_odds))
    if len(w):
        # the flat prior's disc and the fix's region, as shares of Hk's Gaussian: the evidence counts only the
        # part inside the disc, and the loss is the part of that outside the region
        fw = f[w]
        jk = (a11[w], a12[w], a22[w])
        region = (j_reg[0][fw], j_reg[1][fw], j_reg[2][fw], (bound - s_min)[fw], cx[fw], cy[fw])
        # the disc is tested only where the Gaussian reaches beyond it: its points lie within RING_REACH SDs of the
        # answer (_POINTS' outer ring), and its largest SD is at most sqrt(trace Jk^-1)
        with np.errstate(divide="ignore", invalid="ignore"):
            big_sd = np.sqrt((a11[w] + a22[w]) / (a11[w] * a22[w] - a12[w] ** 2))
            edge = ~(np.hypot(xk[w], yk[w]) + RING_REACH * big_sd < reach[fw])
        in_disc, in_both = np.ones(len(w)), np.ones(len(w))
        (in_both[~edge],) = inside_shares(xk[w][~edge], yk[w][~edge], [t[~edge] for t in jk],
                                          [[t[~edge] for t in region]])
        if edge.any():
            e = np.flatnonzero(edge)
            in_disc[e], in_both[e] = inside_shares(xk[w][e], yk[w][e], [t[e] for t in jk], [
                _disc(reach[fw][e]), [t[e] for t in region]])
        with np.errstate(divide="ignore", invalid="ignore"):
            log_odds[w] += np.log(in_disc)
            lost[w] = np.where(in_disc > 0, 1.0 - in_both / in_disc, 1.0)
    # two bearings left: their crossing's likelihood is far from Gaussian (the lines' strips widen with range),
    # so their evidence and loss come from a quadrature over the two bearings instead (_two_lines)
    two = np.flatnonzero(n_alt == 2)
    if len(two):
        first = np.searchsorted(k, two)
        i1, i2 = i[first], i[first + 1]
        ft = f[two]
        log_q, lost[two] = _two_lines(sx[i1], sy[i1], phi[i1], v[i1], sx[i2], sy[i2], phi[i2], v[i2], reach[ft],
                                      (j_reg[0][ft], j_reg[1][ft], j_reg[2][ft], (bound - s_min)[ft], cx[ft], cy[ft]))
        with np.errstate(divide="ignore", invalid="ignore"):
            # log BF = log(Q / 2 pi) - log E0, E0 by Laplace: exp(-S0/2) (2 pi)^(-3/2) / (s1 s2 sk) 2 pi / sqrt(det0)
            log_e0 = (-0.5 * s0[ft] - 0.5 * np.log(2.0 * np.pi) + 0.5 * np.log(v[two] * v[i1] * v[i2])
                      - 0.5 * np.log(det0[ft]))
            lo = log_q - np.log(2.0 * np.pi) - log_e0 + (prior.odds if miss is None else prior.at(miss[two]))
        counted = lo > np.log(1e-4)
        if always is not None:
            counted |= always[two]
        log_odds[two] = np.where(np.isfinite(lo) & counted, lo, -np.inf)
        far[two] = False                   # weighed by the quadrature, strip or not
    return log_odds, lost, far


#: Two bearings left: Gauss-Hermite nodes over the first bearing (probabilists', weights summing to 1), and
#: Gauss-Legendre nodes over the second along each first-bearing line.
_GH_U, _GH_W = np.polynomial.hermite_e.hermegauss(9)
_GH_W = _GH_W / _GH_W.sum()
_GL_X, _GL_W = np.polynomial.legendre.leggauss(16)
#: The second bearing is integrated over this many of its SDs either side of its reading (where the line lets it).
_WINDOW_SD = 6.0


def _two_lines(s1x, s1y, p1, v1, s2x, s2y, p2, v2, reach, region):
    """Evidence and loss of an explanation resting on two bearings, by quadrature (polar about the first station).

    The integral over the plane of the two bearings' likelihood, N(phi1 - b1(x)) N(phi2 - b2(x)) dx, in polar
    coordinates about station 1 (dx = t1 dt1 db1), is a Gauss-Hermite sum over b1 of integrals along each line
    b1; along it, b2 (the direction from station 2) is monotone, and t1 dt1 = t1 t2 / |sin(b1 - b2)| db2, so each
    is a Gauss-Legendre integral over the b2 the line sweeps inside the prior's disc (in front of both observers by
    construction), within _WINDOW_SD SDs of phi2. Nearly parallel lines, whose crossing runs far along them, are
    then integrated where they lie, not over a product grid that misses it. Returns (log of that integral; share of
    it outside the fix's region ``region`` = (j11, j12, j22, gap, centre x, centre y), linearised).
    """
    sd2 = 1.0 / np.sqrt(v2)
    a1 = p1[:, None] + _GH_U / np.sqrt(v1)[:, None]           # (N, 9) lines from station 1
    e1x, e1y = np.sin(a1), np.cos(a1)
    # where each line leaves the disc (station 1 lies inside it)
    pu = s1x[:, None] * e1x + s1y[:, None] * e1y
    tmax = -pu + np.sqrt(np.fmax(pu * pu - (s1x * s1x + s1y * s1y)[:, None] + (reach * reach)[:, None], 0.0))
    # the b2 it sweeps, as offsets from phi2: from station 1 (t1 = 0) to the disc's edge
    oa = np.broadcast_to(wrap_pi(np.arctan2((s1x - s2x)[:, None], (s1y - s2y)[:, None]) - p2[:, None]), a1.shape)
    bx, by = s1x[:, None] + tmax * e1x - s2x[:, None], s1y[:, None] + tmax * e1y - s2y[:, None]
    ob = oa + wrap_pi(np.arctan2(bx, by) - p2[:, None] - oa)
    w_ = (_WINDOW_SD * sd2)[:, None]
    lo, hi = np.fmax(np.fmin(oa, ob), -w_), np.fmin(np.fmax(oa, ob), w_)
    span = np.fmax(hi - lo, 0.0)
    o = 0.5 * (lo + hi)[..., None] + 0.5 * span[..., None] * _GL_X                  # (N, 9, 16) offsets
    a2 = p2[:, None, None] + o
    a1 = a1[..., None]
    s1, c1, s2, c2 = np.sin(a1), np.cos(a1), np.sin(a2), np.cos(a2)
    den = s1 * c2 - c1 * s2                                   # sin(a1 - a2)
    dx, dy = (s2x - s1x)[:, None, None], (s2y - s1y)[:, None, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        t1 = (dx * c2 - dy * s2) / den
        t2 = (dx * c1 - dy * s1) / den
        x, y = s1x[:, None, None] + t1 * s1, s1y[:, None, None] + t1 * c1
        jac = t1 * t2 / np.abs(den)
        dens = np.exp(-0.5 * (o / sd2[:, None, None]) ** 2) / (np.sqrt(2.0 * np.pi) * sd2[:, None, None])
        wq = _GH_W[None, :, None] * _GL_W * (0.5 * span)[..., None] * dens * jac
        keep = (t1 > 0) & (t2 > 0) & np.isfinite(wq) & (span[..., None] > 0)
        wq = np.where(keep, wq, 0.0).reshape(len(p1), -1)
        x, y = x.reshape(len(p1), -1), y.reshape(len(p1), -1)
        j11, j12, j22, gap, cx, cy = (t[:, None] for t in region)
        mx, my = x - cx, y - cy
        inside = j11 * mx * mx + 2.0 * j12 * mx * my + j22 * my * my <= gap
        total = wq.sum(1)
        lost = np.where(total > 0, 1.0 - np.where(inside, wq, 0.0).sum(1) / total, 1.0)
        return np.log(total), lost


def inside_shares(x, y, Jk, forms, points=None):
    """Shares of a Gaussian about (x, y) [m] with covariance Jk^-1 inside the first region of ``forms``, and
    inside all of them: each form (j11, j12, j22, gap, x0, y0) is {p : (p - p0)^T J (p - p0) <= gap}.

    With p = mu + L z (L L^T = Jk^-1, z the fixed points), each form is a quadratic in z: six numbers per
    Gaussian against six per point, one matrix product.
    """
    zx, zy = _POINTS if points is None else points
    basis = np.stack([np.ones_like(zx), zx, zy, zx * zx, zx * zy, zy * zy])
    a11, a12, a22 = Jk
    with np.errstate(divide="ignore", invalid="ignore"):
        det = a11 * a22 - a12 * a12
        l11 = np.sqrt(a22 / det)                  # Cholesky factor of Jk^-1 = [[a22, -a12], [-a12, a11]] / det
        l21 = (-a12 / det) / l11
        l22 = np.sqrt(np.fmax(a11 / det - l21 * l21, 0.0))
    inside = None
    shares = []
    for j11, j12, j22, gap, x0, y0 in forms:
        with np.errstate(invalid="ignore"):
            mx, my = x - x0, y - y0
            u1, u2 = j11 * mx + j12 * my, j12 * mx + j22 * my                # J mu
            b1, b2 = l11 * u1 + l21 * u2, l22 * u2                          # L^T J mu
            c11 = l11 * (j11 * l11 + j12 * l21) + l21 * (j12 * l11 + j22 * l21)
            c12 = l22 * (j12 * l11 + j22 * l21)
            c22 = l22 * j22 * l22
            coef = np.stack([mx * u1 + my * u2 - gap, 2.0 * b1, 2.0 * b2, c11, 2.0 * c12, c22], axis=1)
        fin = np.isfinite(coef).all(1)
        if fin.all():
            this = coef @ basis <= 0.0
        else:
            this = (np.where(fin[:, None], coef, 0.0) @ basis <= 0.0) & fin[:, None]
        inside = this if inside is None else inside & this
        shares.append(inside.mean(1))
    return shares
