"""The sheet's own wild lines (dfkit.locate.wildlines) and regions drawn wider for the wild risk.

Truth: fixes simulated with geographiclib (tests/simulation.py, Karney 2013), each bearing wild independently
with a known share and a known range of misses, so what dfkit learns is checked against the simulation's own
density, the regions' bound against scipy's chi-square quantile, and their edges against geographiclib residuals.
"""

import numpy as np
import pytest
from scipy.stats import chi2

from dfkit import read_bearings
from dfkit.locate import locate, wildlines
from tests.simulation import WGS, scenario


def _sheet(path, n_fix, n, sd, share, miss, seed, label="F"):
    """n_fix fixes of n bearings (SD ``sd``, given), each bearing wild with probability ``share``, ``miss``
    degrees off either side; the truth and, per fix, whether any bearing is wild."""
    rng = np.random.default_rng(seed)
    sc = scenario(n_fix, n, sd, rng, layout="random")
    wild = rng.random((n_fix, n)) < share
    off = rng.uniform(*miss, (n_fix, n)) * rng.choice([-1, 1], (n_fix, n))
    true_b = sc["bearing"].copy()      # noisy; the wild ones are set from the exact azimuth below
    for i, j in zip(*np.nonzero(wild)):
        inv = WGS.Inverse(sc["lat"][i, j], sc["lon"][i, j], sc["truth_lat"][i], sc["truth_lon"][i])
        true_b[i, j] = (inv["azi1"] + off[i, j]) % 360.0
    rows = ["fix,lat,lon,bearing,sd"] + [f"{label}{i},{sc['lat'][i, j]:.9f},{sc['lon'][i, j]:.9f},{true_b[i, j]:.6f},{sd}"
                                         for i in range(n_fix) for j in range(n)]
    path.write_text("\n".join(rows) + "\n")
    return sc["truth_lat"], sc["truth_lon"], wild.any(1)


def _two_sizes(tmp_path, share, miss, seed=5):
    """Three-line fixes (F) and five-line fixes (G) on one sheet: the five-line ones show the wild lines."""
    a = _sheet(tmp_path / "a.csv", 900, 3, 5.0, share, miss, seed)
    b = _sheet(tmp_path / "b.csv", 500, 5, 3.0, share, miss, seed + 1, label="G")
    text_a = (tmp_path / "a.csv").read_text()
    text_b = (tmp_path / "b.csv").read_text().split("\n", 1)[1]
    (tmp_path / "s.csv").write_text(text_a + text_b)
    return read_bearings(tmp_path / "s.csv"), [np.concatenate(p) for p in zip(a, b)]


def _in_order(fx, truth, n_a=900):
    """The truth in the fix table's order (labels F<i> then G<i>)."""
    lat, lon, wild = truth
    idx = np.array([int(f[1:]) + (n_a if f[0] == "G" else 0) for f in fx.table["fix"]])
    return lat[idx], lon[idx], wild[idx]


def test_the_density_learnt_is_the_simulations(tmp_path):
    # five-line fixes, SD 2°, each bearing wild with probability 0.08 at 30-50° either side: as prior odds per
    # radian that is 0.08 / 0.92 / (2 * 20° in rad) = 0.1246, 14.9 times the prior's 0.05 / 0.95 / (2 pi)
    _sheet(tmp_path / "s.csv", 800, 5, 2.0, 0.08, (30.0, 50.0), 11)
    fx = locate(read_bearings(tmp_path / "s.csv"), method="andrews", wild_rate="prior")
    lines = wildlines.learn(fx, 0.05)
    truth = 0.08 / 0.92 / (2.0 * np.radians(20.0))
    edges = wildlines.EDGES_DEG
    inside = (edges[:-1] >= 30.0) & (edges[1:] <= 50.0)
    assert lines.raises
    assert np.all((lines.density[inside] > 0.6 * truth) & (lines.density[inside] < 1.3 * truth)), lines.density
    # where no bearing was wild, the prior is kept
    assert np.all(lines.raise_by[(edges[1:] <= 20.0) | (edges[:-1] >= 60.0)] == 1.0)


def test_a_clean_sheet_learns_nothing_and_changes_nothing(tmp_path):
    _sheet(tmp_path / "s.csv", 400, 5, 3.0, 0.0, (30.0, 50.0), 12)
    b = read_bearings(tmp_path / "s.csv")
    own, prior = locate(b, method="andrews"), locate(b, method="andrews", wild_rate="prior")
    assert wildlines.learn(own, 0.05) is None or not wildlines.learn(own, 0.05).raises
    assert own.table.equals(prior.table)
    assert not any(n.startswith("wild lines") for n in own.notes)


def test_three_line_fixes_weighed_at_the_sheets_rate_are_wrong_less_often(tmp_path):
    # one bearing in ten wild, 20-60° off: a three-line fix with SD 5° can absorb such a line and look consistent;
    # the five-line fixes of the same sheet show how common they are
    b, truth = _two_sizes(tmp_path, 0.10, (20.0, 60.0))
    own, prior = locate(b, method="andrews"), locate(b, method="andrews", wild_rate="prior")
    assert any(n.startswith("wild lines") for n in own.notes)
    wrong = {}
    for name, fx in (("own", own), ("prior", prior)):
        lat, lon, _ = _in_order(fx, truth)
        three = fx.table["fix"].str.startswith("F").to_numpy()
        ok = (fx.table["status"] == "ok").to_numpy() & three
        wrong[name] = int((ok & ~fx.contains(lat, lon)).sum())
        wrong[name + "_share"] = wrong[name] / max(ok.sum(), 1)
    assert wrong["own"] < 0.75 * wrong["prior"], wrong
    assert wrong["own_share"] < wrong["prior_share"], wrong
    # the reason of a fix flagged at the sheet's rate says so
    flagged = own.table["reason"][own.table["status"] == "ambiguous"]
    assert flagged.str.contains("as common as this sheet's own").any()


def test_widened_regions_are_drawn_at_level_plus_risk(tmp_path):
    b, truth = _two_sizes(tmp_path, 0.05, (0.0, 180.0))
    fx = locate(b, method="mle", wild_rate="prior", sheet_checks=False)
    t, lik = fx.table, fx.likelihood
    risk = t["wild_risk"].to_numpy(float)
    ok = (t["status"] == "ok").to_numpy()
    with np.errstate(invalid="ignore"):
        grow = ok & (risk >= 0.005)
    assert grow.sum() > 50
    assert np.allclose(t["region_level"][grow], 0.95 + risk[grow], rtol=0, atol=1e-12)
    assert np.all(t["region_level"][ok & ~grow] == 0.95)
    # the bound on S: scipy's chi-square(2) quantile at the widened level (known SD)
    rows = np.flatnonzero(grow)
    assert np.allclose(lik.threshold[rows] - lik.s_min[rows], chi2.ppf(0.95 + risk[rows], 2), rtol=1e-9)
    # and the drawn edge lies where S reaches it, with geographiclib's azimuths (a few fixes)
    bt = fx.bearings
    for i in rows[:5]:
        _, ring_lat, ring_lon = lik.rings(np.array([i]))
        sub = bt[bt["fix_id"] == i]
        for la, lo in zip(ring_lat[0, :-1:4], ring_lon[0, :-1:4]):
            s = sum(((brg - WGS.Inverse(slat, slon, la, lo)["azi1"] + 180.0) % 360.0 - 180.0) ** 2 / sd ** 2
                    for slat, slon, brg, sd in zip(sub["lat"], sub["lon"], sub["true_bearing"], sub["sd"]))
            assert s == pytest.approx(lik.threshold[i], rel=2e-3)     # S in SDs squared, degrees cancel
