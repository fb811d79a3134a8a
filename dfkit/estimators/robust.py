"""Lenth's robust fixes: Huber and Andrews M-estimators of the bearing residuals.

Lenth (1981) proposed down-weighting wild bearings with M-estimators
(R. V. Lenth, "On finding the source of a signal", Technometrics 23(2),
149-154, 1981 [from memory; the paper itself was not consulted]). dfkit
minimises F = sum w_i s_i^2 rho(t_i) over the position, with the standardised
von Mises residual t_i = 2 sin(r_i / 2) / s_i (r_i for small residuals, and
bounded for a bearing that points away), so that with no bearing down-weighted
Huber's fix is exactly Lenth's maximum-likelihood fix:

* Huber (P. J. Huber, "Robust estimation of a location parameter", Ann. Math.
  Statist. 35(1), 73-101, 1964): rho(t) = t^2/2 for |t| <= c, c|t| - c^2/2 beyond;
  psi(t) = clip(t, -c, c).
* Andrews (D. F. Andrews, "A robust method for multiple linear regression",
  Technometrics 16(4), 523-531, 1974 [from memory]): rho(t) = c^2 (1 - cos(t/c))
  for |t| <= c pi, 2 c^2 beyond; psi(t) = c sin(t/c), zero beyond c pi, so a
  bearing that far off gets weight 0.

The scale s is the bearing SD when it is known. When it is not, it is estimated
once from the start (a trimmed scale that leaves out the worst bearing, see
:func:`start_scale`) and then held fixed, so it cannot shrink onto the good
bearings as the fit proceeds; the region then uses the classical n - 2 scale
of the bearings that keep their weight (:mod:`dfkit.estimators.covariance`).
Whether a bearing Andrews' weights drop stays dropped is decided without that
scale, by whether all the bearings together could be right
(:func:`dfkit.estimators.solve._settle_unknown_sd`).

Tuning constants: c = 1.5 is the value usually quoted with Lenth (1981) for both
(from memory, unconfirmed against the paper); dfkit's defaults were chosen by
the coverage study in ``benchmarks/coverage.py`` (see DEVELOPERS.md).
"""

from __future__ import annotations

import numpy as np

from dfkit.estimators.groups import gsum, within_rank

#: Default tuning constants, chosen by measured coverage (benchmarks/coverage.py, DEVELOPERS.md).
ROBUST_C = {"huber": 1.5, "andrews": 1.5}

#: Bounds of the scale used for the weights when the SD is unknown [rad]: the floor is a numerical
#: guard for bearings that agree almost exactly (not a field value); at the ceiling (180 degrees)
#: no bearing is down-weighted.
MIN_SCALE = np.radians(0.1)
MAX_SCALE = np.pi

#: Factor on the trimmed start scale when the SD is unknown: the scale from the n - 1 best-fitting
#: bearings is biased low in clean data (the worst bearing is left out on purpose); this factor,
#: chosen by simulation (benchmarks/coverage.py), keeps good bearings from being thrown away.
TRIM_SCALE_FACTOR = 1.0


def huber_psi(t, c):
    return np.clip(t, -c, c)


def huber_rho(t, c):
    a = np.abs(t)
    return np.where(a <= c, 0.5 * t * t, c * a - 0.5 * c * c)


def huber_dpsi(t, c):
    return (np.abs(t) <= c).astype(float)


def andrews_psi(t, c):
    return np.where(np.abs(t) < c * np.pi, c * np.sin(t / c), 0.0)


def andrews_rho(t, c):
    return np.where(np.abs(t) < c * np.pi, c * c * (1.0 - np.cos(t / c)), 2.0 * c * c)


def andrews_dpsi(t, c):
    return np.where(np.abs(t) < c * np.pi, np.cos(t / c), 0.0)


_FUNCS = {"huber": (huber_rho, huber_psi, huber_dpsi), "andrews": (andrews_rho, andrews_psi, andrews_dpsi)}


def weight_function(kind, t, c):
    """psi(t)/t, the iteratively re-weighted least-squares weight (1 at t = 0)."""
    psi = _FUNCS[kind][1]
    with np.errstate(divide="ignore", invalid="ignore"):
        small = np.abs(t) < 1e-12
        return np.where(small, 1.0, psi(t, c) / np.where(small, 1.0, t))


def chord(r):
    """The von Mises residual 2 sin(r/2): r for small r, bounded by 2 for a bearing that points away."""
    return 2.0 * np.sin(0.5 * r)


def make_terms(kind):
    rho, psi, dpsi = _FUNCS[kind]

    def terms(r, w, s, c):
        """f = w s^2 rho(u/s) with u = 2 sin(r/2); f' = w W(t) sin r; scoring curvature w W(t); f''."""
        h = 0.5 * r
        t = 2.0 * np.sin(h) / s
        ch, sh = np.cos(h), np.sin(h)
        ps = psi(t, c)
        return (w * s * s * rho(t, c), w * s * ps * ch, w * weight_function(kind, t, c),
                w * (dpsi(t, c) * ch * ch - 0.5 * s * ps * sh))

    def objective(r, w, s, c):
        """The objective alone, w s^2 rho(2 sin(r/2) / s) per bearing."""
        return w * s * s * rho(2.0 * np.sin(0.5 * r) / s, c)

    def weights(r, s, c):
        return weight_function(kind, chord(r) / s, c)

    return terms, objective, weights


def trim_count(n):
    """How many of n bearings the trimmed start keeps: all of 3 or fewer, n - 1 up to 7, 3n/4 beyond."""
    n = np.asarray(n)
    return np.where(n <= 3, n, np.where(n <= 7, n - 1, n - n // 4))


def trimmed_sum(owner, r2, counts_of_owner, n_owner):
    """Sum of the h smallest values of ``r2`` per owner, h = :func:`trim_count` of its count."""
    counts_of_owner = np.asarray(counts_of_owner)
    h = trim_count(counts_of_owner)
    total = gsum(owner, r2, n_owner)
    # up to 7 bearings at most one is left out: the sum less the largest
    largest = np.zeros(n_owner)
    np.maximum.at(largest, owner, r2)
    out = np.where(h == counts_of_owner, total, total - largest)
    many = h < counts_of_owner - 1
    if many.any():
        sel = many[owner]
        rank = within_rank(owner[sel], r2[sel])
        out[many] = gsum(owner[sel], np.where(rank < h[owner[sel]], r2[sel], 0.0), n_owner)[many]
    return out


#: Floor of the trimmed scale as a fraction of the classical scale of all bearings at the start: with
#: four bearings the trimmed scale has one degree of freedom and can be tiny, which would down-weight
#: every bearing. Chosen by simulation (benchmarks/coverage.py).
TRIM_FLOOR = 0.3


def start_scale(r, g, m, counts):
    """Residual scale from the start, leaving out the worst-fitting bearing (radians, per fix).

    sqrt(sum of the h smallest u^2 / (h - 2)), u = 2 sin(r/2), * TRIM_SCALE_FACTOR, h = :func:`trim_count`,
    at least TRIM_FLOOR times the classical scale of all bearings;
    within [MIN_SCALE, MAX_SCALE]; MAX_SCALE (no down-weighting) where h <= 2.
    """
    h = trim_count(counts)
    u = chord(r)
    ss = trimmed_sum(g, u * u, counts, m)
    counts = np.asarray(counts)
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.sqrt(ss / (h - 2)) * TRIM_SCALE_FACTOR
        classical = np.sqrt(gsum(g, u * u, m) / (counts - 2))
    s = np.where(counts > 2, np.fmax(s, TRIM_FLOOR * classical), s)
    return np.clip(np.where(h > 2, s, MAX_SCALE), MIN_SCALE, MAX_SCALE)
