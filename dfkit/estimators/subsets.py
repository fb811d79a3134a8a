"""Subsets of a fix's bearings, as flat index arrays: each fix without one bearing, or whole.

A *variant* is a set of bearings of one fix, solved as a fix of its own (one
vectorised :func:`dfkit.estimators.solve` call for all variants). Variants test
explanations such as "bearing j is wild" (the fix without j) or "every bearing is
good" (the whole fix).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from dfkit.estimators.groups import expand


@dataclass
class Variants:
    """``fix`` (k,) the fix of each variant; ``left_out`` (k,) the bearing it leaves out (-1: none);
    ``owner``, ``member`` the flat (variant, bearing) pairs of its bearings, grouped by variant."""

    fix: np.ndarray
    left_out: np.ndarray
    owner: np.ndarray
    member: np.ndarray

    def __len__(self) -> int:
        return len(self.fix)


def _layout(g, counts):
    order = np.argsort(g, kind="stable")
    offsets = np.concatenate(([0], np.cumsum(counts)[:-1])).astype(np.int64)
    return order, offsets


def _expand(counts_of_owner, offsets_of_owner, order):
    if not len(counts_of_owner):
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    return expand(counts_of_owner, offsets_of_owner, order)


def variants(g, counts, fixes_out, fixes_whole=None, *, skip=None) -> Variants:
    """Each fix of ``fixes_out`` without each of its bearings in turn, then each fix of ``fixes_whole`` whole.

    Parameters
    ----------
    g : ndarray of int, shape (N,)
        Fix of each bearing.
    counts : ndarray of int
        Bearings per fix.
    fixes_out, fixes_whole : array_like of int
        Fix indices.
    skip : ndarray of bool, shape (N,), optional
        Bearings not to leave out (no variant without them).
    """
    counts = np.asarray(counts, np.int64)
    order, offsets = _layout(g, counts)
    fixes_out = np.asarray(fixes_out, np.int64)
    fixes_whole = np.zeros(0, np.int64) if fixes_whole is None else np.asarray(fixes_whole, np.int64)
    own, out = _expand(counts[fixes_out], offsets[fixes_out], order)
    v_fix = fixes_out[own]
    if skip is not None:
        keep = ~skip[out]
        v_fix, out = v_fix[keep], out[keep]
    v_fix = np.concatenate([v_fix, fixes_whole])
    v_out = np.concatenate([out, np.full(len(fixes_whole), -1, np.int64)])
    owner, member = _expand(counts[v_fix], offsets[v_fix], order)
    keep = member != v_out[owner]
    return Variants(fix=v_fix, left_out=v_out, owner=owner[keep], member=member[keep])
