"""Per-group smallest and largest values (numpy) checked against pandas' groupby ``min`` and ``max`` (pandas
documentation, GroupBy.min/max), and the evidence checks that use them to skip tight fixes: a station just beyond
the far-station distance of dfkit.policy is still refused, whatever the order of the rows; and the shared empty
list of rejected lines of a fix without any."""

import numpy as np
import pandas as pd
import pytest

from dfkit.observations import read_bearings
from dfkit.observations.groupstats import group_ranges
from dfkit.policy import FAR_STATION_KM


@pytest.mark.parametrize("seed", range(10))
def test_ranges_match_pandas_groupby(seed):
    rng = np.random.default_rng(seed)
    n = int(rng.integers(1, 300))
    m = int(rng.integers(1, 60))
    groups = rng.integers(0, m, n)
    if seed % 2:
        groups = np.sort(groups)              # rows that come grouped take the path without a sort
    values = rng.normal(47.0, 3.0, n)
    if seed % 3 == 0:
        values[rng.integers(0, n)] = np.nan   # a group holding a NaN has a NaN range
    counts, ((lo, hi),) = group_ranges(groups, m, values)
    frame = pd.DataFrame({"g": groups, "v": values}).groupby("g")["v"]
    want_lo, want_hi = np.full(m, np.nan), np.full(m, np.nan)
    has_nan = frame.apply(lambda v: v.isna().any())
    idx = frame.min().index.to_numpy()
    want_lo[idx] = np.where(has_nan, np.nan, frame.min().to_numpy())    # pandas skips NaN; the range does not
    want_hi[idx] = np.where(has_nan, np.nan, frame.max().to_numpy())
    assert np.array_equal(counts, np.bincount(groups, minlength=m))
    assert np.array_equal(lo, want_lo, equal_nan=True) and np.array_equal(hi, want_hi, equal_nan=True)


def _far_sheet(order):
    # three stations within about a kilometre and one 0.55° of latitude north (about 61 km on any model of the
    # earth: 111 km per degree of latitude, a value from memory) in fix A; fix B all within a kilometre
    rows = [("A", 47.000, 15.000, 10), ("A", 47.005, 15.004, 20), ("A", 47.002, 14.996, 30), ("A", 47.550, 15.000, 40),
            ("B", 47.100, 15.100, 50), ("B", 47.104, 15.106, 60), ("B", 47.101, 15.097, 70)]
    rows = [rows[i] for i in order]
    return "fix,lat,lon,bearing\n" + "".join(f"{f},{la},{lo},{b}\n" for f, la, lo, b in rows)


@pytest.mark.parametrize("order", [range(7), [4, 0, 5, 1, 6, 2, 3], [3, 6, 5, 4, 2, 1, 0]])
def test_a_station_just_beyond_the_far_distance_is_refused(write_sheet, order):
    assert 0.55 * 111.0 > FAR_STATION_KM        # the case is beyond the policy's distance
    b = read_bearings(write_sheet(_far_sheet(list(order))))
    errors = [p for p in b.problems if p.severity == "error"]
    far_line = 2 + list(order).index(3)
    assert [p.line for p in errors] == [far_line] and "km from the other stations" in errors[0].message
    assert len(b.table) == 6


def test_fixes_without_rejected_lines_share_an_empty_list_that_refuses_changes(write_sheet):
    b = read_bearings(write_sheet("fix,lat,lon,bearing\nA,47,15,10\nA,47.01,15,x\nB,47,15,10\nB,47.01,15.01,20\n"))
    lines = b.fix_index.set_index("fix")["rejected_lines"]
    assert lines["A"] == [3] and lines["B"] == [] and isinstance(lines["B"], list)
    lines["A"].append(99)                      # a fix's own list is an ordinary list
    with pytest.raises(TypeError):
        lines["B"].append(3)
    assert lines["B"] == []
