"""Times as people write them; every expected instant is computed here with the standard library (datetime,
zoneinfo), and the daylight-saving dates come from the EU rule (Directive 2000/84/EC, from memory: summer time from
01:00 UTC on the last Sunday of March to 01:00 UTC on the last Sunday of October), the Sundays checked below."""

from datetime import datetime, timedelta, timezone
from zoneinfo import ZoneInfo

import pytest

from dfkit import read_bearings
from dfkit.cli import main

VIENNA = ZoneInfo("Europe/Vienna")


def errors(b):
    return {p.line: p.message for p in b.problems if p.severity == "error"}


def sheet_of(times, extra_col="", extra=None):
    head = "fix,time,lat,lon,bearing" + (f",{extra_col}" if extra_col else "")
    rows = [f"A,{t},47.0,{15 + k / 100:.2f},{(45 + 40 * k) % 360}" + (f",{extra[k]}" if extra else "")
            for k, t in enumerate(times)]
    return head + "\n" + "\n".join(rows) + "\n"


def utc(*a):
    return datetime(*a, tzinfo=timezone.utc)


@pytest.mark.parametrize("text, expected", [
    ("2026-05-03T06:12:00+02:00", utc(2026, 5, 3, 4, 12)), ("2026-05-03 06:12Z", utc(2026, 5, 3, 6, 12)),
    ("20260503T061200Z", utc(2026, 5, 3, 6, 12)), ("2026-05-03T06:12:00.5-0300", utc(2026, 5, 3, 9, 12, 0, 500000)),
    ("2026-05-03T06:12+02", utc(2026, 5, 3, 4, 12)), ("13.05.2026 06:12 UTC", utc(2026, 5, 13, 6, 12)),
    ("2026/05/03 06:12Z", utc(2026, 5, 3, 6, 12)),
])
def test_times_with_an_offset_need_no_time_zone(write_sheet, text, expected):
    b = read_bearings(write_sheet(sheet_of([text, "2026-05-03T06:20Z"])))
    assert errors(b) == {}
    assert b.table["time"][0].to_pydatetime() == expected


def test_local_times_with_tz(write_sheet):
    texts = ["2026-05-03T06:12:00", "3 May 2026 06:13", '"May 3, 2026 6:14 PM"', "03-May-2026 06:15"]
    b = read_bearings(write_sheet(sheet_of(texts)), tz="Europe/Vienna")
    assert errors(b) == {}
    want = [datetime(2026, 5, 3, 6, 12, tzinfo=VIENNA), datetime(2026, 5, 3, 6, 13, tzinfo=VIENNA),
            datetime(2026, 5, 3, 18, 14, tzinfo=VIENNA), datetime(2026, 5, 3, 6, 15, tzinfo=VIENNA)]
    assert [t.to_pydatetime() for t in b.table["time"]] == want


def test_day_first_dates_are_read_when_the_column_shows_it(write_sheet):
    # '03.10.2026 16:05' alone could be 3 October or 10 March; '25.10.2026' in the same column can only be day-first.
    b = read_bearings(write_sheet(sheet_of(["03.10.2026 16:05", "03.10.2026 16:15", "25.10.2026 16:05"])), tz="UTC")
    assert errors(b) == {}
    assert b.table["time"][0].to_pydatetime() == utc(2026, 10, 3, 16, 5)
    assert any("day first" in n for n in b.notes)


def test_ambiguous_dates_are_refused_per_row_with_both_readings(write_sheet):
    sheet = write_sheet(sheet_of(["03.10.2026 16:05", "03.10.2026 16:15", "2026-10-03T16:20Z"]))
    b = read_bearings(sheet, tz="UTC")
    errs = errors(b)
    assert set(errs) == {2, 3} and "3 October or 10 March" in errs[2] and "--date-format" in errs[2]
    assert b.table["line"].tolist() == [4]        # one bad time never makes the sheet unreadable
    b = read_bearings(sheet, tz="UTC", date_format="mdy")
    assert errors(b) == {} and b.table["time"][0].to_pydatetime() == utc(2026, 3, 10, 16, 5)


def test_a_column_that_mixes_orders_refuses_only_the_ambiguous_rows(write_sheet):
    b = read_bearings(write_sheet(sheet_of(["25.10.2026 16:05", "10/26/2026 16:05", "05/06/2026 16:00"])), tz="UTC")
    errs = errors(b)
    assert set(errs) == {4} and "day-first" in errs[4] and "month-first" in errs[4]


def test_an_explicit_strptime_pattern(write_sheet):
    b = read_bearings(write_sheet(sheet_of(["03|10|2026 16h05", "03|10|2026 16h10"])), tz="UTC",
                      date_format="%d|%m|%Y %Hh%M")
    assert errors(b) == {} and b.table["time"][0].to_pydatetime() == utc(2026, 10, 3, 16, 5)


def test_a_local_time_that_did_not_exist_is_refused(write_sheet):
    # Last Sunday of March 2026 is the 29th: clocks in Vienna jump from 02:00 to 03:00 local time.
    assert datetime(2026, 3, 29).weekday() == 6 and datetime(2026, 3, 29) + timedelta(days=7) > datetime(2026, 3, 31)
    b = read_bearings(write_sheet(sheet_of(["2026-03-29T02:30:00", "2026-03-29T03:30:00"])), tz="Europe/Vienna")
    errs = errors(b)
    assert set(errs) == {2} and "did not exist" in errs[2]


def test_a_repeated_local_time_is_refused_unless_told_which(write_sheet):
    # Last Sunday of October 2026 is the 25th: 02:30 local happens at 00:30 UTC (summer) and 01:30 UTC (winter).
    assert datetime(2026, 10, 25).weekday() == 6 and datetime(2026, 10, 25) + timedelta(days=7) > datetime(2026, 10, 31)
    sheet = write_sheet(sheet_of(["2026-10-25T02:30:00", "2026-10-25T04:00:00"]))
    errs = errors(read_bearings(sheet, tz="Europe/Vienna"))
    assert set(errs) == {2} and "happened twice" in errs[2] and "00:30Z or 01:30Z" in errs[2]
    for which, hour in (("earlier", 0), ("later", 1)):
        b = read_bearings(sheet, tz="Europe/Vienna", repeated_hour=which)
        assert errors(b) == {} and b.table["time"][0].to_pydatetime() == utc(2026, 10, 25, hour, 30)


@pytest.mark.parametrize("text, words", [
    ("2206-05-03T06:12Z", "not plausible"), ("1926-05-03T06:12Z", "not plausible"),
    ("03/10/26 10:00", "two-digit year"), ("46145.26", "spreadsheet date number"),
    ("tomorrow", "not a time"), ("2026-02-30T06:00Z", "not"), ("2026-05-03T25:00Z", "not"),
])
def test_bad_times_are_refused_per_row(write_sheet, text, words):
    b = read_bearings(write_sheet(sheet_of([text, "2026-05-03T06:20Z"])))
    errs = errors(b)
    assert set(errs) == {2} and words in errs[2]
    assert b.table["line"].tolist() == [3]


def test_naive_times_without_tz_name_the_option(write_sheet):
    errs = errors(read_bearings(write_sheet(sheet_of(["2026-05-03T06:12:00", "2026-05-03T06:20Z"]))))
    assert set(errs) == {2} and "--tz" in errs[2]


def test_a_separate_date_column(write_sheet):
    sheet = "fix,date,time,lat,lon,bearing\nA,2026-05-03,06:12,47,15,45\nA,03.05.2026,06:20,47,15.02,315\n" \
            "A,2026-05-03,,47,15.01,200\n"
    b = read_bearings(write_sheet(sheet), tz="Europe/Vienna")
    errs = errors(b)
    assert set(errs) == {3}          # 03.05.2026 alone is ambiguous; a date without a time is a coarse time
    assert b.table["time"][0].to_pydatetime() == datetime(2026, 5, 3, 6, 12, tzinfo=VIENNA)
    assert b.table["time"][1].to_pydatetime() == utc(2026, 5, 3, 12, 0)


def test_a_date_column_that_contradicts_the_time_cell_is_refused(write_sheet):
    # A time cell with its own date beside a date cell of another day: which is meant cannot be known. A date
    # one day off is allowed only where an offset (up to 14 h) could put the cell's local date there.
    sheet = ("fix,date,time,lat,lon,bearing\n"
             "B,2026-06-02,2026-06-01 06:14,47,15,45\n"          # another day: refused
             "B,2026-06-01,2026-06-01 06:20,47,15.02,315\n"      # the same day
             "B,01.06.2026,2026-06-01T23:30-03:00,47,15.01,200\n"  # 1 June local, 2 June UTC: the same day
             "B,2026-06-03,2026-06-01T06:40Z,47,15.03,100\n")     # two days off: refused
    b = read_bearings(write_sheet(sheet), tz="UTC", date_format="dmy")
    errs = errors(b)
    assert set(errs) == {2, 5}
    assert "'2026-06-02'" in errs[2] and "'2026-06-01 06:14'" in errs[2]
    assert b.table["time"][0].to_pydatetime() == utc(2026, 6, 1, 6, 20)
    assert b.table["time"][1].to_pydatetime() == utc(2026, 6, 2, 2, 30)


def test_cli_options_for_times(write_sheet, capsys):
    sheet = str(write_sheet(sheet_of(["03.10.2026 16:05", "03.10.2026 16:15"])))
    assert main(["check", sheet, "--tz", "UTC"]) == 1
    assert main(["check", sheet, "--tz", "UTC", "--date-format", "dmy"]) == 0
    assert main(["check", sheet, "--date-format", "ydm-ish"]) == 2
    assert "--date-format ydm-ish" in capsys.readouterr().err


# --------------------------------------------------------------------------- a date alone (issue 7, field trial)

@pytest.mark.parametrize("text, order", [("2026-05-03", None), ("03.05.2026", "dmy"), ("05/03/2026", "mdy"),
                                         ("3 May 2026", None), ('"May 3, 2026"', None), ("2026/05/03", None)])
def test_a_date_alone_is_noon_utc_of_that_date(write_sheet, text, order):
    # a numeric date whose order the column does not show needs --date-format, as with times of day
    b = read_bearings(write_sheet(sheet_of([text, "2026-05-04"])), date_format=order)
    assert errors(b) == {}
    assert [t.to_pydatetime() for t in b.table["time"]] == [utc(2026, 5, 3, 12), utc(2026, 5, 4, 12)]
    assert any("date and no time of day" in n for n in b.notes)


def test_the_trial_sheet_with_a_date_column_and_no_times(write_sheet):
    # dateonly.csv: every row was refused, though the fixes are labelled and on true north
    b = read_bearings(write_sheet("fix,tag,date,lat,lon,bearing,sd\n1,150.1,2026-05-03,47.8473227,15.1531455,19.995,3\n"
                                  "1,150.1,2026-05-03,47.8581248,15.1757928,280.012,3\n"
                                  "1,150.1,2026-05-04,47.8740193,15.1479690,149.991,3\n"
                                  "1,150.1,2026-05-04,47.8473227,15.1531455,25.0,3\n"))
    assert errors(b) == {}
    # the label is used on two dates: two fixes, named by their date
    assert b.table["fix"].tolist() == ["1 (2026-05-03)"] * 2 + ["1 (2026-05-04)"] * 2


def test_a_date_alone_does_not_group_unlabelled_bearings(write_sheet):
    sheet = "fix,time,lat,lon,bearing\nA,2026-05-03,47,15,45\nA,2026-05-03,47,15.02,315\n,2026-05-03,47,15.01,200\n"
    errs = errors(read_bearings(write_sheet(sheet)))
    assert set(errs) == {4} and "only a date, no time of day" in errs[4]


def test_without_labels_a_date_makes_one_fix_per_tag_and_day(write_sheet):
    sheet = ("tag,time,lat,lon,bearing\n1,2026-05-03,47,15,45\n1,2026-05-03,47,15.02,315\n1,2026-05-04,47,15.01,200\n"
             "1,2026-05-04,47,15.03,100\n")
    b = read_bearings(write_sheet(sheet))
    assert errors(b) == {}
    assert b.table["fix"].tolist() == ["1 2026-05-03"] * 2 + ["1 2026-05-04"] * 2


def test_a_magnetic_bearing_dated_by_day_gets_the_model_declination(write_sheet):
    # WMM2025 at noon UTC of the date; pygeomag (J. Myers) is an independent WMM2025 implementation. A day moves
    # the declination by about 0.0003 deg (0.1 deg a year), far below a compass's reading.
    from pygeomag import GeoMag

    b = read_bearings(write_sheet("fix,date,lat,lon,bearing,north\nA,2026-05-03,47.0,15.0,45,magnetic\n"
                                  "A,2026-05-03,47.0,15.02,315,magnetic\n"))
    assert errors(b) == {}
    noon = utc(2026, 5, 3, 12)
    start, end = utc(2026, 1, 1), utc(2027, 1, 1)
    year = 2026 + (noon - start) / (end - start)
    ref = GeoMag().calculate(glat=47.0, glon=15.0, alt=0, time=year).d
    assert b.table["declination"][0] == pytest.approx(ref, abs=1e-6)


def test_a_date_alone_does_not_look_up_the_track(write_sheet, tmp_path):
    gpx = tmp_path / "t.gpx"
    gpx.write_text('<?xml version="1.0"?><gpx version="1.1" creator="test" xmlns="http://www.topografix.com/GPX/1/1">'
                   '<trk><trkseg><trkpt lat="47.0" lon="15.0"><time>2026-05-03T11:59:50Z</time></trkpt>'
                   '<trkpt lat="47.0" lon="15.001"><time>2026-05-03T12:00:10Z</time></trkpt></trkseg></trk></gpx>')
    b = read_bearings(write_sheet("fix,time,bearing\nA,2026-05-03,45\n"), track=gpx)
    errs = errors(b)
    assert set(errs) == {2} and "no time" in errs[2]


def test_the_day_first_note_quotes_a_date_as_the_sheet_writes_it(write_sheet):
    # a sheet writing 14/05/2026 was told it has "dates like 14.05.2026"
    from dfkit import read_bearings

    b = read_bearings(write_sheet("fix,time,lat,lon,bearing\nA,14/05/2026 10:00,47,15,45\n"
                                  "A,14/05/2026 10:05,47,15.02,315\n"), tz="UTC")
    said = [n for n in b.notes if "read day first" in n]
    assert len(said) == 1 and "'14/05/2026 10:00'" in said[0]


def test_a_sheet_without_time_or_date_column_reads_as_empty_cells_and_still_checks_the_zone():
    import numpy as np

    from dfkit.observations.times import no_times, parse_times

    for tm in (no_times(3), parse_times(["", "", ""])):
        assert np.isnan(tm.seconds).all() and tm.empty.all() and list(tm.error) == ["", "", ""]
        assert not tm.bad.any() and not tm.date_only.any() and tm.notes == []
    with pytest.raises(Exception):
        no_times(2, tz="Not/AZone")
    with pytest.raises(Exception):
        parse_times(["", ""], tz="Not/AZone")
