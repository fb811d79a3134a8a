"""Circular statistics of bearing errors: mean direction, resultant length, von Mises concentration, SDs."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

_Z95 = 1.959963984540054  # standard normal 97.5 % quantile (scipy.special.ndtri(0.975))


@dataclass(frozen=True)
class CircularSummary:
    """Summary of one sample of angular errors (see the module docstring for each formula).

    Angles in degrees; ``rbar`` is the mean resultant length, ``rho2`` the mean cos 2(e - mean).
    """

    n: int
    mean_deg: float
    rbar: float
    rho2: float
    mean_se_deg: float
    mean_lo_deg: float
    mean_hi_deg: float
    sd_deg: float
    circular_sd_deg: float
    angular_deviation_deg: float
    kappa_mle: float
    kappa: float
    sd_from_kappa_deg: float


def mean_resultant_ratio(kappa):
    """A(kappa) = I1(kappa) / I0(kappa), the mean resultant length of a von Mises distribution [1]_.

    >>> round(float(mean_resultant_ratio(1.0)), 8)
    0.44638997
    """
    from scipy.special import i0e, i1e

    k = np.asarray(kappa, float)
    with np.errstate(invalid="ignore"):
        return np.where(
            np.isinf(k), 1.0, i1e(np.where(np.isinf(k), 1.0, k)) / i0e(np.where(np.isinf(k), 1.0, k))
        )


def kappa_from_rbar(rbar):
    """Maximum-likelihood von Mises concentration: the root kappa of A(kappa) = rbar.

    Starts from the Best & Fisher approximation ([1]_ eq. 4.40) and refines it with Newton steps on A
    (dA/dkappa = 1 - A/kappa - A^2) until the relative change is below 1e-12. ``rbar`` >= 1 gives inf,
    ``rbar`` <= 0 gives 0.

    >>> round(float(kappa_from_rbar(0.9)), 5)
    5.30469
    """
    r = np.asarray(rbar, float)
    rc = np.clip(r, 1e-12, 1 - 1e-15)
    with np.errstate(divide="ignore", invalid="ignore"):
        k = np.where(
            rc < 0.53,
            2 * rc + rc**3 + 5 * rc**5 / 6,
            np.where(rc < 0.85, -0.4 + 1.39 * rc + 0.43 / (1 - rc), 1.0 / (rc**3 - 4 * rc**2 + 3 * rc)),
        )
        for _ in range(50):
            a = mean_resultant_ratio(k)
            step = (a - rc) / (1.0 - a / k - a * a)
            k_new = np.maximum(k - step, k / 10.0)
            done = np.abs(k_new - k) <= 1e-12 * k
            k = k_new
            if np.all(done):
                break
    return np.where(r >= 1.0, np.inf, np.where(r <= 0.0, 0.0, k))


def kappa_small_sample(kappa, n):
    """Fisher's small-sample correction of a von Mises kappa for n <= 15 ([1]_ eq. 4.41, from memory).

    kappa* = max(kappa - 2/(n kappa), 0) when kappa < 2, else (n - 1)^3 kappa / (n^3 + n); kappa itself
    for n > 15.
    """
    k = np.asarray(kappa, float)
    n = np.asarray(n, float)
    with np.errstate(divide="ignore", invalid="ignore"):
        low = np.maximum(k - 2.0 / (n * k), 0.0)
        high = (n - 1) ** 3 * k / (n**3 + n)
    return np.where(n > 15, k, np.where(k < 2, low, high))


def sd_from_kappa(kappa):
    """Wrapped-normal SD with the mean resultant length of a von Mises kappa: sqrt(-2 ln A(kappa)). [°]"""
    a = mean_resultant_ratio(kappa)
    with np.errstate(divide="ignore"):
        return np.degrees(np.sqrt(-2.0 * np.log(a)))


def circular_summary(errors_deg) -> CircularSummary:
    """Bias, spread and concentration of one sample of angular errors [°] (formulas in the module docstring).

    >>> s = circular_summary([-3, 5, 2, -1, 4, 0, -6, 3, 1, -2, 7, 2.5])
    >>> round(s.mean_deg, 6), round(s.rbar, 8)
    (1.042268, 0.99813274)
    """
    e = np.radians(np.asarray(errors_deg, float))
    n = len(e)
    if n == 0:
        nan = float("nan")
        return CircularSummary(0, nan, nan, nan, nan, nan, nan, nan, nan, nan, nan, nan, nan)
    c, s = np.cos(e).mean(), np.sin(e).mean()
    rbar = float(np.hypot(c, s))
    mean = float(np.arctan2(s, c))
    d = (e - mean + np.pi) % (2 * np.pi) - np.pi
    rho2 = float(np.cos(2 * d).mean())
    with np.errstate(divide="ignore", invalid="ignore"):
        se = float(np.sqrt(max(1.0 - rho2, 0.0) / (2 * n * rbar**2))) if n > 1 else float("nan")
        half = np.arcsin(_Z95 * se) if np.isfinite(se) and _Z95 * se < 1 else np.pi
        sd = float(np.std(d, ddof=1)) if n > 1 else float("nan")
        circ = float(np.sqrt(-2.0 * np.log(rbar))) if rbar > 0 else float("inf")
    k_mle = float(kappa_from_rbar(rbar))
    k = float(kappa_small_sample(k_mle, n))
    deg = np.degrees
    return CircularSummary(
        n=n,
        mean_deg=float(deg(mean)),
        rbar=rbar,
        rho2=rho2,
        mean_se_deg=float(deg(se)),
        mean_lo_deg=float(deg(mean - half)) if half < np.pi else float("nan"),
        mean_hi_deg=float(deg(mean + half)) if half < np.pi else float("nan"),
        sd_deg=float(deg(sd)),
        circular_sd_deg=float(deg(circ)),
        angular_deviation_deg=float(deg(np.sqrt(2 * (1 - rbar)))),
        kappa_mle=k_mle,
        kappa=k,
        sd_from_kappa_deg=float(sd_from_kappa(k)),
    )
