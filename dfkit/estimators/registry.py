"""The estimators dfkit offers, in one table: add a method here and in its family's module.

Each entry says how the method is solved (``kind``):

* ``closed``: a 2x2 linear system in each plane (least squares);
* ``fixed_point``: re-weighted least squares until the point stops moving (Stansfield);
* ``optimiser``: minimise the method's objective sum f(r_i) with Newton or scoring steps
  that are accepted only when they lower it (Lenth's likelihood, the M-estimators).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

from dfkit.estimators import lenth, robust


@dataclass(frozen=True)
class Method:
    """An estimator: its name, family, how it is solved, and what it minimises.

    ``terms(r, w, s, c)`` returns per-bearing (f, f', scoring curvature, f'') of the
    objective for optimisers, ``objective(r, w, s, c)`` f alone; ``weights(r, s, c)``
    the weight each bearing ends with. ``sc_terms(sn, cs, w, s, c)`` (f', scoring curvature, f'') and
    ``sc_objective(sn, cs, w, s, c)``, where a method has them, take sin r and cos r in place of r: the
    optimiser then needs no arctan2 per bearing and step.
    """

    name: str
    family: str
    kind: str
    summary: str
    terms: Callable | None = None
    objective: Callable | None = None
    weights: Callable | None = None
    robust: bool = False
    default_c: float | None = None
    sc_terms: Callable | None = None
    sc_objective: Callable | None = None


_huber_terms, _huber_objective, _huber_weights = robust.make_terms("huber")
_andrews_terms, _andrews_objective, _andrews_weights = robust.make_terms("andrews")

REGISTRY: dict[str, Method] = {
    "mle": Method("mle", "lenth", "optimiser", "maximum likelihood, von Mises bearing errors (Lenth 1981)",
                  lenth.terms, lenth.objective, lenth.weights, sc_terms=lenth.sc_terms,
                  sc_objective=lenth.sc_objective),
    "huber": Method("huber", "robust", "optimiser", "Huber M-estimator: large residuals count linearly",
                    _huber_terms, _huber_objective, _huber_weights, robust=True, default_c=robust.ROBUST_C["huber"]),
    "andrews": Method("andrews", "robust", "optimiser", "Andrews M-estimator: wild bearings get weight 0",
                      _andrews_terms, _andrews_objective, _andrews_weights, robust=True, default_c=robust.ROBUST_C["andrews"]),
    "lsq": Method("lsq", "lsq", "closed", "least squares on the perpendicular distances to the lines"),
    "stansfield": Method("stansfield", "stansfield", "fixed_point",
                         "least squares weighted by 1/(range x SD)^2 (Stansfield 1947)"),
}

#: Names of the methods, the default first.
METHODS = tuple(REGISTRY)


def get(method: str) -> Method:
    """The registry entry of ``method``; ValueError naming the choices otherwise."""
    try:
        return REGISTRY[method]
    except (KeyError, TypeError):
        raise ValueError(f"method={method!r} is not one of {', '.join(repr(m) for m in METHODS)}") from None
