"""Do 95 % regions hold the truth 95 % of the time? Seeded simulations with a known truth (tests/simulation.py).

Each cell simulates 1000-1500 fixes, so a true 95 % rate falls within 93-97 % with probability above 99.5 %
(binomial standard deviation 0.55-0.7 %). The full study, every method and cell, is benchmarks/coverage.py.
"""

import numpy as np
import pytest

from dfkit import read_bearings
from dfkit.locate import WITH_POSITION, locate

from .simulation import distance_m, scenario, sheet_text


def run(write_sheet, n_fix, n, sd, seed, method, known, **kw):
    sc = scenario(n_fix, n, sd, np.random.default_rng(seed), **kw)
    fixes = locate(read_bearings(write_sheet(sheet_text(sc, sd if known else None))), method=method)
    return sc, fixes


def rates(sc, fixes):
    t = fixes.table
    status = t["status"].to_numpy()
    with_pos = np.isin(status, WITH_POSITION)
    has_region = with_pos & fixes.likelihood.has_region
    has_ellipse = with_pos & np.isfinite(t["semi_major_m"].to_numpy(float))
    in_region = fixes.contains(sc["truth_lat"], sc["truth_lon"])
    in_ellipse = fixes.contains(sc["truth_lat"], sc["truth_lon"], kind="ellipse")
    ok = status == "ok"
    return dict(region=in_region[has_region].mean(), ellipse=in_ellipse[has_ellipse].mean(),
                without_region=1 - has_region.mean(), not_ok=(~ok).mean(),
                ok_region=in_region[ok].mean() if ok.any() else np.nan)


def oracle_error(write_sheet, sc, known):
    """Errors of Lenth's fit of each fix without its wild bearing (an oracle that knows which one it is)."""
    keep = np.ones(sc["lat"].shape, bool)
    keep[np.arange(len(keep)), sc["bad"]] = False
    n = sc["lat"].shape[1] - 1
    oracle_sc = dict(sc, lat=sc["lat"][keep].reshape(-1, n), lon=sc["lon"][keep].reshape(-1, n),
                     bearing=sc["bearing"][keep].reshape(-1, n))
    oracle = locate(read_bearings(write_sheet(sheet_text(oracle_sc, 5.0 if known else None), "oracle.csv")),
                    method="mle").table
    return distance_m(oracle["lat"], oracle["lon"], sc["truth_lat"], sc["truth_lon"])


def test_least_squares_with_a_known_sd(write_sheet):
    # unweighted least squares needs its sandwich covariance (White 1980) to hold 95 %
    sc, fixes = run(write_sheet, 1500, 3, 5.0, 101, "lsq", True)
    r = rates(sc, fixes)
    assert 0.93 <= r["ellipse"] <= 0.97
    assert 0.93 <= r["region"] <= 0.97


@pytest.mark.parametrize("method", ["huber", "andrews"])
@pytest.mark.parametrize("n", [4, 5])
def test_robust_methods_with_an_estimated_sd(write_sheet, method, n):
    sc, fixes = run(write_sheet, 1000, n, 5.0, 200 + n, method, False)
    r = rates(sc, fixes)
    assert 0.92 <= r["region"] <= 0.98
    assert 0.92 <= r["ellipse"] <= 0.98
    assert r["without_region"] <= 0.01


@pytest.mark.parametrize("known, seed", [(True, 301), (False, 302)])
def test_one_reflected_bearing_in_five_with_a_robust_method(write_sheet, known, seed):
    # Each fix has one bearing 40-120 degrees off. Andrews: close to an oracle that knows the bad bearing
    # (Lenth's fit of the other four), nearly all fixes ok, coverage near 95 %. With no SD given it drops the
    # reflection when all five together would need an implausible SD (above 20 degrees), whatever the spread
    # of the kept four, so its regions are not drawn from a spread selected for being small.
    sc, fixes = run(write_sheet, 1500, 5, 5.0, seed, "andrews", known, outlier=True)
    r = rates(sc, fixes)
    t = fixes.table
    err = distance_m(t["lat"], t["lon"], sc["truth_lat"], sc["truth_lon"])
    assert np.nanmedian(err) <= 1.25 * np.nanmedian(oracle_error(write_sheet, sc, known))
    # few not ok: 1.1-2.4 % (seeds 301, 5, 6) before the wild risk of fixes that dropped a line was weighed, 2.9-4.3 %
    # after (those flagged hold the transmitter about 75 % of the time: each of them had another answer that the
    # bearings supported); with binomial slack for 1500 fixes
    assert r["not_ok"] <= 0.055
    assert 0.92 <= r["region"] <= 0.97
    assert 0.92 <= r["ok_region"] <= 0.97


@pytest.mark.parametrize("method, known, n, seed, floor", [
    # (the floor allows for sampling: about 1390 ok fixes in the first case, 180 in the second, 0.7 and 1.9 %
    # binomial standard deviations around the 93 % aimed at)
    ("andrews", True, 4, 702, 0.925),
    ("mle", False, 6, 703, 0.90),
])
def test_ok_fixes_hold_the_truth_when_a_bearing_is_wild(write_sheet, method, known, n, seed, floor):
    # Every fix has one bearing 40-120 degrees off. Whatever becomes of the others, the fixes called ok must
    # keep the region's promise: a wild bearing that another set of bearings contradicts makes the fix
    # ambiguous, not ok.
    sc, fixes = run(write_sheet, 1500, n, 5.0, seed, method, known, outlier=True)
    assert rates(sc, fixes)["ok_region"] >= floor


@pytest.mark.parametrize("known, n, seed, most", [(True, 4, 705, 0.01), (False, 6, 706, 0.02)])
def test_clean_fixes_are_seldom_called_ambiguous(write_sheet, known, n, seed, most):
    # Without a wild bearing, leaving one out moves the answer out of the region only when that bearing both
    # disagrees and carries much of the fix (see dfkit.locate.rivals): rare. (The wild risk, which weighs how
    # likely a bearing is to be wild whether or not it disagrees, is tested below.)
    sc, fixes = run(write_sheet, 1000, n, 5.0, seed, "mle", known)
    t = fixes.table
    by_risk = t["reason"].str.contains("may rest on a wild line", na=False)
    assert ((t["status"] == "ambiguous") & ~by_risk).mean() <= most


def test_the_wild_risk_keeps_ok_fixes_closer_to_their_promise(write_sheet):
    # A sheet where 15 % of fixes have one bearing 30-60° off, three bearings from random directions 500-3000 m
    # away, SD 5° given: a wild bearing that the fit absorbs goes unseen by every residual test, and such fixes
    # came out ok holding the transmitter none of the time (92 % of all ok fixes held it, benchmarks/coverage.py).
    # Weighing the chance that a bearing is wild (one in 20) flags the fixes that rest on one bearing: on the same
    # sheet, the ok fixes must hold the truth more often, and none that is ok may carry a risk of 5 % or more.
    sc = scenario(1500, 3, 5.0, np.random.default_rng(707), outlier=0.15, wild=(30.0, 60.0), layout="random",
                  ranges=(500.0, 3000.0))
    b = read_bearings(write_sheet(sheet_text(sc, 5.0)))
    inside = {}
    for share in (0.0, 0.05):
        fixes = locate(b, wild_share=share, sheet_checks=False)
        ok = (fixes.table["status"] == "ok").to_numpy()
        inside[share] = fixes.contains(sc["truth_lat"], sc["truth_lon"])[ok].mean()
        if share:
            assert (fixes.table["wild_risk"].to_numpy()[ok] < 0.05).all()
    assert inside[0.05] >= inside[0.0] + 0.005, inside


@pytest.mark.parametrize("crossing", [30, 90, 150])
def test_two_bearing_regions_with_a_known_sd(write_sheet, crossing):
    # With two bearings and a known SD the likelihood-ratio region has exact coverage where the lines
    # cross in front of both stations (S at the truth is chi-square with 2 degrees of freedom).
    sc, fixes = run(write_sheet, 1500, 2, 5.0, 400 + crossing, "mle", True, crossing_deg=crossing)
    r = rates(sc, fixes)
    assert 0.93 <= r["region"] <= 0.97


def test_three_bearings_with_an_estimated_sd(write_sheet):
    # one degree of freedom: F(2, 1) regions are wide, often open, and hold at least their 95 % (more, where an
    # estimate below the plausibility floor is raised to it)
    sc, fixes = run(write_sheet, 1500, 3, 5.0, 501, "mle", False)
    r = rates(sc, fixes)
    assert r["region"] >= 0.945


@pytest.mark.parametrize("sd, seed", [(5.0, 503), (10.0, 504)])
def test_ok_three_bearing_fixes_with_an_estimated_sd_keep_their_promise(write_sheet, sd, seed):
    # Calling a fix ok only when its region is bounded selects the fixes whose SD estimate (one degree of
    # freedom) came out small: in a linear model the ok fixes hold the truth 1 - 0.05 / P(bounded) of the time
    # (the misses sit among the smallest estimates), 91-92 % with observers in random directions 500-3000 m
    # away and a 5 degree SD, 87 % with 10 degrees, before estimates were kept above a plausible floor.
    sc, fixes = run(write_sheet, 1500, 3, sd, seed, "mle", False, layout="random", ranges=(500.0, 3000.0))
    r = rates(sc, fixes)
    ok = fixes.table["status"] == "ok"
    assert ok.sum() >= 400                       # enough ok fixes for the rate to mean something (SE <= 1.1 %)
    assert r["ok_region"] >= 0.945


def test_clean_fixes_rarely_lose_a_good_bearing(write_sheet):
    # With the SD unknown, Andrews drops a bearing only when the others show it to be wild (a Bonferroni
    # outlier test at 1 %): in clean data at most about 1 fix in 100 loses one.
    sc, fixes = run(write_sheet, 1000, 5, 5.0, 601, "andrews", False)
    dropped = fixes.bearings.groupby("fix_id")["weight"].min() <= 0
    assert dropped.mean() <= 0.02
