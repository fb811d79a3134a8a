"""A turn shared by every bearing of a sheet (compass bearings taken as true north) is named as such, not blamed on
the SD.

Invented sheet: 30 transmitters near Fairbanks, Alaska, three or four observers each 0.8-2 km away, bearings from
pyproj's geodesics (Karney 2013) with Gaussian errors of 3°, then all turned by the same angle. The magnetic
declination there in mid-2026 is about 15° east (NOAA's WMM2025 calculator gives 14.5-15° E for Fairbanks in
2025-2026 [from memory]): a compass bearing is the true one less 15°.
"""

from __future__ import annotations

import numpy as np
import pyproj
import pytest

from dfkit.locate import locate_sheet

GEOD = pyproj.Geod(ellps="WGS84")


def _sheet(write_sheet, turn, seed=3):
    rng = np.random.default_rng(seed)
    rows = []
    for f in range(30):
        lat0, lon0 = 64.84 + rng.uniform(-0.05, 0.05), -147.7 + rng.uniform(-0.1, 0.1)
        n = int(rng.integers(3, 5))
        for j, az in enumerate(rng.uniform(0, 360) + np.arange(n) * 360 / n + rng.uniform(-20, 20, n)):
            lon, lat, back = GEOD.fwd(lon0, lat0, az, rng.uniform(800, 2000))
            bearing = (back + rng.normal(0, 3.0) + turn) % 360
            rows.append(f"F{f:02d},{lat:.7f},{lon:.7f},{bearing:.1f},2026-06-01T{8 + f // 6:02d}:{(f % 6) * 10:02d}:00Z")
    return write_sheet("fix,lat,lon,bearing,time\n" + "\n".join(rows) + "\n")


def _turn(warnings):
    said = [w for w in warnings if "of the fixes" in w and "read on average" in w]
    assert len(said) == 1, warnings
    deg = float(said[0].split("read on average ")[1].split("°")[0])
    return deg if "clockwise of" in said[0] and "anticlockwise" not in said[0] else -deg


def test_compass_bearings_taken_as_true_are_named_not_blamed_on_the_sd(write_sheet):
    fixes = locate_sheet(_sheet(write_sheet, -15.0), sd=3.0)
    # the turn is found (15° is 5 SDs: before, every turned bearing was left out of the test as wild) ...
    assert _turn(fixes.warnings) == pytest.approx(-15.0, abs=1.0)
    # ... matched with the declination there ...
    assert any("give --north magnetic" in w and "magnetic declination" in w for w in fixes.warnings)
    # ... and not called an SD too small
    assert not any("looks too small" in w for w in fixes.warnings)
    assert (fixes.table["status"] != "ok").all()          # every region is drawn with the turn in it


def test_a_turn_unlike_the_declination_is_named_without_the_compass_advice(write_sheet):
    fixes = locate_sheet(_sheet(write_sheet, 8.0), sd=3.0)
    assert _turn(fixes.warnings) == pytest.approx(8.0, abs=1.0)
    assert not any("give --north magnetic" in w for w in fixes.warnings)


def test_true_bearings_say_nothing_of_a_turn(write_sheet):
    fixes = locate_sheet(_sheet(write_sheet, 0.0), sd=3.0)
    assert not any("read on average" in w for w in fixes.warnings)
    assert not any("magnetic declination" in w for w in fixes.warnings)


@pytest.mark.parametrize("method", ["andrews", "huber"])
def test_a_robust_fit_that_drops_turned_lines_still_gets_the_compass_advice(write_sheet, method):
    # a robust fit's weights bend the residuals the turn is pooled from (Andrews' drops some turned lines): the
    # turn it shows is off by a few degrees, so the advice rests on solving again as compass bearings
    fixes = locate_sheet(_sheet(write_sheet, -15.0), sd=3.0, method=method)
    assert -20.0 <= _turn(fixes.warnings) <= -9.0
    assert any("give --north magnetic" in w for w in fixes.warnings)


def test_no_time_column_names_the_declination_to_give(write_sheet):
    path = _sheet(write_sheet, -15.0)
    text = path.read_text().splitlines()
    path.write_text("\n".join(",".join(row.split(",")[:4]) for row in text) + "\n")
    fixes = locate_sheet(path, sd=3.0)
    said = [w for w in fixes.warnings if "--declination" in w]
    assert len(said) == 1
    # WMM2025 at Fairbanks, 2027.5: about 14.5° east (NOAA's calculator, from memory)
    assert 13.5 <= float(said[0].split("--declination ")[1].split()[0]) <= 16.0


def test_an_observer_column_all_alike_still_gets_the_compass_advice(write_sheet):
    path = _sheet(write_sheet, -15.0)
    rows = path.read_text().splitlines()
    path.write_text("\n".join([rows[0] + ",observer"] + [f"{r},{'ABC'[i % 3]}" for i, r in enumerate(rows[1:])]) + "\n")
    fixes = locate_sheet(path, sd=3.0)
    assert any("give --north magnetic" in w for w in fixes.warnings)


def test_true_bearings_taken_as_magnetic_are_named(write_sheet):
    # true bearings read with --north magnetic: dfkit adds the declination (about 15° E there) they did not need
    fixes = locate_sheet(_sheet(write_sheet, 0.0), sd=3.0, north="magnetic")
    assert _turn(fixes.warnings) == pytest.approx(15.0, abs=1.5)
    assert any("give --north true" in w for w in fixes.warnings)
    assert not any("give --north magnetic" in w for w in fixes.warnings)


def _observers(write_sheet, b_off):
    """Compass bearings (true - 15°) from observers A and C, and from B turned by ``b_off`` more."""
    rows = _sheet(write_sheet, -15.0).read_text().splitlines()
    out = [rows[0] + ",observer"]
    for i, r in enumerate(rows[1:]):
        who = "ABC"[i % 3]
        if who == "B":
            cells = r.split(",")
            cells[3] = f"{(float(cells[3]) + b_off) % 360:.1f}"
            r = ",".join(cells)
        out.append(f"{r},{who}")
    return write_sheet("\n".join(out) + "\n", name="observers.csv")


def test_one_observer_writing_true_bearings_on_a_magnetic_sheet_is_named(write_sheet):
    # B's bearings true (15° more than a compass there reads), all read as magnetic
    fixes = locate_sheet(_observers(write_sheet, 15.0), sd=3.0, north="magnetic")
    said = [w for w in fixes.warnings if "observer B's offset" in w]
    assert len(said) == 1 and "mark its rows true north" in said[0]
    assert not any("observer A's offset" in w or "observer C's offset" in w for w in fixes.warnings)


def test_an_observer_offset_unlike_the_declination_gets_no_north_note(write_sheet):
    # B 8° off (half the declination): the sheet shows a turn (the fixes cannot tell the observers apart at 30
    # fixes), but nothing says B wrote true bearings
    fixes = locate_sheet(_observers(write_sheet, 8.0), sd=3.0, north="magnetic")
    assert any("read on average" in w for w in fixes.warnings)
    assert not any("mark its rows" in w for w in fixes.warnings)
