"""Beacon calibration: circular statistics against Fisher's formulas and scipy, recovery of a hidden truth,
the coverage of calibrated fixes, the leave-one-beacon-out check, and the command line."""

import numpy as np
import pandas as pd
import pytest
import scipy.optimize
import scipy.special
import scipy.stats
from geographiclib.geodesic import Geodesic

from dfkit import calibration, read_bearings
from dfkit.cli import main
from dfkit.locate import locate

from .conftest import SAMPLES

WGS = Geodesic.WGS84
# Check set of beacon errors [deg], used with the formulas of N. I. Fisher, Statistical Analysis of
# Circular Data, Cambridge UP, 1993 (sections 4.4-4.5); every reference value below is recomputed here
# with numpy/scipy.
CHECK = np.array([-3, 5, 2, -1, 4, 0, -6, 3, 1, -2, 7, 2.5])


def a_inverse(r):
    """Reference A^-1 by bracketing root search on I1/I0 (scipy)."""
    return scipy.optimize.brentq(
        lambda k: scipy.special.i1e(k) / scipy.special.i0e(k) - r, 1e-9, 1e7, xtol=1e-12, rtol=1e-14
    )


# --------------------------------------------------------------------------- circular statistics


def test_check_set_against_numpy_and_scipy():
    s = calibration.circular_summary(CHECK)
    e = np.radians(CHECK)
    c, sn = np.mean(np.cos(e)), np.mean(np.sin(e))
    rbar = np.hypot(c, sn)
    mean = np.arctan2(sn, c)
    assert s.n == 12
    assert s.mean_deg == pytest.approx(np.degrees(mean), abs=1e-10)
    assert s.rbar == pytest.approx(rbar, abs=1e-14)
    assert s.circular_sd_deg == pytest.approx(
        np.degrees(np.sqrt(-2 * np.log(rbar))), rel=1e-12
    )  # circular SD sqrt(-2 ln R) (Fisher 1993; Mardia & Jupp 2000)
    assert s.angular_deviation_deg == pytest.approx(np.degrees(np.sqrt(2 * (1 - rbar))), rel=1e-12)
    assert s.sd_deg == pytest.approx(np.std(CHECK, ddof=1), rel=1e-6)  # errors far from +-180: plain SD
    # von Mises MLE: scipy's fit with the scale fixed at 1 (scipy.stats.vonmises.fit) and brentq on A = I1/I0
    kappa_fit, loc_fit, _ = scipy.stats.vonmises.fit(e, fscale=1)
    assert s.kappa_mle == pytest.approx(a_inverse(rbar), rel=1e-9)
    assert s.kappa_mle == pytest.approx(kappa_fit, rel=1e-4)
    assert s.mean_deg == pytest.approx(np.degrees(loc_fit), abs=1e-4)
    # Fisher (1993) eq. 4.41 small-sample correction for n <= 15 (formula from memory, see the module
    # docstring)
    n = 12
    assert s.kappa == pytest.approx((n - 1) ** 3 * a_inverse(rbar) / (n**3 + n), rel=1e-9)
    # Fisher (1993) section 4.4: standard error of the mean direction and its 95 % interval
    rho2 = np.mean(np.cos(2 * (e - mean)))
    se = np.sqrt((1 - rho2) / (2 * n * rbar**2))
    assert s.mean_se_deg == pytest.approx(np.degrees(se), rel=1e-12)
    half = np.degrees(np.arcsin(scipy.stats.norm.ppf(0.975) * se))
    assert (s.mean_lo_deg, s.mean_hi_deg) == pytest.approx(
        (np.degrees(mean) - half, np.degrees(mean) + half), abs=1e-9
    )
    # the wrapped-normal SD of the corrected kappa: A(kappa*) = exp(-sigma^2 / 2)
    a = scipy.special.iv(1, s.kappa) / scipy.special.iv(0, s.kappa)
    assert s.sd_from_kappa_deg == pytest.approx(np.degrees(np.sqrt(-2 * np.log(a))), rel=1e-9)


@pytest.mark.parametrize("r", [0.01, 0.1, 0.5, 0.53, 0.7, 0.85, 0.9, 0.95, 0.99, 0.999, 0.99999])
def test_kappa_from_rbar_is_the_exact_inverse(r):
    assert calibration.kappa_from_rbar(r) == pytest.approx(a_inverse(r), rel=1e-9)


def test_kappa_edges_and_small_sample_branches():
    assert calibration.kappa_from_rbar(1.0) == np.inf
    assert calibration.kappa_from_rbar(0.0) == 0.0
    # Fisher (1993) eq. 4.41: below kappa = 2 the correction subtracts 2/(n kappa), floored at 0
    assert calibration.kappa_small_sample(1.5, 10) == pytest.approx(1.5 - 2 / (10 * 1.5))
    assert calibration.kappa_small_sample(0.2, 5) == 0.0
    assert calibration.kappa_small_sample(50.0, 16) == 50.0  # not applied above n = 15


@pytest.mark.parametrize("kappa", [1.0, 2.0, 5.0, 10.0, 100.0])
def test_mean_resultant_ratio_against_bessel_functions(kappa):
    assert calibration.mean_resultant_ratio(kappa) == pytest.approx(
        scipy.special.iv(1, kappa) / scipy.special.iv(0, kappa), rel=1e-12
    )


def test_errors_straddling_180_are_wrapped():
    # a sample whose true bias is 180 deg (a loop read the wrong way round): plain averaging would say 0
    s = calibration.circular_summary([178, -179, 179, -178, 180])
    assert abs(((s.mean_deg + 180) % 360) - 180) > 179


# --------------------------------------------------------------------------- simulated trials and fixes

ORIGIN = (46.8, 9.9)
ANTENNAS = {"yagi": (2.5, 3.0), "loop": (-4.0, 7.5), "whip": (0.8, 5.0)}  # hidden bias, SD [deg]
WILD_ROWS = (5, 250, 444, 610)


def _point(east_m, north_m, origin=ORIGIN):
    g = WGS.Direct(origin[0], origin[1], np.degrees(np.arctan2(east_m, north_m)), np.hypot(east_m, north_m))
    return g["lat2"], g["lon2"]


def trials_sheet(rng, n_per_antenna=300, n_beacons=8, wild=()):
    """A trials sheet made with geographiclib: normal errors with each antenna's hidden bias and SD."""
    beacons = [_point(*rng.uniform(-3000, 3000, 2)) for _ in range(n_beacons)]
    lines = ["fix,time,lat,lon,bearing,antenna,beacon,beacon_lat,beacon_lon"]
    extra = dict(zip(sorted(WILD_ROWS), wild))  # data row -> added error (a reflection) [deg]
    k = 0
    for antenna, (bias, sd) in ANTENNAS.items():
        for j in range(n_per_antenna):
            b = j % n_beacons
            blat, blon = beacons[b]
            d = WGS.Direct(blat, blon, rng.uniform(0, 360), rng.uniform(300, 3000))
            az = WGS.Inverse(d["lat2"], d["lon2"], blat, blon)["azi1"]
            err = rng.normal(bias, sd) + extra.get(k, 0.0)
            lines.append(
                f"B{b}-{antenna}-{j // (4 * n_beacons)},2026-06-01T06:00:00Z,{d['lat2']:.8f},"
                f"{d['lon2']:.8f},{(az + err) % 360:.4f},{antenna},B{b},{blat:.8f},{blon:.8f}"
            )
            k += 1
    return "\n".join(lines) + "\n", beacons


def field_sheet(rng, n_fix):
    """Field fixes of 3 bearings from stations around the target, each fix with one antenna, no sd column."""
    rows = ["fix,lat,lon,bearing,antenna"]
    truth = []
    names = list(ANTENNAS)
    for i in range(n_fix):
        tgt = _point(*rng.uniform(-4000, 4000, 2))
        antenna = names[i % len(names)]
        bias, sd = ANTENNAS[antenna]
        for ang in rng.uniform(0, 360) + np.array([0, 120, 240]) + rng.normal(0, 15, 3):
            d = WGS.Direct(tgt[0], tgt[1], ang, rng.uniform(500, 1500))
            az = WGS.Inverse(d["lat2"], d["lon2"], tgt[0], tgt[1])["azi1"]
            b = (az + rng.normal(bias, sd)) % 360
            rows.append(f"F{i},{d['lat2']:.8f},{d['lon2']:.8f},{b:.4f},{antenna}")
        truth.append(tgt)
    return "\n".join(rows) + "\n", np.array(truth)


def coverage(fixes, truth):
    t = fixes.table
    idx = t["fix"].str[1:].astype(int).to_numpy()
    has = t["semi_major_m"].notna().to_numpy()
    inside, _ = calibration.inside_ellipse(
        t["lat"].to_numpy()[has],
        t["lon"].to_numpy()[has],
        t["semi_major_m"].to_numpy()[has],
        t["semi_minor_m"].to_numpy()[has],
        t["orientation_deg"].to_numpy()[has],
        truth[idx[has], 0],
        truth[idx[has], 1],
    )
    return inside.mean(), int(has.sum())


@pytest.fixture(scope="module")
def hidden(tmp_path_factory):
    rng = np.random.default_rng(20260601)
    text, beacons = trials_sheet(rng, wild=(38.0, -55.0, 180.0, 71.0))
    path = tmp_path_factory.mktemp("trials") / "trials.csv"
    path.write_text(text)
    return path, calibration.calibrate(path)


def test_hidden_bias_and_sd_come_back(hidden):
    # Done-when of the calibration: bias within 3 standard errors, SD within 15 %, per antenna.
    _, cal = hidden
    t = cal.table.set_index("antenna")
    assert sorted(t.index) == sorted(ANTENNAS)
    for antenna, (bias, sd) in ANTENNAS.items():
        row = t.loc[antenna]
        true_se = sd / np.sqrt(row["n"])  # SE of a mean of n normal errors
        assert abs(row["bias_deg"] - bias) <= 3 * true_se, antenna
        assert row["bias_se_deg"] == pytest.approx(true_se, rel=0.2), antenna
        assert abs(row["sd_deg"] / sd - 1) <= 0.15, antenna
        assert row["dof"] == row["n"] - 1 and row["status"] == "ok"


def test_wild_trials_are_found_listed_and_left_out(hidden):
    path, cal = hidden
    wild_lines = {r + 2 for r in WILD_ROWS}  # data row k is on line k + 2 (header is line 1)
    found = set(cal.wild["line"])
    assert wild_lines <= found  # every injected reflection is caught
    assert len(found - wild_lines) <= 2  # and hardly any good trial (P(|z| > 4) = 6e-5 each)
    assert cal.table["n_wild"].sum() == len(found)
    assert cal.table["n"].sum() + len(found) == 3 * 300
    for line in wild_lines:
        assert f"{line}" in " ".join(cal.table["warning"])


def test_calibrated_field_fixes_hold_the_truth_95_percent(hidden):
    # Done-when: biased bearings with no sd column, solved with the calibration: 95 % regions hold the truth
    # 93-97 % of the time. 900 fixes: the binomial SD of the rate is 0.73 %, so the band is +-2.7 SD.
    _, cal = hidden
    text, truth = field_sheet(np.random.default_rng(7), 900)
    raw = read_bearings(text.encode())
    b = calibration.apply(raw, cal)
    assert (b.table["sd_source"] == "calibration").all()
    fixes = locate(b)
    placed = fixes.table["lat"].notna()
    assert placed.sum() >= 890
    assert (fixes.table.loc[placed, "sd_source"] == "calibration").all()
    rate, n = coverage(fixes, truth)
    assert n == placed.sum()
    assert 0.93 <= rate <= 0.97
    # the bias is gone: calibrated bearing minus the true geodesic azimuth averages ~0 per antenna
    t = b.table
    true_az = np.array(
        [WGS.Inverse(la, lo, *truth[int(f[1:])])["azi1"] for la, lo, f in zip(t["lat"], t["lon"], t["fix"])]
    )
    miss = (t["true_bearing"].to_numpy() - true_az + 180) % 360 - 180
    c = cal.table.set_index("antenna")
    for antenna, (bias, sd) in ANTENNAS.items():
        m = (t["antenna"] == antenna).to_numpy()
        tol = 3 * np.hypot(sd / np.sqrt(m.sum()), c.loc[antenna, "bias_se_deg"])
        assert abs(miss[m].mean()) <= tol, antenna
        assert abs(miss[m].mean() + c.loc[antenna, "bias_deg"] - bias) <= 3 * sd / np.sqrt(m.sum()), antenna


def test_sd_measured_on_few_trials_widens_the_region_by_f():
    # A known SD from n trials carries n - 1 degrees of freedom: k^2 = 2 F(0.95; 2, n - 1) instead of chi2_2.
    sheet = "fix,lat,lon,bearing,antenna\nA,47,15,45,y\nA,47,15.02,315,y\nA,47.02,15.01,180,y\n"
    b = read_bearings(sheet.encode())
    fixed = []
    for dof in (4, 10_000_000):
        cal = calibration.Calibration(
            table=pd.DataFrame(
                {
                    "by": ["antenna"],
                    "antenna": ["y"],
                    "group": ["y"],
                    "n": [dof + 1],
                    "bias_deg": [0.0],
                    "sd_deg": [3.0],
                    "dof": [dof],
                    "status": ["ok"],
                }
            ),
            by=("antenna",),
        )
        fixed.append(locate(calibration.apply(b, cal)).table.iloc[0])
    ratio = fixed[0]["semi_major_m"] / fixed[1]["semi_major_m"]
    assert ratio == pytest.approx(
        np.sqrt(2 * scipy.stats.f.ppf(0.95, 2, 4) / scipy.stats.chi2.ppf(0.95, 2)), rel=1e-5
    )


# --------------------------------------------------------------------------- apply: matching and fallbacks


def _cal(rows, by=("antenna",)):
    t = pd.DataFrame(rows)
    t.insert(0, "by", "+".join(by))
    t["group"] = [", ".join(f"{b}={r[b]}" for b in by) for r in rows]
    t["dof"] = t["n"] - 1
    t["status"] = t.get("status", "ok")
    return calibration.Calibration(table=t, by=by, source="cal")


def test_apply_paths_are_counted_and_sheet_is_untouched():
    sheet = (
        "fix,lat,lon,bearing,antenna,sd\n"
        "A,47,15,45,Yagi  One,\nA,47,15.02,315,yagi one,2\nA,47.02,15.01,180,loop,4\nA,47.01,15.03,250,,\n"
    )
    b = read_bearings(sheet.encode())
    cal = _cal(
        [
            {"antenna": "Yagi one", "n": 50, "bias_deg": 2.0, "sd_deg": 3.0},
            {"antenna": "whip", "n": 50, "bias_deg": -1.0, "sd_deg": 6.0},
        ]
    )
    out = calibration.apply(b, cal)
    t = out.table
    assert t["sd_source"].tolist() == ["calibration", "calibration", "sheet", ""]
    assert t["true_bearing"].tolist() == pytest.approx([43.0, 313.0, 180.0, 250.0])
    assert t["sd"].tolist()[:3] == pytest.approx([3.0, 3.0, 4.0]) and np.isnan(t["sd"].iloc[3])
    assert t["bias_removed_deg"].tolist()[:2] == [2.0, 2.0] and t["bias_removed_deg"].iloc[2:].isna().all()
    note = " ".join(out.notes)
    assert "2 bearings calibrated (antenna=Yagi one: 2)" in note
    assert "1 of them had an sd in the sheet" in note
    assert "1 kept the sheet's sd" in note and "1 has no matching group and no sd" in note
    assert "1 fix mixes calibrated bearings with bearings of unknown SD" in note
    assert b.table["true_bearing"].tolist() == pytest.approx([45.0, 315.0, 180.0, 250.0])  # input unchanged
    with pytest.raises(ValueError, match="already calibrated"):
        calibration.apply(out, cal)


def test_apply_without_the_grouping_column_matches_nothing_and_says_so():
    b = read_bearings(b"fix,lat,lon,bearing\nA,47,15,45\nA,47,15.02,315\nA,47.02,15.01,180\n")
    out = calibration.apply(b, _cal([{"antenna": "y", "n": 50, "bias_deg": 2.0, "sd_deg": 3.0}]))
    assert (out.table["sd_source"] == "").all()
    assert any("no antenna values" in n for n in out.notes)
    # a calibration with no grouping column applies to every bearing
    every = calibration.apply(b, _cal([{"n": 50, "bias_deg": 1.0, "sd_deg": 3.0}], by=()))
    assert (every.table["sd_source"] == "calibration").all()


def test_unmatched_group_values_are_named_with_their_lines_and_the_likely_group():
    b = read_bearings(b"fix,lat,lon,bearing,antenna\nA,47,15,45,H adcock\nA,47,15.02,315,Y\n"
                      b"A,47.02,15.01,180,H adcock\nB,47.1,15,45,Q\nB,47.1,15.02,315,Y\nB,47.12,15.01,180,\n")
    cal = _cal([{"antenna": "H-adcock", "n": 40, "bias_deg": 1.0, "sd_deg": 4.0},
                {"antenna": "Y", "n": 40, "bias_deg": 2.0, "sd_deg": 5.0}])
    note = " ".join(calibration.apply(b, cal).notes)
    assert ("4 have no matching group and no sd: antenna 'H adcock' (lines 2, 4: did you mean 'H-adcock'?), "
            "antenna 'Q' (line 5), antenna (blank) (line 7); the calibration has antenna H-adcock, Y") in note


def test_trials_get_no_word_about_grouping_fixes(tmp_path):
    # A trials sheet has neither fix labels nor times; the reader's "all bearings of each tag form one fix"
    # is about fixes, which trials are not.
    trials = calibration.read_trials(b"antenna,lat,lon,bearing,beacon_lat,beacon_lon\n"
                                     b"Yagi,47.869,15.174,234.2,47.86,15.16\nYagi,47.906,15.102,191.2,47.9,15.1\n")
    assert len(trials.table) == 2
    words = [p.message for p in trials.problems] + trials.notes
    assert not any("no fix labels and no times" in w for w in words)
    plain = read_bearings(b"lat,lon,bearing\n47,15,45\n47,15.02,315\n")     # the words it would have had
    assert any("no fix labels and no times" in w for w in [p.message for p in plain.problems] + plain.notes)


def test_beacon_columns_are_not_offered_as_fix_labels():
    # Beacon label and position columns run in blocks, as fix labels do; calibrate reads them as beacons, so
    # advice to name them 'fix' is wrong. A bearing sheet with a beacon_lat column is not told so either.
    rows = [f"BC{k},{47.85 + 0.03 * k},{15.1 + 0.04 * k},{47.84 + 0.03 * k + 0.001 * j},{15.12 + 0.04 * k},"
            f"{300 + j},2026-05-02T1{k}:{10 + 5 * j}:00Z" for k in range(3) for j in range(6)]
    sheet = ("beacon,beacon_lat,beacon_lon,lat,lon,bearing,time\n" + "\n".join(rows) + "\n").encode()
    trials = calibration.read_trials(sheet)
    assert len(trials.table) == 18
    assert not any("looks like fix labels" in p.message for p in trials.problems)
    plain = read_bearings(sheet)
    said = [p.message for p in plain.problems if "looks like fix labels" in p.message]
    assert not any("beacon_lat" in w or "beacon_lon" in w for w in said)
    assert any("column 'beacon'" in w for w in said)     # a label column is still offered, in a bearing sheet


def test_unusable_groups_are_not_applied():
    b = read_bearings(b"fix,lat,lon,bearing,antenna\nA,47,15,45,y\nA,47,15.02,315,y\nA,47.02,15.01,180,y\n")
    out = calibration.apply(
        b, _cal([{"antenna": "y", "n": 3, "bias_deg": 2.0, "sd_deg": 3.0, "status": "unusable"}])
    )
    assert (out.table["sd_source"] == "").all()
    assert (out.table["true_bearing"] == b.table["true_bearing"]).all()
    assert "3 belong to a group with too few trials to use" in " ".join(out.notes)


# --------------------------------------------------------------------------- reading trials


def test_beacon_positions_in_every_form(write_sheet, tmp_path):
    import pyproj

    stations = tmp_path / "stations.csv"
    stations.write_text("station,lat,lon\nhut,46.81,9.91\n")
    # UTM 32N, E 500000 N 5185000 -> lat/lon by pyproj (EPSG:32632)
    ulon, ulat = pyproj.Transformer.from_crs("EPSG:32632", "EPSG:4326", always_xy=True).transform(
        500000, 5185000
    )
    sheet = write_sheet(
        "fix,lat,lon,bearing,beacon,beacon_lat,beacon_lon,beacon_utm_zone,beacon_easting,beacon_northing\n"
        "a,46.80,9.90,30,,46.81,9.91,,,\n"
        "b,46.80,9.90,30,hut,,,,,\n"
        "c,46.80,9.90,30,,,,32N,500000,5185000\n"
    )
    tr = calibration.read_trials(sheet, stations=str(stations))
    assert not [p for p in tr.problems if p.severity == "error"]
    t = tr.table.set_index("fix")
    assert (t.loc["a", "beacon_lat"], t.loc["a", "beacon_lon"]) == pytest.approx((46.81, 9.91))
    assert (t.loc["b", "beacon_lat"], t.loc["b", "beacon_lon"]) == pytest.approx((46.81, 9.91))
    assert (t.loc["c", "beacon_lat"], t.loc["c", "beacon_lon"]) == pytest.approx((ulat, ulon), abs=1e-9)
    assert t["beacon_from"].tolist() == ["lat/lon", "station", "utm"]
    g = WGS.Inverse(46.80, 9.90, 46.81, 9.91)
    assert t.loc["a", "distance_m"] == pytest.approx(g["s12"], abs=1e-3)
    assert t.loc["a", "error_deg"] == pytest.approx(30.0 - g["azi1"], abs=1e-9)
    assert t.loc["b", "beacon"] == "hut" and t.loc["a", "beacon"] == "46.810000, 9.910000"


def test_beacon_mgrs_reads_like_a_station_mgrs(write_sheet):
    ref = "32TNS 00000 85000"
    tr = calibration.read_trials(write_sheet(f"fix,lat,lon,bearing,beacon_mgrs\na,46.80,9.90,30,{ref}\n"))
    st = read_bearings(write_sheet(f"fix,mgrs,bearing\na,{ref},30\n", "st.csv")).table
    assert (tr.table["beacon_lat"].iloc[0], tr.table["beacon_lon"].iloc[0]) == (
        st["lat"].iloc[0],
        st["lon"].iloc[0],
    )


def test_bad_beacon_cells_are_reported_with_line_and_column(write_sheet):
    sheet = write_sheet(
        "fix,lat,lon,bearing,beacon_lat,beacon_lon,beacon\n"
        "a,46.80,9.90,30,46.81,9.91,\n"
        "a,46.80,9.90,30,46.81,,\n"
        "a,46.80,9.90,30,91.5,9.91,\n"
        "a,46.80,9.90,30,,,\n"
        "a,46.80,9.90,30,,,far hut\n"
        "a,46.80,9.90,30,46.80,9.90,\n"
        "a,46.80,9.90,400,46.81,9.91,\n"
    )
    tr = calibration.read_trials(sheet)
    errs = {(p.line, p.column): p.message for p in tr.problems if p.severity == "error"}
    assert errs[(3, "beacon_lon")] == "beacon_lon is missing (beacon_lat is given)"
    assert (
        errs[(4, "beacon_lat")]
        == "91.5 is not a latitude, but 9.91 could be: beacon_lat and beacon_lon look swapped"
    )
    assert errs[(5, "")].startswith("no beacon position")
    assert "beacon 'far hut' given but no stations file" in errs[(6, "beacon")]
    assert "0.0 m from the beacon" in errs[(7, "")]
    assert "out of range for degrees" in errs[(8, "bearing")]
    assert tr.table["line"].tolist() == [2] and tr.n_rejected == 6


def test_a_sheet_without_beacon_columns_is_refused(write_sheet):
    from dfkit.problems import SheetError

    with pytest.raises(SheetError, match="needs the beacon's position"):
        calibration.read_trials(write_sheet("fix,lat,lon,bearing\na,47,15,30\n"))


def test_by_default_and_errors(write_sheet):
    rows = "\n".join(f"f,47,15,{30 + (i % 5) - 2},{'ab'[i % 2]},o{i % 3},47.01,15.01" for i in range(12))
    path = write_sheet("fix,lat,lon,bearing,antenna,observer,beacon_lat,beacon_lon\n" + rows + "\n")
    assert calibration.calibrate(path).by == ("antenna",)
    assert calibration.calibrate(path, by="Observer").by == ("observer",)
    assert calibration.calibrate(path, by="antenna,observer").table.shape[0] == 6
    assert calibration.calibrate(path, by="all").table["group"].tolist() == ["all"]
    with pytest.raises(ValueError, match="by='mast': the trials have no column 'mast'"):
        calibration.calibrate(path, by="mast")


# --------------------------------------------------------------------------- leave one beacon out


def test_leave_one_beacon_out_uses_only_the_other_beacons(write_sheet, capsys):
    # Beacon B0 stands where the antenna reads 12 deg off (a site effect); the others read true. Calibrated by
    # the others, B0's fixes must miss; calibrated by itself the check would have been fooled. Stations stand
    # on one side of each beacon (a 90-degree arc), so a common bias moves the fix instead of cancelling.
    rng = np.random.default_rng(3)
    lines = ["fix,lat,lon,bearing,antenna,beacon,beacon_lat,beacon_lon"]
    beacons = [_point(e, n) for e, n in ((0, 0), (3000, 500), (-2500, 1500), (500, -3000))]
    for b, (blat, blon) in enumerate(beacons):
        for rnd in range(6):
            for ang in rng.uniform(0, 360) + np.array([0, 30, 60, 90]):
                d = WGS.Direct(blat, blon, ang, rng.uniform(500, 1500))
                az = WGS.Inverse(d["lat2"], d["lon2"], blat, blon)["azi1"]
                err = rng.normal(12.0 if b == 0 else 0.0, 3.0)
                lines.append(
                    f"r{rnd},{d['lat2']:.8f},{d['lon2']:.8f},{(az + err) % 360:.4f},y,B{b},"
                    f"{blat:.8f},{blon:.8f}"
                )
    path = write_sheet("\n".join(lines) + "\n")
    check = calibration.leave_one_beacon_out(path)
    per = check.by_beacon
    assert per.loc["B0", "n_fixes"] == 6 and per.loc["B0", "n_with_region"] == 6
    assert per.loc["B0", "n_inside"] <= 1
    assert check.n_with_region == 24
    lo, hi = check.interval
    assert lo < check.rate < hi
    # Wilson (1927) score interval, computed independently
    k, n, z = check.n_inside, check.n_with_region, scipy.stats.norm.ppf(0.975)
    p = k / n
    centre = (p + z * z / (2 * n)) / (1 + z * z / n)
    half = z * np.sqrt(p * (1 - p) / n + z * z / (4 * n * n)) / (1 + z * z / n)
    assert check.interval == pytest.approx((centre - half, centre + half))
    # the command line says so, and exits 1
    assert check.interval[1] < 0.95
    assert main(["calibrate", str(path)]) == 1
    assert "held their beacon less often than 95 %" in capsys.readouterr().err


def test_leave_one_beacon_out_needs_two_beacons(write_sheet):
    rows = "\n".join(f"f,47,{15 + 0.01 * (i % 3)},{30 + i % 3},47.02,15.01" for i in range(6))
    check = calibration.leave_one_beacon_out(
        write_sheet("fix,lat,lon,bearing,beacon_lat,beacon_lon\n" + rows + "\n")
    )
    assert check.n_with_region == 0 and "at least two beacons" in check.summary()


# --------------------------------------------------------------------------- files and the command line


def test_calibration_file_round_trip_and_bad_rows(hidden, tmp_path):
    path, cal = hidden
    out = tmp_path / "cal.csv"
    assert main(["calibrate", str(path), "-o", str(out)]) == 1  # wild trials were left out: exit 1
    back = calibration.read_calibration(out)
    assert back.by == ("antenna",) and not back.problems
    assert back.table.set_index("antenna")["sd_deg"].to_dict() == pytest.approx(
        cal.table.set_index("antenna")["sd_deg"].to_dict(), abs=1e-3
    )
    text = out.read_text().splitlines()
    bad = tmp_path / "bad.csv"
    bad.write_text(
        "\n".join(
            [
                text[0],
                text[1],
                text[1],
                text[2].replace(",ok,", ",maybe,"),
                text[3].replace(text[3].split(",")[9], "-2"),
            ]
        )
        + "\n"
    )
    back = calibration.read_calibration(bad)
    msgs = {(p.line, p.column): p.message for p in back.problems}
    assert "listed twice (first on line 2)" in msgs[(3, "antenna")]
    assert "unknown status 'maybe'" in msgs[(4, "status")]
    assert "-2 is not a usable bearing SD" in msgs[(5, "sd_deg")]
    assert len(back.table) == 1


def test_calibration_file_errors(tmp_path):
    from dfkit.problems import SheetError

    p = tmp_path / "c.csv"
    p.write_text("antenna,bias_deg\nx,1\n")
    with pytest.raises(SheetError, match="needs the column"):
        calibration.read_calibration(p)
    p.write_text("by,antenna,n,bias_deg,sd_deg\nantenna,x,40,1,3\nobserver,y,40,1,3\n")
    with pytest.raises(SheetError, match="'by' column differs"):
        calibration.read_calibration(p)
    with pytest.raises(SheetError, match="cannot read"):
        calibration.read_calibration(tmp_path / "missing.csv")


def test_cli_calibrate_clean_trials_exit_0_and_fix_uses_it(write_sheet, tmp_path, capsys):
    rng = np.random.default_rng(11)
    lines = ["fix,lat,lon,bearing,antenna,beacon_lat,beacon_lon"]
    for b in range(3):
        blat, blon = _point(b * 2000.0, 0.0)
        for i in range(16):
            d = WGS.Direct(blat, blon, i * 22.5 + rng.uniform(-5, 5), 800 + 40 * i)
            az = WGS.Inverse(d["lat2"], d["lon2"], blat, blon)["azi1"]
            lines.append(
                f"B{b}-{i // 4},{d['lat2']:.8f},{d['lon2']:.8f},{(az + 1 + rng.normal(0, 2)) % 360:.3f},"
                f"y,{blat:.8f},{blon:.8f}"
            )
    trials = write_sheet("\n".join(lines) + "\n", "trials.csv")
    cal, fig = tmp_path / "out" / "cal.csv", tmp_path / "out" / "figs" / "calibration.png"
    code = main(
        [
            "calibrate",
            str(trials),
            "-o",
            str(cal),
            "--figures",
            str(fig.parent),
            "--trials-out",
            str(tmp_path / "t.csv"),
            "--check-out",
            str(tmp_path / "chk.csv"),
        ]
    )
    out = capsys.readouterr()
    assert code == 0, out.err
    assert "antenna=y" in out.out and "leave-one-beacon-out:" in out.out and "life-safety" in out.err
    assert fig.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert (fig.parent / "group_1_antenna_y.png").read_bytes()[:4] == b"\x89PNG"
    assert len(pd.read_csv(tmp_path / "t.csv")) == 48
    field = write_sheet(
        "fix,lat,lon,bearing,antenna\nA,46.79,9.89,45,Y\nA,46.79,9.92,315,y\nA,46.82,9.905,180,y\n",
        "field.csv",
    )
    assert main(["fix", str(field), "--calibration", str(cal), "-o", str(tmp_path / "f.csv")]) == 0
    err = capsys.readouterr().err
    assert "3 bearings calibrated (antenna=y: 3)" in err
    assert pd.read_csv(tmp_path / "f.csv")["sd_source"].tolist() == ["calibration"]
    # without the calibration the same fix sizes its region from 3 bearings, and the summary says so
    assert main(["fix", str(field), "-o", str(tmp_path / "g.csv")]) == 0
    assert "1 fix sizes its region from the SD of its own 3 bearings" in capsys.readouterr().err


def test_cli_calibrate_misuse_and_unreadable(write_sheet, tmp_path, capsys):
    good = write_sheet("fix,lat,lon,bearing,beacon_lat,beacon_lon\na,47,15,30,47.01,15.01\n")
    assert main(["calibrate", str(tmp_path / "none.csv")]) == 2
    assert main(["calibrate", str(write_sheet("fix,lat,lon,bearing\na,47,15,30\n", "nb.csv"))]) == 2
    assert main(["calibrate", str(good), "--by", "mast"]) == 2
    (tmp_path / "x.gif").write_text("not a folder")
    assert main(["calibrate", str(good), "--figures", str(tmp_path / "x.gif")]) == 2
    assert main(["fix", str(good), "--calibration", str(tmp_path / "none.csv")]) == 2
    err = capsys.readouterr().err
    assert (
        "--by: by='mast'" in err
        and "not a folder" in err
        and "cannot read the calibration" in err
    )


def test_figures_per_group(hidden):
    from dfkit import figures

    _, cal = hidden
    fig = figures.calibration_figure(cal)
    assert len(fig.axes) == 3 * len(cal.table)
    assert sum(ax.name == "polar" for ax in fig.axes) == len(cal.table)
    with pytest.raises(ValueError, match="group='nope' is not one of"):
        figures.error_histogram(cal, "nope")
    with pytest.raises(ValueError, match="has no trials to draw"):
        figures.error_rose(calibration.Calibration(table=cal.table, by=cal.by))


# --------------------------------------------------------------------------- the invented sample


def test_sample_trials_recover_their_truth():
    truth = pd.read_csv(SAMPLES / "truth_beacon_antennas.csv").set_index("antenna")
    cal = calibration.calibrate(SAMPLES / "beacon_trials.csv")
    assert cal.by == ("antenna",)
    assert sorted(cal.wild["line"]) == [31, 93, 150]  # the three wild trials the script put in
    for _, r in cal.table.iterrows():
        bias, sd = truth.loc[r["antenna"], ["bias_deg", "sd_deg"]]
        sd = np.hypot(sd, 1 / np.sqrt(12))  # + whole-degree rounding (uniform, SD 1/sqrt(12) deg)
        assert abs(r["bias_deg"] - bias) <= 3 * sd / np.sqrt(r["n"]), r["group"]
        assert abs(r["sd_deg"] - sd) <= 3 * sd / np.sqrt(2 * (r["n"] - 1)), r["group"]  # 3 SE of an SD
    assert cal.table.set_index("antenna").loc["2-element (borrowed)", "status"] == "few"


def test_sample_field_fixes_with_the_sample_calibration():
    cal = calibration.calibrate(SAMPLES / "beacon_trials.csv")
    b = calibration.apply(read_bearings(SAMPLES / "tracking_after_trials.csv"), cal)
    fixes = locate(b)
    truth = pd.read_csv(SAMPLES / "truth_tracking_after_trials.csv").set_index("fix")
    t = fixes.table[fixes.table["semi_major_m"].notna()]
    inside, _ = calibration.inside_ellipse(
        t["lat"].to_numpy(),
        t["lon"].to_numpy(),
        t["semi_major_m"].to_numpy(),
        t["semi_minor_m"].to_numpy(),
        t["orientation_deg"].to_numpy(),
        truth.loc[t["fix"], "lat"].to_numpy(),
        truth.loc[t["fix"], "lon"].to_numpy(),
    )
    assert len(t) == 60
    # at least the 1 % binomial quantile of 60 fixes at 95 %
    assert inside.sum() >= scipy.stats.binom.ppf(0.01, 60, 0.95)


def test_readme_calibration_commands_parse():
    import shlex

    from dfkit.cli import build_parser

    from .conftest import ROOT

    lines = [
        ln.split("#")[0]
        for ln in (ROOT / "README.md").read_text().splitlines()
        if ln.startswith("dfkit ") and ("calibrat" in ln)
    ]
    assert len(lines) >= 4
    for ln in lines:
        args = build_parser().parse_args(shlex.split(ln)[1:])
        assert args.command in ("calibrate", "fix", "map")


def test_trials_take_every_reading_option(write_sheet, tmp_path):
    # mils, magnetic north with a declination column, local times with --tz, station from a GPS track
    gpx = tmp_path / "walk.gpx"
    gpx.write_text(
        '<?xml version="1.0"?><gpx version="1.1" creator="t" xmlns="http://www.topografix.com/GPX/1/1">'
        "<trk><trkseg>"
        '<trkpt lat="46.8" lon="9.9"><time>2026-06-01T05:59:50Z</time></trkpt>'
        '<trkpt lat="46.8" lon="9.9"><time>2026-06-01T06:00:10Z</time></trkpt>'
        "</trkseg></trk></gpx>"
    )
    sheet = write_sheet(
        "time,bearing,unit,north,declination,beacon_lat,beacon_lon\n"
        "2026-06-01T08:00:00,600,mil,magnetic,3.0E,46.81,9.91\n"
    )
    tr = calibration.read_trials(sheet, track=str(gpx), tz="Europe/Zurich")
    assert not [p for p in tr.problems if p.severity == "error"]
    g = WGS.Inverse(46.8, 9.9, 46.81, 9.91)
    # 600 mil = 33.75 deg (NATO mil, 6400 to the circle); true = magnetic + declination east
    assert tr.table["error_deg"].iloc[0] == pytest.approx(600 * 360 / 6400 + 3.0 - g["azi1"], abs=1e-6)
