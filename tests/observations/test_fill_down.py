"""Fix labels written only where a fix starts (issue 7, field trial): before, the unlabelled rows of two fixes
chained past the labelled row of the second into one `ok` fix whose region held neither true position."""

import numpy as np
import pyproj
import pytest

from dfkit import read_bearings
from dfkit.cli import main
from dfkit.observations import OptionError

GEOD = pyproj.Geod(ellps="WGS84")
# two positions of one animal, 400 m apart (east), and the three stations bearings were taken from
TRUTH = [(47.86, 15.16), None]
_lon, _lat, _ = GEOD.fwd(TRUTH[0][1], TRUTH[0][0], 90.0, 400.0)
TRUTH[1] = (_lat, _lon)
OFFSETS = [(200.0, 1500.0), (100.0, 1200.0), (330.0, 1800.0)]      # azimuth from the animal [deg], distance [m]


def stations_and_bearings(truth):
    """Stations around a truth and their exact bearings to it, by pyproj's geodesics (Karney 2013)."""
    out = []
    for az, dist in OFFSETS:
        lon, lat, _ = GEOD.fwd(truth[1], truth[0], az, dist)
        fwd, _, _ = GEOD.inv(lon, lat, truth[1], truth[0])
        out.append((lat, lon, fwd % 360.0))
    return out


def fill_down_sheet(times=True):
    rows = ["fix,tag," + ("time," if times else "") + "lat,lon,bearing,sd"]
    minute = 0
    for k, (label, truth) in enumerate(zip(("F1", "F2"), TRUTH)):
        for j, (lat, lon, b) in enumerate(stations_and_bearings(truth)):
            when = f"2026-05-03T06:{minute:02d}:00Z," if times else ""
            rows.append(f"{label if j == 0 else ''},150.1,{when}{lat:.7f},{lon:.7f},{b:.3f},3")
            minute += 4
    return "\n".join(rows) + "\n"


def errors(b):
    return [(p.line, p.column, p.message) for p in b.problems if p.severity == "error"]


@pytest.mark.parametrize("times", [True, False])
def test_labels_written_where_a_fix_starts_are_filled_down(write_sheet, times):
    b = read_bearings(write_sheet(fill_down_sheet(times)))
    assert errors(b) == []
    assert b.table["fix"].tolist() == ["F1"] * 3 + ["F2"] * 3
    assert b.table["grouped_by"].tolist() == ["label", "filled", "filled"] * 2
    (w,) = [p for p in b.problems if p.severity == "warning"]
    assert w.line == 3 and "written only where a fix starts" in w.message and "--no-fill-labels" in w.message
    assert any("filled down" in n for n in b.notes)


def test_each_filled_fix_holds_its_own_truth(write_sheet):
    from dfkit.locate import locate

    fixes = locate(read_bearings(write_sheet(fill_down_sheet())))
    t = fixes.table
    assert t["fix"].tolist() == ["F1", "F2"] and t["status"].tolist() == ["ok", "ok"]
    # exact bearings: each estimate is on its own truth (pyproj geodesic distance), well apart from the other
    for k, truth in enumerate(TRUTH):
        _, _, d = GEOD.inv(t["lon"][k], t["lat"][k], truth[1], truth[0])
        assert d < 1.0
    assert fixes.contains(np.array([TRUTH[0][0], TRUTH[1][0]]), np.array([TRUTH[0][1], TRUTH[1][1]])).tolist() == \
        [True, True]


def test_without_filling_a_labelled_row_still_ends_an_unlabelled_chain(write_sheet):
    b = read_bearings(write_sheet(fill_down_sheet()), fill_labels=False)
    groups = b.table.groupby("fix", sort=False)["line"].apply(list).to_dict()
    # the four unlabelled rows are 4 min apart, but F2's labelled row (line 5) comes between them
    assert sorted(groups.values()) == [[2], [3, 4], [5], [6, 7]]
    (w,) = [p for p in b.problems if p.severity == "warning"]
    assert w.line == 3 and "--no-fill-labels is given" in w.message


def test_without_times_or_filling_the_rows_are_refused_with_a_hint(write_sheet, capsys):
    path = write_sheet(fill_down_sheet(times=False))
    b = read_bearings(path, fill_labels=False)
    errs = errors(b)
    assert [line for line, _, _ in errs] == [3, 4, 6, 7]
    assert "line 2, is labelled 'F1'" in errs[0][2] and "line 5, is labelled 'F2'" in errs[2][2]
    assert main(["check", str(path), "--no-fill-labels"]) == 1
    assert "labels look written only where a fix starts" in capsys.readouterr().out


def test_a_sheet_that_labels_every_row_is_not_filled(write_sheet):
    # F1 is written on two successive rows: this sheet labels every row, so a blank is not a fill-down
    sheet = ("fix,lat,lon,bearing\nF1,47.84,15.15,20\nF1,47.85,15.17,280\n,47.87,15.14,150\n"
             "F2,47.84,15.16,20\n,47.85,15.18,280\n")
    b = read_bearings(write_sheet(sheet))
    errs = errors(b)
    assert [line for line, _, _ in errs] == [4, 6]
    assert "lines 2 and 3, 'F1'" in errs[0][2] and "write the label on every row" in errs[0][2]
    assert b.table["fix"].tolist() == ["F1", "F1", "F2"]


def test_tags_are_filled_with_their_labels_and_tags_keep_their_own_heads(write_sheet):
    # rows of two tags interleaved; the third tag-less row continues the fix above it, tag and all
    sheet = ("fix,tag,lat,lon,bearing\nA,150.1,47.84,15.15,20\nB,150.2,47.84,15.16,30\n,150.1,47.85,15.17,280\n"
             ",150.2,47.85,15.18,290\n,,47.86,15.18,300\n")
    b = read_bearings(write_sheet(sheet))
    assert errors(b) == []
    assert b.table["fix"].tolist() == ["A", "B", "A", "B", "B"]
    assert b.table["tag"].tolist() == ["150.1", "150.2", "150.1", "150.2", "150.2"]


def test_rows_before_the_first_label_are_left_unlabelled(write_sheet):
    sheet = "fix,lat,lon,bearing\n,47.83,15.15,10\nF1,47.84,15.15,20\n,47.85,15.17,280\n"
    b = read_bearings(write_sheet(sheet))
    assert [line for line, _, _ in errors(b)] == [2]
    assert b.table["fix"].tolist() == ["F1", "F1"]


def test_fill_labels_must_be_a_boolean():
    with pytest.raises(OptionError, match="fill_labels='yes' must be True or False"):
        read_bearings("unused.csv", fill_labels="yes")


def test_merged_cells_in_a_workbook_are_read_on_every_row(tmp_path):
    import openpyxl

    path = tmp_path / "merged.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["fix", "tag", "lat", "lon", "bearing"])
    for label, rows in (("F1", [(47.84, 15.15, 20), (47.85, 15.17, 280)]), ("F2", [(47.84, 15.16, 30),
                                                                                   (47.86, 15.18, 290)])):
        for k, (a, o, x) in enumerate(rows):
            ws.append([label if k == 0 else None, 150.1 if k == 0 else None, a, o, x])
    ws.merge_cells("A2:A3")
    ws.merge_cells("B2:B5")
    ws.merge_cells("A4:A5")
    ws["B2"].number_format = "0.000"        # the merged tag is shown as 150.100 on every row it spans
    wb.save(path)
    b = read_bearings(path)
    assert errors(b) == []
    assert b.table["fix"].tolist() == ["F1", "F1", "F2", "F2"] and set(b.table["tag"]) == {"150.100"}
    (w,) = [p for p in b.problems if p.severity == "warning" and p.column == ""]
    assert "merged over several rows (A2:A3, B2:B5, A4:A5)" in w.message
