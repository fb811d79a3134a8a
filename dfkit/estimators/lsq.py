"""Least squares on the perpendicular distances from the point to the bearing lines.

The point minimising sum v_i p_i^2, p_i = n_i . (P - S_i) the signed distance
from P to the line through station S_i along its observed bearing (n_i the
line's unit normal), solves a 2x2 linear system: the classical start of every
iterative fix, and dfkit's ``lsq`` method (v_i = 1). Its perpendicular
distances are ~ d_i times the angular error, so unweighted least squares is not
efficient and the Fisher information does not describe its scatter: its
covariance is the sandwich form (see :mod:`dfkit.estimators.covariance`).
"""

from __future__ import annotations

import numpy as np

from dfkit.estimators.groups import gsum, solve2


def line_sums(g, m, sx, sy, sp, cp, v):
    """The five sums of the normal equations, per fix: a11, a12, a22, b1, b2 (``sp``, ``cp`` the sine and
    cosine of each line's direction phi, as :class:`dfkit.estimators.plane.PlaneGeometry` holds them)."""
    nx, ny = cp, -sp
    c = nx * sx + ny * sy
    vx, vy = v * nx, v * ny
    return tuple(gsum(g, t, m) for t in (vx * nx, vx * ny, vy * ny, vx * c, vy * c))


def per_bearing_terms(sx, sy, sp, cp, v):
    """Each bearing's own contribution to :func:`line_sums` (for leave-one-out solutions)."""
    nx, ny = cp, -sp
    c = nx * sx + ny * sy
    vx, vy = v * nx, v * ny
    return vx * nx, vx * ny, vy * ny, vx * c, vy * c


def planar_point(g, m, sx, sy, sp, cp, v):
    """The least-squares point of each fix: x, y [m] and the conditioning ratio (0 if singular)."""
    return solve2(*line_sums(g, m, sx, sy, sp, cp, v))
