"""Sheet-level rules: missing columns, grouping into fixes, labels reused on another day, swapped lat/lon judged
against the row's own fix."""

import numpy as np
import pytest

from dfkit import SheetError, read_bearings
from dfkit.cli import main
from dfkit.locate import locate


def errors(b):
    return {p.line: p.message for p in b.problems if p.severity == "error"}


# --------------------------------------------------------------------------- missing columns

@pytest.mark.parametrize("header, words", [
    ("fix,lat,lon,heading", "no bearing column. Found: fix, lat, lon, heading"),
    ("fix,brg,note", "no position columns. Found: fix, bearing, note"),
    ("fix,lat,bearing", "a lat column but no lon column"),
    ("fix,station,bearing", "no stations file"),
    ("fix,easting,northing,bearing", "UTM positions need utm_zone"),
])
def test_missing_columns_are_one_message(write_sheet, capsys, header, words):
    sheet = write_sheet(header + "\n" + "\n".join(",".join(["A"] + ["1"] * (header.count(","))) for _ in range(50))
                        + "\n")
    with pytest.raises(SheetError, match=words.replace("(", r"\(")):
        read_bearings(sheet)
    assert main(["check", str(sheet)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and words in err


@pytest.mark.parametrize("b_name, lat_name, lon_name", [("azimuth", "latitude", "longitude"), ("brg", "lat", "lng"),
                                                        ("Bearing_deg", "Latitude", "Long")])
def test_documented_header_aliases(write_sheet, b_name, lat_name, lon_name):
    b = read_bearings(write_sheet(f"fix,{lat_name},{lon_name},{b_name}\nA,47,15,45\nA,47,15.02,315\n"))
    assert errors(b) == {} and b.table["true_bearing"].tolist() == [45.0, 315.0]
    assert any("read as 'bearing'" in p.message for p in b.problems) or b_name == "bearing"


# --------------------------------------------------------------------------- grouping

def walk(minutes, tag="150.1"):
    """A tracker walking round a still transmitter at (47.01 N, 15.01 E), one bearing at each stop; the bearings
    are computed with pyproj's geodesics (not dfkit), noise-free."""
    import pyproj

    geod = pyproj.Geod(ellps="WGS84")
    rows = []
    for k, m in enumerate(minutes):
        lon, lat, back = geod.fwd(15.01, 47.01, 360.0 * k / len(minutes) + 10.0, 1000.0)
        rows.append(f"{tag},2026-05-03T{6 + m // 60:02d}:{m % 60:02d}:00Z,{lat:.6f},{lon:.6f},{back % 360:.2f},3")
    return "tag,time,lat,lon,bearing,sd\n" + "\n".join(rows) + "\n"


def test_a_walk_with_bearings_11_to_12_minutes_apart_is_one_fix(write_sheet):
    b = read_bearings(write_sheet(walk([0, 11, 23])))
    assert b.table["fix"].nunique() == 1 and len(b.fix_index) == 1
    fixes = locate(b)
    assert fixes.table["status"].tolist() != ["long_span"]     # 23 min span, gaps 11 and 12 min: not flagged


def test_a_gap_longer_than_the_window_starts_a_new_fix(write_sheet):
    b = read_bearings(write_sheet(walk([0, 11, 23, 50, 55])))
    assert sorted(b.table.groupby("fix")["line"].apply(list).tolist()) == [[2, 3, 4], [5, 6]]


def test_a_long_chain_is_flagged(write_sheet):
    # bearings every 15 min for 75 min: each within the window, but the fix lasts more than 3 windows (60 min)
    b = read_bearings(write_sheet(walk([0, 15, 30, 45, 60, 75])))
    assert len(b.fix_index) == 1
    row = locate(b).table.iloc[0]
    assert row["status"] == "long_span" and "3 windows" in row["reason"]


def test_a_labelled_fix_with_a_gap_longer_than_the_window_is_flagged(write_sheet):
    sheet = walk([0, 5, 40]).replace("tag,", "fix,").replace("150.1,", "A,")
    b = read_bearings(write_sheet(sheet))
    row = locate(b).table.iloc[0]
    assert row["status"] == "long_span" and "35 min pass between two of its bearings" in row["reason"]


def test_the_window_given_once_serves_grouping_and_flags(write_sheet):
    b = read_bearings(write_sheet(walk([0, 25, 40])), window_min=30)
    assert len(b.fix_index) == 1 and b.window_min == 30
    assert locate(b).table["status"].iloc[0] != "long_span"


def test_labels_reused_on_another_day_are_split(write_sheet):
    # fixes numbered 1, 2 per day and per tag, as a season sheet does
    rows = []
    for day in (3, 4):
        for tag in ("150.1", "150.2"):
            for lab, hh in (("1", 6), ("2", 9)):
                for k in range(3):
                    rows.append(f"{lab},{tag},2026-05-0{day}T{hh:02d}:{5 * k:02d}:00Z,{47 + 0.004 * k:.3f},"
                                f"{15 + 0.006 * (k % 2):.3f},{[30, 330, 200][k]},3")
    b = read_bearings(write_sheet("fix,tag,time,lat,lon,bearing,sd\n" + "\n".join(rows) + "\n"))
    assert errors(b) == {}
    assert len(b.fix_index) == 8                                   # 2 days x 2 tags x 2 labels
    assert set(b.fix_index["fix"]) == {"1 (2026-05-03T06:00Z)", "1 (2026-05-04T06:00Z)", "2 (2026-05-03T09:00Z)",
                                       "2 (2026-05-04T09:00Z)"}
    assert (b.table.groupby("fix_id")["line"].count() == 3).all()
    assert any("split into 2 fixes" in n for n in b.notes)


# --------------------------------------------------------------------------- swapped lat/lon, per fix

def test_a_sheet_spanning_two_continents_loses_no_row(write_sheet):
    # One study area in Spain and one in Kenya, and one where lat 5.5/lon 0.4 sits beside lat 0.4/lon 5.5 (another
    # fix): all valid. Judged against the whole sheet, one area's rows looked swapped.
    rows = []
    for f, (la, lo) in enumerate([(37.4, -3.5)] * 3 + [(-1.3, 36.8)] * 3 + [(5.5, 0.4), (0.4, 5.5)]):
        for k in range(3):
            rows.append(f"F{f},{la + 0.004 * k:.4f},{lo + 0.006 * (k % 2):.4f},{[30, 330, 200][k]}")
    b = read_bearings(write_sheet("fix,lat,lon,bearing\n" + "\n".join(rows) + "\n"))
    assert errors(b) == {} and len(b.table) == len(rows)


def test_a_swapped_row_is_judged_against_its_own_fix(write_sheet):
    b = read_bearings(write_sheet("fix,lat,lon,bearing\nC,-1.28,36.82,10\nC,-1.29,36.85,300\nC,36.84,-1.30,200\n"
                                  "K,36.84,-1.30,200\nK,36.85,-1.31,100\n"))
    errs = errors(b)
    assert set(errs) == {4} and "lat and lon look swapped" in errs[4]


def test_two_rows_that_meet_when_either_is_swapped_are_both_refused(write_sheet):
    errs = errors(read_bearings(write_sheet("fix,lat,lon,bearing\nD,47.0,15.0,10\nD,15.01,47.01,300\n")))
    assert set(errs) == {2, 3} and "line 3" in errs[2] and "line 2" in errs[3]


def test_the_track_decides_a_swapped_row(write_sheet, tmp_path):
    gpx = tmp_path / "t.gpx"
    gpx.write_text('<?xml version="1.0"?><gpx version="1.1" creator="t" xmlns="http://www.topografix.com/GPX/1/1">'
                   '<trk><trkseg><trkpt lat="47.0" lon="15.0"><time>2026-05-03T06:00:00Z</time></trkpt>'
                   '<trkpt lat="47.01" lon="15.01"><time>2026-05-03T06:20:00Z</time></trkpt></trkseg></trk></gpx>')
    b = read_bearings(write_sheet("fix,time,lat,lon,bearing\nD,2026-05-03T06:00Z,47.0,15.0,10\n"
                                  "D,2026-05-03T06:10Z,15.01,47.01,300\n"), track=gpx)
    errs = errors(b)
    assert set(errs) == {3} and "GPS track" in errs[3]


def test_many_fixes_far_apart_are_fast_enough_to_check_by_fix(write_sheet):
    rng = np.random.default_rng(3)
    lat = rng.uniform(-60, 60, 2000)
    lon = rng.uniform(-180, 180, 2000)
    rows = [f"F{i // 4},{la:.4f},{lo:.4f},{rng.uniform(0, 360):.1f}" for i, (la, lo) in
            enumerate(zip(np.repeat(lat[:500], 4), np.repeat(lon[:500], 4)))]
    b = read_bearings(write_sheet("fix,lat,lon,bearing\n" + "\n".join(rows) + "\n"))
    assert errors(b) == {}


def test_unlabelled_rows_whose_times_all_fail_are_reported_not_a_crash(write_sheet):
    # regression: no fix at all (every time refused) used to index an empty per-fix table
    b = read_bearings(write_sheet("time,lat,lon,bearing\n12.09.2026 10:05,47.87,15.16,42\n"
                                  "12.09.2026 10:07,47.86,15.19,149\n"))
    assert set(errors(b)) == {2, 3} and "usually day-first" in errors(b)[2]
    assert len(b.fix_index) == 0 and len(b.table) == 0


def test_a_position_cell_written_longitude_first_is_named_as_one_cell(write_sheet):
    # One cell holds both numbers: the message names its order, not a column swapped with itself.
    b = read_bearings(write_sheet('fix,position,bearing\nG,"-91.796515, 47.913286",190\n'))
    errs = errors(b)
    assert set(errs) == {2}
    assert "position and position" not in errs[2] and "longitude first" in errs[2]
