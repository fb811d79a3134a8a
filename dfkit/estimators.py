"""Bearings to positions: the estimators, vectorised over many fixes at once.

Every fix is solved in its own local plane, the ellipsoidal azimuthal
equidistant projection centred at the *current* estimate (see
:mod:`dfkit.geodesy`). In that plane a station S_i lies at its exact geodesic
distance and azimuth from the estimate, and the observed bearing theta_i (true,
at the station) becomes the plane direction ``phi_i = r_i + mu_i``, where
``r_i = theta_i - alpha_i`` is the residual against the geodesic forward
azimuth alpha_i from the station to the estimate, and mu_i the plane direction
from the station to the centre. The fix is solved in that plane (cheap numpy
iterations, no geodesics), the answer is carried back to the ellipsoid exactly
(direct geodesic problem), the plane is re-centred there, and so on until the
planar answer lies at the centre (typically two re-centrings). At that point the
planar residuals *are* the geodesic residuals, so the answer carries no
projection error over any baseline (tested from 200 m to thousands of km,
across the antimeridian and near the poles).

The estimators are defined by what they optimise; how the optimum is found is
an implementation matter checked against general optimisers in the tests:
closed-form least squares for the start, Newton steps on sum w cos(r) for
``mle`` (scoring steps far from the optimum), iteratively re-weighted scoring
steps for the robust methods, and re-weighted least squares for ``stansfield``.
A step that turns back on the previous one is halved, so no fix is left
oscillating.

Estimators (``method``):

``lsq``
    Least squares on the perpendicular distances from the point to the bearing
    lines (also the starting value of all others).
``stansfield``
    Range-weighted least squares, weights 1/(d_i sigma_i)^2, ranges taken from
    the current estimate: R. G. Stansfield, "Statistical theory of d.f.
    fixing", J. IEE Part IIIA 94(15), 762-770, 1947.
``mle``
    Maximum likelihood under von Mises bearing errors, maximising
    sum kappa_i cos(r_i): R. V. Lenth, "On
    finding the source of a signal", Technometrics 23(2), 149-154, 1981.
``huber``, ``andrews``
    Lenth's (1981) M-estimators: re-weighted steps with weights psi(t)/t of
    the standardised residual t_i = r_i / sigma (Huber: psi(t) = clip(t, -c, c);
    Andrews: psi(t) = c sin(t/c) for |t| < c pi, else 0), c = 1.5 by default.
    sigma is the given bearing SD or, when unknown, a robust scale
    (1.4826 x median |r|) re-estimated at every iteration.

Covariance of the position (east, north, m^2): the inverse of the Fisher
information sum_i w_i g_i g_i^T / sigma_i^2, with g_i the gradient of the
predicted bearing (radians per metre; Stansfield's M, the Cramer-Rao bound).
When the SD is not given it is estimated from the fix's own residuals,
sigma^2 = sum w_i r_i^2 / (n - 2).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from dfkit import geodesy
from dfkit.conventions import wrap180

METHODS = ("mle", "huber", "andrews", "lsq", "stansfield")
#: Default tuning constant of the Huber and Andrews weights (the value usually
#: quoted with Lenth 1981; from memory, see DEVELOPERS.md "Sources to verify").
ROBUST_C = 1.5
#: Smallest robust scale used when the SD is estimated [°] (avoids zero division on exact fits).
MIN_SCALE_DEG = 0.05
#: Observed bearings whose doubled-angle spread is below this are parallel [°].
PARALLEL_DEG = 0.5


@dataclass
class Solution:
    """Raw numerical result for ``m`` fixes of ``N`` bearings (arrays).

    Per fix: ``lat``, ``lon`` [°]; ``cov_en`` (m, 2, 2) east/north covariance
    [m²]; ``sd_deg`` bearing SD used [°]; ``sd_known`` (given, not estimated);
    ``dof`` residual degrees of freedom (n_used - 2); ``n_used`` bearings with
    non-zero weight; ``kappa`` von Mises concentration matching ``sd_deg``;
    ``iterations``; ``converged``; ``parallel`` (no crossing at the start);
    ``behind`` (the point lies behind a station: cos r <= 0 for a used bearing);
    ``crossing_deg`` spread of the bearing lines at the fix [°, 0..90] (for two
    bearings, their crossing angle).

    Per bearing: ``residual_deg`` observed minus geodesic azimuth [°],
    ``weight`` (robust weight, 1 for non-robust methods), ``range_m`` distance
    from the station to the fix [m].
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


def kappa_from_sd(sd_deg):
    """Von Mises concentration matching a bearing SD (wrapped-normal moments,
    A(kappa) = exp(-sigma^2/2)), by the Best & Fisher (1981) approximation of
    A^-1 (N. I. Fisher, *Statistical Analysis of Circular Data*, 1993, eq. 4.40)."""
    s = np.radians(np.asarray(sd_deg, float))
    r = np.exp(-(s**2) / 2.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        k = np.where(r < 0.53, 2 * r + r**3 + 5 * r**5 / 6,
                     np.where(r < 0.85, -0.4 + 1.39 * r + 0.43 / (1 - r), 1.0 / (r**3 - 4 * r**2 + 3 * r)))
    return k


def _group_median(values, group, n_groups):
    """Median of ``values`` within each group (vectorised)."""
    order = np.lexsort((values, group))
    v = values[order]
    counts = np.bincount(group, minlength=n_groups)
    starts = np.concatenate(([0], np.cumsum(counts)[:-1]))
    lo = starts + np.maximum(counts - 1, 0) // 2
    hi = starts + counts // 2
    out = np.full(n_groups, np.nan)
    ok = counts > 0
    out[ok] = 0.5 * (v[lo[ok]] + v[np.minimum(hi[ok], len(v) - 1)])
    return out


class _Problem:
    """Bearings of all fixes with the per-iteration geometry."""

    def __init__(self, lat, lon, theta, group, n_groups, sd):
        self.lat, self.lon, self.theta = lat, lon, theta
        self.g, self.m = group, n_groups
        self.sd = sd

    def geometry(self, P_lat, P_lon, sel):
        """Plane geometry of bearings ``sel`` about the current estimates."""
        g = self.g[sel]
        az_ps, az_sp, d = geodesy.inverse(P_lat[g], P_lon[g], self.lat[sel], self.lon[sel])
        a = np.radians(az_ps)
        sx, sy = d * np.sin(a), d * np.cos(a)
        r = np.radians((self.theta[sel] - az_sp + 180.0) % 360.0 - 180.0)
        mu = a + np.pi
        phi = r + mu
        return dict(g=g, sx=sx, sy=sy, r=r, mu=mu, phi=phi, nx=np.cos(phi), ny=-np.sin(phi),
                    d=np.maximum(d, 1e-9))


def _robust_weights(method, r, sd_rad, c):
    t = np.abs(r) / sd_rad
    with np.errstate(divide="ignore", invalid="ignore"):
        if method == "huber":
            w = np.where(t <= c, 1.0, c / t)
        else:  # andrews
            w = np.where(t < c * np.pi, np.where(t > 1e-12, c * np.sin(t / c) / t, 1.0), 0.0)
    return w


def _solve2(a11, a12, a21, a22, b1, b2):
    det = a11 * a22 - a12 * a21
    scale = (np.abs(a11) + np.abs(a22)) ** 2 / 4.0
    with np.errstate(divide="ignore", invalid="ignore"):
        return (a22 * b1 - a12 * b2) / det, (a11 * b2 - a21 * b1) / det, np.abs(det) / scale


def _planar_solve(method, geo, m, act, w_rel, sd_rad, robust_c, tol, max_iter):
    """Solve every active fix in its (fixed) local plane, centred at the current estimate.

    Least squares gives the start in closed form; ``stansfield`` then re-weights by
    the ranges; ``mle`` takes Newton steps on sum w cos(r) (scoring step:
    sum w g g^T dP = sum w sin(r) g, g the gradient of the predicted bearing); the
    robust methods continue with the same steps and iteratively re-computed
    weights. ``mle`` uses the full Newton matrix of sum w cos(r) where it is
    positive definite (quadratic convergence), the scoring matrix elsewhere. Returns the planar solution (x, y) per fix, whether it settled,
    singular fixes, iteration counts, and the final robust weight of each bearing.
    """
    gi, sx, sy, nx, ny, phi = geo["g"], geo["sx"], geo["sy"], geo["nx"], geo["ny"], geo["phi"]
    nb = len(gi)
    c = nx * sx + ny * sy
    px, py, ratio = _solve2(*(np.bincount(gi, v, m) for v in (nx * nx, nx * ny, ny * nx, ny * ny, nx * c, ny * c)))
    singular = act & (~np.isfinite(px) | ~np.isfinite(py) | (ratio < 1e-14))
    px = np.where(singular, 0.0, px)
    py = np.where(singular, 0.0, py)
    iters = np.ones(m, int)
    wts = np.ones(nb)
    settled = act & ~singular
    if method == "lsq":
        return px, py, settled, singular, iters, wts
    chain = ["stansfield"] if method == "stansfield" else (["mle"] + ([method] if method in ("huber", "andrews")
                                                                      else []))
    for kind in chain:
        done = ~act | singular
        # Lenth-type iterations can fall into a 2-cycle on some geometries: a step that turns back on the
        # previous one is halved (down to 1/64) until the fix settles.
        damp = np.ones(m)
        last = np.full(m, np.inf)
        lx = np.zeros(m)
        ly = np.zeros(m)
        near = np.full(m, np.inf)      # distance from the plane's centre to the nearest station
        np.minimum.at(near, gi, np.hypot(sx, sy))
        # Work only on fixes still iterating: bearings `idx`, fixes `grp`, compact fix index `cg`.
        idx = np.arange(nb)
        grp = np.arange(m)
        cg = gi
        for _ in range(max_iter):
            if done.all():
                break
            live = ~done[grp]
            if live.sum() < 0.7 * len(grp):
                grp = grp[live]
                keep = ~done[gi[idx]]
                idx = idx[keep]
                cg = np.searchsorted(grp, gi[idx])
            mg = len(grp)
            b_sx, b_sy, b_w = sx[idx], sy[idx], w_rel[idx]
            pxg, pyg = px[grp], py[grp]
            dx = pxg[cg] - b_sx
            dy = pyg[cg] - b_sy
            d2 = np.maximum(dx * dx + dy * dy, 1e-18)
            if kind == "stansfield":
                a = b_w / d2
                bnx, bny, bc = nx[idx], ny[idx], c[idx]
                nx2, ny2 = a * bnx, a * bny
                qx, qy, ratio = _solve2(*(np.bincount(cg, v, mg) for v in (nx2 * bnx, nx2 * bny, ny2 * bnx,
                                                                           ny2 * bny, nx2 * bc, ny2 * bc)))
                stepx, stepy = qx - pxg, qy - pyg
            else:
                r = (phi[idx] - np.arctan2(dx, dy) + np.pi) % (2 * np.pi) - np.pi
                if kind in ("huber", "andrews"):
                    scale = np.maximum(1.4826 * _group_median(np.abs(r), cg, mg), np.radians(MIN_SCALE_DEG))
                    sdr = sd_rad[idx]
                    wr = _robust_weights(kind, r, np.where(np.isfinite(sdr), sdr, scale[cg]), robust_c)
                    wts[idx] = wr
                    a = b_w * wr
                    cr, sr = np.ones_like(r), np.sin(r)      # iteratively re-weighted scoring steps
                else:
                    a = b_w
                    # Newton steps on sum w cos(r) once close (quadratic convergence); scoring steps before
                    newton = (last[grp] < 0.01 * near[grp])[cg]
                    cr, sr = np.where(newton, np.cos(r), 1.0), np.where(newton, np.sin(r), 0.0)
                gx = dy / d2
                gy = -dx / d2
                # -Hessian of sum a cos(r): a [cos r g g^T - sin r dg/dP], dg/dP = [[-2xy, x2-y2], [x2-y2, 2xy]]/d^4
                k = a * sr / (d2 * d2) if kind == "mle" else np.zeros_like(a)
                kxy = 2.0 * dx * dy * k
                kd = (dx * dx - dy * dy) * k
                acr = a * cr
                h11 = np.bincount(cg, acr * gx * gx + kxy, mg)
                h12 = np.bincount(cg, acr * gx * gy - kd, mg)
                h22 = np.bincount(cg, acr * gy * gy - kxy, mg)
                ag = a * np.sin(r)
                b1 = np.bincount(cg, ag * gx, mg)
                b2 = np.bincount(cg, ag * gy, mg)
                # where the Newton matrix is not positive definite, take a scoring step instead
                nonpd = (h11 <= 0) | (h11 * h22 - h12 * h12 <= 0)
                if nonpd.any():
                    j11 = np.bincount(cg, a * gx * gx, mg)
                    j12 = np.bincount(cg, a * gx * gy, mg)
                    j22 = np.bincount(cg, a * gy * gy, mg)
                    h11, h12, h22 = (np.where(nonpd, j, h) for j, h in ((j11, h11), (j12, h12), (j22, h22)))
                stepx, stepy, ratio = _solve2(h11, h12, h12, h22, b1, b2)
            upd = ~done[grp]
            bad = upd & (~np.isfinite(stepx) | ~np.isfinite(stepy) | (ratio < 1e-14))
            singular[grp[bad]] = True
            upd &= ~bad
            step = np.hypot(stepx, stepy)
            dmp, lst = damp[grp], last[grp]
            with np.errstate(invalid="ignore"):
                reverse = upd & (stepx * lx[grp] + stepy * ly[grp] < 0) & (step >= 0.5 * lst)
            dmp = np.where(reverse, np.maximum(dmp * 0.5, 1.0 / 64.0), dmp)
            damp[grp] = dmp
            last[grp] = np.where(upd, step, lst)
            stepx = np.where(upd, stepx * dmp, 0.0)
            stepy = np.where(upd, stepy * dmp, 0.0)
            lx[grp], ly[grp] = stepx, stepy
            px[grp], py[grp] = pxg + stepx, pyg + stepy
            iters[grp] += upd
            done[grp] |= bad | (upd & (step < tol))
        settled = act & ~singular & done
    return px, py, settled, singular, iters, wts


def solve(lat, lon, bearing_deg, group, n_groups, sd_deg=None, *, method="mle", robust_c=ROBUST_C,
          tol_m=1e-4, max_iter=60, max_outer=30) -> Solution:
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
    method : {'mle', 'huber', 'andrews', 'lsq', 'stansfield'}
    robust_c : float
        Tuning constant of the Huber and Andrews weights.
    tol_m : float
        Convergence: the estimate moved less than this in the last iteration. [m]
    max_iter : int
        Planar iterations allowed per re-centring.
    max_outer : int
        Re-centrings of the exact local plane allowed.

    Returns
    -------
    Solution
    """
    if method not in METHODS:
        raise ValueError(f"method={method!r} is not one of {', '.join(repr(m) for m in METHODS)}")
    lat = np.asarray(lat, float)
    lon = np.asarray(lon, float)
    theta = np.mod(np.asarray(bearing_deg, float), 360.0)
    g = np.asarray(group, np.int64)
    m = int(n_groups)
    N = len(lat)
    sd = np.full(N, np.nan) if sd_deg is None else np.asarray(sd_deg, float)
    counts = np.bincount(g, minlength=m)
    known_g = np.bincount(g, np.isfinite(sd).astype(float), m) == counts
    known_b = known_g[g]
    w_rel = np.where(known_b, 1.0 / np.where(np.isfinite(sd), sd, 1.0) ** 2, 1.0)
    # normalise within each fix so that weights are O(1)
    w_rel = w_rel / (np.bincount(g, w_rel, m) / np.maximum(counts, 1))[g]
    prob = _Problem(lat, lon, theta, g, m, sd)

    P_lat, P_lon = geodesy.group_centroid(lat, lon, g, m)
    iterations = np.zeros(m, int)
    converged = np.zeros(m, bool)
    singular = np.zeros(m, bool)

    # Parallel test on the observed lines at the start.
    geo0 = prob.geometry(P_lat, P_lon, np.ones(N, bool))
    phi0 = np.arctan2(-geo0["ny"], geo0["nx"])  # direction of each observed line
    c2 = np.bincount(g, np.cos(2 * phi0), m)
    s2 = np.bincount(g, np.sin(2 * phi0), m)
    spread0 = np.degrees(np.arccos(np.clip(np.hypot(c2, s2) / np.maximum(counts, 1), 0, 1))) / 1.0
    parallel = (spread0 < PARALLEL_DEG) & (counts >= 2)

    base = (counts >= 2) & ~parallel
    # Per-bearing geometry at the latest estimate of its fix (kept for the final statistics).
    last_geo = {k: geo0[k].copy() for k in ("r", "mu", "d")}
    weight = np.ones(N)
    done = np.zeros(m, bool)
    unsettled = np.zeros(m, int)    # re-centrings whose planar solve did not settle
    geo = geo0
    for outer in range(max_outer):
        act = base & ~done & ~singular & (unsettled < 2)
        if not act.any():
            break
        sel = act[g]
        if outer:
            geo = prob.geometry(P_lat, P_lon, sel)
        else:
            geo = {k: v[sel] for k, v in geo0.items()}
        for k in ("r", "mu", "d"):
            last_geo[k][sel] = geo[k]
        px, py, inner_ok, sing, its, wts = _planar_solve(
            method, geo, m, act, w_rel[sel], np.radians(np.where(known_b[sel], sd[sel], np.nan)),
            robust_c, tol_m / 100.0, max_iter)
        weight[sel] = wts
        singular |= act & sing
        iterations += np.where(act, its, 0)
        move = act & ~sing
        step = np.hypot(px, py)
        P_lat = P_lat.copy()
        P_lon = P_lon.copy()
        P_lat[move], P_lon[move] = geodesy.from_local(P_lat[move], P_lon[move], px[move], py[move])
        # Settled when the exact plane about the estimate puts the answer at its centre.
        done |= move & inner_ok & (step < tol_m)
        unsettled += act & ~inner_ok
    converged[:] = done & ~singular & ~parallel & (counts >= 2)

    # Final statistics from the geometry at the settled estimate (it moved by less than tol_m since).
    geo = last_geo
    r = geo["r"]
    d = geo["d"]
    if method not in ("huber", "andrews"):
        weight = np.ones(N)
    used = weight > 0
    n_used = np.bincount(g, used.astype(float), m).astype(int)
    gx = np.cos(geo["mu"]) / d
    gy = -np.sin(geo["mu"]) / d
    sd_rad_known = np.radians(np.where(np.isfinite(sd), sd, 1.0))
    info_w = np.where(known_b, weight / sd_rad_known**2, weight)
    j11 = np.bincount(g, info_w * gx * gx, m)
    j12 = np.bincount(g, info_w * gx * gy, m)
    j22 = np.bincount(g, info_w * gy * gy, m)
    dof = n_used - 2
    with np.errstate(divide="ignore", invalid="ignore"):
        s2_est = np.bincount(g, weight * r**2, m) / dof
        det = j11 * j22 - j12**2
        inv = np.stack([np.stack([j22, -j12], -1), np.stack([-j12, j11], -1)], -2) / det[:, None, None]
    var_scale = np.where(known_g, 1.0, s2_est)
    cov = inv * var_scale[:, None, None]
    sd_known_val = np.sqrt(np.bincount(g, np.where(known_b, sd**2, 0.0), m) / np.maximum(counts, 1))
    with np.errstate(invalid="ignore"):
        sd_out = np.where(known_g, sd_known_val, np.degrees(np.sqrt(np.where(dof > 0, s2_est, np.nan))))
    sd_out = np.where(known_g | (dof > 0), sd_out, np.nan)
    cov[~(known_g | (dof > 0))] = np.nan

    dirs = geo["mu"]   # line of sight at the fix (doubled angles ignore its sense)
    c2 = np.bincount(g, used * np.cos(2 * dirs), m)
    s2 = np.bincount(g, used * np.sin(2 * dirs), m)
    crossing = np.degrees(np.arccos(np.clip(np.hypot(c2, s2) / np.maximum(n_used, 1), 0, 1)))
    behind = np.bincount(g, (used & (np.cos(r) <= 0)).astype(float), m) > 0

    return Solution(
        lat=P_lat, lon=wrap180(P_lon), cov_en=cov,
        sd_deg=sd_out, sd_known=known_g, dof=dof, n_used=n_used, kappa=kappa_from_sd(sd_out),
        iterations=iterations, converged=converged, parallel=parallel | singular, behind=behind,
        crossing_deg=crossing, residual_deg=np.degrees(r), weight=weight, range_m=d,
    )
