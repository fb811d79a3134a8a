"""The small pieces the checks after the solve rest on, each against an outside reference: numpy's own unique and
isin, Python's number formatting, and geodesics from geographiclib (Karney 2013) and pyproj.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pyproj
import pytest

import dfkit
from dfkit import geodesy
from dfkit.locate import core, locate
from dfkit.locate.fixes import WITH_POSITION, has_position, status_in
from dfkit.locate.offsets import _sorted_codes, _unique
from dfkit.locate.sheetwide import _sd_keys
from dfkit.locate.status import append_reason, classify
from tests.simulation import WGS, scenario, sheet_text

GEOD = pyproj.Geod(ellps="WGS84")


def test_status_words_are_tested_as_numpy_isin_tests_them():
    rng = np.random.default_rng(5)
    words = np.array(["ok", "too_few", "shallow", "ambiguous", "parallel", "", None, np.nan, "OK"], dtype=object)
    status = words[rng.integers(0, len(words), 500)]
    assert np.array_equal(has_position(status), np.isin(status, WITH_POSITION))
    assert np.array_equal(status_in(status, ("parallel", "")), np.isin(status, ("parallel", "")))
    assert has_position(np.zeros(0, dtype=object)).shape == (0,)


@pytest.mark.parametrize("n, size", [(1000, 300), (1000, 5000), (50, 10**7), (0, 0), (1, 1)])
def test_pairs_are_numpy_unique(n, size):
    key = np.random.default_rng(n + size).integers(0, max(size, 1), n)
    want, want_inv = np.unique(key, return_inverse=True)
    got, got_inv = _unique(key, size)
    assert np.array_equal(got, want) and np.array_equal(got_inv, want_inv)


def test_labels_are_coded_as_numpy_unique_codes_them():
    labels = np.array(["kim", "Al", "kim", "b", "Al", "al", "all"], dtype=object)
    want, want_inv = np.unique(labels, return_inverse=True)
    got, got_inv = _sorted_codes(labels)
    assert list(got) == list(want) and np.array_equal(got_inv, want_inv)


def test_sd_keys_are_python_formatted_pairs():
    # the key of a fix is its SD source and its SD to three significant digits (Python's format mini-language):
    # 4 and 4.0001 share a key, 4.01 does not
    source = np.array(["given", "given", "", "calibration", "given", "given"], dtype=object)
    sd = np.array([4.0, 4.0001, np.nan, 2.5, 4.01, 4.0])
    assert list(_sd_keys(source, sd)) == ["given|4", "given|4", "|nan", "calibration|2.5", "given|4.01", "given|4"]
    mixed = np.array(["given", None], dtype=object)          # not all text: written one by one, as Python does
    assert list(_sd_keys(mixed, np.array([3.0, np.nan]))) == ["given|3", "None|nan"]


def test_appended_reasons_are_joined_by_semicolons():
    reasons = np.array(["", "a", "", "b; c"], dtype=object)
    append_reason(reasons, [0, 1, 3], "x")
    append_reason(reasons, 2, "y")
    assert list(reasons) == ["x", "a; x", "y", "b; c; x"]


def test_station_spread_is_the_distance_from_the_stations_centre():
    # four stations 500 m north, east, south and west of a point (pyproj geodesics): their centre is the point and
    # each stands 500 m from it (the chord on a sphere of radius a is within 0.5 % of the geodesic here: common
    # practice, no source); three bearings from one spot spread 0 m
    lon, lat, _ = GEOD.fwd(np.full(4, 13.0), np.full(4, 47.0), [0.0, 90.0, 180.0, 270.0], np.full(4, 500.0))
    lat = np.append(np.asarray(lat), [46.5, 46.5, 46.5])
    lon = np.append(np.asarray(lon), [12.0, 12.0, 12.0])
    g = np.array([0, 0, 0, 0, 1, 1, 1])
    spread = geodesy.group_spread_m(lat, lon, g, 2)
    assert spread[0] == pytest.approx(500.0, rel=0.005)
    assert spread[1] == pytest.approx(0.0, abs=1e-6)
    # the solver works the spread out with the stations' centroid and hands it to the statuses: the same
    # distances, whatever the bearings (here all pointing north: no fix is needed for it)
    sol = dfkit.estimators.solve(lat, lon, np.zeros(7), g, 2)
    assert sol.station_spread_m[0] == pytest.approx(500.0, rel=0.005)
    assert sol.station_spread_m[1] == pytest.approx(0.0, abs=1e-6)


def _located(tmp_path, seed=11, n_fix=60):
    """A sheet with a wild bearing in every fix (geographiclib truth, tests/simulation.py), SD given."""
    sc = scenario(n_fix, 5, 3.0, np.random.default_rng(seed), outlier=True)
    path = tmp_path / "s.csv"
    path.write_text(sheet_text(sc, sd_deg=3))
    return dfkit.read_bearings(path)


def test_fix_azimuths_are_the_geodesic_azimuths_from_fix_to_station(tmp_path):
    # the solver takes its last geodesic pass at the point it then reports, or a fraction of a millimetre from it
    # (its last planar step): 1e-5° is 0.09 mm at 500 m
    fx = locate(_located(tmp_path))
    b, t = fx.bearings, fx.table
    g = b["fix_id"].to_numpy()
    pos = np.isfinite(t["lat"].to_numpy())[g]
    assert pos.sum() > 100
    want = np.array([WGS.Inverse(t["lat"].iat[i], t["lon"].iat[i], la, lo)["azi1"] % 360.0
                     for i, la, lo in zip(g[pos], b["lat"].to_numpy()[pos], b["lon"].to_numpy()[pos])])
    diff = (fx.azimuth_deg[pos] - want + 180.0) % 360.0 - 180.0
    assert np.abs(diff).max() < 1e-5


def test_judging_again_only_the_fixes_with_new_hints_or_rivals_is_judging_all(tmp_path):
    # locate's classify calls: the first on every fix, the later ones on the fixes that gained hints or rivals
    seen = []

    def spy(facts, previous=None, redo=()):
        out = classify(facts, previous, redo)
        seen.append((dataclasses.replace(facts, judged=None), out))
        return out

    original = core.classify
    core.classify = spy
    try:
        locate(_located(tmp_path, seed=12))
    finally:
        core.classify = original
    assert len(seen) >= 2                           # the wild bearings gave hints or rivals
    for facts, (status, reasons) in seen[1:]:
        whole_status, whole_reasons = classify(facts)
        assert list(status) == list(whole_status)
        assert list(reasons) == list(whole_reasons)
