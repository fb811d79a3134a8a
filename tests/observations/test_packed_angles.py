"""Packed angles: degrees, minutes and maybe seconds written without separators (``4751.6N``, ``075136N``),
as NMEA 0183 writes positions. They are read as such, or refused naming the form; never as decimal degrees.

Every expected value is worked out here by hand (d + m/60 + s/3600).
"""

import numpy as np
import pytest

from dfkit import read_bearings
from dfkit.observations.cells import angles, packed_angle, split_position


def dms(d, m=0.0, s=0.0, sign=1):
    return sign * (d + m / 60.0 + s / 3600.0)


def errors(b):
    return [(p.line, p.column, p.message) for p in b.problems if p.severity == "error"]


@pytest.mark.parametrize("text, axis, value", [
    # The GGA sentence example printed in NMEA references ("$GPGGA,123519,4807.038,N,01131.000,E,...": latitude
    # 48 deg 07.038' N, longitude 11 deg 31.000' E; NMEA 0183 writes latitude ddmm.mmm and longitude dddmm.mmm with
    # the hemisphere in the next field; from memory of the standard's GGA field table).
    ("4807.038N", "lat", dms(48, 7.038)), ("01131.000E", "lon", dms(11, 31.0)),
    ("4807.038,N", "lat", dms(48, 7.038)), ("N4807.038", "lat", dms(48, 7.038)),
    # the field trial's cells
    ("0751.6N", "lat", dms(7, 51.6)), ("4751.6N", "lat", dms(47, 51.6)), ("3751.6N", "lat", dms(37, 51.6)),
    ("751.6N", "lat", dms(7, 51.6)),                      # degrees without their leading zero
    ("01509.6E", "lon", dms(15, 9.6)), ("1509.6E", "lon", dms(15, 9.6)), ("00309.6W", "lon", dms(3, 9.6, sign=-1)),
    ("W08005.2", "lon", dms(80, 5.2, sign=-1)),
    # degrees, minutes and seconds packed: DDMMSS and DDDMMSS
    ("075136N", "lat", dms(7, 51, 36)), ("475136N", "lat", dms(47, 51, 36)), ("75136N", "lat", dms(7, 51, 36)),
    ("0800512W", "lon", dms(80, 5, 12, sign=-1)), ("0150936E", "lon", dms(15, 9, 36)), ("150936E", "lon", dms(15, 9, 36)),
    ("3352.5S", "lat", dms(33, 52.5, sign=-1)), ("475136.5N", "lat", dms(47, 51, 36.5)),
    # near the equator: the leading zeros make it packed although 45.12 would be a latitude
    ("0045.12N", "lat", dms(0, 45.12)),
])
def test_packed_forms_are_read_as_degrees_and_minutes(text, axis, value):
    got, err = packed_angle(text, axis)
    assert err == "" and got == pytest.approx(value, abs=1e-12)
    col = angles(np.array([text], dtype=object), axis)
    assert col.error[0] == "" and col.values[0] == pytest.approx(value, abs=1e-12) and col.packed[0]


@pytest.mark.parametrize("text, axis", [("47.86", "lat"), ("-3.5", "lon"), ("045.5", "lat"), ("150.5", "lon"),
                                        ("350.5", "lon"), ("48°58'07.4\"N", "lat"), ("147.0", "lat")])
def test_decimal_degrees_and_marked_forms_are_not_packed(text, axis):
    assert packed_angle(text, axis) is None


@pytest.mark.parametrize("text, axis, words", [
    ("4751.60", "lat", "hemisphere letter is missing"),          # NMEA keeps the letter in its own field
    ("01509.60", "lon", "hemisphere letter is missing"),
    ("0045.1234", "lat", "hemisphere letter is missing"),
    ("15036E", "lon", "150°36'"),                                  # 150°36' or 1°50'36": both fit
    ("4775.6N", "lat", "minutes and seconds below 60"),
    ("4751.6E", "lat", "lat and lon look swapped"),
    ("-4751.6N", "lat", "both a sign and a hemisphere letter"),
])
def test_packed_forms_that_cannot_be_read_are_refused_naming_the_form(text, axis, words):
    got, err = packed_angle(text, axis)
    assert np.isnan(got) and words in err


def test_a_run_on_dms_is_not_split_into_degrees_minutes_seconds():
    # Before: '075136N' matched the spaced-DMS pattern as 75 deg 13' 6" (75.218 N) while the longitude
    # '0800512W' was read right, a fix 7,500 km off with no warning.
    col = angles(np.array(["075136N", "48 58 7.4 N"], dtype=object), "lat")
    assert col.values.tolist() == pytest.approx([dms(7, 51, 36), dms(48, 58, 7.4)])


def test_the_trial_sheet_with_packed_positions(write_sheet):
    b = read_bearings(write_sheet("fix,lat,lon,bearing\nA,075136N,0800512W,10\nB,475136N,0150936E,10\n"
                                  "A,N0751.6,W08005.2,10\n"))
    assert errors(b) == []
    assert b.table["lat"].tolist() == pytest.approx([dms(7, 51, 36), dms(47, 51, 36), dms(7, 51.6)])
    assert b.table["lon"].tolist() == pytest.approx([dms(80, 5, 12, -1), dms(15, 9, 36), dms(80, 5.2, sign=-1)])
    warned = [p for p in b.problems if p.severity == "warning" and "packed angle" in p.message]
    assert [(p.line, p.column) for p in warned] == [(2, "lat"), (2, "lon")]
    assert "2 more lat cells" in warned[0].message


def test_nmea_fields_without_letters_are_refused_not_read_as_decimal(write_sheet):
    # a column of plain numbers reaches the reader as floats: the packed reading must still be found
    b = read_bearings(write_sheet("fix,lat,lon,bearing\nA,4751.60,01509.60,10\nA,47.86,15.16,20\n"))
    (lat_err, lon_err) = errors(b)
    assert lat_err[:2] == (2, "lat") and "47°51.60'" in lat_err[2] and "4751.60N or 4751.60S" in lat_err[2]
    assert lon_err[:2] == (2, "lon") and "15°09.60'" in lon_err[2]
    assert b.table["line"].tolist() == [3]


def test_leading_zeros_count_in_a_column_that_also_holds_packed_values(write_sheet):
    # '0045.1234' reads as 45.1234 in a float column; a column holding any value beyond degrees is read as text,
    # so the zeros that make it packed (0 deg 45.1234') are seen
    b = read_bearings(write_sheet("fix,lat,lon,bearing\nA,0045.1234,3.5,10\nA,4751.6,15.1,20\n"))
    msgs = {line: m for line, col, m in errors(b) if col == "lat"}
    assert "0°45.1234'" in msgs[2] and "47°51.6'" in msgs[3]


def test_an_nmea_position_in_one_cell():
    assert split_position("4807.038,N,01131.000,E") == ("4807.038N", "01131.000E", "")


def test_nmea_position_column_reads_the_gga_example(write_sheet):
    b = read_bearings(write_sheet('fix,position,bearing\nA,"4807.038,N,01131.000,E",45\n'))
    assert errors(b) == []
    assert (b.table["lat"][0], b.table["lon"][0]) == pytest.approx((dms(48, 7.038), dms(11, 31.0)), abs=1e-12)
