"""The sheet reader and validator: bad input is reported with line, column and reason, never dropped."""

import csv
import io
import re

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

import dfkit
from dfkit import SheetError, read_bearings
from dfkit.io.sheet import read_sheet

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
                 st.text(alphabet='#"\'=,;\t \r\n\x00ab1-', max_size=6),
                 st.floats(allow_nan=True, allow_infinity=True).map(str),
                 st.sampled_from(["", "nan", "inf", "47,5", "1e400", "-0", "33N", "Z", "mil", "magnetic", "#B",
                                  '"', "\x00", "30S", "33T", "33U 512300 5301200", "48°58.1'N", "N48 58 7",
                                  "15 10 30 E", "E15", "-0 30 W", "03.10.2026 16:05", "25.10.2026 06:00",
                                  "2026-10-25T02:30:00", "2026-03-29 02:30", "2026-05-03T06:12Z", "06:12", "46145.5",
                                  "2206-01-01T00:00Z", "5301200", "-32254", "512300", "47.8", "15.1", "0", "90", "180",
                                  "359.9"]))
COLUMNS = ["fix", "tag", "time", "lat", "lon", "utm_zone", "easting", "northing", "mgrs", "bearing", "unit",
           "north", "sd", "declination", "note", "date", "station"]
_BREAK = re.compile(r"\r\n|\r|\n")


def _written(cols, rows, delimiter):
    """The sheet text as Python's csv writer makes it, and for each row: (first line, text of the row)."""
    buf = io.StringIO()
    w = csv.writer(buf, delimiter=delimiter, lineterminator="\r\n")   # quotes any cell holding \r or \n
    w.writerow(cols)
    line = 1 + len(_BREAK.findall(buf.getvalue()))
    starts = []
    for r in rows:
        before = buf.tell()
        w.writerow(r[: len(cols)])
        text = buf.getvalue()[before:]
        starts.append((line, text))
        line += len(_BREAK.findall(text))
    return buf.getvalue(), starts


def _as_read(cell):
    """A cell as the README says it is read: line ends inside it become \\n, a guard ' before = + - @ tab CR LF
    is removed (after leading white space), and surrounding white space is stripped."""
    cell = _BREAK.sub("\n", cell).lstrip()
    if re.match("^'+[=+\\-@\t\r\n]", cell):
        cell = cell[1:]
    return cell.strip()


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(cols=st.lists(st.sampled_from(COLUMNS), min_size=1, max_size=8, unique=True),
       rows=st.lists(st.lists(CELL, min_size=8, max_size=8), min_size=0, max_size=6),
       delimiter=st.sampled_from([",", ";", "\t"]),
       options=st.fixed_dictionaries({}, optional={"tz": st.sampled_from(["UTC", "Europe/Vienna"]),
                                                   "utm_letters": st.sampled_from(["band", "hemisphere"]),
                                                   "date_format": st.sampled_from(["dmy", "mdy"]),
                                                   "repeated_hour": st.sampled_from(["earlier", "later"])}))
def test_reader_never_crashes_and_nothing_vanishes(tmp_path, cols, rows, delimiter, options):
    # The model of the format (README, "The bearing sheet"): a row written by Python's csv module is a comment
    # when its text starts with '#', blank when every cell is white space, and otherwise data; data rows are
    # used, or rejected with a problem on the line where they start. Nothing else may happen to a row.
    if len(cols) == 1:
        delimiter = ","     # a one-column header shows no delimiter; the reader then takes the comma
    text, starts = _written(cols, rows, delimiter)
    # A comment is one line (README: "a line whose very first character is #"), so a '#' row holding a line
    # break inside a quoted cell is not one row of the model: its comment ends at that break.
    assume(not any(t.startswith("#") and _BREAK.search(t[:-2]) for _, t in starts))
    p = tmp_path / "fuzz.csv"
    p.write_text(text, encoding="utf-8")
    try:
        raw = read_sheet(p)
        b = read_bearings(p, **options)
    except SheetError as err:
        assert str(err).startswith(str(p)), err     # one message naming the file (exit 2 in the CLI)
        return
    table_lines = raw.table["line"].tolist()
    refused = {pr.line for pr in raw.problems if pr.severity == "error"}
    assert len(table_lines) == len(set(table_lines))
    for (line, row_text), cells in zip(starts, rows):
        cells = cells[: len(cols)]
        if row_text.startswith("#"):
            assert line in raw.comment_lines, (line, row_text)
        elif "\x00" in row_text:
            assert line in table_lines and line in refused, (line, row_text)
        elif all(not _as_read(c) for c in cells):
            assert line in raw.blank_lines, (line, row_text)
        else:
            assert line in table_lines, (line, row_text)
            if line not in refused:
                got = raw.table.loc[raw.table["line"] == line, raw.columns[0]].iloc[0]
                assert got == _as_read(cells[0])
    used = set(b.table["line"].tolist())
    rejected = {pr.line for pr in b.problems if pr.severity == "error" and pr.source == b.source}
    assert used.isdisjoint(rejected)
    assert set(table_lines) == used | rejected
    assert np.isfinite(b.table["true_bearing"]).all()
    assert ((b.table["true_bearing"] >= 0) & (b.table["true_bearing"] < 360)).all()


@settings(max_examples=200, deadline=None)
@given(data=st.binary(max_size=400))
def test_any_bytes_are_read_or_refused_with_a_message(data):
    # Whatever the bytes, the reader returns rows or raises SheetError (exit 2 with one message): nothing else.
    try:
        raw = read_sheet(data, name="bytes.csv")
        b = read_bearings(raw)
    except SheetError as err:
        assert str(err)
        return
    lines = raw.table["line"].tolist()
    assert lines == sorted(set(lines))
    assert set(b.table["line"]) <= set(lines)


# --------------------------------------------------------------------------- nothing lost, nothing swallowed

def test_only_unquoted_lines_starting_with_hash_are_comments(write_sheet):
    raw = read_sheet(write_sheet('# field sheet\nfix,lat,lon,bearing,note\n"#B",47,15,45,x\n#C,47,15,45,y\n'
                                 "A,47,15.02,315,#2 antenna\n  # indented,47,15,45,\n"))
    assert raw.comment_lines == [1, 4]
    assert raw.table["line"].tolist() == [3, 5, 6]
    assert raw.table["fix"].tolist() == ["#B", "A", "# indented"]
    assert raw.table["note"].tolist()[1] == "#2 antenna"
    notes = [p.message for p in raw.problems if p.severity == "note"]
    assert any("2 comment lines (lines 1, 4)" in m for m in notes), notes
    # The skipped line 4 has as many fields as the header: the user is told how to keep it as a row.
    assert any(p.line == 4 and "quote its first cell" in p.message for p in raw.problems)


def test_blank_lines_are_listed(write_sheet):
    raw = read_sheet(write_sheet("fix,lat,lon,bearing\n\nA,47,15,45\n,,,\n   \nA,47,15.02,315\n"))
    assert raw.blank_lines == [2, 4, 5]
    assert raw.table["line"].tolist() == [3, 6]


@pytest.mark.parametrize("tail", ["", 'A,47.01,15.03,200,closed later"\n'])
def test_unbalanced_quote_is_reported_where_it_opens_and_swallows_nothing(write_sheet, tail):
    text = ('fix,lat,lon,bearing,note\nA,47,15,45,"open quote\nA,47,15.02,315,ok\nB,47.01,15.01,200,fine\n' + tail)
    b = read_bearings(write_sheet(text))
    (line, col, msg), = errors(b)
    assert line == 2 and "quote" in msg
    expect = [3, 4, 5] if tail else [3, 4]
    assert b.table["line"].tolist() == expect
    assert "A" in b.labels and "B" in b.labels


def test_a_real_multi_line_note_is_one_row(write_sheet):
    b = read_bearings(write_sheet('fix,lat,lon,bearing,note\nA,47,15,45,"first line\nsecond, line"\n'
                                  "A,47,15.02,315,\n"))
    assert errors(b) == [] and b.table["line"].tolist() == [2, 4]
    assert b.table["note"][0] == "first line\nsecond, line"


def test_one_windows_1252_line_falls_back_alone(write_sheet):
    utf8 = "fix,lat,lon,bearing,note\nA,47,15,45,Böschung\n".encode()
    cp = "A,47,15.02,315,Böschung\n".encode("cp1252")
    b = read_bearings(write_sheet(utf8 + cp + "A,47.01,15.01,200,Straße\n".encode()))
    assert b.table["note"].tolist() == ["Böschung", "Böschung", "Straße"]
    warned = [p for p in b.problems if "Windows-1252" in p.message]
    assert [p.line for p in warned] == [3]


@pytest.mark.parametrize("encoding", ["utf-16", "utf-16-be", "utf-16-le"])
def test_utf16_sheets(write_sheet, encoding):
    text = "fix,lat,lon,bearing,note\nA,47,15,45,Böschung\nA,47,15.02,315,\n"
    data = text.encode(encoding)
    if encoding == "utf-16-be":
        data = b"\xfe\xff" + data
    b = read_bearings(write_sheet(data))
    assert errors(b) == [] and b.table["note"][0] == "Böschung"


def test_a_row_of_only_nul_bytes_is_rejected_not_dropped(write_sheet):
    b = read_bearings(write_sheet(b"fix,lat,lon,bearing\nA,47,15,45\n\x00\nA,47,15.02,315\n\x00\x00B,47,15,9\x00\n"))
    nul = [(line, col) for line, col, msg in errors(b) if "NUL" in msg]
    assert nul == [(3, ""), (5, "")]
    assert {line for line, _, _ in errors(b)} == {3, 5}
    assert b.table["line"].tolist() == [2, 4]
    assert "B" in b.labels          # the damaged row's label still reaches the output


@pytest.mark.parametrize("content, match", [
    (b"\x00" * 5000, "NUL bytes"),
    (bytes(range(256)) * 4, "not look like a text sheet"),
    (b"PK\x03\x04" + b"\x00" * 40, "workbook"),
    (b"fix,lat,lon,bearing,\"" + b"n" * 200_000 + b"\"\nA,47,15,45,x\n", "header has a field longer"),
    (("fix,lat,lon,bearing," + ",".join(f"c{i}" for i in range(2000)) + "\n").encode(), "at most 1000"),
])
def test_limits_are_one_message(write_sheet, content, match):
    with pytest.raises(SheetError, match=match):
        read_sheet(write_sheet(content))


@pytest.mark.parametrize("quote", ['"', ""])
def test_huge_cell_rejects_its_row_only(write_sheet, quote):
    big = quote + "x" * 200_000 + quote
    b = read_bearings(write_sheet(f"fix,lat,lon,bearing,note\nA,47,15,45,{big}\nA,47,15.02,315,\nA,47.01,15.01,200,\n"))
    (line, col, msg), = errors(b)
    assert line == 2 and "longer than 131072" in msg
    assert b.table["line"].tolist() == [3, 4]


def test_header_of_many_empty_columns_is_cut_not_crawled(write_sheet):
    # 50,000 empty names after four real ones (this took minutes when each column was handled one by one).
    raw = read_sheet(write_sheet("fix,lat,lon,bearing" + "," * 50_000 + "\nA,47,15,45\nA,47,15.02,315\n"))
    assert raw.columns == ["fix", "lat", "lon", "bearing"] and len(raw.table) == 2
    assert any("empty column names" in p.message for p in raw.problems)


def test_unnamed_empty_columns_are_dropped_with_a_note(write_sheet):
    raw = read_sheet(write_sheet("fix,lat,lon,bearing,,\nA,47,15,45,,\nA,47,15.02,315,,\n"))
    assert raw.columns == ["fix", "lat", "lon", "bearing"]
    assert any("no name and no values" in p.message for p in raw.problems)


def test_many_repeated_column_names_get_distinct_names(write_sheet):
    raw = read_sheet(write_sheet("fix,lat,lon,bearing," + ",".join(["x"] * 500) + "\nA,47,15,45\n"))
    assert len(set(raw.columns)) == len(raw.columns) == 504


def test_guarded_cells_are_read_as_they_were(write_sheet):
    # OWASP CSV-injection guard: a leading ' before = + - @ tab CR; one ' is removed when read back.
    raw = read_sheet(write_sheet("fix,lat,lon,bearing,note,'=col\n'=A,47,15,45,''-x,1\n'@B,47,15.02,315,'x,2\n"))
    assert raw.table["fix"].tolist() == ["=A", "@B"]
    assert raw.table["note"].tolist() == ["'-x", "'x"]
    assert "=col" in raw.columns


NOTE_TEXT = st.text(alphabet="abcäöüßéèñ ABC-.", max_size=8)


@settings(max_examples=100, deadline=None)
@given(lines=st.lists(st.tuples(NOTE_TEXT, st.booleans(), st.sampled_from(["\n", "\r\n", "\r"])), min_size=1,
                      max_size=12))
def test_each_line_is_decoded_on_its_own(lines):
    # Python's own codecs are the reference: a line is read as UTF-8 when its bytes are valid UTF-8, otherwise
    # as Windows-1252; exactly the lines that fell back are named.
    data = b"fix,note\n"
    expect, fallback = [], []
    for k, (note, as_1252, end) in enumerate(lines, start=2):
        raw = f"A{k},{note}".encode("cp1252" if as_1252 else "utf-8")
        data += raw + end.encode()
        try:
            expect.append(raw.decode("utf-8").split(",", 1)[1].strip())
        except UnicodeDecodeError:
            expect.append(raw.decode("cp1252").split(",", 1)[1].strip())
            fallback.append(k)
    raw = read_sheet(data, name="mixed.csv")
    assert raw.table["line"].tolist() == list(range(2, 2 + len(lines)))
    assert raw.table["note"].tolist() == expect
    named = sorted(p.line for p in raw.problems if "Windows-1252" in p.message)
    assert named == (fallback if len(fallback) <= 20 else fallback[:1])


def test_a_header_that_starts_with_a_hash_is_named_as_read_as_a_comment(write_sheet):
    # '#' as the first column's name makes the header a comment line; the sheet then has no bearing column, and the
    # message must say why instead of only listing the data row as "found" columns
    from dfkit import read_bearings
    from dfkit.problems import SheetError

    sheet = write_sheet("#,lat,lon,bearing,sd\n1,47,15,45,3\n1,47,15.02,315,3\n")
    with pytest.raises(SheetError, match="line 1 starts with '#' and was read as a comment"):
        read_bearings(sheet)


def test_a_comment_ends_at_its_first_line_break_even_inside_quotes(tmp_path):
    # README, "Comments": a comment is a *line* starting with '#'. A '#' row written with a quoted line break
    # ('#,,,,"<CR>"') is therefore a comment up to the bare CR (line 5); what follows is read by the quote rules:
    # line 6 opens a quote that closes on line 7 (one row, line 6) and line 8 opens one never closed (a row on
    # line 8). Every line after the comment reaches a row that is used or rejected with its line number.
    p = tmp_path / "hash_row.csv"
    p.write_bytes(b'fix,tag,time,bearing,utm_zone\r\n,,,,\r\n,,,,\r\n,,,,\r\n#,,,,"\r"\r\n,,,"\n",0\r\n')
    raw = read_sheet(p)
    assert raw.comment_lines == [5] and raw.blank_lines == [2, 3, 4]
    assert raw.table["line"].tolist() == [6, 8]
    b = read_bearings(p)
    assert len(b.table) == 0
    assert {pr.line for pr in b.problems if pr.severity == "error"} == {6, 8}
