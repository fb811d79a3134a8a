"""A whole UTM position in one cell, and a zone letter S typed where the band is T (second field trial, reading
side). Before, '16T705900 5150600' gave three rejections on one row (not a zone, easting missing, northing missing),
and '16S' typed in Ontario was refused as '10,035 km from the other stations' without saying how the letter was
read. Expected positions come from pyproj (PROJ's UTM), never from dfkit."""

import mgrs
import numpy as np
import pyproj
import pytest

from dfkit import grids, read_bearings

# Stations around a point in Ontario, zone 16, latitude band T (40-48 N)
STATIONS = [(46.4700, -84.3300), (46.4760, -84.3170), (46.4690, -84.3150)]
TO_UTM = pyproj.Transformer.from_crs("EPSG:4326", "EPSG:32616", always_xy=True)     # WGS 84 / UTM zone 16N


def en(lat, lon):
    e, n = TO_UTM.transform(lon, lat)
    return round(e), round(n)


def errors(b):
    return [p for p in b.problems if p.severity == "error"]


@pytest.mark.parametrize("form", ["16T {e} {n}", "16T{e} {n}", "16 T 0{e} {n}", "16T {e}mE {n}mN", "16t {e}, {n}",
                                  "16 north {e} {n}", "16N {e} {n}"])
def test_one_cell_utm_positions_are_read(form):
    rows = ["fix,time,UTM,bearing,sd"]
    want = []
    for k, (lat, lon) in enumerate(STATIONS):
        e, n = en(lat, lon)
        rows.append(f'1,2026-06-08T07:0{k}:00Z,"{form.format(e=e, n=n)}",{[20, 300, 250][k]},5')
        back_lon, back_lat = pyproj.Transformer.from_crs("EPSG:32616", "EPSG:4326", always_xy=True).transform(e, n)
        want.append((back_lat, back_lon))
    b = read_bearings(("\n".join(rows) + "\n").encode())
    assert errors(b) == []
    np.testing.assert_allclose(b.table[["lat", "lon"]].to_numpy(), np.array(want), atol=1e-7)
    assert (b.table["position_from"] == "utm").all()


@pytest.mark.parametrize("cell", ["16T 7O5900 5150600", "16T 705900", "16T705900", "16T 705900 5150600 12"])
def test_a_cell_that_is_more_than_a_zone_but_no_position_is_refused_once(cell):
    b = read_bearings(f'fix,utm,bearing\n1,"{cell}",20\n'.encode())
    errs = errors(b)
    assert len(errs) == 1
    assert errs[0].line == 2 and errs[0].column == "utm_zone"
    assert "16T 705900 5150600" in errs[0].message and cell in errs[0].message


def test_the_trial_row_reads_like_pyproj():
    """'16T705900 5150600', the tester's cell, against pyproj directly."""
    b = read_bearings(b'fix,utm,bearing\n1,16T705900 5150600,20\n1,16T 706100 5149700,300\n')
    lon, lat = pyproj.Transformer.from_crs("EPSG:32616", "EPSG:4326", always_xy=True).transform(705900, 5150600)
    assert errors(b) == []
    assert b.table["lat"][0] == pytest.approx(lat, abs=1e-8) and b.table["lon"][0] == pytest.approx(lon, abs=1e-8)


def test_s_typed_for_t_in_ontario_says_how_the_letter_was_read():
    rows = ["fix,utm_zone,easting,northing,bearing,sd"]
    for k, (lat, lon) in enumerate(STATIONS + [(46.4720, -84.3230)]):
        e, n = en(lat, lon)
        rows.append(f"1,{'16S' if k == 3 else '16T'},{e},{n},{[20, 300, 250, 330][k]},5")
    b = read_bearings(("\n".join(rows) + "\n").encode())
    errs = errors(b)
    assert [(p.line, p.column) for p in errs] == [(5, "utm_zone")]
    msg = errs[0].message
    # band S is 32-40 N (NGA.STND.0037_2.0.0_GRIDS, 2014; checked against the mgrs package below)
    assert "southern hemisphere" in msg and "band S (32.00°N to 40.00°N)" in msg
    assert "46.47°N" in msg and "written '16T'" in msg and "a typo for 16T?" in msg


def test_a_band_letter_that_does_not_fit_names_the_band_that_does():
    e, n = en(*STATIONS[0])
    b = read_bearings(f"fix,utm_zone,easting,northing,bearing\n1,16R,{e},{n},20\n".encode())
    errs = errors(b)
    assert len(errs) == 1 and "band R runs from 24.00°N to 32.00°N" in errs[0].message
    assert "in band T" in errs[0].message


@pytest.mark.parametrize("lat", [-79.9, -33.9, -0.1, 0.1, 7.99, 40.0, 46.47, 71.9, 72.1, 83.9])
def test_band_letter_matches_the_mgrs_package(lat):
    """The mgrs package implements the same standard (GeoTrans); it is not dfkit."""
    assert grids.band_letter(lat) == mgrs.MGRS().toMGRS(lat, 15.0, MGRSPrecision=0)[2]


def test_a_whole_sheet_typed_16S_in_ontario_says_it_was_read_as_the_southern_hemisphere():
    # every row '16S' with Ontario's northings: as band S (32-40 N) they cannot be read, so they are the southern
    # hemisphere (the rule), which puts the stations ~10,000 km south; nothing else would show it, so one warning
    # must say how the letter was read and which band the northings fit (T: 40-48 N, pyproj's inverse)
    rows = ["fix,time,zone,easting,northing,bearing,sd"]
    for k, (lat, lon) in enumerate(STATIONS):
        e, n = en(lat, lon)
        rows.append(f"1,2026-06-08T07:0{k}:00Z,16S,{e},{n},{[20, 300, 250][k]},5")
    b = read_bearings(("\n".join(rows) + "\n").encode())
    assert errors(b) == [] and (b.table["lat"] < 0).all()
    said = [p.message for p in b.problems if "read as the southern hemisphere" in p.message]
    assert len(said) == 1 and "3 rows with zone letter S" in said[0] and "write T (the band) or N" in said[0]
