"""The covariance of each method's position (east/north, m^2), and the bearing SD behind it.

Every method solves sum_i v_i g_i r_i = 0 at its answer, with g_i the gradient of
bearing i's predicted azimuth (radians per metre, perpendicular to the line of
sight, length 1/d_i) and v_i the method's working weight. To first order its
covariance is the sandwich

    Cov = B^-1 M B^-1,  B = sum v_i g_i g_i^T,  M = sum v_i^2 sigma_i^2 g_i g_i^T

(H. White, "A heteroskedasticity-consistent covariance matrix estimator and a
direct test for heteroskedasticity", Econometrica 48(4), 817-838, 1980 [from
memory]; here with the model variances sigma_i^2, not squared residuals, which
would be useless with 3 bearings).

* ``lsq``: v_i = d_i^2 (perpendicular distances are ~ d_i r_i), the full sandwich.
* ``stansfield`` and ``mle``: v_i = 1/sigma_i^2, where the sandwich collapses to
  B^-1, the inverse Fisher information (Stansfield's matrix; the Cramer-Rao bound).
* ``huber`` and ``andrews``: v_i = W_i/sigma_i^2 with the final robust weights W_i
  in [0, 1]; dfkit reports B^-1, which is at least the fixed-weight sandwich
  (W_i^2 <= W_i), and equals the information of the bearings kept when weights
  are 0 or 1.

With the SD unknown, sigma^2 is estimated from the fix's residuals with n_used - 2
degrees of freedom, sum over the bearings kept (W_i > 0) of r_i^2 / (n_used - 2) (not
weighted: down-weighting would shrink it in clean data), and regions use F(2, n_used - 2).
The estimate is never taken below the fix's floor (:mod:`dfkit.locate.resolution`: the rounding
of bearings written to a coarse step, and the plausibility limit of hand-held bearings).
"""

from __future__ import annotations

import numpy as np

from dfkit.estimators.groups import gsum


def _inv(a11, a12, a22):
    with np.errstate(divide="ignore", invalid="ignore"):
        det = a11 * a22 - a12 * a12
        return a22 / det, -a12 / det, a11 / det


def _stack(c11, c12, c22):
    return np.stack([np.stack([c11, c12], -1), np.stack([c12, c22], -1)], -2)


def position_covariance(family, g, m, gx, gy, d, r, weight, known_b, known_g, sd_rad, floor_rad=None):
    """Covariance of each fix, the SD behind it and the residual degrees of freedom.

    Parameters
    ----------
    family : str
        'lsq', 'stansfield', 'lenth' or 'robust'.
    g : ndarray of int
        Fix of each bearing; ``m`` fixes.
    gx, gy : ndarray
        Gradient of each bearing's predicted azimuth at its fix. [rad/m]
    d, r : ndarray
        Range [m] and residual [rad] of each bearing at its fix.
    weight : ndarray
        Robust weight of each bearing (1 for the other methods).
    known_b, known_g : ndarray of bool
        Whether the SD is known, per bearing and per fix.
    sd_rad : ndarray
        Known bearing SD (NaN where unknown). [rad]
    floor_rad : ndarray, shape (m,), optional
        Smallest SD an estimate may take, per fix (default 0). [rad]

    Returns
    -------
    cov : ndarray, shape (m, 2, 2)
        East/north covariance [m^2]; NaN where it cannot be sized.
    sd_rad_fix : ndarray
        The fix's bearing SD: RMS of the known SDs, or the estimate raised to its floor. [rad]
    dof : ndarray of int
        n_used - 2.
    sd_estimate : ndarray
        The estimate from the residuals alone, before the floor (NaN where the SD is known or
        dof < 1). [rad]
    """
    used = weight > 0
    n_used = gsum(g, used.astype(float), m).astype(int)
    dof = n_used - 2
    counts = np.bincount(g, minlength=m)
    with np.errstate(divide="ignore", invalid="ignore"):
        s2_est = gsum(g, np.where(used, r * r, 0.0), m) / dof
    s2_est = np.where(dof > 0, s2_est, np.nan)
    s2_raw = s2_est
    if floor_rad is not None:
        s2_est = np.fmax(s2_est, np.where(dof > 0, np.asarray(floor_rad, float) ** 2, np.nan))
    inv_var = np.where(known_b, 1.0 / np.where(known_b, sd_rad, 1.0) ** 2, 1.0)
    if family == "lsq":
        v = d * d
        var_b = np.where(known_b, np.where(known_b, sd_rad, 0.0) ** 2, 1.0)   # times s2_est below if unknown
        b11, b12, b22 = (gsum(g, v * t, m) for t in (gx * gx, gx * gy, gy * gy))
        mv = v * v * var_b
        m11, m12, m22 = (gsum(g, mv * t, m) for t in (gx * gx, gx * gy, gy * gy))
        i11, i12, i22 = _inv(b11, b12, b22)
        # B^-1 M B^-1 for symmetric 2x2 matrices (NaN, quietly, for a fix whose lines give no B^-1)
        with np.errstate(invalid="ignore", over="ignore"):
            c11 = i11 * (i11 * m11 + i12 * m12) + i12 * (i11 * m12 + i12 * m22)
            c12 = i11 * (i12 * m11 + i22 * m12) + i12 * (i12 * m12 + i22 * m22)
            c22 = i12 * (i12 * m11 + i22 * m12) + i22 * (i12 * m12 + i22 * m22)
    else:
        v = weight * inv_var
        b11, b12, b22 = (gsum(g, v * t, m) for t in (gx * gx, gx * gy, gy * gy))
        c11, c12, c22 = _inv(b11, b12, b22)
    cov = _stack(c11, c12, c22)
    scale = np.where(known_g, 1.0, s2_est)
    cov = cov * scale[:, None, None]
    sd_known = np.sqrt(gsum(g, np.where(known_b, np.nan_to_num(sd_rad) ** 2, 0.0), m) / np.maximum(counts, 1))
    sd_fix = np.where(known_g, sd_known, np.sqrt(s2_est))
    bad = ~(np.isfinite(cov).all(axis=(1, 2)))
    cov[bad] = np.nan
    return cov, sd_fix, dof, np.where(known_g, np.nan, np.sqrt(s2_raw))
