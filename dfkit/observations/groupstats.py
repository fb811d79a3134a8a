"""Per-group counts and medians with numpy alone (no pandas groupby), for the evidence checks that compare a row
with the other rows of its own fix.

A median is the middle value of the group's sorted values, or the mean of the two middle values,
``(lower + upper) / 2``, for an even count: the usual definition, and the one pandas' groupby median uses.
"""

from __future__ import annotations

import numpy as np

#: Groups of up to this many rows are sorted as the rows of one padded 2-D array (one ``np.sort`` along the
#: rows); larger groups are sorted together by one lexsort of their own rows.
_PADDED = 16


def group_counts(groups, m: int) -> np.ndarray:
    """How many rows each group ``0..m-1`` has (``groups`` non-negative ints)."""
    return np.bincount(np.asarray(groups, np.int64), minlength=m)[:m]


def group_medians(groups, m: int, *values) -> tuple[np.ndarray, list[np.ndarray]]:
    """(count per group, [median per group for each of ``values``]) for groups ``0..m-1``; NaN for a group with
    no rows. ``groups`` are non-negative ints, one per row; ``values`` are arrays of finite floats, one per row."""
    groups = np.asarray(groups, np.int64)
    counts = group_counts(groups, m)
    meds = [np.full(m, np.nan) for _ in values]
    if not len(groups):
        return counts, meds
    order = np.argsort(groups, kind="stable")       # rows of a sheet come mostly grouped: a near-linear sort
    gs = groups[order]
    starts = np.cumsum(counts) - counts
    small_rows = counts[gs] <= _PADDED
    has = counts > 0
    small = has & (counts <= _PADDED)
    big = has & ~small
    if small.any():
        width = int(counts[small].max())
        rank = np.arange(len(gs)) - starts[gs]
        at_g, at_r = gs[small_rows], rank[small_rows]
        which = np.flatnonzero(small)
        k = counts[which]
    if big.any():
        big_rows = np.flatnonzero(~small_rows)
        which_big = np.flatnonzero(big)
        k_big = counts[which_big]
        # start of each big group within the big rows (they keep the groups' order)
        start_big = np.cumsum(k_big) - k_big
    for v, med in zip(values, meds):
        vs = np.asarray(v, float)[order]
        if small.any():
            pad = np.full((m, width), np.inf)
            pad[at_g, at_r] = vs[small_rows]
            pad.sort(axis=1)
            med[which] = (pad[which, (k - 1) // 2] + pad[which, k // 2]) / 2
        if big.any():
            sub = vs[big_rows]
            s = sub[np.lexsort((sub, gs[big_rows]))]
            med[which_big] = (s[start_big + (k_big - 1) // 2] + s[start_big + k_big // 2]) / 2
    return counts, meds


def group_ranges(groups, m: int, *values) -> tuple[np.ndarray, list[tuple[np.ndarray, np.ndarray]]]:
    """(count per group, [(smallest, largest) per group for each of ``values``]) for groups ``0..m-1``; NaN for a
    group with no rows, and for a group holding a NaN. ``groups`` are non-negative ints, one per row. Rows that
    come grouped (each group's rows together, groups in any order) need no sort."""
    groups = np.asarray(groups, np.int64)
    counts = group_counts(groups, m)
    out = [(np.full(m, np.nan), np.full(m, np.nan)) for _ in values]
    if not len(groups):
        return counts, out
    starts = np.flatnonzero(np.concatenate([[True], groups[1:] != groups[:-1]]))
    order = None
    if len(starts) != int(np.count_nonzero(counts)):     # some group's rows are not together: sort them
        order = np.argsort(groups, kind="stable")
        gs = groups[order]
        starts = np.flatnonzero(np.concatenate([[True], gs[1:] != gs[:-1]]))
    else:
        gs = groups
    which = gs[starts]
    for v, (lo, hi) in zip(values, out):
        vs = np.asarray(v, float) if order is None else np.asarray(v, float)[order]
        lo[which] = np.minimum.reduceat(vs, starts)
        hi[which] = np.maximum.reduceat(vs, starts)
    return counts, out
