"""The sheet reader and validator: bad input is reported with line, column and reason, never dropped."""

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import dfkit
from dfkit import SheetError, read_bearings

GOOD = "fix,lat,lon,bearing\nA,47.0,15.0,45\nA,47.0,15.02,315\n"


def errors(b):
    return [(p.line, p.column, p.message) for p in b.problems if p.severity == "error"]


def test_good_sheet_reads_every_row(write_sheet):
    b = read_bearings(write_sheet(GOOD))
    assert list(b.table["line"]) == [2, 3]
    assert errors(b) == []
    assert list(b.table["true_bearing"]) == [45.0, 315.0]


@pytest.mark.parametrize("content, match", [
    ("", "empty"),
    ("   \n\n", "empty"),
    ("# only a comment\n", "no header"),
    ("fix,bearing,bearing\nA,1,2\n", "both 'bearing'"),
])
def test_unreadable_sheets_raise_sheet_error(write_sheet, content, match):
    with pytest.raises(SheetError, match=match):
        read_bearings(write_sheet(content))


def test_header_only_is_a_warning_not_a_crash(write_sheet):
    b = read_bearings(write_sheet("fix,lat,lon,bearing\n"))
    assert len(b.table) == 0
    assert any("no data rows" in p.message for p in b.problems)


def test_byte_order_mark_and_crlf(write_sheet):
    b = read_bearings(write_sheet(("\ufeff" + GOOD).replace("\n", "\r\n").encode("utf-8")))
    assert len(b.table) == 2 and errors(b) == []


def test_semicolon_sheet_with_decimal_commas(write_sheet):
    b = read_bearings(write_sheet("fix;lat;lon;bearing\nA;47,0;15,0;45,5\nA;47,0;15,02;315\n"))
    assert errors(b) == []
    assert b.table["lat"].tolist() == [47.0, 47.0]
    assert b.table["true_bearing"].tolist() == [45.5, 315.0]


def test_decimal_comma_in_comma_sheet_is_explained(write_sheet):
    b = read_bearings(write_sheet('fix,lat,lon,bearing\nA,47.0,15.0,"45,5"\nA,47,15.02,315\n'))
    (line, col, msg), = errors(b)
    assert (line, col) == (2, "bearing") and "decimal comma" in msg


def test_windows_1252_file_is_read_with_a_warning(write_sheet):
    b = read_bearings(write_sheet((GOOD.replace("bearing\n", "bearing,note\n").replace("45\n", "45,Böschung\n")
                                   ).encode("cp1252")))
    assert errors(b) == []
    assert any("not UTF-8" in p.message for p in b.problems)


@pytest.mark.parametrize("row, column, words", [
    ("A,47.0,15.0,nan", "bearing", "not a finite number"),
    ("A,47.0,15.0,inf", "bearing", "not a finite number"),
    ("A,47.0,15.0,412", "bearing", "mils?"),
    ("A,47.0,15.0,380", "bearing", "grads?"),
    ("A,47.0,15.0,-10", "bearing", "negative"),
    ("A,147.0,15.0,45", "lat", "swapped"),
    ("A,95.0,100.0,45", "lat", "outside -90..90"),
    ("A,0,0,45", "lat", "missing position"),
    ("A,47.0,,45", "lon", "lon is missing"),
    ("A,47.0,15.0,", "bearing", "missing"),
    ("A,47.0,15.0,abc", "bearing", "not a finite number"),
])
def test_each_bad_value_is_named(write_sheet, row, column, words):
    b = read_bearings(write_sheet(GOOD + row + "\n"))
    errs = errors(b)
    assert len(errs) == 1, errs
    line, col, msg = errs[0]
    assert line == 4 and col == column and words in msg
    assert 4 not in b.table["line"].tolist()
    assert list(b.table["line"]) == [2, 3]


def test_swapped_lat_lon_within_range_is_caught_by_the_others(write_sheet):
    b = read_bearings(write_sheet(GOOD + "A,47.01,15.01,200\nA,15.01,47.01,200\n"))
    (line, col, msg), = errors(b)
    assert line == 5 and "swapped" in msg


def test_stray_whitespace_and_case_in_header_and_cells(write_sheet):
    b = read_bearings(write_sheet(" Fix , LAT,Lon , Bearing ,Unit, North \n A , 47.0 ,15.0, 45 , DEG , True\n"
                                  "A,47.0,15.02,315,deg,t\n"))
    assert errors(b) == [] and b.table["true_bearing"].tolist() == [45.0, 315.0]


def test_mixed_units_per_row(write_sheet):
    # FM 21-26 ch. 6: 6400 mils and 400 grads to the circle.
    b = read_bearings(write_sheet("fix,lat,lon,bearing,unit\nA,47,15,1600,mil\nA,47,15.02,100,grad\n"
                                  "A,47.01,15.01,90,deg\n"))
    assert errors(b) == []
    assert b.table["true_bearing"].tolist() == pytest.approx([90.0, 90.0, 90.0])


def test_unknown_columns_and_notes_are_carried(write_sheet):
    b = read_bearings(write_sheet("fix,lat,lon,bearing,observer,weather,note\nA,47,15,45,Kim,rain,\"a, b\"\n"
                                  "A,47,15.02,315,Lee,dry,\n"))
    assert b.table["weather"].tolist() == ["rain", "dry"]
    assert b.table["note"].tolist() == ["a, b", ""]


def test_duplicated_unknown_column_is_kept_under_a_new_name(write_sheet):
    b = read_bearings(write_sheet("fix,lat,lon,bearing,extra,extra\nA,47,15,45,x,y\nA,47,15.02,315,u,v\n"))
    assert b.table["extra_2"].tolist() == ["y", "v"]


def test_too_many_fields_rejects_the_row_but_keeps_its_label(write_sheet):
    b = read_bearings(write_sheet("fix,lat,lon,bearing\nA,47,15,45\nB,47,15,45,9,9\n"))
    (line, col, msg), = errors(b)
    assert line == 3 and "fields" in msg
    assert "B" in b.labels and b.fix_index.set_index("fix").loc["B", "rejected_lines"] == [3]


def test_comments_and_blank_lines_keep_line_numbers(write_sheet):
    b = read_bearings(write_sheet("# field sheet\nfix,lat,lon,bearing\n\nA,47,15,45\n# lunch\nA,47,15.02,999\n"))
    (line, col, msg), = errors(b)
    assert line == 6 and col == "bearing"
    assert b.table["line"].tolist() == [4]


def test_multi_line_quoted_note_keeps_line_numbers(write_sheet):
    b = read_bearings(write_sheet('fix,lat,lon,bearing,note\nA,47,15,45,"two\nlines"\nA,47,15.02,999,\n'))
    (line, col, msg), = errors(b)
    assert line == 4


def test_time_without_offset_needs_tz(write_sheet):
    sheet = write_sheet("fix,time,lat,lon,bearing\nA,2026-05-03T06:12:00,47,15,45\nA,2026-05-03T06:13:00Z,47,15.02,315\n")
    b = read_bearings(sheet)
    (line, col, msg), = errors(b)
    assert (line, col) == (2, "time") and "--tz" in msg
    b = read_bearings(sheet, tz="Europe/Vienna")
    assert errors(b) == []
    # 06:12 in Vienna in May is CEST, UTC+2 (IANA tz database).
    assert b.table["time"][0].isoformat() == "2026-05-03T04:12:00+00:00"


def test_lat_lon_and_utm_that_disagree_are_rejected(write_sheet):
    # 33N 512300 5301200 is near 47.86N 15.16E; the lat/lon given is 10 km away.
    b = read_bearings(write_sheet("fix,lat,lon,utm_zone,easting,northing,bearing\n"
                                  "A,47.95,15.17,33N,512300,5301200,45\n"))
    (line, col, msg), = errors(b)
    assert "disagrees" in msg


@pytest.mark.parametrize("zone, words", [("33", "hemisphere"), ("33U", "latitude band"), ("61N", "1 to 60"),
                                         ("x", "not a UTM zone")])
def test_bad_utm_zone(write_sheet, zone, words):
    b = read_bearings(write_sheet(f"fix,utm_zone,easting,northing,bearing\nA,{zone},512300,5301200,45\n"))
    (line, col, msg), = errors(b)
    assert col == "utm_zone" and words in msg


def test_station_file(write_sheet, tmp_path):
    st = tmp_path / "stations.csv"
    st.write_text("station,lat,lon\nR1,47.0,15.0\nR2,47.0,15.02\n")
    b = read_bearings(write_sheet("fix,station,bearing\nA,R1,45\nA,R2,315\nA,R9,200\n"), stations=st)
    (line, col, msg), = errors(b)
    assert line == 4 and "R9" in msg
    assert b.table["lat"].tolist() == [47.0, 47.0]


def test_every_label_is_kept_even_when_all_its_rows_are_rejected(write_sheet):
    b = read_bearings(write_sheet(GOOD + "Z,47,15,999\n"))
    assert b.labels == ["A", "Z"] and b.fix_index["rejected_lines"].tolist() == [[], [4]]


def test_sheet_without_labels_or_times_is_one_fix_per_tag(write_sheet):
    b = read_bearings(write_sheet("lat,lon,bearing\n47,15,45\n47,15.02,315\n"))
    assert b.table["fix"].nunique() == 1
    assert any("one fix" in p.message for p in b.problems)


def test_grouping_by_time_window(write_sheet):
    rows = "\n".join(f"T1,2026-05-03T06:{m:02d}:00Z,47,{15 + m / 1000},45" for m in (0, 5, 12, 40, 44))
    b = read_bearings(write_sheet("tag,time,lat,lon,bearing\n" + rows + "\n"), window_min=20)
    groups = b.table.groupby("fix")["line"].apply(list).tolist()
    assert sorted(groups) == [[2, 3, 4], [5, 6]]
    assert set(b.table["grouped_by"]) == {"window"}


def test_large_sheet_reads(write_sheet):
    n = 50_000
    rng = np.random.default_rng(1)
    lines = [f"F{i // 4},{47 + rng.uniform(0, .1):.6f},{15 + rng.uniform(0, .1):.6f},{rng.uniform(0, 360):.1f}"
             for i in range(n)]
    b = read_bearings(write_sheet("fix,lat,lon,bearing\n" + "\n".join(lines) + "\n"))
    assert len(b.table) == n and errors(b) == []


def test_check_sheet_returns_dataframe_and_problems(write_sheet):
    table, problems = dfkit.check_sheet(write_sheet(GOOD + "A,47,15,999\n"))
    assert len(table) == 2 and len(problems) == 1 and problems[0].line == 4


CELL = st.one_of(st.text(alphabet=st.characters(blacklist_categories=("Cs",)), max_size=12),
                 st.floats(allow_nan=True, allow_infinity=True).map(str),
                 st.sampled_from(["", "nan", "inf", "47,5", "1e400", "-0", "33N", "Z", "mil", "magnetic", "30S", "33T",
                                  "33U 512300 5301200", "48°58.1'N", "N48 58 7", "15 10 30 E", "E15", "-0 30 W",
                                  "03.10.2026 16:05", "25.10.2026 06:00", "2026-10-25T02:30:00", "2026-03-29 02:30",
                                  "2026-05-03T06:12Z", "06:12", "46145.5", "2206-01-01T00:00Z", "5301200", "-32254",
                                  "512300", "47.8", "15.1", "0", "90", "180", "359.9"]))
COLUMNS = ["fix", "tag", "time", "lat", "lon", "utm_zone", "easting", "northing", "mgrs", "bearing", "unit",
           "north", "sd", "declination", "note", "date", "station"]


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(cols=st.lists(st.sampled_from(COLUMNS), min_size=1, max_size=8, unique=True),
       rows=st.lists(st.lists(CELL, min_size=8, max_size=8), min_size=0, max_size=6),
       delimiter=st.sampled_from([",", ";", "\t"]),
       options=st.fixed_dictionaries({}, optional={"tz": st.sampled_from(["UTC", "Europe/Vienna"]),
                                                   "utm_letters": st.sampled_from(["band", "hemisphere"]),
                                                   "date_format": st.sampled_from(["dmy", "mdy"]),
                                                   "repeated_hour": st.sampled_from(["earlier", "later"])}))
def test_reader_never_crashes_and_nothing_vanishes(tmp_path, cols, rows, delimiter, options):
    import csv
    import io

    buf = io.StringIO()
    w = csv.writer(buf, delimiter=delimiter, lineterminator="\n")
    w.writerow(cols)
    for r in rows:
        w.writerow(r[: len(cols)])
    p = tmp_path / "fuzz.csv"
    p.write_text(buf.getvalue(), encoding="utf-8")
    try:
        b = read_bearings(p, **options)
    except SheetError:
        return
    used = set(b.table["line"].tolist())
    rejected = {pr.line for pr in b.problems if pr.severity == "error"}
    data_lines = set(range(2, 2 + len(rows)))
    blank = {i + 2 for i, r in enumerate(rows) if all(not c.strip() for c in r[: len(cols)])
             or r[0].lstrip().startswith("#")}
    assert used.isdisjoint(rejected)
    assert data_lines - blank <= used | rejected | _shifted(rows, cols)
    assert np.isfinite(b.table["true_bearing"]).all()
    assert ((b.table["true_bearing"] >= 0) & (b.table["true_bearing"] < 360)).all()


def _shifted(rows, cols):
    # Quoted newlines inside cells move later rows down; the reader's own numbering is then authoritative.
    return set(range(2, 2 + 3 * len(rows))) if any("\n" in c or "\r" in c for r in rows for c in r) else set()
