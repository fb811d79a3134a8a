"""Lenth's maximum-likelihood fix under von Mises bearing errors.

The bearing errors are von Mises with concentration kappa_i; the likelihood is
maximised by the point that maximises sum kappa_i cos(r_i), r_i the residual of
bearing i (R. V. Lenth, "On finding the source of a signal", Technometrics
23(2), 149-154, 1981 [volume and pages from memory]). dfkit minimises
F = -sum w_i cos(r_i) with w_i proportional to 1/sigma_i^2 (equal when the SD
is unknown), written as F = sum w_i (1 - cos r_i) to keep its small changes
exact in floating point, by Newton steps where the Newton matrix is positive definite and
Fisher-scoring steps elsewhere, each accepted only if it lowers F.
"""

from __future__ import annotations

import numpy as np


def terms(r, w, s, c):
    """Per bearing: objective f(r), its derivative f'(r), the Fisher (scoring) curvature and f''(r).

    ``s`` (scale) and ``c`` (tuning constant) are unused: the likelihood has no tuning.
    """
    cr = np.cos(r)
    return 2.0 * w * np.sin(0.5 * r) ** 2, w * np.sin(r), w, w * cr


def objective(r, w, s, c):
    """The objective alone, w (1 - cos r) = 2 w sin^2(r/2) per bearing."""
    return 2.0 * w * np.sin(0.5 * r) ** 2


def sc_terms(sn, cs, w, s, c):
    """f'(r), the scoring curvature and f''(r) from sin r and cos r (the optimiser's form, no angle needed)."""
    return w * sn, w, w * cs


def sc_objective(sn, cs, w, s, c):
    """The objective w (1 - cos r) from sin r and cos r, as sin^2 r / (1 + cos r) where cos r > 0 so that its
    small values keep their relative precision."""
    out = np.add(1.0, cs)
    t = np.multiply(sn, sn)
    with np.errstate(divide="ignore", invalid="ignore"):     # the branch not taken where cos r = -1
        np.divide(t, out, out=out)
    np.subtract(1.0, cs, out=t)
    np.copyto(out, t, where=~(cs > 0))      # where(cs > 0, sn^2 / (1 + cs), 1 - cs), in place
    out *= w
    return out


def weights(r, s, c):
    """Lenth's estimator keeps every bearing at full weight."""
    return np.ones_like(r)


def kappa_from_sd(sd_deg):
    """Von Mises concentration matching a bearing SD.

    Wrapped-normal moment matching, A(kappa) = exp(-sigma^2 / 2), with A^-1 by
    the Best & Fisher (1981) approximation (N. I. Fisher, *Statistical Analysis
    of Circular Data*, Cambridge UP, 1993, eq. 4.40 [equation number from memory];
    checked against scipy's Bessel functions in the tests).
    """
    s = np.radians(np.asarray(sd_deg, float))
    r = np.exp(-(s**2) / 2.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        k = np.where(r < 0.53, 2 * r + r**3 + 5 * r**5 / 6,
                     np.where(r < 0.85, -0.4 + 1.39 * r + 0.43 / (1 - r), 1.0 / (r**3 - 4 * r**2 + 3 * r)))
    return k
