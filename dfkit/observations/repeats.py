"""Repeated rows: the same bearing written twice is one bearing.

A row *repeats* an earlier one when both are usable and have the same fix (tag and label, after grouping), the
same time (or both none), the same station position, the same bearing (in degrees, with the same north and
declination), the same SD, and the same text in every other column but the note (observer, antenna, a beacon's
position in a trials sheet, columns dfkit does not know). The copy is not used and is reported on its line ("repeats line 3"): a copied
row is no new information, and counting it would make the region smaller than the bearings allow (two
identical bearings weigh like one bearing with its SD divided by the square root of two).

Without times, two rows that agree in everything else are also taken as one bearing: taken twice from the same
spot at the same moment or copied, the readings share the spot's reflections and the observer's reading, and
dfkit cannot tell them apart from a copy. Rows with different times are different bearings.
"""

from __future__ import annotations

import numpy as np
import pandas as pd


def repeated_rows(fix_ids, times, lat, lon, bearing_deg, *, usable, extra=()):
    """Which usable rows repeat an earlier usable row, and the index of the row each repeats.

    Parameters
    ----------
    fix_ids : array_like of int
        Fix of each row (-1 for none).
    times : array_like of float
        Seconds since 1970 UTC, NaN without a time.
    lat, lon : array_like of float
        Station position [°].
    bearing_deg : array_like of float
        Bearing as read, in degrees of its own north (with north and declination in ``extra``). [°]
    usable : array_like of bool
        Rows still in use; only they are compared.
    extra : sequence of array_like
        More columns that must agree (north, declination, SD, observer, antenna...).

    Returns
    -------
    repeat : ndarray of bool
        Rows that repeat an earlier row (in sheet order).
    first : ndarray of int
        For each repeat, the index of the first row it repeats (-1 elsewhere).

    >>> rep, first = repeated_rows([0, 0, 0], [np.nan] * 3, [47.0] * 3, [15.0] * 3, [20.0, 20.0, 21.0],
    ...                            usable=np.ones(3, bool))
    >>> rep.tolist(), first.tolist()
    ([False, True, False], [-1, 0, -1])
    """
    ids = np.asarray(fix_ids, np.int64)
    n = len(ids)
    repeat = np.zeros(n, bool)
    first = np.full(n, -1, np.int64)
    b = np.asarray(bearing_deg, float)
    use = np.asarray(usable, bool) & (ids >= 0) & np.isfinite(b)
    if use.sum() < 2:
        return repeat, first
    # a quick screen on (fix, bearing); the full comparison runs only on rows that share both
    rows = np.flatnonzero(use)
    rows = rows[_shared_keys(ids[rows], b[rows])]
    if not len(rows):
        return repeat, first
    cols = {"f": ids[rows], "t": np.asarray(times, float)[rows], "la": np.asarray(lat, float)[rows],
            "lo": np.asarray(lon, float)[rows], "b": b[rows]}
    for k, e in enumerate(extra):
        cols[f"x{k}"] = np.asarray(e, dtype=object)[rows]
    frame = pd.DataFrame(cols)
    group = frame.groupby(list(cols), sort=False, dropna=False).ngroup().to_numpy()
    _, first_pos = np.unique(group, return_index=True)
    head = rows[first_pos][group]
    rep = head != rows
    repeat[rows[rep]] = True
    first[rows[rep]] = head[rep]
    return repeat, first


#: An odd 64-bit multiplier (the golden-ratio constant, as two's complement) spreading fix ids over the key bits.
_SPREAD = np.int64(-7046029254386353131)


def _shared_keys(ids, b):
    """Rows whose (fix, bearing) key occurs more than once: a screen, so a key may also join rows that differ (two
    pairs giving one key); it never parts rows with the same fix and the same bearing (-0.0 is taken as 0.0).
    One sort of 64-bit keys, instead of a hash table sized for every row."""
    key = (b + 0.0).view(np.int64) ^ (ids * _SPREAD)        # int64 products wrap; equal pairs, equal keys
    order = np.argsort(key)
    same = key[order[1:]] == key[order[:-1]]
    out = np.zeros(len(key), bool)
    out[order[1:][same]] = True
    out[order[:-1][same]] = True
    return out
