"""Bearings to positions: the estimators, vectorised over many fixes at once.

Estimators (``method``; the registry is :mod:`dfkit.estimators.registry`):

``mle``
    Maximum likelihood under von Mises bearing errors, maximising
    sum kappa_i cos(r_i) (R. V. Lenth, "On finding the source of a signal",
    Technometrics 23(2), 149-154, 1981): :mod:`dfkit.estimators.lenth`.
``huber``, ``andrews``
    Lenth's (1981) robust M-estimators, which down-weight wild bearings
    (Andrews' to zero): :mod:`dfkit.estimators.robust`.
``lsq``
    Least squares on the perpendicular distances to the bearing lines:
    :mod:`dfkit.estimators.lsq`.
``stansfield``
    Range-weighted least squares, weights 1/(d_i sigma_i)^2 (R. G. Stansfield,
    "Statistical theory of d.f. fixing", J. IEE Part IIIA 94(15), 762-770,
    1947): :mod:`dfkit.estimators.stansfield`.

How a fix is solved exactly on the ellipsoid: :mod:`dfkit.estimators.plane` (the
exact local plane), :mod:`dfkit.estimators.starts` (starts that do not inherit a
wild bearing), :mod:`dfkit.estimators.iterate` (the planar iterations) and
:mod:`dfkit.estimators.solve` (the re-centring loop and the final checks). Each
method's covariance: :mod:`dfkit.estimators.covariance`.
"""

from dfkit.estimators.lenth import kappa_from_sd
from dfkit.estimators.registry import METHODS, REGISTRY, Method
from dfkit.estimators.robust import ROBUST_C
from dfkit.estimators.solve import ENDINGS, PARALLEL_DEG, Solution, solve

__all__ = ["ENDINGS", "METHODS", "PARALLEL_DEG", "REGISTRY", "ROBUST_C", "Method", "Solution", "kappa_from_sd",
           "solve"]
