"""Bearings to fixes: positions, statuses with plain reasons, covariances and likelihood regions.

:func:`locate` solves every fix of a :class:`~dfkit.observations.Bearings`
(:mod:`dfkit.locate.core`); :mod:`dfkit.locate.status` decides each fix's status
and reasons, :mod:`dfkit.locate.hints` names the line when one bearing spoils a
fix, :mod:`dfkit.locate.rivals` finds fixes that another set of their bearings
explains as well elsewhere (``ambiguous``), and :mod:`dfkit.locate.fixes` holds the
result (:class:`Fixes`).
"""

from dfkit.locate.core import locate, locate_sheet
from dfkit.locate.fixes import FIX_COLUMNS, STATUS_MEANING, WITH_POSITION, Fixes

__all__ = ["FIX_COLUMNS", "STATUS_MEANING", "WITH_POSITION", "Fixes", "locate", "locate_sheet"]
