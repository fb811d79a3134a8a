"""GeoPackage, KML and FlatGeobuf outputs read back with pyogrio (GDAL); geometry checked with pyproj's geodesics."""

import numpy as np
import pyogrio
import pyproj
import pytest

from dfkit.cli import main
from dfkit.export import write_fixes, WriteOptions
from dfkit.locate import locate_sheet

SHEET = ("fix,tag,lat,lon,bearing,sd,note\n"
         "A,t1,47.00,15.00,45,3,\nA,t1,47.00,15.02,315,3,\nA,t1,46.99,15.01,0,3,\n"
         "B,t1,47.10,15.00,45,3,only one\n"                       # too_few: no position
         "A,t2,47.20,15.00,30,3,\nA,t2,47.20,15.02,330,3,\n")     # same label, other tag
GEOD = pyproj.Geod(ellps="WGS84")


@pytest.fixture
def fixes(write_sheet):
    return locate_sheet(write_sheet(SHEET))


@pytest.mark.parametrize("ext", [".gpkg", ".kml", ".fgb"])
def test_every_layer_reads_back(fixes, tmp_path, ext):
    out = tmp_path / f"f{ext}"
    write_fixes(fixes, out, WriteOptions(error_polygons=True))
    if ext == ".fgb":
        paths = {"fixes": out, **{k: tmp_path / f"f.{k}.fgb" for k in ("regions", "bearings", "stations")}}
        read = {k: pyogrio.read_dataframe(p) for k, p in paths.items()}
    else:
        names = [n for n, _ in pyogrio.list_layers(out)]
        assert {"fixes", "regions", "bearings", "stations"} <= set(names)
        read = {k: pyogrio.read_dataframe(out, layer=k) for k in ("fixes", "regions", "bearings", "stations")}
    f = read["fixes"]
    assert len(f) == 3                                    # every fix, the failed one included
    name_col = "fix" if "fix" in f.columns else "Name"
    assert sorted(f[name_col]) == ["A", "A", "B"]
    failed = f[f[name_col] == "B"]
    assert failed.geometry.iloc[0] is None or failed.geometry.iloc[0].is_empty
    if "status" in f.columns:
        assert failed["status"].iloc[0] == "too_few" and "usable bearing" in failed["reason"].iloc[0]
    assert len(read["bearings"]) == len(fixes.bearings) == 6     # B's one bearing is drawn too
    assert len(read["stations"]) == 6
    assert len(read["regions"]) == int(np.isfinite(fixes.table["semi_major_m"]).sum())


def test_ellipse_polygon_has_the_stated_axes(fixes, tmp_path):
    # Reference: distances from the fix to the ring by pyproj's geodesic inverse (Karney 2013). The farthest
    # vertex is a semi-major axis away, the nearest a semi-minor axis (72 vertices: within 0.1 %).
    import dataclasses

    fixes = dataclasses.replace(fixes, likelihood=None, _regions=None)    # ellipses, not likelihood regions
    out = tmp_path / "f.gpkg"
    write_fixes(fixes, out)
    reg = pyogrio.read_dataframe(out, layer="regions")
    t = fixes.table
    for _, r in reg.iterrows():
        row = t[(t["fix"] == r["fix"]) & (t["tag"] == r["tag"])].iloc[0]
        poly = r.geometry.geoms[0] if r.geometry.geom_type == "MultiPolygon" else r.geometry
        x, y = np.asarray(poly.exterior.coords).T
        _, _, d = GEOD.inv(np.full(len(x), row["lon"]), np.full(len(x), row["lat"]), x, y)
        assert d.max() == pytest.approx(row["semi_major_m"], rel=1e-3)
        assert d.min() == pytest.approx(row["semi_minor_m"], rel=2e-3)


def test_kml_descriptions_are_text_not_html(write_sheet, tmp_path):
    sheet = write_sheet('fix,lat,lon,bearing,sd\n"<b>x</b>\x07",47,15,45,3\n"<b>x</b>\x07",47,15.02,315,3\n')
    out = tmp_path / "f.kml"
    assert main(["fix", str(sheet), "-o", str(out)]) in (0, 1)
    text = out.read_text(encoding="utf-8")
    import xml.etree.ElementTree as ET

    root = ET.fromstring(text)                           # valid XML despite the control character
    ns = {"k": "http://www.opengis.net/kml/2.2"}
    desc = [d.text for d in root.iter("{http://www.opengis.net/kml/2.2}description")]
    assert any("&lt;b&gt;x&lt;/b&gt;\\x07" in d for d in desc if d)   # viewers render it as text
    assert root.find(".//k:Placemark", ns) is not None
    assert "not for life-safety search" in text


def test_csv_utm_columns_match_pyproj(fixes, tmp_path):
    # Reference: pyproj's transformation to WGS 84 / UTM zone 33N (EPSG:32633) for 15 deg E.
    out = tmp_path / "f.csv"
    write_fixes(fixes, out, WriteOptions(utm=True))
    import pandas as pd

    t = pd.read_csv(out, keep_default_na=False)
    ok = t[t["lat"] != ""]
    tr = pyproj.Transformer.from_crs("EPSG:4326", "EPSG:32633", always_xy=True)
    e, n = tr.transform(ok["lon"].astype(float), ok["lat"].astype(float))
    assert (ok["utm_zone"] == "33N").all()
    assert np.allclose(ok["easting"].astype(float), e, atol=0.01)
    assert np.allclose(ok["northing"].astype(float), n, atol=0.01)
    assert (t.loc[t["lat"] == "", "utm_zone"] == "").all()
