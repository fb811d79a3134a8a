"""UTM zone letters: latitude bands (C-X, as GPS units and MGRS write them) and hemispheres (N/S), never guessed."""

import mgrs
import numpy as np
import pyproj
import pytest

from dfkit import grids, read_bearings

# Latitude bands of the MGRS/UTM grid: 8 degrees each from 80 S, letters C-X without I and O, X 12 degrees tall
# (NGA.STND.0037_2.0.0_GRIDS, 2014, and DMA TM 8358.1, 1990; cited from memory). Checked here against the `mgrs`
# package, an implementation of the same standard (GeoTrans), not against dfkit.
BANDS = "CDEFGHJKLMNPQRSTUVWX"


def errors(b):
    return [(p.line, p.column, p.message) for p in b.problems if p.severity == "error"]


def warnings_(b):
    return [(p.line, p.column, p.message) for p in b.problems if p.severity == "warning"]


@pytest.mark.parametrize("letter", list(BANDS))
def test_band_limits_match_the_mgrs_package(letter):
    south, north = grids.band_limits(letter)
    m = mgrs.MGRS()
    for lat in (south + 0.01, (south + north) / 2, north - 0.01):
        assert m.toMGRS(lat, 15.0, MGRSPrecision=0)[2] == letter


def utm(zone_epsg, lat, lon):
    tr = pyproj.Transformer.from_crs("EPSG:4326", f"EPSG:{zone_epsg}", always_xy=True)
    return tr.transform(lon, lat)


def latlon(zone_epsg, e, n):
    tr = pyproj.Transformer.from_crs(f"EPSG:{zone_epsg}", "EPSG:4326", always_xy=True)
    lon, lat = tr.transform(e, n)
    return lat, lon


# Two stations in southern Spain (band S, 32-40 N, zone 30) and, for evidence, one near Madrid (band T).
SPAIN = [(37.39, -3.52), (37.41, -3.47)]
MADRID = (40.45, -3.70)


def spain_rows(zone_text="30S"):
    rows = []
    for k, (la, lo) in enumerate(SPAIN):
        e, n = utm(32630, la, lo)
        rows.append(f"A,{zone_text},{e:.1f},{n:.1f},{[45, 315][k]}")
    return rows


def test_an_s_without_evidence_is_refused_showing_both_readings(write_sheet):
    b = read_bearings(write_sheet("fix,utm_zone,easting,northing,bearing\n" + "\n".join(spain_rows()) + "\n"))
    errs = errors(b)
    assert [e[:2] for e in errs] == [(2, "utm_zone"), (3, "utm_zone")]
    e, n = utm(32630, *SPAIN[0])
    south_lat, _ = latlon(32730, e, n)      # the same numbers read in the southern hemisphere (pyproj)
    msg = errs[0][2]
    assert "latitude band S" in msg and "southern hemisphere" in msg and "--utm-letters" in msg
    assert f"{SPAIN[0][0]:.2f}°N" in msg and f"{abs(south_lat):.2f}°S" in msg
    assert len(b.table) == 0


@pytest.mark.parametrize("how, epsg", [("band", 32630), ("hemisphere", 32730)])
def test_an_explicit_choice_reads_s_that_way(write_sheet, how, epsg):
    b = read_bearings(write_sheet("fix,utm_zone,easting,northing,bearing\n" + "\n".join(spain_rows()) + "\n"),
                      utm_letters=how)
    assert errors(b) == []
    e, n = (float(v) for v in spain_rows()[0].split(",")[2:4])
    assert (b.table["lat"][0], b.table["lon"][0]) == pytest.approx(latlon(epsg, e, n), abs=1e-9)


def test_band_letters_elsewhere_in_the_sheet_are_evidence(write_sheet):
    # The case: '30S' written as a GPS shows it (band S, southern Spain) must not land 10,000 km away.
    e, n = utm(32630, *MADRID)
    rows = spain_rows() + [f"B,30T,{e:.1f},{n:.1f},10", f"B,30T,{e + 900:.1f},{n + 900:.1f},300"]
    b = read_bearings(write_sheet("fix,utm_zone,easting,northing,bearing\n" + "\n".join(rows) + "\n"))
    assert errors(b) == []
    assert b.table["lat"][0] == pytest.approx(SPAIN[0][0], abs=1e-6)
    assert b.table["lon"][0] == pytest.approx(SPAIN[0][1], abs=1e-6)
    said = [m for (line, col, m) in warnings_(b) if line == 2]
    assert said and "latitude band S" in said[0] and "line 4" in said[0]


def test_the_fix_own_positions_are_evidence(write_sheet):
    rows = spain_rows() + [f"A,,,,200,{SPAIN[0][0] + 0.02},{SPAIN[0][1]}"]
    sheet = "fix,utm_zone,easting,northing,bearing,lat,lon\n" + "\n".join(r + ",," for r in spain_rows()) + "\n" + \
        rows[-1] + "\n"
    b = read_bearings(write_sheet(sheet))
    assert errors(b) == []
    assert b.table["lat"].tolist()[:2] == pytest.approx([la for la, _ in SPAIN], abs=1e-6)
    assert any("other positions of this fix" in m for (_, _, m) in warnings_(b))


def test_the_track_is_evidence(write_sheet, tmp_path):
    gpx = tmp_path / "t.gpx"
    gpx.write_text('<?xml version="1.0"?><gpx version="1.1" creator="t" xmlns="http://www.topografix.com/GPX/1/1">'
                   f'<trk><trkseg><trkpt lat="{SPAIN[0][0]}" lon="{SPAIN[0][1]}"><time>2026-05-03T06:00:00Z</time>'
                   f'</trkpt><trkpt lat="{SPAIN[1][0]}" lon="{SPAIN[1][1]}"><time>2026-05-03T06:10:00Z</time></trkpt>'
                   '</trkseg></trk></gpx>')
    rows = [r.replace("A,", "A,2026-05-03T06:0" + str(5 * k) + ":00Z,", 1) for k, r in enumerate(spain_rows())]
    b = read_bearings(write_sheet("fix,time,utm_zone,easting,northing,bearing\n" + "\n".join(rows) + "\n"), track=gpx)
    assert errors(b) == []
    assert b.table["lat"][0] == pytest.approx(SPAIN[0][0], abs=1e-6)


def test_an_s_whose_northing_cannot_be_band_s_is_the_southern_hemisphere(write_sheet):
    # 6,200,000 m north would be about 56 N as band S (32-40 N): impossible, so S is the hemisphere (~34 S).
    e, n = utm(32734, -34.3, 18.5)
    b = read_bearings(write_sheet(f"fix,utm_zone,easting,northing,bearing\nA,34S,{e:.1f},{n:.1f},45\n"))
    assert errors(b) == []
    assert (b.table["lat"][0], b.table["lon"][0]) == pytest.approx((-34.3, 18.5), abs=1e-6)


def test_a_band_letter_that_contradicts_the_northing_is_refused(write_sheet):
    # 33U is band U (48-56 N); this northing is at 47.86 N (band T).
    b = read_bearings(write_sheet("fix,utm_zone,easting,northing,bearing\nA,33U,512300,5301200,45\n"))
    (line, col, msg), = errors(b)
    assert col == "utm_zone" and "band U runs from 48.00°N to 56.00°N" in msg


@pytest.mark.parametrize("zone, epsg, lat, lon", [
    ("33T", 32633, 47.86, 15.17), ("33 T", 32633, 47.86, 15.17), ("T33", 32633, 47.86, 15.17),
    ("33 north", 32633, 47.86, 15.17), ("33N", 32633, 47.86, 15.17), ("56H", 32756, -33.87, 151.21),
    ("19 south", 32719, -33.45, -70.66), ("33X", 32633, 78.22, 15.65), ("31N", 32631, 4.5, 3.2),
])
def test_band_and_hemisphere_letters_convert_like_pyproj(write_sheet, zone, epsg, lat, lon):
    e, n = utm(epsg, lat, lon)
    b = read_bearings(write_sheet(f"fix,utm_zone,easting,northing,bearing\nA,{zone},{e:.3f},{n:.3f},45\n"))
    assert errors(b) == []
    assert (b.table["lat"][0], b.table["lon"][0]) == pytest.approx((lat, lon), abs=1e-7)


def test_hemisphere_only_refuses_band_letters(write_sheet):
    b = read_bearings(write_sheet("fix,utm_zone,easting,northing,bearing\nA,33T,512300,5301200,45\n"),
                      utm_letters="hemisphere")
    (line, col, msg), = errors(b)
    assert col == "utm_zone" and "is a latitude band, not a hemisphere" in msg


def test_a_whole_position_in_the_zone_cell(write_sheet):
    # The way a GPS screen shows it: '33T 512300 5301200'.
    b = read_bearings(write_sheet("fix,utm_zone,bearing\nA,33T 512300 5301200,45\n"))
    assert errors(b) == []
    assert (b.table["lat"][0], b.table["lon"][0]) == pytest.approx(latlon(32633, 512300, 5301200), abs=1e-9)


def test_a_whole_position_in_the_zone_cell_beside_easting_and_northing(write_sheet):
    # The same position in the zone cell and the columns is read; one that disagrees is refused naming both (it is
    # a position, not an unreadable zone); more than a zone that is no position says the zone cell takes a zone.
    sheet = ("fix,utm,easting,northing,bearing\n"
             "A,33T 512300 5301200,512300,5301200,45\n"
             "A,33T 512300 5301200,512300,5309999,90\n"
             "A,33T 5123 x,512300,5301200,135\n")
    b = read_bearings(write_sheet(sheet))
    errs = dict((line, m) for line, _, m in errors(b))
    assert set(errs) == {3, 4}
    assert "is a whole UTM position" in errs[3] and "northing 5309999," in errs[3]
    assert "not a UTM zone" not in errs[3] and "more than a UTM zone" in errs[4]
    assert (b.table["lat"][0], b.table["lon"][0]) == pytest.approx(latlon(32633, 512300, 5301200), abs=1e-9)


@pytest.mark.parametrize("zone, words", [("33", "needs a letter"), ("33I", "no latitude band I"),
                                         ("61N", "1 to 60"), ("33Z", "neither"), ("x", "not a UTM zone")])
def test_unreadable_zones(write_sheet, zone, words):
    b = read_bearings(write_sheet(f"fix,utm_zone,easting,northing,bearing\nA,{zone},512300,5301200,45\n"))
    (line, col, msg), = errors(b)
    assert col == "utm_zone" and words in msg


def test_mgrs_square_letters_are_consistent_with_their_band(write_sheet):
    # MGRS always uses bands; the reference below is decoded by the mgrs package (not dfkit), which returns the
    # centre of the 1 m square a 10-digit reference names.
    zone, hemi, e, n = mgrs.MGRS().MGRSToUTM("30SVG3500037000")
    lat, lon = latlon(32630 if hemi == "N" else 32730, e, n)
    b = read_bearings(write_sheet("fix,mgrs,bearing\nA,30SVG3500037000,45\n"))
    assert errors(b) == []
    assert (b.table["lat"][0], b.table["lon"][0]) == pytest.approx((lat, lon), abs=1e-9)
    assert 32 < lat < 40   # band S
    assert np.isfinite(b.table["true_bearing"][0])


# Tierra del Fuego, zone 19 of the southern hemisphere: written '19S' by someone who means the hemisphere.
FUEGO = [(-54.80, -68.30), (-54.81, -68.26), (-54.83, -68.29)]


def test_a_band_habit_seen_only_in_other_zones_does_not_make_an_ok_fix(write_sheet):
    # A sheet spanning continents: band letters in Spain (zone 30) say nothing sure about an '19S' in zone 19, whose
    # two readings lie 10,000 km apart (35.5 N as band S, 54.8 S as the hemisphere; pyproj). The reading may stand,
    # but the fix must not come out ok without a word.
    from dfkit.locate import locate

    e, n = utm(32630, *MADRID)
    rows = [f"B,30T,{e:.1f},{n:.1f},10", f"B,30T,{e + 900:.1f},{n + 900:.1f},300",
            f"B,30T,{e - 900:.1f},{n + 500:.1f},120"]
    from geographiclib.geodesic import Geodesic

    for k, (la, lo) in enumerate(FUEGO):
        fe, fn = utm(32719, la, lo)
        # bearings that meet in either reading (the same plane shape): the fix comes out ok as read
        nla, nlo = latlon(32619, fe, fn)
        az = Geodesic.WGS84.Inverse(nla, nlo, *latlon(32619, *utm(32719, -54.815, -68.28)))["azi1"] % 360
        rows.append(f"F,19S,{fe:.1f},{fn:.1f},{az:.3f}")
    b = read_bearings(write_sheet("fix,utm_zone,easting,northing,bearing\n" + "\n".join(rows) + "\n"))
    assert errors(b) == []
    assert sorted(b.doubts) == [5, 6, 7]
    fixes = locate(b).table.set_index("fix")
    assert "zone letter" not in fixes.loc["B", "reason"]
    assert fixes.loc["F", "status"] == "ambiguous"
    reason = fixes.loc["F", "reason"]
    assert "'19S'" in reason and "latitude band S" in reason and "southern hemisphere" in reason
    lat_s, _ = latlon(32719, *utm(32719, *FUEGO[0]))
    assert f"{abs(lat_s):.2f}°S" in reason      # where the other reading puts it


def test_a_band_habit_in_the_same_zone_leaves_no_doubt(write_sheet):
    e, n = utm(32630, *MADRID)
    rows = spain_rows() + [f"B,30T,{e:.1f},{n:.1f},10", f"B,30T,{e + 900:.1f},{n + 900:.1f},300"]
    b = read_bearings(write_sheet("fix,utm_zone,easting,northing,bearing\n" + "\n".join(rows) + "\n"))
    assert b.doubts == {}
