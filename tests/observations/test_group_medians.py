"""Per-group counts and medians (numpy) checked against pandas' groupby ``size`` and ``median`` (pandas
documentation, GroupBy.median: the median of each group, excluding missing values) and against numpy's
``np.median`` of each group."""

import numpy as np
import pandas as pd
import pytest

from dfkit.observations.groupstats import group_medians


def _reference(groups, m, values):
    frame = pd.DataFrame({"g": groups, "v": values}).groupby("g")["v"]
    counts = np.zeros(m, np.int64)
    med = np.full(m, np.nan)
    size = frame.size()
    counts[size.index.to_numpy()] = size.to_numpy()
    by = frame.median()
    med[by.index.to_numpy()] = by.to_numpy()
    return counts, med


@pytest.mark.parametrize("seed", range(12))
def test_matches_pandas_groupby(seed):
    rng = np.random.default_rng(seed)
    n = int(rng.integers(1, 400))
    m = int(rng.integers(1, 80))
    groups = rng.integers(0, m, n)
    if seed % 2:
        groups = np.sort(groups)               # a sheet's rows usually come grouped
    if seed % 3 == 0:
        groups[: n // 2] = 0                   # one group larger than the padded ones
    values = np.round(rng.normal(47.0, 3.0, n), int(rng.integers(0, 7)))
    counts, (med,) = group_medians(groups, m, values)
    want_counts, want_med = _reference(groups, m, values)
    assert np.array_equal(counts, want_counts)
    assert np.array_equal(med, want_med, equal_nan=True)


def test_even_count_is_mean_of_the_two_middle_values():
    # np.median of [1, 2, 4, 10] is (2 + 4) / 2 = 3 (numpy documentation, numpy.median: the average of the two
    # middle values of the sorted copy); group 1 has no rows
    counts, (med,) = group_medians([0, 0, 0, 0, 2, 2, 2], 3, [10.0, 1.0, 4.0, 2.0, 7.0, 5.0, 6.0])
    assert counts.tolist() == [4, 0, 3]
    assert med[0] == np.median([10.0, 1.0, 4.0, 2.0]) == 3.0
    assert np.isnan(med[1])
    assert med[2] == 6.0


def test_large_group_against_numpy():
    rng = np.random.default_rng(5)
    values = rng.normal(size=101)
    groups = np.r_[np.zeros(100, int), 1]
    counts, (med,) = group_medians(groups, 2, values)
    assert counts.tolist() == [100, 1]
    assert med[0] == np.median(values[:100]) and med[1] == values[100]


def test_no_rows():
    counts, (a, b) = group_medians(np.zeros(0, int), 2, np.zeros(0), np.zeros(0))
    assert counts.tolist() == [0, 0] and np.isnan(a).all() and np.isnan(b).all()
