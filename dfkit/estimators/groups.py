"""Per-fix reductions over bearings grouped by fix, without a Python loop over fixes.

Bearings of many fixes sit in flat arrays with a fix index ``g`` (0..m-1); these
helpers sum, rank and pick within each fix with ``np.bincount`` and sorting.
"""

from __future__ import annotations

import numpy as np


def gsum(g, values, m):
    """Sum of ``values`` within each of ``m`` groups."""
    return np.bincount(g, values, m)


def solve2(a11, a12, a22, b1, b2):
    """Solve the symmetric 2x2 systems [[a11, a12], [a12, a22]] x = b, element-wise.

    Returns x1, x2 and the conditioning ratio |det| / (trace/2)^2 (0 for a singular matrix).
    """
    det = a11 * a22 - a12 * a12
    scale = (np.abs(a11) + np.abs(a22)) ** 2 / 4.0
    with np.errstate(divide="ignore", invalid="ignore"):
        return (a22 * b1 - a12 * b2) / det, (a11 * b2 - a12 * b1) / det, np.abs(det) / scale


def within_rank(g, key):
    """Rank (0, 1, ...) of each element within its group when sorted by ``key`` ascending."""
    order = np.lexsort((key, g))
    gs = g[order]
    n = len(g)
    first = np.ones(n, bool)
    first[1:] = gs[1:] != gs[:-1]
    start = np.maximum.accumulate(np.where(first, np.arange(n), 0))
    rank = np.empty(n, np.int64)
    rank[order] = np.arange(n) - start
    return rank


def group_median(values, g, m):
    """Median of ``values`` within each group (NaN for an empty group)."""
    order = np.lexsort((values, g))
    v = values[order]
    counts = np.bincount(g, minlength=m)
    starts = np.concatenate(([0], np.cumsum(counts)[:-1]))
    lo = starts + np.maximum(counts - 1, 0) // 2
    hi = starts + counts // 2
    out = np.full(m, np.nan)
    ok = counts > 0
    out[ok] = 0.5 * (v[lo[ok]] + v[np.minimum(hi[ok], len(v) - 1)])
    return out


def best_in_group(g, score, m):
    """Index of the element with the smallest ``score`` in each group (-1 where a group has none).

    NaN scores are never chosen while a finite one exists.
    """
    key = np.where(np.isfinite(score), score, np.inf)
    order = np.lexsort((key, g))
    out = np.full(m, -1, np.int64)
    gs = g[order]
    first = np.ones(len(order), bool)
    first[1:] = gs[1:] != gs[:-1]
    out[gs[first]] = order[first]
    return out


def top_in_group(g, score, m, k):
    """Indices of the ``k`` smallest finite scores of each group, shape (m, k), -1 where fewer exist."""
    key = np.where(np.isfinite(score), score, np.inf)
    rank = within_rank(g, key)
    out = np.full((m, k), -1, np.int64)
    sel = (rank < k) & np.isfinite(key)
    out[g[sel], rank[sel]] = np.flatnonzero(sel)
    return out


def group_min(g, values, m):
    """Minimum of ``values`` within each group (inf for an empty group)."""
    out = np.full(m, np.inf)
    np.minimum.at(out, g, values)
    return out


def expand(counts_of_owner, offsets_of_owner, order):
    """For each owner k with ``counts[k]`` members stored at ``order[offsets[k]:offsets[k] + counts[k]]``,
    the flat list of (owner, member) pairs: returns (owner index, member index) arrays."""
    counts_of_owner = np.asarray(counts_of_owner, np.int64)
    owner = np.repeat(np.arange(len(counts_of_owner)), counts_of_owner)
    starts = np.concatenate(([0], np.cumsum(counts_of_owner)[:-1]))
    within = np.arange(len(owner)) - np.repeat(starts, counts_of_owner)
    return owner, order[np.repeat(offsets_of_owner, counts_of_owner) + within]
