"""The position parser others reuse: any column set through a prefix (beacons, spots), and files of places."""

import pandas as pd
import pyproj
import pytest

from dfkit.observations import parse_positions, read_places


def test_prefixed_columns_parse_like_station_columns():
    tr = pyproj.Transformer.from_crs("EPSG:4326", "EPSG:32633", always_xy=True)
    e, n = tr.transform(15.17, 47.86)
    table = pd.DataFrame({"line": [2, 3, 4, 5], "beacon_lat": ["47.86", "", "", "95"],
                          "beacon_lon": ["15.17", "", "", "150"],
                          "beacon_utm_zone": ["", "33T", "", ""], "beacon_easting": ["", f"{e:.3f}", "", ""],
                          "beacon_northing": ["", f"{n:.3f}", "", ""],
                          "beacon_mgrs": ["", "", "33TWN1230001200", ""]})
    pos = parse_positions(table, prefix="beacon_", source="trials.csv")
    assert pos.source.tolist() == ["lat/lon", "utm", "mgrs", ""]
    assert (pos.lat[1], pos.lon[1]) == pytest.approx((47.86, 15.17), abs=1e-8)
    (p,) = [p for p in pos.problems if p.severity == "error"]
    assert (p.line, p.column) == (5, "beacon_lat") and "outside -90..90" in p.message
    assert pos.rejected.tolist() == [False, False, False, True]


def test_a_beacon_label_column_looks_up_stations():
    stations = pd.DataFrame({"lat": [47.0], "lon": [15.0], "zone": [0], "south": [False]},
                            index=pd.Index(["B1"], name="station"))
    table = pd.DataFrame({"line": [2, 3], "beacon": ["B1", "B9"]})
    pos = parse_positions(table, prefix="beacon_", stations=stations)
    assert pos.source.tolist() == ["station", ""]
    assert [p.line for p in pos.problems if p.severity == "error"] == [3]


def test_read_places_from_a_spots_file(write_sheet):
    path = write_sheet("spot,lat,lon,mgrs,note\nJ1,47.01,15.02,,junction\nJ2,,,33TWN1230001200,lay-by\n"
                       "J3,47.5,,,typo\nJ1,47.0,15.0,,again\n,47,15,,no label\n", name="spots.csv")
    places, problems = read_places(path, label_column="spot")
    assert places.index.tolist() == ["J1", "J2"]
    assert places.loc["J1", ["lat", "lon"]].tolist() == [47.01, 15.02] and places.loc["J2", "source"] == "mgrs"
    assert places["line"].tolist() == [2, 3]
    assert sorted({p.line for p in problems if p.severity == "error"}) == [4, 5, 6]


def test_read_places_needs_its_label_column(write_sheet):
    from dfkit import SheetError

    with pytest.raises(SheetError, match="no 'spot' column"):
        read_places(write_sheet("name,lat,lon\nA,47,15\n"), label_column="spot")


def test_a_station_refused_in_its_file_is_named_as_such(write_sheet, tmp_path):
    from dfkit import read_bearings

    st = tmp_path / "stations.csv"
    st.write_text("station,utm_zone,easting,northing\nR1,33T,512300,5301200\nR2,33T,514300,5301000\n"
                  "R3,33U,513300,5303200\n")
    b = read_bearings(write_sheet("fix,station,bearing\nA,R1,30\nA,R2,330\nA,R3,200\nA,R9,100\n"), stations=st)
    errs = {p.line: p.message for p in b.problems if p.severity == "error" and p.source.endswith("sheet.csv")}
    assert "no usable position in the stations file (its line 4)" in errs[4]
    assert "is not in the stations file" in errs[5]
