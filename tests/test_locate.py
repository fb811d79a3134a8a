"""Fix statuses: fixes with no honest answer are named, never dropped, never faked."""

import numpy as np
import pytest
from geographiclib.geodesic import Geodesic

from dfkit import read_bearings
from dfkit.locate import WITH_POSITION, locate, locate_sheet

WGS = Geodesic.WGS84


def az(a, b):
    return WGS.Inverse(a[0], a[1], b[0], b[1])["azi1"] % 360


def sheet_of(rows, header="fix,lat,lon,bearing,sd,time"):
    return header + "\n" + "\n".join(",".join(str(v) for v in r) for r in rows) + "\n"


T = (47.01, 15.01)
S = [(47.0, 15.0), (47.0, 15.02), (47.02, 15.02)]


def good_rows(label, sd="", times=("", "", "")):
    return [(label, s[0], s[1], round(az(s, T), 3), sd, t) for s, t in zip(S, times)]


def status_of(fixes, label):
    row = fixes.table.set_index("fix").loc[label]
    return row["status"], row["reason"], row


def test_each_kind_of_bad_geometry_is_named(write_sheet):
    rows = good_rows("ok")
    rows += [("few", 47.0, 15.0, 45, "", "")]
    rows += [("spot", 47.0, 15.0, 45, "", ""), ("spot", 47.0, 15.0, 50, "", ""), ("spot", 47.0, 15.0, 55, "", "")]
    rows += [("par", 47.0, 15.0, 0, "", ""), ("par", 47.0, 15.02, 0, "", "")]
    rows += [("div", 47.0, 15.0, 300, "", ""), ("div", 47.0, 15.02, 60, "", "")]
    rows += [("shal", 47.0, 15.0, round(az((47.0, 15.0), T), 3), 3, ""),
             ("shal", 47.0005, 15.0003, round(az((47.0005, 15.0003), T), 3), 3, "")]
    rows += [("two", 47.0, 15.0, round(az(S[0], T), 3), "", ""), ("two", 47.0, 15.02, round(az(S[1], T), 3), "", "")]
    rows += good_rows("slow", times=("2026-05-03T06:00:00Z", "2026-05-03T06:10:00Z", "2026-05-03T07:30:00Z"))
    rows += [("bad", 47.0, 15.0, 999, "", "")]
    fixes = locate(read_bearings(write_sheet(sheet_of(rows))), window_min=20)
    expect = {"ok": "ok", "few": "too_few", "spot": "one_spot", "par": "parallel", "div": "diverging",
              "shal": "shallow", "two": "no_region", "slow": "long_span", "bad": "too_few"}
    assert list(fixes.table["fix"]) == list(expect)            # every label, in input order
    for label, status in expect.items():
        got, reason, row = status_of(fixes, label)
        assert got == status, (label, reason)
        assert (reason != "") == (status != "ok")
        has_pos = np.isfinite(row["lat"])
        assert has_pos == (status in WITH_POSITION), label
    _, reason, row = status_of(fixes, "two")
    assert "no confidence region" in reason and not np.isfinite(row["semi_major_m"])
    _, reason, _ = status_of(fixes, "bad")
    assert "rejected input line 13" in reason or "rejected input line" in reason
    assert fixes.summary() == {"ok": 1, "flagged": 3, "failed": 5}


def test_truth_is_recovered_without_noise(write_sheet):
    fixes = locate(read_bearings(write_sheet(sheet_of(good_rows("A", sd=2)))))
    r = fixes.table.iloc[0]
    assert WGS.Inverse(r["lat"], r["lon"], *T)["s12"] < 0.5   # bearings rounded to 1e-3 deg
    assert r["sd_source"] == "given" and r["status"] == "ok"


def test_two_bearings_with_known_sd_have_a_chi_square_region(write_sheet):
    # METHODS.md section 11 [OWN]: two stations at 1000 m crossing at 90 deg, sd 5 deg: the 95% ellipse is a circle
    # of radius 213.606 m. Derivation: sd per axis = 1000 m * 5 deg in rad = 87.2665 m; k = 2.447747.
    tgt = (47.0, 15.0)
    s1 = WGS.Direct(*tgt, 180.0, 1000.0)
    s2 = WGS.Direct(*tgt, 270.0, 1000.0)
    # azi2 points away from the target at the station; the bearing to the target is azi2 + 180
    rows = [("A", s1["lat2"], s1["lon2"], (s1["azi2"] + 180) % 360, 5, ""),
            ("A", s2["lat2"], s2["lon2"], (s2["azi2"] + 180) % 360, 5, "")]
    rows = [(a, f"{b:.10f}", f"{c:.10f}", f"{d:.8f}", e, f) for a, b, c, d, e, f in rows]
    r = locate(read_bearings(write_sheet(sheet_of(rows)))).table.iloc[0]
    assert r["status"] == "ok"
    assert r["semi_major_m"] == pytest.approx(213.606, rel=2e-3)
    assert r["semi_minor_m"] == pytest.approx(213.606, rel=2e-3)


def test_locate_sheet_python_api(write_sheet):
    fixes = locate_sheet(write_sheet(sheet_of(good_rows("A", sd=2))), method="huber", level=0.5)
    assert fixes.table["method"][0] == "huber" and fixes.table["level"][0] == 0.5
    assert {"residual_deg", "weight", "range_m", "fix_status"} <= set(fixes.bearings.columns)


def test_unknown_method_lists_the_choices(write_sheet):
    b = read_bearings(write_sheet(sheet_of(good_rows("A"))))
    with pytest.raises(ValueError, match=r"method='lenth'.*'mle', 'huber', 'andrews', 'lsq', 'stansfield'"):
        locate(b, method="lenth")
