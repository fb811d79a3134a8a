"""Positions written as degrees-minutes-seconds or degrees-decimal-minutes, with symbols or spaces and a hemisphere
letter before or after; every expected value is worked out here by hand (d + m/60 + s/3600)."""

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from dfkit import read_bearings
from dfkit.observations.cells import angles, parse_angle


def dms(d, m=0.0, s=0.0, sign=1):
    return sign * (d + m / 60.0 + s / 3600.0)


@pytest.mark.parametrize("text, value, axis", [
    # GeographicLib, GeoConvert(1) manual, "GEOGRAPHIC COORDINATES": "33.3 44.4", "E44.4 N33.3", "33d18'N 44d24'E",
    # "44d24 33d18N" and "33:18 44:24" are all the same point (33.3 N, 44.4 E).
    ("33d18'N", 33.3, "lat"), ("44d24'E", 44.4, "lon"), ("N33.3", 33.3, "lat"), ("E44.4", 44.4, "lon"),
    ("33d18N", 33.3, "lat"), ("44d24", 44.4, ""), ("33:18", 33.3, ""), ("44:24", 44.4, ""),
    # GeographicLib examples/example-DMS.cpp decodes 30d14'45.6"S.
    ("30d14'45.6\"S", dms(30, 14, 45.6, -1), "lat"),
    # The forms named in issue 7, and the usual symbol variants (prime, double prime, ordinal sign for degrees).
    ("48°58'07.4\"N", dms(48, 58, 7.4), "lat"), ("48°58.123'N", dms(48, 58.123), "lat"),
    ("N48 58.123", dms(48, 58.123), "lat"), ("48 58 7.4 N", dms(48, 58, 7.4), "lat"),
    ("48º58′07.4″N", dms(48, 58, 7.4), "lat"), ("48° 58' 07.4\" N", dms(48, 58, 7.4), "lat"),
    ("48°30'15''N", dms(48, 30, 15), "lat"), ("015°10.5'W", dms(15, 10.5, sign=-1), "lon"),
    ("W 3 30.5", dms(3, 30.5, sign=-1), "lon"), ("-48 30", -48.5, ""), ("0 30 W", -0.5, "lon"),
    ("48.9687N", 48.9687, "lat"), ("S 12.5", -12.5, "lat"),
])
def test_published_and_everyday_forms(text, value, axis):
    got, got_axis, err = parse_angle(text)
    assert err == ""
    assert got == pytest.approx(value, abs=1e-12) and got_axis == axis


@pytest.mark.parametrize("text, words", [
    ("48°60'N", "below 60"), ("48 58 60", "below 60"), ("48 58.5 7", "only the last part"),
    ("-48°N", "minus sign and a hemisphere"), ("N48S", "two hemisphere letters"), ("48°58'O", "not a position"),
    ("abc", "not a position"), ("48''58", "not a position"),
])
def test_malformed_angles_are_refused_with_a_reason(text, words):
    got, _, err = parse_angle(text)
    assert words in err


def test_a_longitude_letter_in_the_latitude_column_means_swapped_columns():
    c = angles(["15°10.2'E", "48°58.1'N"], "lat")
    assert "lat and lon look swapped" in c.error[0] and c.error[1] == ""


def test_a_sheet_with_gps_style_positions(write_sheet):
    b = read_bearings(write_sheet('fix,lat,lon,bearing\nA,"48°58\'07.4""N",15°10.2\'E,45\nA,N48 58.300,E15 11.100,315\n'
                                  "A,48 59 7.4 N,15 10 30 E,200\nA,48.9800,15.1800,100\n"))
    assert [p for p in b.problems if p.severity == "error"] == []
    assert b.table["lat"].tolist() == pytest.approx([dms(48, 58, 7.4), dms(48, 58.3), dms(48, 59, 7.4), 48.98])
    assert b.table["lon"].tolist() == pytest.approx([dms(15, 10.2), dms(15, 11.1), dms(15, 10, 30), 15.18])


def test_decimal_comma_minutes_in_a_semicolon_sheet(write_sheet):
    b = read_bearings(write_sheet("fix;lat;lon;bearing\nA;48°58,5'N;15°10,25'E;45\nA;48,98;15,18;315\n"))
    assert [p for p in b.problems if p.severity == "error"] == []
    assert b.table["lat"][0] == pytest.approx(dms(48, 58.5)) and b.table["lon"][0] == pytest.approx(dms(15, 10.25))


@settings(max_examples=300, deadline=None)
@given(d=st.integers(0, 180), m=st.one_of(st.none(), st.integers(0, 61), st.floats(0, 61, allow_nan=False)),
       s=st.one_of(st.none(), st.integers(0, 61), st.floats(0, 61, allow_nan=False)),
       marks=st.sampled_from(["dms", "space", "colon", "d"]), letter=st.sampled_from(["", "N", "S", "E", "W"]),
       before=st.booleans())
def test_the_column_reader_agrees_with_the_one_cell_reader(d, m, s, marks, letter, before):
    # The fast, whole-column reading of common forms must give exactly what parse_angle gives cell by cell
    # (value or refusal); both are checked against the hand formula in the tests above.
    parts = [str(d)] + ([f"{m:.3f}" if isinstance(m, float) else str(m)] if m is not None else []) + \
        ([f"{s:.2f}" if isinstance(s, float) else str(s)] if s is not None and m is not None else [])
    if marks == "dms":
        text = "".join(p + sym for p, sym in zip(parts, ["°", "'", '"']))
    elif marks == "d":
        text = "".join(p + sym for p, sym in zip(parts, ["d", "'", '"']))
    else:
        text = (" " if marks == "space" else ":").join(parts)
    text = (letter + text) if before else (text + (" " if letter and marks == "space" else "") + letter)
    for axis in ("lat", "lon"):
        col = angles([text], axis)
        v, got_axis, err = parse_angle(text)
        wrong_axis = got_axis and got_axis != axis
        if err or wrong_axis:
            assert col.error[0] != "", text
        elif abs(v) > {"lat": 90, "lon": 360}[axis]:
            # beyond decimal degrees: read as a packed angle (test_packed_angles), refused, or handed on as
            # written for the range check of the sheet reader
            assert col.error[0] != "" or col.packed[0] or col.values[0] == pytest.approx(v, abs=1e-12), text
        else:
            assert col.error[0] == "" and col.values[0] == pytest.approx(v, abs=1e-12), text


@pytest.mark.parametrize("cell", [
    # GeographicLib, GeoConvert(1) manual, "GEOGRAPHIC COORDINATES": these name one point, 33.3 N 44.4 E
    "33.3 44.4", "E44.4 N33.3", "33d18'N 44d24'E", "44d24 33d18N", "33:18 44:24",
    # as map apps and GPS units copy a position
    '"33.3, 44.4"', "N33 18.000 E44 24.000", "33 18 0 N 44 24 0 E",
])
def test_a_whole_position_in_one_cell(write_sheet, cell):
    b = read_bearings(write_sheet(f"fix,position,bearing\nA,{cell},45\n"))
    assert [p for p in b.problems if p.severity == "error"] == []
    assert (b.table["lat"][0], b.table["lon"][0]) == pytest.approx((dms(33, 18), dms(44, 24)), abs=1e-12)


@pytest.mark.parametrize("cell, words", [("48 58 15 10", "more than one way"), ("N47 N15", "two latitudes"),
                                         ("near the hut", "not a position")])
def test_a_position_cell_that_cannot_be_split_is_refused(write_sheet, cell, words):
    b = read_bearings(write_sheet(f"fix,coordinates,bearing\nA,{cell},45\n"))
    (p,) = [p for p in b.problems if p.severity == "error"]
    assert p.column == "coordinates" and words in p.message
