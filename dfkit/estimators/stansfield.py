"""Stansfield's fix: least squares on the perpendicular distances weighted by 1/(d_i sigma_i)^2.

R. G. Stansfield, "Statistical theory of d.f. fixing", Journal of the IEE Part
IIIA (Radiocommunication) 94(15), 762-770, 1947 [volume and pages from reference
lists, the paper itself not consulted]. The ranges d_i are taken from the current
estimate and the weighted least-squares point recomputed until it stops moving
(a fixed point); a step that turns back on the previous one is halved, so no fix
is left oscillating between two points.
"""

from __future__ import annotations

import numpy as np

from dfkit.estimators.lsq import planar_point


def step(cg, mg, sx, sy, sp, cp, w, x, y):
    """One re-weighting: the weighted least-squares point with ranges from (x, y) [m]."""
    d2 = np.maximum((x[cg] - sx) ** 2 + (y[cg] - sy) ** 2, 1e-18)
    return planar_point(cg, mg, sx, sy, sp, cp, w / d2)
