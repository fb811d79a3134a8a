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
    ("03/10/26 10:00", "two-digit year"), ("2026-05-03", "no time of day"), ("46145.26", "spreadsheet date number"),
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
    assert set(errs) == {3, 4}       # 03.05.2026 alone is ambiguous; a date without a time is refused
    assert b.table["time"][0].to_pydatetime() == datetime(2026, 5, 3, 6, 12, tzinfo=VIENNA)


def test_cli_options_for_times(write_sheet, capsys):
    sheet = str(write_sheet(sheet_of(["03.10.2026 16:05", "03.10.2026 16:15"])))
    assert main(["check", sheet, "--tz", "UTC"]) == 1
    assert main(["check", sheet, "--tz", "UTC", "--date-format", "dmy"]) == 0
    assert main(["check", sheet, "--date-format", "ydm-ish"]) == 2
    assert "--date-format ydm-ish" in capsys.readouterr().err
