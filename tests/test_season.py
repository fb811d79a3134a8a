"""The season store: a valid GeoPackage (OGC 12-128r18) read back by GDAL, imports that are idempotent and
atomic, changes that are reported, filters, and the review page."""

import json
import os
import signal
import sqlite3
import struct
import subprocess
import sys
import time

import numpy as np
import pandas as pd
import pyproj
import pytest
import shapely

from dfkit.cli import main
from dfkit.locate import WITH_POSITION
from dfkit.geometry import ellipse_ring
from dfkit.season import SeasonFilter, SeasonStore, StoreError, add_sheet
from dfkit.season.keys import bearing_keys
from dfkit.season.rings import ellipse_rings

from .browser import needs_chromium
from .gpkg import validate
from .conftest import ROOT, SAMPLES

GEOD = pyproj.Geod(ellps="WGS84")

SHEET = """tag,time,lat,lon,bearing,sd,observer,weather
A,2026-06-01T06:00:00Z,47.000,15.000,45,3,ana,dry
A,2026-06-01T06:05:00Z,47.000,15.020,315,3,ana,dry
A,2026-06-01T06:10:00Z,47.020,15.010,180,3,ben,
B,2026-06-01T07:00:00Z,47.000,15.000,40,3,ana,wet
B,2026-06-01T07:04:00Z,47.000,15.020,320,3,ana,wet
B,2026-06-01T07:08:00Z,47.020,15.010,175,3,ben,wet
"""


@pytest.fixture
def sheet(write_sheet):
    return write_sheet(SHEET, "week1.csv")


@pytest.fixture
def store_path(tmp_path):
    return tmp_path / "season.gpkg"


def add(store_path, sheet, **kw):
    with SeasonStore.open(store_path, create=True) as store:
        return add_sheet(store, sheet, **kw)


# ------------------------------------------------------------------ the file

def test_store_is_a_valid_geopackage(store_path, sheet):
    add(store_path, sheet)
    conn = sqlite3.connect(store_path)
    # OGC 12-128r18 requirements 2 and 3: application_id 'GPKG', user_version 10300 for 1.3
    assert conn.execute("PRAGMA application_id").fetchone()[0] == 0x47504B47
    assert conn.execute("PRAGMA user_version").fetchone()[0] == 10300
    # requirement 11: the three srs rows
    srs = {r[0] for r in conn.execute("SELECT srs_id FROM gpkg_spatial_ref_sys")}
    assert {-1, 0, 4326} <= srs
    contents = dict(conn.execute("SELECT table_name, data_type FROM gpkg_contents"))
    assert contents["fixes"] == contents["regions"] == contents["bearings"] == "features"
    assert contents["imports"] == "attributes"
    geom = dict(conn.execute("SELECT table_name, geometry_type_name FROM gpkg_geometry_columns"))
    assert geom == {"fixes": "POINT", "regions": "MULTIPOLYGON", "bearings": "POINT"}
    conn.close()
    validate(store_path)


def test_geometry_blobs_follow_the_standard(store_path, sheet):
    # OGC 12-128r18 clause 2.1.3 table 6: 'GP', version 0, flags, srs_id, envelope, then WKB
    add(store_path, sheet)
    conn = sqlite3.connect(store_path)
    for table in ("fixes", "regions", "bearings"):
        for (blob,) in conn.execute(f"SELECT geom FROM {table} WHERE geom IS NOT NULL"):
            assert blob[:2] == b"GP" and blob[2] == 0
            flags = blob[3]
            little = flags & 1
            env = (flags >> 1) & 7
            srs = struct.unpack("<i" if little else ">i", blob[4:8])[0]
            assert srs == 4326
            size = {0: 0, 1: 32}[env]
            geom = shapely.from_wkb(bytes(blob[8 + size:]))
            assert geom.is_valid and not geom.is_empty
            if env == 1:
                minx, maxx, miny, maxy = struct.unpack("<4d", blob[8:40])
                assert (minx, miny, maxx, maxy) == pytest.approx(geom.bounds)
            assert -180 <= geom.bounds[0] and geom.bounds[2] <= 180    # x is longitude
            assert 46 < geom.bounds[1] < 48                            # y is latitude
    conn.close()


def test_gdal_reads_every_layer_back(store_path, sheet):
    import pyogrio

    add(store_path, sheet)
    layers = dict(pyogrio.list_layers(store_path))
    assert layers["fixes"] == "Point" and layers["regions"] == "MultiPolygon" and layers["bearings"] == "Point"
    for name in ("imports", "problems", "changes", "dfkit_meta"):
        assert name in layers
    fixes = pyogrio.read_dataframe(store_path, layer="fixes")
    from dfkit.locate import FIX_COLUMNS

    assert set(FIX_COLUMNS) <= set(fixes.columns)
    assert sorted(fixes["tag"]) == ["A", "B"] and (fixes["status"] == "ok").all()
    # the point is the fix's own lat/lon
    np.testing.assert_allclose(fixes.geometry.x, fixes["lon"], atol=1e-12)
    np.testing.assert_allclose(fixes.geometry.y, fixes["lat"], atol=1e-12)
    bearings = pyogrio.read_dataframe(store_path, layer="bearings")
    assert len(bearings) == 6
    for col in ("tag", "time", "bearing", "sd", "observer", "weather", "true_bearing", "residual_deg", "line"):
        assert col in bearings.columns
    assert sorted(bearings["weather"].fillna("")) == ["", "dry", "dry", "wet", "wet", "wet"]
    regions = pyogrio.read_dataframe(store_path, layer="regions")
    assert len(regions) == 4 and set(regions["kind"]) == {"ellipse", "likelihood"}    # each fix has both
    regions = regions[regions["kind"] == "ellipse"]
    # each region polygon holds its fix and has the area of its ellipse (pi a b), within the polygon's
    # shortfall for 32 vertices: n/(2 pi) sin(2 pi/n) = 0.9936
    for _, r in regions.iterrows():
        fx = fixes[fixes["fix"] == r["fix"]].iloc[0]
        assert r.geometry.contains(shapely.Point(fx["lon"], fx["lat"]))
        ring = np.asarray(r.geometry.geoms[0].exterior.coords)
        area = abs(GEOD.polygon_area_perimeter(ring[:, 0], ring[:, 1])[0])
        assert area == pytest.approx(np.pi * fx["semi_major_m"] * fx["semi_minor_m"] * 0.99359, rel=2e-3)
    imports = pyogrio.read_dataframe(store_path, layer="imports")
    assert imports["file_name"].tolist() == ["week1.csv"] and imports["n_fixes_added"].tolist() == [2]


def test_ellipse_rings_agree_with_the_exact_drawing():
    # exact: dfkit.geometry.ellipse_ring maps the fix's azimuthal-equidistant plane back with geodesics
    for a, b, lat in ((300.0, 120.0, 47.0), (4000.0, 900.0, 65.0), (4900.0, 4000.0, -65.0), (20000.0, 5000.0, -30.0)):
        row = {"status": "ok", "lat": lat, "lon": 15.0, "semi_major_m": a, "semi_minor_m": b,
               "orientation_deg": 33.0}
        exact = ellipse_ring(row, 32)
        la, lo = ellipse_rings([lat], [15.0], [a], [b], [33.0], 32)
        _, _, d = GEOD.inv(exact[1], exact[0], lo[0], la[0])
        assert d.max() < max(0.01, 1e-4 * a), (a, d.max())


# ------------------------------------------------------------------ importing

def test_importing_again_adds_nothing(store_path, sheet):
    r1 = add(store_path, sheet)
    r2 = add(store_path, sheet)
    assert (r1.fixes_added, r1.bearings_added) == (2, 6)
    assert (r2.fixes_added, r2.fixes_known, r2.bearings_known, r2.fixes_changed) == (0, 2, 6, 0)
    with SeasonStore.open(store_path) as s:
        assert len(s.fixes()) == 2
        assert s.imports()["n_fixes_added"].tolist() == [2, 0]


def test_rows_in_another_order_and_file_are_the_same_rows(store_path, sheet, write_sheet):
    add(store_path, sheet)
    lines = SHEET.strip().splitlines()
    shuffled = write_sheet("\n".join([lines[0]] + lines[:0:-1]) + "\n", "copy.csv")
    r = add(store_path, shuffled)
    assert r.fixes_added == 0 and r.fixes_known == 2


def test_a_cumulative_sheet_adds_only_its_new_fixes(store_path, sheet, write_sheet):
    add(store_path, sheet)
    more = SHEET + ("A,2026-06-02T06:00:00Z,47.000,15.000,50,3,ana,dry\n"
                    "A,2026-06-02T06:05:00Z,47.000,15.020,310,3,ana,dry\n"
                    "A,2026-06-02T06:10:00Z,47.020,15.010,185,3,ben,dry\n")
    r = add(store_path, write_sheet(more, "week1_and_2.csv"))
    assert (r.fixes_added, r.fixes_known, r.bearings_added) == (1, 2, 3)


def test_changed_rows_are_reported_not_duplicated_then_replaced(store_path, sheet, write_sheet):
    add(store_path, sheet)
    fixed = SHEET.replace("A,2026-06-01T06:05:00Z,47.000,15.020,315,", "A,2026-06-01T06:05:00Z,47.000,15.020,316,")
    r = add(store_path, write_sheet(fixed, "week1_fixed.csv"))
    assert r.fixes_added == 0 and r.fixes_known == 1 and r.fixes_changed == 1
    tag, _, detail = r.changed[0]
    assert tag == "A" and "line 3 differs from the stored bearing" in detail and "import 1" in detail
    with SeasonStore.open(store_path) as s:
        assert len(s.fixes()) == 2
        assert s.changes()["kind"].tolist() == ["kept_stored"]
    r = add(store_path, write_sheet(fixed, "week1_fixed.csv"), replace=True)
    assert r.fixes_added == 1 and r.fixes_changed == 1
    with SeasonStore.open(store_path) as s:
        f = s.fixes()
        assert len(f) == 2 and sorted(f["source"]) == ["week1.csv", "week1_fixed.csv"]
        b = s.bearings(f["fid"])
        assert len(b) == 6 and 316 in b["bearing"].tolist() and 315 not in b["bearing"].tolist()


def test_a_bearing_removed_from_a_stored_fix_is_a_change(store_path, sheet, write_sheet):
    add(store_path, sheet)
    fewer = "\n".join(line for line in SHEET.splitlines() if "06:10:00" not in line) + "\n"
    r = add(store_path, write_sheet(fewer, "fewer.csv"))
    assert r.fixes_changed == 1 and "1 stored bearing not in this sheet" in r.changed[0][2]


def test_restarted_labels_in_a_new_sheet_are_new_fixes(store_path, write_sheet):
    week1 = "fix,tag,time,lat,lon,bearing,sd\n1,A,2026-06-01T06:00Z,47,15,45,3\n1,A,2026-06-01T06:05Z,47,15.02,315,3\n"
    week2 = "fix,tag,time,lat,lon,bearing,sd\n1,A,2026-06-08T06:00Z,47,15,40,3\n1,A,2026-06-08T06:05Z,47,15.02,320,3\n"
    assert add(store_path, write_sheet(week1, "w1.csv")).fixes_added == 1
    r = add(store_path, write_sheet(week2, "w2.csv"))
    assert r.fixes_added == 1 and r.fixes_changed == 0
    with SeasonStore.open(store_path) as s:
        assert s.fixes()["fix"].tolist() == ["1", "1"]


def test_a_fix_with_every_row_rejected_is_stored_once_with_its_reason(store_path, write_sheet, tmp_path):
    r1 = add(store_path, write_sheet(SHEET + "C,2026-06-01T08:00:00Z,47.0,15.0,412,3,ana,\n", "c.csv"))
    assert r1.n_rejected == 1
    with SeasonStore.open(store_path) as s:
        probs = s.problems()
        assert probs["line"].tolist() == [8] and "out of range" in probs["message"].iloc[0]
    rows = SHEET.splitlines()
    labelled = "fix," + rows[0] + "\n" + "".join(f"X,{ln}\n" for ln in rows[1:4])
    labelled += "Z,C,2026-06-01T08:00:00Z,47.0,15.0,412,3,ana,\n"
    p = write_sheet(labelled, "labelled.csv")
    other = tmp_path / "labelled.gpkg"
    ra = add(other, p)
    rb = add(other, p)
    assert ra.fixes_added == 2 and rb.fixes_added == 0 and rb.fixes_known == 2
    with SeasonStore.open(other) as s:
        z = s.fixes(SeasonFilter(tags=("C",)))
        assert z["fix"].tolist() == ["Z"] and z["status"].iloc[0] == "too_few"
        assert "rejected input line 5" in z["reason"].iloc[0]


def test_identity_keys_do_not_depend_on_line_numbers_or_file_but_content_keys_see_changes():
    from dfkit.observations import read_bearings

    b = read_bearings(SHEET.encode()).table
    rk, ck, _ = bearing_keys(b)
    moved = b.assign(line=b["line"] + 100)
    rk2, ck2, _ = bearing_keys(moved)
    assert list(rk) == list(rk2) and list(ck) == list(ck2)
    changed = b.copy()
    changed.loc[1, "true_bearing"] += 0.01
    rk3, ck3, _ = bearing_keys(changed)
    assert list(rk3) == list(rk) and ck3[1] != ck[1] and list(ck3[[0, 2, 3, 4, 5]]) == list(ck[[0, 2, 3, 4, 5]])
    assert len(set(rk)) == 6


# Two hunt teams (or two tracking crews) on one tag in the same minutes, no observer column: the sheets of the
# field trial, each team at its own stations.
TEAM_A = """fix,tag,time,lat,lon,bearing,sd
F1,150.5,2026-05-03T06:12:00+02:00,47.8473227,15.1531455,19.995,3
F1,150.5,2026-05-03T06:15:00+02:00,47.8581248,15.1757928,280.012,3
F1,150.5,2026-05-03T06:18:00+02:00,47.8740193,15.1479690,149.991,3
"""
TEAM_B = """fix,tag,time,lat,lon,bearing,sd
B1,150.5,2026-05-03T06:12:00+02:00,47.8500000,15.1700000,330.0,3
B1,150.5,2026-05-03T06:15:00+02:00,47.8650000,15.1400000,120.0,3
B1,150.5,2026-05-03T06:18:00+02:00,47.8700000,15.1750000,225.0,3
"""


def test_two_teams_on_one_tag_at_the_same_times_are_two_fixes(store_path, write_sheet):
    a, b = write_sheet(TEAM_A, "teamA.csv"), write_sheet(TEAM_B, "teamB.csv")
    assert add(store_path, a).fixes_added == 1
    r = add(store_path, b)
    assert (r.fixes_added, r.bearings_added, r.fixes_changed) == (1, 3, 0)
    assert [(t, f) for t, f, _ in r.beside] == [("150.5", "B1")] and "'F1' (import 1)" in r.beside[0][2]
    # --replace has nothing to replace: team A's fix stays
    r = add(store_path, b, replace=True)
    assert (r.fixes_added, r.fixes_known, r.fixes_changed, r.beside) == (0, 1, 0, [])
    assert add(store_path, a, replace=True).fixes_known == 1
    with SeasonStore.open(store_path) as s:
        assert sorted(s.fixes()["fix"]) == ["B1", "F1"]
        stored = s.bearings(s.fixes()["fid"])
        assert len(stored) == 6 and not {"row_key", "content_key", "moment_key"} & set(stored.columns)
        ch = s.changes()
        assert ch["kind"].tolist() == ["added_beside"] and ch["fix"].tolist() == ["B1"]


def test_the_command_keeps_both_teams_and_says_so(store_path, write_sheet, capsys):
    a, b = write_sheet(TEAM_A, "teamA.csv"), write_sheet(TEAM_B, "teamB.csv")
    main(["season", "add", str(store_path), str(a), str(b), "--replace"])
    err = capsys.readouterr().err
    assert "teamB.csv: import 2: 1 fix in the sheet: 1 added" in err
    assert "beside    tag 150.5, fix B1: has bearings at the tag, time and observer of stored fix 'F1'" in err
    assert "replaced" not in err
    with SeasonStore.open(store_path) as s:
        assert sorted(s.fixes()["fix"]) == ["B1", "F1"]


def test_a_corrected_bearing_sd_or_station_is_a_change_of_the_stored_fix(store_path, write_sheet):
    add(store_path, write_sheet(TEAM_A, "teamA.csv"))
    for name, text, says in [
            ("bearing.csv", TEAM_A.replace("280.012,3", "281.012,3"), "line 3 differs from the stored bearing"),
            ("sd.csv", TEAM_A.replace("149.991,3", "149.991,5"), "line 4 differs from the stored bearing"),
            ("station.csv", TEAM_A.replace("47.8581248,15.1757928", "47.8581248,15.1767928"),
             "1 bearing not in the stored fix; 1 stored bearing not in this sheet")]:
        r = add(store_path, write_sheet(text, name))
        assert (name, r.fixes_added, r.fixes_changed) == (name, 0, 1) and says in r.changed[0][2], r.changed


def test_a_relabelled_fix_is_kept_beside_the_stored_one_and_said(store_path, write_sheet):
    add(store_path, write_sheet(TEAM_A, "teamA.csv"))
    r = add(store_path, write_sheet(TEAM_A.replace("F1,", "G1,"), "relabelled.csv"))
    assert r.fixes_added == 1 and [f for _, f, _ in r.beside] == ["G1"]


def test_identity_includes_station_and_given_label_but_not_labels_dfkit_made():
    from dfkit.observations import read_bearings

    b = read_bearings(TEAM_A.encode()).table
    rk, _, mk = bearing_keys(b)
    other_place = b.assign(lat=b["lat"] + 1e-5)
    other_label = b.assign(fix="G1")
    assert set(bearing_keys(other_place).row_key).isdisjoint(rk)
    assert set(bearing_keys(other_label).row_key).isdisjoint(rk)
    assert list(bearing_keys(other_place).moment_key) == list(mk)          # same tag, time and observer
    near = b.assign(lat=b["lat"] + 1e-8)                                   # 1 mm: the same station
    assert list(bearing_keys(near).row_key) == list(rk)
    windowed = read_bearings(SHEET.encode()).table                         # labels made from time windows
    assert list(bearing_keys(windowed.assign(fix="another name")).row_key) == list(bearing_keys(windowed).row_key)
    untimed = read_bearings(b"fix,tag,lat,lon,bearing\nU,C,47,15,45\nU,C,47,15.02,315\n").table
    assert all(k is None for k in bearing_keys(untimed).moment_key)


def test_a_label_split_by_time_keeps_the_identity_it_had_before_the_split(store_path, write_sheet):
    day1 = "fix,tag,time,lat,lon,bearing,sd\nS,D,2026-06-01T06:00Z,47,15,45,3\nS,D,2026-06-01T06:05Z,47,15.02,315,3\n"
    both = day1 + "S,D,2026-06-03T06:00Z,47,15,50,3\nS,D,2026-06-03T06:05Z,47,15.02,310,3\n"
    from dfkit.observations import read_bearings

    k1 = bearing_keys(read_bearings(day1.encode()).table).row_key
    k2 = bearing_keys(read_bearings(both.encode()).table).row_key
    assert list(k2[:2]) == list(k1)


V1 = ROOT / "tests" / "season_v1"


def test_a_schema_1_store_is_migrated_and_matches_its_sheets_again(tmp_path):
    # store_v1.gpkg was written by the dfkit of store schema 1 (see tests/season_v1/make_store.py)
    old = tmp_path / "old.gpkg"
    old.write_bytes((V1 / "store_v1.gpkg").read_bytes())
    conn = sqlite3.connect(old)
    meta = dict(conn.execute("SELECT key, value FROM dfkit_meta").fetchall())
    n_fixes = conn.execute("SELECT COUNT(*) FROM fixes").fetchone()[0]
    conn.close()
    assert meta["schema_version"] == "1" and meta["key_scheme"] == "dfkit-bearing-keys-1" and n_fixes == 7
    with SeasonStore.open(old) as s:
        assert s.schema_version == 2 and len(s.migrated) == 1 and "17 bearing keys" in s.migrated[0]
    with SeasonStore.open(old) as s:
        assert s.migrated == []                                        # once
    validate(old)
    # week1.csv line 5 repeats line 4: the dfkit of schema 1 used both; this one names the copy and leaves it out,
    # so fix A's result is different now and is reported as changed (never stored twice). Its positions (47.000,
    # 15.020 ...: every row ends in zeros, so they pad values taken to 0.01°) were stored as exact, which the
    # schema-1 dfkit took every position for: fix B is changed by its steps, and A says so too. labels.csv's three
    # fixes are written the same way (teamA.csv's positions have 7 decimals: exact, unchanged)
    for name, changed_fixes in (("teamA.csv", 0), ("week1.csv", 2), ("labels.csv", 3)):
        r = add(old, V1 / name)
        assert (name, r.fixes_added, r.fixes_changed, r.bearings_added) == (name, 0, changed_fixes, 0)
        assert all("none (taken as exact) in the store" in d for _, _, d in r.changed)
    r = add(old, V1 / "teamB2.csv")
    assert r.fixes_added == 1 and "'F1' (import 1)" in r.beside[0][2]
    changed = tmp_path / "week1.csv"
    changed.write_text((V1 / "week1.csv").read_text().replace(",45,3,", ",46,3,"))
    r = add(old, changed)                  # A by its bearing (and its steps), B still by its steps
    assert r.fixes_changed == 2 and "line 2 differs from the stored bearing" in r.changed[0][2]
    conn = sqlite3.connect(old)
    meta = dict(conn.execute("SELECT key, value FROM dfkit_meta").fetchall())
    assert meta["key_scheme"] == "dfkit-bearing-keys-2" and "store schema 1 -> 2" in meta["migrated_1_to_2"]
    assert conn.execute("SELECT COUNT(*) FROM fixes").fetchone()[0] == n_fixes + 1


def test_a_schema_1_store_that_cannot_be_migrated_is_refused_clearly_and_left_as_it_was(tmp_path, monkeypatch):
    from dfkit.season import store as store_module

    old = tmp_path / "old.gpkg"
    data = (V1 / "store_v1.gpkg").read_bytes()
    old.write_bytes(data)
    monkeypatch.setattr(store_module, "BUSY_TIMEOUT_S", 0.2)
    other = sqlite3.connect(old, isolation_level=None)
    other.execute("BEGIN IMMEDIATE")                     # another program is writing to the file
    with pytest.raises(StoreError, match="has store schema 1; this dfkit must migrate it to schema 2, which writes"):
        SeasonStore.open(old)
    other.execute("ROLLBACK")
    other.close()

    def broken(conn):                                    # the migration fails half way
        conn.execute("UPDATE bearings SET row_key = NULL")
        raise sqlite3.OperationalError("disk I/O error")

    monkeypatch.setitem(store_module._MIGRATIONS, 1, broken)
    with pytest.raises(StoreError, match="could not be migrated to 2 .disk I/O error.; the file is unchanged"):
        SeasonStore.open(old)
    conn = sqlite3.connect(old)
    assert conn.execute("SELECT COUNT(*) FROM bearings WHERE row_key IS NULL").fetchone()[0] == 0
    assert conn.execute("SELECT value FROM dfkit_meta WHERE key = 'schema_version'").fetchone()[0] == "1"
    conn.close()


def test_the_command_says_it_migrated_the_store(tmp_path, capsys):
    old = tmp_path / "old.gpkg"
    old.write_bytes((V1 / "store_v1.gpkg").read_bytes())
    assert main(["season", "show", str(old)]) == 1               # fix Z of the sheet is too_few
    assert "the season file was migrated: store schema 1 -> 2" in capsys.readouterr().err


def test_a_store_from_elsewhere_is_refused(tmp_path):
    plain = tmp_path / "plain.gpkg"
    sqlite3.connect(plain).execute("CREATE TABLE t (x)").connection.commit()
    with pytest.raises(StoreError, match="not a GeoPackage"):
        SeasonStore.open(plain)
    text = tmp_path / "notes.gpkg"
    text.write_text("hello, this is not a database at all" * 100)
    with pytest.raises(StoreError, match="not a season store"):
        SeasonStore.open(text)
    with pytest.raises(FileNotFoundError, match="no season store"):
        SeasonStore.open(tmp_path / "missing.gpkg")


def test_a_newer_schema_is_refused(store_path, sheet):
    add(store_path, sheet)
    conn = sqlite3.connect(store_path)
    conn.execute("UPDATE dfkit_meta SET value = '99' WHERE key = 'schema_version'")
    conn.commit()
    conn.close()
    with pytest.raises(StoreError, match="newer dfkit"):
        SeasonStore.open(store_path)


KILL_SCRIPT = r"""
import sys
from dfkit.season import SeasonStore, add_sheet
with SeasonStore.open(sys.argv[1], create=True) as s:
    add_sheet(s, sys.argv[2], progress=lambda t: print(t, flush=True))
"""


def big_sheet(path, n_fix, seed):
    rng = np.random.default_rng(seed)
    lat0 = rng.uniform(46, 48, n_fix)
    lon0 = rng.uniform(14, 16, n_fix)
    rows = ["tag,time,lat,lon,bearing,sd,observer"]
    for i in range(n_fix):
        for k in range(3):
            lon, lat, back = GEOD.fwd(lon0[i], lat0[i], 120 * k + 10, 800.0)
            t = pd.Timestamp("2026-06-01", tz="UTC") + pd.Timedelta(minutes=30 * i + 5 * k)
            rows.append(f"T{i % 5},{t:%Y-%m-%dT%H:%M:%SZ},{lat:.6f},{lon:.6f},{back % 360:.2f},3,o{seed}")
    path.write_text("\n".join(rows) + "\n")
    return path


def test_a_killed_import_leaves_a_valid_store_with_that_import_whole_or_absent(tmp_path):
    store = tmp_path / "k.gpkg"
    first = big_sheet(tmp_path / "first.csv", 300, 1)
    add(store, first)
    second = big_sheet(tmp_path / "second.csv", 4000, 2)
    hit_inside = 0
    outcomes = set()
    for delay in (0.0, 0.05, 0.15, 0.3, 0.6):
        p = subprocess.Popen([sys.executable, "-c", KILL_SCRIPT, str(store), str(second)], stdout=subprocess.PIPE,
                             text=True, cwd=ROOT)
        for line in p.stdout:                     # wait until it writes inside its transaction
            if line.startswith("storing"):
                break
        time.sleep(delay)
        journal_during = os.path.exists(str(store) + "-journal")
        os.kill(p.pid, signal.SIGKILL)
        p.wait()
        hit_inside += journal_during and os.path.exists(str(store) + "-journal")
        with SeasonStore.open(store) as s:        # opening rolls a hot journal back
            assert s.conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
            imports = s.imports()
            n_fix = s.conn.execute("SELECT COUNT(*) FROM fixes").fetchone()[0]
            n_b = s.conn.execute("SELECT COUNT(*) FROM bearings").fetchone()[0]
            if len(imports) == 1:                 # absent: exactly the first import
                assert (n_fix, n_b) == (300, 900)
                outcomes.add("absent")
            else:                                 # whole: every fix and bearing of the second one
                assert (n_fix, n_b) == (4300, 12900)
                outcomes.add("whole")
                break
    assert hit_inside >= 1, "no kill landed inside the transaction: the test proved nothing"
    assert "absent" in outcomes
    validate(store)
    r = add(store, second)                        # and the import can simply be run again
    assert r.fixes_added + r.fixes_known == 4000


# ------------------------------------------------------------------ choosing and showing

def test_sql_filter_and_table_mask_agree(store_path, tmp_path):
    add(store_path, big_sheet(tmp_path / "s.csv", 200, 3))
    with SeasonStore.open(store_path) as s:
        everything = s.fixes()
        rng = np.random.default_rng(0)
        areas = everything["area_m2"].to_numpy()
        times = everything["time"]
        for _ in range(25):
            flt = SeasonFilter(
                tags=tuple(rng.choice(["T0", "T1", "T2", "T3", "T4", "nope"], size=rng.integers(1, 4),
                                      replace=False)) if rng.random() < 0.6 else None,
                start=times.iloc[rng.integers(len(times))] if rng.random() < 0.5 else None,
                before=times.iloc[rng.integers(len(times))] if rng.random() < 0.5 else None,
                statuses=("ok",) if rng.random() < 0.3 else None,
                max_area_m2=float(np.quantile(areas, rng.random())) if rng.random() < 0.5 else None,
                min_bearings=int(rng.integers(2, 4)) if rng.random() < 0.3 else None)
            by_sql = sorted(s.fixes(flt)["fid"])
            by_mask = sorted(everything.loc[flt.mask(everything), "fid"])
            assert by_sql == by_mask, flt


def test_show_writes_every_kind_and_the_selection_store_is_valid(store_path, sheet, tmp_path, capsys):
    add(store_path, sheet)
    outs = {ext: tmp_path / f"sel{ext}" for ext in (".csv", ".geojson", ".gpkg", ".gpx", ".html")}
    args = ["season", "show", str(store_path), "--tag", "A", "--from", "2026-06-01", "--to", "2026-06-01"]
    for p in outs.values():
        args += ["-o", str(p)]
    assert main(args) == 0
    t = pd.read_csv(outs[".csv"])
    assert t["tag"].tolist() == ["A"] and t["status"].tolist() == ["ok"]
    gj = json.loads(outs[".geojson"].read_text())
    assert {f["properties"]["kind"] for f in gj["features"]} == {"fix", "ellipse"}
    validate(outs[".gpkg"])
    with SeasonStore.open(outs[".gpkg"]) as sel:
        assert sel.fixes()["tag"].tolist() == ["A"] and len(sel.bearings(sel.fixes()["fid"])) == 3
    assert "<wpt" in outs[".gpx"].read_text()
    assert main(["season", "show", str(store_path), "--to", "2026-05-31", "-o", str(tmp_path / "none.csv")]) == 0
    assert len(pd.read_csv(tmp_path / "none.csv")) == 0
    assert main(["season", "show", str(store_path), "-o", str(tmp_path / "x.shp")]) == 2
    assert main(["season", "show", str(store_path), "--status", "fine"]) == 2
    assert main(["season", "show", str(store_path), "--from", "yesterday"]) == 2
    assert main(["season", "show", str(tmp_path / "missing.gpkg")]) == 2
    assert main(["season", "show", str(store_path), "-o", str(store_path)]) == 2


def test_season_add_command_exit_codes_and_messages(store_path, sheet, write_sheet, capsys):
    assert main(["season", "add", str(store_path), str(sheet)]) == 0
    err = capsys.readouterr().err
    assert "week1.csv: import 1: 2 fixes in the sheet: 2 added (2 ok, 0 flagged, 0 failed)" in err
    assert "not for life-safety search" in err
    assert main(["season", "add", str(store_path), str(sheet)]) == 0
    assert "0 added" in capsys.readouterr().err and len(SeasonStore.open(store_path).fixes()) == 2
    bad = write_sheet(SHEET + "A,2026-06-03T06:00:00Z,47.0,15.0,412,3,ana,\n", "bad.csv")
    assert main(["season", "add", str(store_path), str(bad)]) == 1
    assert "line 8, bearing: 412 is out of range" in capsys.readouterr().err
    changed = write_sheet(SHEET.replace(",45,3,", ",46,3,"), "changed.csv")
    assert main(["season", "add", str(store_path), str(changed)]) == 1
    assert "changed   tag A" in capsys.readouterr().err
    assert main(["season", "add", str(store_path).replace(".gpkg", ".db"), str(sheet)]) == 2
    assert main(["season", "add", str(store_path), str(store_path.parent / "missing.csv")]) == 2


def test_review_page_is_offline_escaped_and_complete(store_path, write_sheet, tmp_path):
    evil = SHEET.replace("B,", "<script>alert(1)</script>,")
    add(store_path, write_sheet(evil + "C,2026-06-01T09:00:00Z,47.0,15.0,45,3,ana,\n", "evil.csv"))
    out = tmp_path / "review.html"
    assert main(["season", "show", str(store_path), "-o", str(out)]) == 1     # C failed (one bearing)
    page = out.read_text()
    assert "<script>alert(1)</script>" not in page and "&lt;script&gt;alert(1)&lt;/script&gt;" in page
    import re

    # nothing is loaded from the network: no remote script, style, image or frame (links in Leaflet's own
    # attribution text are not loads)
    assert not re.search(r"""<(script|link|img|iframe)[^>]*(src|href)\s*=\s*["']?(https?:)?//""", page)
    for part in ("Per tag", "share ok", "median region", "Map", "Region areas", "Flagged and failed fixes",
                 "too_few", "Imports", "evil.csv", "not for life-safety search"):
        assert part in page, part
    assert page.count("<svg") >= 1


def test_tag_summary_counts_by_hand():
    from dfkit.season.summary import tag_summary

    t = pd.DataFrame({"tag": ["a", "a", "a", "b"], "status": ["ok", "ok", "shallow", "too_few"],
                      "area_m2": [100.0, 300.0, 5000.0, np.nan], "n_used": [3, 3, 2, 1],
                      "time": pd.to_datetime(["2026-06-02", "2026-06-01", "2026-06-03", None], utc=True)})
    s = tag_summary(t).set_index("tag")
    assert s.loc["a", "fixes"] == 3 and s.loc["a", "ok"] == 2 and s.loc["a", "flagged"] == 1
    assert s.loc["a", "share_ok"] == pytest.approx(2 / 3)
    assert s.loc["a", "median_area_m2"] == 200.0                    # of the ok fixes only
    assert s.loc["a", "first"] == pd.Timestamp("2026-06-01", tz="UTC")
    assert s.loc["b", "failed"] == 1 and np.isnan(s.loc["b", "median_area_m2"])


def test_season_samples_go_in_and_give_home_ranges(tmp_path):
    store = tmp_path / "s.gpkg"
    sheets = sorted(SAMPLES.glob("season_*.csv"))
    assert len(sheets) >= 2
    assert main(["season", "add", str(store)] + [str(p) for p in sheets]) in (0, 1)
    with SeasonStore.open(store) as s:
        imports = s.imports()
        assert len(imports) == len(sheets) and imports["n_fixes_known"].iloc[1] > 0   # the sheets overlap
    out = tmp_path / "r.geojson"
    assert main(["ranges", str(store), "--method", "kde", "--levels", "95", "-o", str(out)]) in (0, 1)
    feats = json.loads(out.read_text())["features"]
    truth = pd.read_csv(SAMPLES / "truth_season.csv", dtype={"tag": str})
    for f in feats:
        t = truth[truth["tag"] == f["properties"]["tag"]].iloc[0]
        true_area = -2 * np.log(0.05) * np.pi * t["sigma_east_m"] * t["sigma_north_m"]
        # the kernel range of located fixes is larger than the true range (kernel width and fix error add)
        assert true_area < f["properties"]["area_m2"] < 4 * true_area


def test_season_samples_are_made_by_their_script(tmp_path):
    import importlib.util
    import shutil

    shutil.copy(SAMPLES / "make_samples.py", tmp_path / "make_samples.py")
    spec = importlib.util.spec_from_file_location("make_samples_season", tmp_path / "make_samples.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    mod.season()
    made = sorted(p.name for p in tmp_path.glob("*.csv"))
    assert made == ["season_2026_05.csv", "season_2026_06.csv", "truth_season.csv", "truth_season_fixes.csv"]
    for name in made:
        assert (tmp_path / name).read_text() == (SAMPLES / name).read_text(), name


def test_season_sample_fixes_hold_the_truth_at_the_stated_rate():
    from geographiclib.geodesic import Geodesic

    from dfkit.locate import locate_sheet

    truth = pd.read_csv(SAMPLES / "truth_season_fixes.csv", dtype={"tag": str})
    hits = []
    for sheet in ("season_2026_05.csv", "season_2026_06.csv"):
        t = locate_sheet(SAMPLES / sheet).table
        for _, r in t[t["status"] == "ok"].iterrows():
            stamp = r["fix"].split(" ")[1][:16]
            m = truth[(truth["tag"] == r["tag"]) & (truth["first_bearing_time"].str[:16] == stamp)]
            assert len(m) == 1
            g = Geodesic.WGS84.Inverse(r["lat"], r["lon"], m["lat"].iloc[0], m["lon"].iloc[0])
            a = np.radians(g["azi1"])
            x, y = g["s12"] * np.sin(a), g["s12"] * np.cos(a)
            th = np.radians(r["orientation_deg"])
            u, v = x * np.sin(th) + y * np.cos(th), x * np.cos(th) - y * np.sin(th)
            hits.append((u / r["semi_major_m"]) ** 2 + (v / r["semi_minor_m"]) ** 2 <= 1)
    # ~150 fixes with 95 % ellipses, 2 % of bearings are 30-60 degree reflections: at least 85 % inside
    # (for a true 95 % region, P(below 85 %) is far under 1 %, binomial)
    assert len(hits) > 120 and np.mean(hits) >= 0.85


@needs_chromium
def test_review_page_map_and_time_filter_in_a_browser_offline(tmp_path):
    from playwright.sync_api import sync_playwright

    from .browser import OfflinePage

    store = tmp_path / "s.gpkg"
    add(store, SAMPLES / "season_2026_05.csv")
    out = tmp_path / "review.html"
    assert main(["season", "show", str(store), "-o", str(out)]) in (0, 1)
    with SeasonStore.open(store) as s:
        located = int(s.fixes(SeasonFilter(statuses=WITH_POSITION)).shape[0])
    with sync_playwright() as pw:
        p = OfflinePage(pw, out, viewport=(1100, 900))
        page = p.page
        frame = page.frame_locator("iframe.season-map")
        frame.locator("path.dfk-track").first.wait_for(state="attached", timeout=20000)
        inner = next(f for f in page.frames if f != page.main_frame)
        shown = inner.evaluate("window.dfkit.layer.counts.fix")
        tracks = frame.locator("path.dfk-track").count()
        vertices = inner.evaluate("window.dfkitTracks.group.getLayers().reduce((n, l) => n + l.getLatLngs().length, 0)")
        frame.locator("#dfk-time-to").evaluate("e => { e.value = 500; e.dispatchEvent(new Event('change')); }")
        half = inner.evaluate("window.dfkit.layer.counts.fix")
        half_vertices = inner.evaluate(
            "window.dfkitTracks.group.getLayers().reduce((n, l) => n + l.getLatLngs().length, 0)")
        page.screenshot(path=str(tmp_path / "review.png"), full_page=True)
        p.close()
    assert p.outside == [] and p.errors == []
    assert shown == located                     # every located fix is on the map
    assert tracks == 3 and vertices == located  # one track per tag through every located fix
    assert 0 < half < shown                     # the time filter keeps the first half of the season
    assert half_vertices == half                # and the tracks follow it


def test_readme_season_and_ranges_commands_run(tmp_path, monkeypatch):
    import re
    import shlex

    text = (ROOT / "README.md").read_text()
    cmds = re.findall(r"^dfkit ((?:season|ranges) [^#\n]*)", text, flags=re.M)
    assert len(cmds) >= 5
    monkeypatch.chdir(tmp_path)
    assert main(["fix", str(SAMPLES / "season_2026_05.csv"), "-o", "fixes.csv"]) in (0, 1)
    for cmd in cmds:
        args = [a.replace("sample_bearings/", f"{SAMPLES}/") for a in shlex.split(cmd)]
        assert main(args) in (0, 1), cmd
    assert (tmp_path / "review.html").exists() and (tmp_path / "ranges.gpkg").exists()


def test_columns_the_fix_table_gains_and_likelihood_regions_are_stored(store_path, sheet):
    # Solvers may add covariance columns and likelihood regions (fixes.regions: fix_id, geometry, bounded);
    # the store keeps both without a schema change.
    import pyogrio

    from dfkit.locate import locate_sheet

    fixes = locate_sheet(sheet)
    fixes.table["cov_ee_m2"] = [100.0, 200.0]
    fixes.table["cov_en_m2"] = [10.0, -20.0]
    fixes.table["cov_nn_m2"] = [50.0, 60.0]
    r0 = fixes.table.iloc[0]
    blob = shapely.Point(r0["lon"], r0["lat"]).buffer(0.002)
    fixes.regions = pd.DataFrame({"fix_id": [0], "geometry": [blob], "bounded": [False]})
    with SeasonStore.open(store_path, create=True) as s:
        s.add(fixes, file_name="week1.csv")
        back = s.fixes()
        assert back["cov_en_m2"].tolist() == [10.0, -20.0]
    regions = pyogrio.read_dataframe(store_path, layer="regions")
    assert sorted(regions["kind"]) == ["ellipse", "ellipse", "likelihood"]
    lk = regions[regions["kind"] == "likelihood"].iloc[0]
    assert not lk["bounded"] and lk.geometry.geoms[0].normalize().equals_exact(blob.normalize(), 1e-9)
    validate(store_path)


def daily_label_sheet(days=4, labels=8, bad_line_after=None):
    """Two tags whose fix labels restart every day (1, 2, ... each morning), as a season's monthly sheet numbers
    them; three exact bearings per fix from stations around each transmitter (pyproj geodesics)."""
    rows = ["fix,tag,time,lat,lon,bearing,sd"]
    for day in range(1, days + 1):
        for tag in ("150.210", "150.430"):
            for k in range(1, labels + 1):
                tlat, tlon = 61.2 + 0.01 * k, 24.9 + (0.02 if tag == "150.430" else 0.0)
                for j, az in enumerate((20.0, 140.0, 260.0)):
                    lon, lat, _ = GEOD.fwd(tlon, tlat, az, 1500.0)
                    b, _, _ = GEOD.inv(lon, lat, tlon, tlat)
                    rows.append(f"{k},{tag},2026-06-{day:02d}T{6 + k:02d}:{3 * j:02d}:00Z,{lat:.6f},{lon:.6f},"
                                f"{b % 360:.1f},5")
    rows.insert(7, "3,150.210,2026-06-01T09:09:00Z,61.23,24.9,3O5,5")   # a mistyped bearing on line 8
    return "\n".join(rows) + "\n"


def test_daily_labels_give_one_warning_and_every_rejected_row(tmp_path, capsys):
    """Labels restarting every day were one warning and one note per label per sheet (about 1,100 of 1,120 lines
    of a season's import log); now one warning and one note per sheet, and the rejected row is still named."""
    sheet = tmp_path / "june.csv"
    sheet.write_text(daily_label_sheet())
    store_path = tmp_path / "s.gpkg"
    assert main(["season", "add", str(store_path), str(sheet)]) == 1
    err = capsys.readouterr().err.splitlines()
    rejected = [e for e in err if e.startswith("rejected")]
    assert len(rejected) == 1 and "line 8, bearing: '3O5'" in rejected[0]
    splits = [e for e in err if e.startswith(("warning", "note")) and "split" in e]
    assert len(splits) <= 3, splits
    assert any("16 fix labels start again" in e and "fix '1' of tag '150.210' at line" in e for e in splits)
    with SeasonStore.open(store_path) as store:
        assert len(store.fixes()) == 2 * 8 * 4           # every day's fix is its own


def test_few_reused_labels_are_still_said_one_by_one():
    from dfkit import read_bearings

    b = read_bearings(daily_label_sheet(days=2, labels=1).replace("3O5", "305").encode())
    said = [p for p in b.problems if p.column == "fix" and "starts again here" in p.message]
    assert len(said) == 2 and {"fix '1' of tag '150.210'", "fix '1' of tag '150.430'"} == \
        {p.message.split(" starts")[0] for p in said}


def test_many_warnings_of_one_kind_print_as_a_few_and_a_count(tmp_path, capsys):
    """A declination on 12 true-north rows: 12 warnings of one kind print as three and one line counting nine."""
    rows = ["fix,time,lat,lon,bearing,sd,north,declination"]
    for k in range(4):
        for j, (lat, lon, b) in enumerate(((46.4, -84.3, 45), (46.4, -84.28, 315), (46.42, -84.29, 180))):
            rows.append(f"F{k},2026-05-0{k + 1}T06:0{j}:00Z,{lat},{lon},{b},5,true,3")
    rows.append("F3,2026-05-04T06:09:00Z,46.42,-84.29,999,5,true,3")
    sheet = tmp_path / "s.csv"
    sheet.write_text("\n".join(rows) + "\n")
    assert main(["check", str(sheet)]) == 1
    out = capsys.readouterr().out.splitlines()
    dec = [o for o in out if "declination" in o and o.startswith("warning")]
    assert len(dec) == 4 and "... 9 more warnings like line 4's on declination (lines 5 to 13)" in dec[-1]
    assert [o for o in out if o.startswith("rejected")] == [o for o in out if "999" in o]
    assert len([o for o in out if o.startswith("rejected")]) == 1


# ------------------------------------------------------------------ observer positions' steps

ROUNDED = """tag,time,lat,lon,bearing,sd,observer
A,2026-06-01T06:00:00Z,47.013,15.007,45,2,ana
A,2026-06-01T06:05:00Z,47.011,15.023,315,2,ana
A,2026-06-01T06:10:00Z,47.024,15.016,180,2,ben
B,2026-06-01T07:00:00Z,47.012,15.008,40,2,ana
B,2026-06-01T07:04:00Z,47.009,15.026,320,2,ana
B,2026-06-01T07:08:00Z,47.026,15.013,175,2,ben
"""


def test_a_store_keeps_each_positions_step_and_reads_back_the_same_fixes(store_path, write_sheet):
    # 3-decimal positions: a step of 0.001° (about 111 m north-south), which dfkit fix writes per bearing
    from dfkit import read_bearings
    from dfkit.locate import locate

    p = write_sheet(ROUNDED, "rounded.csv")
    direct = locate(read_bearings(p))
    add(store_path, p)
    with SeasonStore.open(store_path) as s:
        back = s.select()
    assert (back.bearings["position_step_north_m"].to_numpy(float) > 100).all()
    got = back.table.set_index(["tag", "fix"])
    want = direct.table.set_index(["tag", "fix"])
    assert got.loc[want.index, "status"].tolist() == want["status"].tolist()
    assert got.loc[want.index, "reason"].tolist() == want["reason"].tolist()


def test_a_stored_fix_whose_positions_were_taken_as_exact_is_changed_by_their_steps(store_path, write_sheet):
    # stored first with positions taken as exact (as a store made before dfkit read steps holds them: no step
    # columns at all); the same rows read with their 0.001° steps are the same content but not the same fix: both
    # fixes are reported as changed, saying why, and replaced on request
    p = write_sheet(ROUNDED, "rounded.csv")
    add(store_path, p, position_rounding="none")
    with SeasonStore.open(store_path) as s:
        assert "position_step_north_m" not in s.bearings(s.fixes()["fid"])
    r = add(store_path, p)
    assert r.fixes_added == 0 and r.fixes_known == 0 and r.fixes_changed == 2
    assert all("none (taken as exact) in the store" in d and "111 m now" in d for _, _, d in r.changed)
    r = add(store_path, p, replace=True)
    assert r.fixes_added == 2
    r = add(store_path, p)
    assert r.fixes_known == 2 and r.fixes_changed == 0
