"""Repeated rows are one bearing: the copy is reported on its line and not used (issue 7, field trial: dup.csv
counted four copies of one bearing and made the region smaller than the bearings allow)."""

import numpy as np
import pytest

from dfkit import read_bearings

ROW_A = "47.8473227,15.1531455,19.995"
ROW_B = "47.8581248,15.1757928,280.012"


def errors(b):
    return [(p.line, p.column, p.message) for p in b.problems if p.severity == "error"]


def test_copies_of_a_row_are_named_and_not_used(write_sheet):
    b = read_bearings(write_sheet(f"fix,lat,lon,bearing,sd\nD,{ROW_A},3\nD,{ROW_B},3\nD,{ROW_B},3\nD,{ROW_B},3\n"
                                  f"D,{ROW_B},3\n"))
    errs = errors(b)
    assert [(line, col) for line, col, _ in errs] == [(4, ""), (5, ""), (6, "")]
    assert all(m.startswith("repeats line 3 ") and "not used" in m and "no time" in m for _, _, m in errs)
    assert b.table["line"].tolist() == [2, 3]
    assert b.fix_index["rejected_lines"][0] == [4, 5, 6]


def test_the_bearings_of_a_sheet_with_copies_are_those_without(write_sheet):
    with_copies = read_bearings(write_sheet(f"fix,lat,lon,bearing\nA,{ROW_A}\nA,{ROW_B}\nA,{ROW_B}\n", "a.csv"))
    clean = read_bearings(write_sheet(f"fix,lat,lon,bearing\nA,{ROW_A}\nA,{ROW_B}\n", "b.csv"))
    cols = ["fix", "lat", "lon", "true_bearing", "sd"]
    assert with_copies.table[cols].equals(clean.table[cols])


@pytest.mark.parametrize("second, repeated", [
    ("2026-05-03T06:12:00Z,D,{B},3,ok", True),           # same time, another note: a copy
    ("2026-05-03T06:12:00Z,D,{B},4,ok", False),          # another SD: not a copy
    ("2026-05-03T06:13:00Z,D,{B},3,ok", False),          # a minute later: another bearing
    ("2026-05-03T06:12:00Z,D,47.8581248,15.1757929,280.012,3,ok", False),   # another spot
    ("2026-05-03T06:12:00Z,D,{B2},3,ok", False),         # another bearing
])
def test_what_counts_as_a_repeat(write_sheet, second, repeated):
    rows = ("time,fix,lat,lon,bearing,sd,note\n"
            f"2026-05-03T06:00:00Z,D,{ROW_A},3,\n"
            f"2026-05-03T06:12:00Z,D,{ROW_B},3,\n"
            + second.format(B=ROW_B, B2=ROW_B.replace("280.012", "281")) + "\n")
    b = read_bearings(write_sheet(rows))
    errs = errors(b)
    if repeated:
        assert [(line, col) for line, col, _ in errs] == [(4, "")] and "repeats line 3 (same fix, time," in errs[0][2]
    else:
        assert errs == []


def test_two_observers_at_one_spot_are_two_bearings(write_sheet):
    b = read_bearings(write_sheet(f"fix,lat,lon,bearing,observer\nA,{ROW_A},ann\nA,{ROW_B},ann\nA,{ROW_B},bo\n"))
    assert errors(b) == [] and len(b.table) == 3


def test_a_column_dfkit_does_not_know_tells_rows_apart(write_sheet):
    # beacon trials: one station and bearing, two beacons; any other column but the note counts
    b = read_bearings(write_sheet(f"fix,lat,lon,bearing,beacon_lat,comment\nA,{ROW_A},46.8,x\nA,{ROW_B},46.8,x\n"
                                  f"A,{ROW_B},46.9,x\nA,{ROW_B},46.8,y\n"))
    assert [(line, m.split(" (")[0]) for line, _, m in errors(b)] == [(5, "repeats line 3")]


def test_another_fix_or_tag_is_not_a_repeat(write_sheet):
    b = read_bearings(write_sheet(f"fix,tag,lat,lon,bearing\nA,1,{ROW_A}\nA,1,{ROW_B}\nA,2,{ROW_B}\nB,1,{ROW_B}\n"))
    assert errors(b) == []


def test_a_rejected_row_is_not_the_original(write_sheet):
    # a copy of a row that is itself refused is refused for its own reason, not as a repeat
    b = read_bearings(write_sheet(f"fix,lat,lon,bearing,unit\nA,{ROW_A},deg\nA,{ROW_B},furlong\nA,{ROW_B},deg\n"))
    assert [(line, col) for line, col, _ in errors(b)] == [(3, "unit")]
    assert b.table["line"].tolist() == [2, 4]


def test_repeats_are_found_among_many_rows(write_sheet):
    rng = np.random.default_rng(7)
    n = 3000
    lat = 47 + rng.uniform(0, 0.01, n)
    lon = 15 + rng.uniform(0, 0.01, n)
    brg = rng.uniform(0, 360, n).round(1)
    lines = [f"F{i // 3},{a:.6f},{o:.6f},{x}" for i, (a, o, x) in enumerate(zip(lat, lon, brg))]
    copies = [10, 500, 2999]
    text = "fix,lat,lon,bearing\n" + "\n".join(lines + [lines[i] for i in copies]) + "\n"
    b = read_bearings(write_sheet(text))
    errs = errors(b)
    assert [line for line, _, _ in errs] == [n + 2, n + 3, n + 4]
    assert [m.split(" (")[0] for _, _, m in errs] == [f"repeats line {i + 2}" for i in copies]


def test_the_screen_keeps_every_row_whose_fix_and_bearing_recur():
    # held to a plain count of (fix, bearing) pairs; a -0.0 bearing equals 0.0 (IEEE 754: the two compare equal)
    from dfkit.observations.repeats import _shared_keys
    rng = np.random.default_rng(5)
    ids = rng.integers(0, 50, 3000)
    b = rng.choice([0.0, -0.0, 12.5, 359.99, 180.0, 7.25], 3000)
    counts = {}
    for i, x in zip(ids.tolist(), b.tolist()):
        counts[(i, x)] = counts.get((i, x), 0) + 1       # Python's dict: 0.0 and -0.0 are one key
    want = np.array([counts[(i, x)] > 1 for i, x in zip(ids.tolist(), b.tolist())])
    got = _shared_keys(ids.astype(np.int64), b)
    assert (got >= want).all()      # a screen: never drops a recurring pair
    assert got.sum() - want.sum() < 10      # and adds next to nothing on this data
    assert _shared_keys(np.array([3, 3], np.int64), np.array([0.0, -0.0])).tolist() == [True, True]
    assert _shared_keys(np.array([3, 4], np.int64), np.array([10.0, 10.0])).tolist() == [False, False]


def test_a_copy_written_with_minus_zero_is_a_repeat(write_sheet):
    b = read_bearings(write_sheet(f"fix,lat,lon,bearing\nA,{ROW_A}\nA,47.8581248,15.1757928,0\n"
                                  "A,47.8581248,15.1757928,-0\n"))
    assert [(line, m[:15]) for line, _, m in errors(b)] == [(4, "repeats line 3 ")]
