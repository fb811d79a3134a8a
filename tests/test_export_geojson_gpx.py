"""GeoJSON keeps every fix (RFC 7946 null geometry for failed ones) and streams; GPX is valid XML for any label."""

import json
import xml.etree.ElementTree as ET
import zoneinfo

import gpxpy
import pandas as pd
import pytest
from shapely.geometry import shape

from dfkit.export import WriteOptions, to_geojson, write_fixes
from dfkit.export.gpx import short_names, xml_text
from dfkit.locate import locate_sheet

SHEET = ("fix,tag,time,lat,lon,bearing,sd\n"
         "A,t1,2026-07-01T10:00:00Z,47.00,15.00,45,3\nA,t1,2026-07-01T10:05:00Z,47.00,15.02,315,3\n"
         "A,t1,2026-07-01T10:08:00Z,46.99,15.01,0,3\n"
         "B,t1,2026-07-01T11:00:00Z,47.10,15.00,45,3\n"
         "C,t1,2026-07-01T12:00:00Z,47.20,15.00,45,3\nC,t1,2026-07-01T12:01:00Z,47.20,15.00,90,3\n")


@pytest.fixture
def fixes(write_sheet):
    return locate_sheet(write_sheet(SHEET))


def test_geojson_keeps_failed_fixes_with_null_geometry(fixes, tmp_path):
    out = tmp_path / "f.geojson"
    write_fixes(fixes, out)
    gj = json.loads(out.read_text())
    fx = [f for f in gj["features"] if f["properties"]["kind"] == "fix"]
    assert [f["properties"]["fix"] for f in fx] == ["A", "B", "C"]
    by = {f["properties"]["fix"]: f for f in fx}
    for label in ("B", "C"):                              # too_few, one_spot: no position
        assert by[label]["geometry"] is None              # RFC 7946 section 3.2 allows a null geometry
        assert by[label]["properties"]["status"] in ("too_few", "one_spot")
        assert by[label]["properties"]["reason"]
    assert by["A"]["geometry"]["type"] == "Point"
    assert gj == json.loads(json.dumps(to_geojson(fixes)))   # the streamed file equals the in-memory form


def test_geojson_rings_are_counter_clockwise(fixes):
    # RFC 7946 section 3.1.6: exterior rings counter-clockwise (shapely's is_ccw is the reference).
    from shapely import LinearRing

    gj = to_geojson(fixes, error_polygons=True)
    rings = [f for f in gj["features"] if f["geometry"] and f["geometry"]["type"] == "Polygon"]
    assert rings
    for f in rings:
        assert LinearRing(f["geometry"]["coordinates"][0]).is_ccw
        assert shape(f["geometry"]).is_valid


HOSTILE = ["a\x01b", "<x>&\"'", "\x1b[31mred", "__proto__", "=1+1", "L" * 300]


def test_gpx_is_valid_xml_for_any_label(write_sheet, tmp_path):
    rows = ["fix,lat,lon,bearing,sd"]
    for k, lab in enumerate(HOSTILE):
        q = '"' + lab.replace('"', '""') + '"'
        rows += [f"{q},{47 + k * 0.1},15.00,45,3", f"{q},{47 + k * 0.1},15.02,315,3"]
    f = locate_sheet(write_sheet("\n".join(rows) + "\n"))
    out = tmp_path / "f.gpx"
    write_fixes(f, out)
    ET.fromstring(out.read_bytes())                        # well-formed XML 1.0
    names = [w.name for w in gpxpy.parse(out.read_text(encoding="utf-8")).waypoints]
    assert len(names) == len(HOSTILE)
    assert "a\\x01b" in names and "<x>&\"'" in names      # control characters made visible, not dropped


def test_xml_text_escapes_only_what_xml_forbids():
    # W3C XML 1.0 (5th ed.) section 2.2: Char ::= #x9 | #xA | #xD | [#x20-#xD7FF] | [#xE000-#xFFFD] | ...
    assert xml_text("a\tb\nc\rd") == "a\tb\nc\rd"
    assert xml_text("\x00\x08\x0b\x0c\x1f") == "\\x00\\x08\\x0b\\x0c\\x1f"
    assert xml_text("\ufffe") == "\\ufffe"
    assert xml_text("é€😀") == "é€😀"


def test_gpx_short_names_and_local_time(fixes, tmp_path, write_sheet):
    f = locate_sheet(write_sheet("fix,time,lat,lon,bearing,sd\n"
                                 "long label one,2026-07-01T10:00:00Z,47,15,45,3\n"
                                 "long label one,2026-07-01T10:01:00Z,47,15.02,315,3\n"
                                 "long label two,2026-07-01T10:00:00Z,47.1,15,45,3\n"
                                 "long label two,2026-07-01T10:01:00Z,47.1,15.02,315,3\n"))
    out = tmp_path / "f.gpx"
    write_fixes(f, out, WriteOptions(gpx_name_length=6, gpx_tz="Europe/Vienna"))
    text = out.read_text()
    g = gpxpy.parse(text)
    names = [w.name for w in g.waypoints]
    assert len(set(names)) == 2 and all(len(n) <= 6 for n in names)
    assert all("long label" in w.comment for w in g.waypoints)     # the full label is kept
    # Reference: zoneinfo (IANA tz database): Vienna is UTC+2 in July (CEST).
    assert zoneinfo.ZoneInfo("Europe/Vienna").utcoffset(pd.Timestamp("2026-07-01").to_pydatetime()).seconds == 7200
    assert "<time>2026-07-01T12:00:30+02:00</time>" in text


def test_short_names_are_unique():
    names = short_names(["abcdefgh", "abcdefgX", "abcdefgY", "x"], 4)
    assert names[0] == "abcd" and len(set(names)) == 4 and all(len(n) <= 4 for n in names)
    with pytest.raises(ValueError, match="gpx_name_length"):
        short_names(["a"], 2)


# Two tags whose crews both call their den fix "Fuchsbau-1" (from the field trial).
TWO_TAGS = ("fix,tag,lat,lon,bearing,sd\n"
            "Fuchsbau-1,150.5,47.00,15.00,45,3\nFuchsbau-1,150.5,47.00,15.02,315,3\n"
            "Fuchsbau-1,151.2,47.10,15.00,45,3\nFuchsbau-1,151.2,47.10,15.02,315,3\n"
            "Dachs,151.2,47.20,15.00,45,3\nDachs,151.2,47.20,15.02,315,3\n")


def _waypoints(path):
    ET.fromstring(path.read_bytes())
    return gpxpy.parse(path.read_text(encoding="utf-8")).waypoints


def test_gpx_names_are_unique_when_tags_share_a_label(write_sheet, tmp_path):
    out = tmp_path / "f.gpx"
    write_fixes(locate_sheet(write_sheet(TWO_TAGS)), out)
    names = [w.name for w in _waypoints(out)]
    assert names == ["150.5 Fuchsbau-1", "151.2 Fuchsbau-1", "Dachs"]     # a label one tag uses stays as it is


def test_gpx_names_are_unique_regardless_of_case(write_sheet, tmp_path):
    f = locate_sheet(write_sheet("fix,lat,lon,bearing,sd\nden,47,15,45,3\nden,47,15.02,315,3\n"
                                 "DEN,47.1,15,45,3\nDEN,47.1,15.02,315,3\n"))
    out = tmp_path / "f.gpx"
    write_fixes(f, out)
    names = [w.name for w in _waypoints(out)]
    assert len({n.casefold() for n in names}) == 2 and names[0] == "den"


def test_gpx_short_names_are_trimmed_and_unique(write_sheet, tmp_path):
    f = locate_sheet(write_sheet('fix,lat,lon,bearing,sd\n"A&B <x>",47,15,45,3\n"A&B <x>",47,15.02,315,3\n'
                                 '"A&B <y>",47.1,15,45,3\n"A&B <y>",47.1,15.02,315,3\n'))
    out = tmp_path / "f.gpx"
    write_fixes(f, out, WriteOptions(gpx_name_length=4))
    wpts = _waypoints(out)
    names = [w.name for w in wpts]
    assert names[0] == "A&B" and all(n == n.strip() and len(n) <= 4 for n in names) and len(set(names)) == 2
    assert [w.comment for w in wpts] == ["fix A&B <x>", "fix A&B <y>"]
    assert short_names(["ab  cdef", "ab  cdeX"], 4) == ["ab", "ab~2"]


def test_gpx_and_kml_give_the_ellipse_as_semi_axes(fixes, tmp_path):
    # "699 x 346 m" reads as the ellipse's full size, which is twice that: the text must say semi-axes
    import pyogrio

    write_fixes(fixes, tmp_path / "f.gpx")
    write_fixes(fixes, tmp_path / "f.kml")
    t = fixes.table
    r = t[t["semi_major_m"].notna()].iloc[0]
    want = f"semi-axes {r['semi_major_m']:.0f} m and {r['semi_minor_m']:.0f} m"
    wpt = gpxpy.parse((tmp_path / "f.gpx").read_text(encoding="utf-8")).waypoints
    assert any(want in (w.description or "") for w in wpt)
    kml = pyogrio.read_dataframe(tmp_path / "f.kml", layer="fixes")
    assert any(want in str(d) for d in kml["description"])
