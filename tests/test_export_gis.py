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

    t = pd.read_csv(out, keep_default_na=False, dtype=str)
    ok = t[t["lat"] != ""]
    tr = pyproj.Transformer.from_crs("EPSG:4326", "EPSG:32633", always_xy=True)
    e, n = tr.transform(ok["lon"].astype(float), ok["lat"].astype(float))
    assert list(t.columns[t.columns.get_loc("lon") + 1:][:5]) == ["utm_zone", "utm_hemisphere", "utm_band",
                                                                   "easting", "northing"]
    assert (ok["utm_zone"] == "33").all() and (ok["utm_hemisphere"] == "north").all()
    assert (ok["utm_band"] == "T").all()                   # 47 N: band T (40-48 N)
    assert np.allclose(ok["easting"].astype(float), e, atol=0.01)
    assert np.allclose(ok["northing"].astype(float), n, atol=0.01)
    failed = t[t["lat"] == ""]
    assert len(failed) == 1 and (failed[["utm_zone", "utm_hemisphere", "utm_band", "easting"]] == "").all(axis=None)


# Places chosen for the zone letters they show: a zone and one letter would be misread at most of them.
PLACES = [("Sydney", -33.8688, 151.2093),        # band H, southern hemisphere ('56S' would read as band S)
          ("Granada", 37.1773, -3.5986),         # band S, northern hemisphere ('30S' would read as south)
          ("Bergen", 60.3913, 5.3221),           # zone 32 by the Norway exception
          ("Longyearbyen", 78.2232, 15.6267),    # zone 33 by the Svalbard exception, band X
          ("Quito", -0.1807, -78.4678),          # band M, just south of the equator
          ("Libreville", 0.4162, 9.4673)]        # band N, just north of it ('32N' reads right either way)


def test_utm_columns_agree_with_the_mgrs_package_and_pyproj():
    import mgrs
    import pandas as pd

    from dfkit.export import with_utm

    t = pd.DataFrame({"fix": [p[0] for p in PLACES], "lat": [p[1] for p in PLACES], "lon": [p[2] for p in PLACES]})
    u = with_utm(t)
    for (_, lat, lon), (_, row) in zip(PLACES, u.iterrows()):
        ref = mgrs.MGRS().toMGRS(lat, lon)              # e.g. '56HLH3436850948': zone 56, band H
        zone, band = int(ref[:2]), ref[2]
        assert (row["utm_zone"], row["utm_band"]) == (zone, band), ref
        assert row["utm_hemisphere"] == ("south" if lat < 0 else "north")
        epsg = (32700 if lat < 0 else 32600) + zone     # EPSG's WGS 84 / UTM zones
        e, n = pyproj.Transformer.from_crs("EPSG:4326", f"EPSG:{epsg}", always_xy=True).transform(lon, lat)
        assert (row["easting"], row["northing"]) == pytest.approx((e, n), abs=0.01)
        # MGRS's 1 m digits are the easting and northing within their 100 km square
        assert int(ref[5:10]) == int(row["easting"]) % 100_000 and int(ref[10:15]) == int(row["northing"]) % 100_000


def _bearings_to(lat, lon, label):
    """Three bearings on a transmitter at (lat, lon) from stations 1.5 km away (exact pyproj geodesics)."""
    rows = []
    for az in (10.0, 130.0, 250.0):
        slon, slat, back = GEOD.fwd(lon, lat, az, 1500.0)
        rows.append(f"{label},{slat:.8f},{slon:.8f},{back % 360:.4f},2")
    return rows


def test_utm_output_is_read_back_by_dfkit(write_sheet, tmp_path):
    import pandas as pd

    from dfkit.observations import read_bearings, read_places

    sheet = write_sheet("fix,lat,lon,bearing,sd\n" + "\n".join(
        r for name, lat, lon in PLACES for r in _bearings_to(lat, lon, name)) + "\n")
    out = tmp_path / "fixes.csv"
    assert main(["fix", str(sheet), "-o", str(out), "--utm"]) == 0
    t = pd.read_csv(out, keep_default_na=False, dtype=str)
    # with lat/lon beside the UTM columns: both read, they agree, nothing refused
    places, problems = read_places(out, label_column="fix")
    assert [p for p in problems if p.severity == "error"] == [] and len(places) == len(PLACES)
    # the UTM columns alone give back the fixes' positions
    utm_only = t.drop(columns=["lat", "lon"])
    places, problems = read_places(utm_only, label_column="fix")
    assert [p for p in problems if p.severity == "error"] == [] and len(places) == len(PLACES)
    _, _, miss = GEOD.inv(places["lon"].to_numpy(float), places["lat"].to_numpy(float),
                          t["lon"].astype(float).to_numpy(), t["lat"].astype(float).to_numpy())
    assert np.max(miss) < 0.02                            # the easting/northing are written to 1 cm
    # as station positions of a new bearing sheet, copied column by column
    again = utm_only[["fix", "utm_zone", "utm_hemisphere", "utm_band", "easting", "northing"]].assign(bearing="90")
    b = read_bearings(again)
    assert [p for p in b.problems if p.severity == "error"] == [] and len(b.table) == len(PLACES)
    bad = again.assign(utm_hemisphere=["up"] + list(again["utm_hemisphere"][1:]))
    errs = [p for p in read_bearings(bad).problems if p.severity == "error"]
    assert (errs[0].line, errs[0].column) == (2, "utm_hemisphere") and "'up' is not a hemisphere" in errs[0].message


def test_geopackage_output_passes_gdals_validator(fixes, tmp_path):
    # OGC GeoPackage 1.2/1.3 requirements as GDAL's validate_gpkg.py checks them (strict: extra checks, warnings
    # as errors), with the layers of every kind of feature: fixes, regions, bearings, stations, error polygons
    from .gpkg import validate

    out = tmp_path / "f.gpkg"
    write_fixes(fixes, out, WriteOptions(error_polygons=True))
    assert set(pyogrio.list_layers(out)[:, 0]) >= {"fixes", "regions", "bearings", "stations"}
    validate(out)


def test_home_range_geopackage_passes_gdals_validator(tmp_path):
    from .conftest import SAMPLES
    from .gpkg import validate

    fixes_csv, out = tmp_path / "fixes.csv", tmp_path / "ranges.gpkg"
    assert main(["fix", str(SAMPLES / "season_2026_05.csv"), "-o", str(fixes_csv)]) in (0, 1)
    assert main(["ranges", str(fixes_csv), "--method", "kde", "--levels", "50,95", "-o", str(out)]) in (0, 1)
    assert len(pyogrio.read_dataframe(out)) >= 2
    validate(out)
