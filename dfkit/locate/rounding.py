"""Observer positions written to a coarse step: their rounding carried into each bearing's SD.

An observer whose position was written to a step (:mod:`dfkit.observations.precision`: lat/lon to 3 decimals,
a 100 m MGRS square, UTM to 100 m) stood somewhere in a cell around the point read, its error spread evenly over
the cell: SD s_e / sqrt(12) east and s_n / sqrt(12) north (the variance of a uniform distribution; Sheppard 1898,
see :mod:`dfkit.locate.resolution`). The bearing line is drawn from the point read, so it is shifted sideways by
the error's component across the line of sight,

    sigma_perp^2 = sigma_e^2 cos^2(beta) + sigma_n^2 sin^2(beta)    (beta: the line's azimuth),

and at the fix, a range r away, that is an angle of sigma_perp / r radians (to first order; the tests check it
against the spread of geodesic azimuths from points drawn evenly over the cell, with pyproj's Geod). The two
errors are independent, so bearing i's variance in the fit becomes

    SD_i^2 + (sigma_perp,i / r_i)^2.

Where the SD is known (given or calibrated) the fixes concerned are solved again with these SDs, the ranges taken
from a first fit without them: the weights of the fit, its consistency test and its likelihood region and ellipse
all use them, through the same per-bearing SDs as bearings with different SDs always were (a bearing close to the
fix, whose line the rounding swings most, counts less). Where the SD is estimated from a fix's own residuals, the
residuals already hold the rounding and the estimate takes it in (measured: benchmarks/coverage_positions.py,
DEVELOPERS.md), so those fixes are left as they are.

A fix whose rounding adds less than :data:`dfkit.policy.ROUNDING_NEGLIGIBLE_RATIO` of the SD to every bearing is
left as it was, bit for bit.
"""

from __future__ import annotations

import numpy as np

from dfkit.policy import ROUNDING_NEGLIGIBLE_RATIO, ROUNDING_SAID_FACTOR

#: Columns of the bearings table that hold the steps (written only when some position is rounded).
STEP_COLUMNS = ("position_step_east_m", "position_step_north_m")
#: A uniform error over a step s has SD s / sqrt(12).
_UNIFORM = 1.0 / np.sqrt(12.0)
#: Largest SD a bearing is given for its observer's rounding [°]: beyond, the line carries next to nothing
#: anyway, and the first-order angle sigma_perp / r no longer describes it (the observer within about one step
#: of the fix).
MAX_ADDED_SD_DEG = 60.0


def has_steps(table) -> bool:
    return STEP_COLUMNS[0] in table.columns


def added_sd_deg(step_east_m, step_north_m, azimuth_deg, range_m) -> np.ndarray:
    """The SD a bearing's line gets at the fix from its observer's rounding [°] (0 where not rounded or the range
    is unknown).

    ``azimuth_deg``: the azimuth of the line of sight, either way along it; ``range_m``: observer to fix.
    """
    se = np.asarray(step_east_m, float) * _UNIFORM
    sn = np.asarray(step_north_m, float) * _UNIFORM
    b = np.radians(np.asarray(azimuth_deg, float))
    perp = np.sqrt(se * se * np.cos(b) ** 2 + sn * sn * np.sin(b) ** 2)
    r = np.asarray(range_m, float)
    with np.errstate(invalid="ignore", divide="ignore"):
        out = np.degrees(perp / r)
    out = np.where(np.isfinite(out) & (perp > 0), out, 0.0)
    return np.fmin(out, MAX_ADDED_SD_DEG)


def widened_sd(sd_deg, table, g, m, sol):
    """Each bearing's SD with its observer's rounding, and the fixes changed.

    Returns ``(sd, added, changed)``: the SD per bearing [°] (the given SD where unchanged or unknown), the SD
    added for the rounding per bearing [°] (0 elsewhere), and a per-fix mask of the fixes to solve again (a known
    SD, a verified answer, and some bearing's rounding at least :data:`~dfkit.policy.ROUNDING_NEGLIGIBLE_RATIO` of
    its SD)."""
    sd = np.asarray(sd_deg, float)
    added = added_sd_deg(table[STEP_COLUMNS[0]].to_numpy(float), table[STEP_COLUMNS[1]].to_numpy(float),
                         sol.azimuth_from_fix_deg, sol.range_m)
    known_b = sol.sd_known[g] & np.isfinite(sd)
    with np.errstate(invalid="ignore", divide="ignore"):
        big = known_b & (added >= ROUNDING_NEGLIGIBLE_RATIO * sd)
    # only fixes with a verified answer: elsewhere the ranges mean nothing (a single bearing's "fix" sits on its
    # observer), and the fix has no region to widen
    changed = (np.bincount(g, big.astype(float), m) > 0) & sol.converged
    take = changed[g] & known_b
    added = np.where(take, added, 0.0)
    return np.where(take, np.hypot(sd, added), sd), added, changed


def widening(g, m, azimuth_deg, range_m, weight, sd_given, sd_used):
    """Per fix: how many times wider (linear size: the fourth root of the ratio of the determinants of the two
    Fisher informations at the fix, sum w g g^T / SD^2 with g across the line of sight, length 1 / range) its
    region is with the SDs used than with the given ones (1 where unchanged or not known)."""
    az = np.radians(np.asarray(azimuth_deg, float))
    r = np.asarray(range_m, float)
    with np.errstate(invalid="ignore", divide="ignore"):
        inv_r = np.where(r > 0, 1.0 / r, 0.0)
        gx, gy = np.cos(az) * inv_r, -np.sin(az) * inv_r
        w = np.where(np.asarray(weight, float) > 0, weight, 0.0)
        dets = []
        for sd in (np.asarray(sd_given, float), np.asarray(sd_used, float)):
            v = np.where(np.isfinite(sd) & (sd > 0), w / np.radians(sd) ** 2, 0.0)
            v = np.where(np.isfinite(gx) & np.isfinite(gy), v, 0.0)
            a, b, c = (np.bincount(g, v * np.nan_to_num(t), m) for t in (gx * gx, gx * gy, gy * gy))
            dets.append(a * c - b * b)
        f = (dets[0] / dets[1]) ** 0.25
    return np.where(np.isfinite(f) & (f > 0), f, 1.0)


def _step_text(e, n):
    if abs(e - n) <= 0.05 * max(e, n):
        return f"{_metres(max(e, n))}"
    return f"{_metres(n)} north-south and {_metres(e)} east-west"


def _metres(x):
    return f"{x:,.0f} m" if x >= 10 else f"{x:.1f} m"


def reason_text(step_e, step_n, source, factor) -> str:
    """The reason of a fix whose region its observers' rounding widened (``step_e``, ``step_n``: the coarsest
    step among its bearings [m]; ``source``: where those positions came from)."""
    how = {"lat/lon": "as lat/lon", "mgrs": "as MGRS squares", "utm": "as UTM"}.get(source, "")
    return (f"observer positions were written to steps of about {_step_text(step_e, step_n)} {how}".rstrip()
            + f": the region allows for that rounding and is {factor:.1f}x as wide as the bearings alone would make it")


def reasons(b, g, m, changed, factor, has_pos):
    """Reason texts by fix index for the fixes whose region the rounding widened by at least
    :data:`~dfkit.policy.ROUNDING_SAID_FACTOR`."""
    out = {}
    said = np.flatnonzero(changed & has_pos & (factor >= ROUNDING_SAID_FACTOR))
    if not len(said):
        return out
    e = b[STEP_COLUMNS[0]].to_numpy(float)
    n = b[STEP_COLUMNS[1]].to_numpy(float)
    src = b["position_from"].to_numpy(dtype=object)
    biggest = np.fmax(e, n)
    order = np.lexsort((-biggest, g))          # per fix, its coarsest step first
    first = np.full(m, -1)
    gs = g[order]
    starts = np.flatnonzero(np.r_[True, gs[1:] != gs[:-1]])
    first[gs[starts]] = order[starts]
    for i in said.tolist():
        k = first[i]
        out[i] = reason_text(e[k], n[k], src[k], factor[i])
    return out


def note(fixes) -> str | None:
    """One note for the sheet (after any chunks are put together): which positions were taken as rounded, and
    what it did to the regions."""
    b = fixes.bearings
    if not len(b):
        return None
    e = b[STEP_COLUMNS[0]].to_numpy(float)
    n = b[STEP_COLUMNS[1]].to_numpy(float)
    rounded = np.fmax(e, n) > 0
    if not rounded.any():
        return None
    g = b["fix_id"].to_numpy(np.int64)
    m = len(fixes.table)
    src = b["position_from"].to_numpy(dtype=object)
    kinds = []
    for s in ("lat/lon", "mgrs", "utm"):
        sel = rounded & (src == s)
        if sel.any():
            k = int(np.argmax(np.fmax(e[sel], n[sel])))
            kinds.append(f"{int(sel.sum())} {'row' if sel.sum() == 1 else 'rows'} {s} to steps of up to "
                         f"{_step_text(e[sel][k], n[sel][k])}")
    text = ("observer positions written to a coarse step (" + "; ".join(kinds) + "): each observer stood anywhere "
            "in a cell of that size, an SD of the step over √12 per axis")
    added = b["rounding_sd_deg"].to_numpy(float) if "rounding_sd_deg" in b else np.zeros(len(b))
    changed = np.bincount(g, (added > 0).astype(float), m) > 0
    if changed.any() and fixes.azimuth_deg is not None:
        given = b["sd"].to_numpy(float)
        f = widening(g, m, fixes.azimuth_deg, b["range_m"].to_numpy(float), b["weight"].to_numpy(float), given,
                     np.hypot(given, added))
        f = f[changed & np.isfinite(fixes.table["lat"].to_numpy(float))]
        text += (f"; where the SD is known, each bearing's SD takes in its observer's rounding across the line of "
                 f"sight at the fix (column rounding_sd_deg of the bearings), so the "
                 f"{'region of 1 fix is' if changed.sum() == 1 else f'regions of {int(changed.sum())} fixes are'} "
                 "wider for it"
                 + (f": a median {np.median(f):.2f}x, up to {f.max():.2f}x" if len(f) else ""))
    estimated = (fixes.table["sd_source"] == "estimated").to_numpy()
    with_rounding = np.zeros(m, bool)
    with_rounding[np.unique(g[rounded])] = True
    if (with_rounding & estimated).any():
        text += ("; where the SD is estimated from a fix's own residuals, the estimate already holds the rounding "
                 "and nothing is added")
    return text
