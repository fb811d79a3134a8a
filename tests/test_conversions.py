"""Magnetic, grid and unit conversions, each against a reference outside dfkit."""

import numpy as np
import pytest
from geographiclib.geodesic import Geodesic

from dfkit import grids, magnetic, read_bearings
from dfkit.conventions import to_degrees

# NOAA/CIRES, WMM2025 technical report, test-value table (tests/WMM2025_TEST_VALUE_TABLE_FOR_REPORT.txt
# in NOAA's wmm repository): decimal year, height [km], lat, lon, declination D [deg], printed to 0.01 deg.
WMM2025_TABLE = [
    (2025.0, 0, 80, 0, 1.28), (2025.0, 0, 0, 120, -0.16), (2025.0, 0, -80, 240, 68.78),
    (2025.0, 100, 80, 0, 0.85), (2025.0, 100, 0, 120, -0.15), (2025.0, 100, -80, 240, 68.21),
    (2027.5, 0, 80, 0, 2.59), (2027.5, 0, 0, 120, -0.24), (2027.5, 0, -80, 240, 68.49),
    (2027.5, 100, 80, 0, 2.16), (2027.5, 100, 0, 120, -0.23), (2027.5, 100, -80, 240, 67.93),
]


@pytest.mark.parametrize("dyear, h, lat, lon, dec", WMM2025_TABLE)
def test_declination_matches_noaa_wmm2025_table(dyear, h, lat, lon, dec):
    got = magnetic.declination([lat], [lon], [dyear], height_km=h).declination_deg[0]
    assert got == pytest.approx(dec, abs=0.006)   # table printed to 0.01 deg


def test_declination_matches_mathworks_natick_example():
    # MathWorks wrldmagm documentation (WMM2025): Natick, MA, 42.283 N 71.35 W, 1000 m, 2028.505464:
    # D = -13.6891 deg.
    got = magnetic.declination([42.283], [-71.35], [2028.505464], height_km=1.0).declination_deg[0]
    assert got == pytest.approx(-13.6891, abs=5e-4)


def test_declination_agrees_with_a_second_implementation():
    # pygeomag (J. Myers), an independent pure-Python WMM2025 implementation.
    from pygeomag import GeoMag

    rng = np.random.default_rng(7)
    lat = rng.uniform(-60, 60, 25)
    lon = rng.uniform(-180, 180, 25)
    dy = rng.uniform(2025.0, 2029.99, 25)
    ours = magnetic.declination(lat, lon, dy).declination_deg
    gm = GeoMag()
    ref = [gm.calculate(glat=a, glon=b, alt=0, time=t).d for a, b, t in zip(lat, lon, dy)]
    assert ours == pytest.approx(ref, abs=1e-6)


def test_decimal_year():
    # 2026-07-02T12:00Z is day 182.5 of 365: 2026 + 182.5/365.
    t = np.datetime64("2026-07-02T12:00:00").astype("datetime64[s]").astype(float)
    assert magnetic.decimal_year(np.array([t]))[0] == pytest.approx(2026 + 182.5 / 365)


def test_magnetic_bearing_is_corrected_east_positive(write_sheet):
    # true = magnetic + D (D east positive; FM 21-26 ch. 6 declination diagram).
    sheet = write_sheet("fix,time,lat,lon,bearing,north\nA,2028-07-04T12:00:00Z,42.283,-71.35,100,magnetic\n")
    b = read_bearings(sheet)
    # MathWorks example above: D = -13.6891 deg there (at 1 km; the 1 km height changes D by < 0.01 deg),
    # so a magnetic 100 deg is about true 86.311 deg.
    assert b.table["true_bearing"][0] == pytest.approx(86.311, abs=0.01)
    assert b.table["declination"][0] == pytest.approx(-13.689, abs=0.01)


def test_date_outside_model_life_is_refused_unless_declination_given(write_sheet):
    rows = "fix,time,lat,lon,bearing,north,declination\nA,2031-01-05T10:00:00Z,47,15,100,magnetic,{}\n"
    b = read_bearings(write_sheet(rows.format("")))
    (p,) = [p for p in b.problems if p.severity == "error"]
    assert p.column == "time" and "outside the life of WMM2025" in p.message
    b = read_bearings(write_sheet(rows.format("4.5E")))
    assert b.table["true_bearing"][0] == pytest.approx(104.5)
    b = read_bearings(write_sheet(rows.format("3W")))
    assert b.table["true_bearing"][0] == pytest.approx(97.0)


def test_magnetic_without_time_or_declination_is_refused(write_sheet):
    b = read_bearings(write_sheet("fix,lat,lon,bearing,north\nA,47,15,100,magnetic\n"))
    assert any(p.severity == "error" and "needs a time" in p.message for p in b.problems)
    b = read_bearings(write_sheet("fix,lat,lon,bearing,north\nA,47,15,100,magnetic\n"), declination=4.0)
    assert b.table["true_bearing"][0] == pytest.approx(104.0)


def test_convergence_value_and_sign_against_geographiclib():
    # Sign: walk 1 m towards grid north in UTM 18N from (40.5 N, 73.5 W) and measure the true azimuth of that
    # step with geographiclib (Karney 2013). true = grid + gamma, so the azimuth of grid north is gamma.
    crs = grids.utm_crs(18, False)
    x, y = grids.latlon_to_projected(crs, [40.5], [-73.5])
    lat2, lon2 = grids.projected_to_latlon(crs, x, y + 1.0)
    az = Geodesic.WGS84.Inverse(40.5, -73.5, float(lat2[0]), float(lon2[0]))["azi1"]
    gamma = grids.convergence_deg(crs, [40.5], [-73.5])[0]
    assert gamma == pytest.approx(az, abs=1e-5)
    # Spherical approximation gamma = atan(tan(dlon) sin(lat)) (Snyder 1987, PP 1395) to 1e-5 deg.
    assert gamma == pytest.approx(np.degrees(np.arctan(np.tan(np.radians(1.5)) * np.sin(np.radians(40.5)))),
                                  abs=1e-4)
    assert gamma > 0   # east of the central meridian in the north: grid north is east of true north


def test_grid_bearing_is_corrected(write_sheet):
    b = read_bearings(write_sheet("fix,utm_zone,easting,northing,bearing,north\nA,18N,627106,4484124,100,grid\n"))
    lat, lon = b.table["lat"][0], b.table["lon"][0]
    gamma = grids.convergence_deg(grids.utm_crs(18, False), [lat], [lon])[0]
    assert b.table["true_bearing"][0] == pytest.approx(100 + gamma)
    assert b.table["convergence"][0] == pytest.approx(gamma)
    assert 0.9 < gamma < 1.1


def test_snyder_transverse_mercator_example():
    # Snyder (1987), Map Projections - A Working Manual, USGS PP 1395, TM ellipsoid example:
    # Clarke 1866, lat0 0, lon0 75 W, k0 0.9996; (40.5 N, 73.5 W) -> x 127106.5 m, y 4484124.4 m.
    import pyproj

    crs = pyproj.CRS.from_proj4("+proj=tmerc +a=6378206.4 +rf=294.978698214 +lon_0=-75 +k_0=0.9996 +units=m")
    x, y = grids.latlon_to_projected(crs, [40.5], [-73.5])
    assert (x[0], y[0]) == pytest.approx((127106.5, 4484124.4), abs=0.06)


def test_utm_definition_points():
    # UTM definitions (DMA TM 8358.2): the central meridian has easting 500000; the equator has northing 0
    # in the north and 10 000 000 in the south.
    lat, lon = grids.utm_to_latlon([33, 33], [False, True], [500000, 500000], [0, 10_000_000])
    assert lat == pytest.approx([0, 0], abs=1e-9) and lon == pytest.approx([15, 15], abs=1e-9)


def test_mgrs_reference_is_the_centre_of_its_square():
    # 33UXP0500444997: zone 33, 100 km square XP. By the MGRS lettering (NGA.STND.0037), column X in zone 33
    # is the 600 km easting; row P with this band puts the square's northing at 5 300 km. A 10-digit reference
    # names a 1 m square: centre = +0.5 m.
    lat, lon, zone, south, prec = grids.parse_mgrs("33UXP0500444997")[0]
    rlat, rlon = grids.projected_to_latlon(grids.utm_crs(33, False), [605004.5], [5344997.5])
    assert (lat, lon) == pytest.approx((rlat[0], rlon[0]), abs=1e-9)
    assert (zone, south, prec) == (33, False, 1.0)
    lat, lon, *_ = grids.parse_mgrs("33U XP 05 44")[0]    # 4-digit: 1 km square, centre +500 m
    rlat, rlon = grids.projected_to_latlon(grids.utm_crs(33, False), [605500.0], [5344500.0])
    assert (lat, lon) == pytest.approx((rlat[0], rlon[0]), abs=1e-9)


@pytest.mark.parametrize("text", ["33UXP050044499", "hello", "33UXP05004449977"])
def test_bad_mgrs(text):
    res, msg = grids.parse_mgrs(text)
    assert res is None and "MGRS" in msg


def test_units_follow_fm_21_26():
    # FM 21-26 ch. 6 section 6-1: 6400 mils and 400 grads to the circle.
    assert to_degrees(6400, "mil") == pytest.approx(360)
    assert to_degrees(1, "mil") == pytest.approx(0.05625)
    assert to_degrees(100, "grad") == pytest.approx(90)


def test_position_from_gps_track(write_sheet, tmp_path):
    gpx = tmp_path / "t.gpx"
    gpx.write_text('<?xml version="1.0"?><gpx version="1.1" creator="t" xmlns="http://www.topografix.com/GPX/1/1">'
                   '<trk><trkseg><trkpt lat="47.0" lon="15.0"><time>2026-05-03T06:00:00Z</time></trkpt>'
                   '<trkpt lat="47.001" lon="15.002"><time>2026-05-03T06:00:20Z</time></trkpt>'
                   '<trkpt lat="47.002" lon="15.002"><time>2026-05-03T06:10:00Z</time></trkpt>'
                   '</trkseg></trk></gpx>')
    sheet = write_sheet("fix,time,bearing\nA,2026-05-03T06:00:10Z,45\nA,2026-05-03T06:05:00Z,90\n"
                        "A,2026-05-03T07:00:00Z,90\n")
    b = read_bearings(sheet, track=gpx)
    # halfway in time between the first two points: halfway in position
    assert (b.table["lat"][0], b.table["lon"][0]) == pytest.approx((47.0005, 15.001), abs=1e-9)
    msgs = {p.line: p.message for p in b.problems if p.severity == "error"}
    assert "no GPS track point within 60 s" in msgs[3]
    assert "outside the GPS track" in msgs[4]


def test_north_written_out_is_read_like_its_abbreviation(write_sheet):
    # "grid north", "magnetic north", "true north" are how field forms and compasses name the three norths; a
    # sheet that writes them out must read as one that writes "grid", "magnetic", "true" (or GN, MN, TN).
    rows = [("grid", "grid north"), ("grid", "Grid North"), ("grid", "GN"), ("grid", "grid-north"),
            ("magnetic", "magnetic north"), ("magnetic", "Mag North"), ("magnetic", "mag. north"),
            ("magnetic", "MN"), ("true", "true north"), ("true", "TN"), ("true", "Geographic North")]
    text = "fix,time,lat,lon,bearing,north\n" + "".join(
        f"A,2026-05-03T06:00:00Z,47.85,15.15,20,{cell}\n" for _, cell in rows) + \
        "A,2026-05-03T06:00:00Z,47.85,15.15,20,map north\n"
    b = read_bearings(write_sheet(text), grid_crs="EPSG:32633")
    got = dict(zip(b.table["line"], b.table["north"]))
    assert [got[i + 2] for i in range(len(rows))] == [n for n, _ in rows]
    plain = read_bearings(write_sheet("fix,time,lat,lon,bearing,north\n" + "".join(
        f"A,2026-05-03T06:00:00Z,47.85,15.15,20,{n}\n" for n in ("grid", "magnetic", "true"))), grid_crs="EPSG:32633")
    want = dict(zip(plain.table["north"], plain.table["true_bearing"]))
    for (north, _), tb in zip(rows, b.table["true_bearing"]):
        assert tb == pytest.approx(want[north], abs=1e-12)
    bad = [p for p in b.problems if p.severity == "error"]
    assert [(p.line, p.column) for p in bad] == [(len(rows) + 2, "north")]
    assert "unknown north 'map north'" in bad[0].message
