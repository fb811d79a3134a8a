"""Position mistakes are named on their own line, judged against the row's own fix (issue 7, field trial):
a station far from the other stations of its fix is refused with the typing slips that would bring it back,
instead of being used and its bearing blamed ("line 5 looks wild", `on_station`, `diverging`)."""

import re

import pytest
from geographiclib.geodesic import Geodesic

from dfkit import read_bearings
from dfkit.observations.typos import variants

# Three stations of one fix as a tester took them (WGS84), about 1-3 km apart.
STATIONS = [(47.8473227, 15.1531455, 19.995), (47.8581248, 15.1757928, 280.012), (47.8740193, 15.1479690, 149.991)]
HEAD = "fix,lat,lon,bearing,sd\n"


def sheet(rows, label="A"):
    return "".join(f"{label},{a},{b},{c},3\n" for a, b, c in rows)


def errors(b):
    return [(p.line, p.column, p.message) for p in b.problems if p.severity == "error"]


def geodesic_km(lat1, lon1, lat2, lon2):
    return Geodesic.WGS84.Inverse(lat1, lon1, lat2, lon2)["s12"] / 1000.0


@pytest.mark.parametrize("bad, column, fix_text, kind", [
    ((48.8740193, 15.1479690), "lat", "47.8740193", "one digit changed"),     # a wrong leading digit: 111 km
    ((47.8740193, -15.1479690), "lon", "15.147969", "sign"),                  # a lost minus sign: 2,300 km
    ((4.78740193, 15.1479690), "lat", "47.8740193", "decimal point moved"),   # 4,800 km
])
def test_a_far_station_is_refused_with_the_slip_that_brings_it_back(write_sheet, bad, column, fix_text, kind):
    rows = STATIONS + [(bad[0], bad[1], 149.991)]
    b = read_bearings(write_sheet(HEAD + sheet(rows)))
    (line, col, msg), = errors(b)
    assert (line, col) == (5, column)
    assert f"{fix_text} ({kind})" in msg and "position mistake" in msg
    assert b.table["line"].tolist() == [2, 3, 4]
    # the distance stated is from the middle of the other stations (their median lat and lon), within the 0.5 %
    # a sphere differs from the ellipsoid; the reference distance is geographiclib's (Karney 2013)
    mid_lat = sorted(r[0] for r in rows)[len(rows) // 2 - 1: len(rows) // 2 + 1]
    mid_lon = sorted(r[1] for r in rows)[len(rows) // 2 - 1: len(rows) // 2 + 1]
    ref = geodesic_km(bad[0], bad[1], sum(mid_lat) / 2, sum(mid_lon) / 2)
    said = float(re.search(r"is ([\d,]+) km from", msg).group(1).replace(",", ""))
    assert said == pytest.approx(ref, rel=0.006, abs=1.0)


def test_the_trial_sheet_with_a_minus_sign_lost(write_sheet):
    # mist.csv of the trial: fix M1 was 'on_station' and its bearings were blamed
    b = read_bearings(write_sheet("fix,tag,time,lat,lon,bearing,north,sd\n"
                                  "M1,150.1,2026-05-03 06:12Z,47.8473227,15.1531455,19.995,true,3\n"
                                  "M1,150.1,2026-05-03 06:15Z,47.8581248,15.1757928,280.012,true,3\n"
                                  "M1,150.1,2026-05-03 06:19Z,47.8740193,-15.1479690,149.991,true,3\n"))
    (line, col, msg), = errors(b)
    assert (line, col) == (4, "lon") and "lon 15.147969" in msg and "(sign)" in msg


@pytest.mark.parametrize("zone", ["33N", "33 north"])
def test_a_utm_northing_with_a_digit_missing_is_judged_against_its_fix(write_sheet, zone):
    # utmmiss.csv: the easting case was refused, the northing (hemisphere letter) was read 4,800 km away
    b = read_bearings(write_sheet("fix,utm_zone,easting,northing,bearing,sd\n"
                                  f"C,{zone},512216,5300695,41,3\nC,{zone},513345,5300828,334,3\n"
                                  f"C,{zone},513523,5302128,229,3\nC,{zone},513523,530212,229,3\n"))
    (line, col, msg), = errors(b)
    assert (line, col) == (5, "northing") and "a digit missing in the northing" in msg


def test_stations_spread_wide_are_left_alone(write_sheet):
    # a long-baseline network: all stations hundreds of km apart; the spread factor keeps it (no position refused)
    g = Geodesic.WGS84
    rows = []
    for az, dist in ((200, 300e3), (100, 450e3), (330, 250e3)):
        p = g.Direct(50.0, 10.0, az, dist)
        rows.append((round(p["lat2"], 7), round(p["lon2"], 7), round((p["azi2"] + 180) % 360, 3)))
    b = read_bearings(write_sheet(HEAD + sheet(rows)))
    assert errors(b) == []


def test_a_station_a_few_km_off_is_left_to_the_bearings(write_sheet):
    # 30 km from the others is farther than usual but within driving reach: not refused (the fit judges it)
    far = Geodesic.WGS84.Direct(STATIONS[0][0], STATIONS[0][1], 90.0, 30e3)
    rows = STATIONS + [(round(far["lat2"], 7), round(far["lon2"], 7), 280.0)]
    b = read_bearings(write_sheet(HEAD + sheet(rows)))
    assert errors(b) == []


def test_two_stations_far_apart_are_both_pointed_out(write_sheet):
    # with two stations dfkit cannot tell which one is wrong: both lines get a warning, neither is refused
    b = read_bearings(write_sheet(HEAD + sheet([STATIONS[0], (47.8740193, -15.1479690, 149.991)])))
    assert errors(b) == []
    warned = [(p.line, p.message) for p in b.problems if p.severity == "warning"]
    assert [w[0] for w in warned] == [2, 3]
    assert all("probably mistyped" in m for _, m in warned) and "line 3" in warned[0][1]


def test_each_fix_is_judged_alone(write_sheet):
    # the same far row belongs to fix B; fix A is far from B (another study area) and is not touched
    rows_a = sheet(STATIONS, "A")
    rows_b = sheet([(-33.9, 18.4, 10.0), (-33.91, 18.42, 300.0), (-33.92, 18.41, 200.0), (-3.392, 18.41, 200.0)], "B")
    b = read_bearings(write_sheet(HEAD + rows_a + rows_b))
    (line, col, msg), = errors(b)
    assert (line, col) == (8, "lat") and "-33.92 (decimal point moved)" in msg


@pytest.mark.parametrize("text, point, expected", [
    ("48.874", True, {("47.874", "one digit changed"), ("84.874", "digits swapped"), ("-48.874", "sign"),
                      ("4.8874", "decimal point moved"), ("48.87", "a digit too many")}),
    ("530212", False, {("5302128", "a digit missing"), ("503212", "digits swapped"), ("53021", "a digit too many")}),
])
def test_typing_slips(text, point, expected):
    got = set(variants(text, point=point))
    assert expected <= got and all(t != text for t, _ in got)


def test_only_plain_numbers_are_varied():
    assert variants("48°52'N") == [] and variants("") == [] and variants("abc") == []
