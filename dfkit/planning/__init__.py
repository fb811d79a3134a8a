r"""Where to take the next bearing: candidate spots ranked by the region they are expected to leave.

For a transmitter at P and a station at range d whose line of sight to P has
azimuth a (at P), a bearing with SD sigma [rad] carries the Fisher information

.. math:: J = u u^T / (d^2 \sigma^2), \qquad u = (\cos a, -\sin a)

in P's east/north plane (u is perpendicular to the line of sight; Torrieri
1984 [1]_). Independent bearings add: J_total = sum J_i, and the Cramer-Rao
bound J_total^-1 is the covariance of an efficient estimate, the one
Stansfield's [4]_ and Lenth's ellipses use. Its p-ellipse has the area

.. math:: A = \pi \, (-2 \ln(1 - p)) / \sqrt{\det J_\mathrm{total}}.

The *expected area after one more bearing from spot c* is this area with
J_total + J_c. Two equal-range bearings crossing at gamma give
det J = sin^2(gamma) / (sigma^4 d^4), so A is proportional to 1/|sin gamma|:
the best crossing is 90 degrees (Dogancay & Hmam 2008 [2]_; Bishop et al.
2010 [3]_ for optimal geometries in general). Ranking spots by A is the
D-optimal choice.

How a spot is scored (``basis``):

``point`` (default)
    A at the current estimate: the textbook value, and what a hand calculation
    gives.
``region``
    The geometric mean of A over 600 positions spread as the estimate's error,
    N(estimate, J^-1), laid out by a deterministic rule (no random numbers):
    the mean of log det J over the region, the Bayesian form of D-optimality
    (K. Chaloner and I. Verdinelli, "Bayesian experimental design: a review",
    Statistical Science 10(3), 273-304, 1995 [from memory]). It hedges against
    the estimate being off, and stays finite for spots at or near the estimate.
    Measured on simulated fixes (``benchmarks/bench_planning.py``) it did not
    pick better spots than ``point`` (judged by the area at the true position),
    and an arithmetic mean, or sampling the exact likelihood, did worse; hence
    the default. The current area is averaged the same way, so ratios compare
    like with like.
``bearing_lines``
    Used when there is no estimate (one bearing so far, or bearings that do not
    cross): the geometric mean of A over positions along the bearing lines,
    evenly spread in range from ``max_range_m / 20`` out to ``max_range_m`` and
    across each line by its SD. This rests on a stated range band, not on data:
    it is weaker than a plan from a fix, and the outputs say so.

Bearing SDs: each bearing's own SD when the fix has them (sheet ``sd``,
``--sd``, a calibration), else the SD estimated from the fix's residuals (weak
with few bearings: it has n - 2 degrees of freedom). The next bearing gets
``next_sd_deg`` or else the fix's SD. Areas use the chi-square scale (the SD
taken as known); with an SD estimated from the fix itself the region ``dfkit
fix`` reports after the bearing is wider (F scale). With no SD at all, spots
are still ranked (for equal SDs the ranking does not depend on the SD) but no
areas are given.

Directions and distances are geodesic (WGS84, :mod:`dfkit.geodesy`); the
information uses the geodesic distance d for the reduced length m12 (their
relative difference is below 1e-6 at 10 km). A grid of spots is laid exactly
in the local azimuthal-equidistant plane of the estimate.

The ranking knows nothing of terrain, reflections, signal strength or access
(:data:`dfkit.cautions.PLAN_CAUTION`).

References
----------
.. [1] D. J. Torrieri, "Statistical theory of passive location systems," IEEE
   Trans. Aerospace and Electronic Systems 20(2), 183-198, 1984 (volume and
   pages from memory).
.. [2] K. Dogancay and H. Hmam, "Optimal angular sensor separation for AOA
   localization," Signal Processing 88(5), 1248-1260, 2008 (from memory).
.. [3] A. N. Bishop, B. Fidan, B. D. O. Anderson, K. Dogancay and P. N.
   Pathirana, "Optimality analysis of sensor-target localization geometries,"
   Automatica 46(3), 479-492, 2010 (from memory).
.. [4] R. G. Stansfield, "Statistical theory of d.f. fixing," J. IEE Part IIIA
   94(15), 762-770, 1947 (from memory).
"""

from dfkit.planning.information import bearing_information, ellipse_area_m2
from dfkit.planning.plan import Plan, plan_next_bearing, plan_sheet
from dfkit.planning.scoring import BASES, N_SAMPLES
from dfkit.planning.spots import MAX_SPOTS, PLAN_COLUMNS, RESERVED_COLUMNS, Spots, grid_spots, read_spots

__all__ = ["BASES", "MAX_SPOTS", "N_SAMPLES", "PLAN_COLUMNS", "RESERVED_COLUMNS", "Plan", "Spots",
           "bearing_information", "ellipse_area_m2", "grid_spots", "plan_next_bearing", "plan_sheet", "read_spots"]
