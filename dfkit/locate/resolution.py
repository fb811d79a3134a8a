"""How finely each fix's bearings were written down, and the smallest SD an estimate from them may take.

A bearing written to a step h (whole degrees: h = 1°) carries a rounding error spread
evenly over one step, whose SD is h / sqrt(12) (W. F. Sheppard, "On the calculation of
the most probable values of frequency-constants, for data arranged according to
equidistant divisions of a scale", Proc. London Math. Soc. 29, 353-380, 1898 [from
memory]). No bearing is better than the resolution it was written with, so an SD
estimated from a fix's own residuals is never taken below h / sqrt(12): three
whole-degree bearings that happen to meet in one point do not make a region of a
square metre.

The step of a fix is inferred from the values of its bearings as the reader keeps them
(the ``bearing`` column, in the unit they were written in, before any conversion): the
finest step any of them needs (23 -> 1, 276.5 -> 0.1, 223.82 -> 0.01; whole numbers
that are multiples of 10 or 5 -> 10 or 5), times the unit's size in degrees. So a fix
read to the nearest 10° (20, 280, 150) gets a floor of 2.9°: n bearings land on
multiples of 10 by chance with probability 10^-n. The written text is not kept, so a
cell written ``23.0`` counts as whole degrees; a fix whose bearings all end in ``.0`` is
then given the whole-degree floor, which errs towards a wider region, never a narrower
one.

The estimate is also never taken below :data:`dfkit.policy.MIN_ESTIMATED_SD_DEG`, the
plausibility limit of bearings taken by hand (see there for why). A known SD (sheet,
option or calibration) is used as given.
"""

from __future__ import annotations

import numpy as np

from dfkit.conventions import DEGREES_PER_UNIT
from dfkit.policy import MIN_ESTIMATED_SD_DEG

#: Finest decimal step looked for [decimals]: a bearing needing more is taken as written without rounding.
MAX_DECIMALS = 6
#: Sheppard's factor: a rounding error uniform over one step has SD step / sqrt(12).
SHEPPARD = 1.0 / np.sqrt(12.0)


def written_step(value, unit=None) -> np.ndarray:
    """The decimal step each bearing was written to, in degrees (NaN where none up to 6 decimals fits).

    Parameters
    ----------
    value : array_like
        Bearings as written, in their own unit (the reader's ``bearing`` column).
    unit : array_like of str, optional
        Their units ('deg', 'mil', 'grad'; default degrees).

    >>> [float(s) for s in written_step([23.0, 276.5, 223.82, 1610, 35, 280], ["deg"] * 3 + ["mil"] + ["deg"] * 2)]
    [1.0, 0.1, 0.01, 0.5625, 5.0, 10.0]
    """
    v = np.abs(np.asarray(value, float))
    step = np.full(v.shape, np.nan)
    todo = np.isfinite(v)
    for k in range(MAX_DECIMALS + 1):
        if not todo.any():
            break
        x = v * 10.0**k
        whole = todo & (np.abs(x - np.round(x)) <= np.fmax(1e-6, 8.0 * np.finfo(float).eps * x))
        step[whole] = 10.0**-k
        todo &= ~whole
    whole = step == 1.0
    for coarse in (5.0, 10.0):
        step[whole & (np.abs(v / coarse - np.round(v / coarse)) <= 1e-9)] = coarse
    if unit is None:
        return step
    u = np.asarray(unit, dtype=object)
    first = u.flat[0] if u.size else None
    if u.shape == v.shape and isinstance(first, str) and bool((u == first).all()):
        # one unit throughout (the usual sheet): one comparison over the cells instead of one per unit name
        per = np.full(v.shape, DEGREES_PER_UNIT.get(first, 1.0))
    else:
        per = np.ones(v.shape)
        for name, size in DEGREES_PER_UNIT.items():
            per[u == name] = size
    return step * per


def fix_steps(table, g, m) -> np.ndarray:
    """Each fix's recording step: the finest step among its bearings [°] (NaN when unknown)."""
    if "bearing" not in table or not len(table):
        return np.full(m, np.nan)
    unit = table["unit"].to_numpy(dtype=object) if "unit" in table else None
    step = written_step(table["bearing"].to_numpy(float), unit)
    out = np.full(m, np.inf)
    np.fmin.at(out, g, step)
    return np.where(np.isfinite(out), out, np.nan)


def sd_floors(step_deg) -> np.ndarray:
    """The smallest SD an estimate may take per fix [°]: its rounding SD, and at least the plausibility limit."""
    return np.fmax(np.nan_to_num(np.asarray(step_deg, float) * SHEPPARD, nan=0.0), MIN_ESTIMATED_SD_DEG)
