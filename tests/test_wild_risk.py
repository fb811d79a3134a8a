"""The wild risk (dfkit.locate.wild): the chance that a fix's region misses because one bearing is wild.

The reference is a brute-force Bayesian computation on a 10 m grid with pyproj's geodesics (Karney 2013) alone:
the same model (each bearing wild with prior probability q, a wild bearing uniform over the circle, the others
Gaussian with the known SD, a flat prior on the transmitter within twice the farthest observer's range of the
fix), integrated numerically instead of by Laplace's method and quadrature. The region is the likelihood-ratio
region S(x) <= min S + chi2_2(0.95), also found on the grid.
"""

from __future__ import annotations

import numpy as np
import pyproj
import pytest

import dfkit
from dfkit.locate import locate
from dfkit.locate.wild import inside_shares

from .simulation import disc_misfits

GEOD = pyproj.Geod(ellps="WGS84")
SD = 5.0


def _sheet(write_sheet, stations, offsets, sd=SD, lat0=61.2, lon0=24.6):
    """One fix: stations at (azimuth from the transmitter [°], distance [m]), bearings off the truth by ``offsets``,
    with SD ``sd`` [°] (one for all, or one a bearing)."""
    rows = []
    sds = np.broadcast_to(np.asarray(sd, float), (len(stations),))
    for (az, dist), off, s in zip(stations, offsets, sds):
        lon, lat, back = GEOD.fwd(lon0, lat0, az, dist)
        rows.append(f"A,{lat:.9f},{lon:.9f},{(back + off) % 360:.6f},{s:g}")
    return write_sheet("fix,lat,lon,bearing,sd\n" + "\n".join(rows) + "\n")


def _grid_risk(b, flat, flon, share=0.05, step=10.0):
    z, s = disc_misfits(b.table, flat, flon, step)
    S = (z * z).sum(0)
    region = S <= S.min() - 2.0 * np.log(0.05)
    log_norm = -0.5 * np.log(2.0 * np.pi) - np.log(s)          # each Gaussian bearing's density [1/rad]
    e0 = np.exp(-0.5 * S + log_norm.sum()).sum()
    ek, lost = [], []
    for k in range(len(s)):
        lk = np.exp(-0.5 * (S - z[k] ** 2) + log_norm.sum() - log_norm[k]) / (2.0 * np.pi)
        ek.append(lk.sum())
        lost.append(lk[~region].sum() / lk.sum())
    odds = share / (1.0 - share) * np.array(ek) / e0
    return float((odds / (1.0 + odds.sum()) * np.array(lost)).sum())


CASES = {
    # observers around the transmitter: every bearing is checked by the others
    "spread": ([(0, 1500), (120, 1800), (240, 1200)], [1.0, -2.0, 3.0]),
    # two nearly parallel lines crossed by a third that is 25° off: the third carries the fix
    "lever": ([(0, 1500), (25, 2000), (110, 900)], [2.0, -3.0, 25.0]),
    "lever, smaller error": ([(0, 1500), (20, 2200), (100, 1000)], [3.0, -4.0, -18.0]),
    "four bearings": ([(0, 1500), (15, 2000), (100, 900), (200, 2500)], [2.0, -3.0, 8.0, 1.0]),
    # the two lines left when the third is dropped are 2.4° apart and meet far along them (a reviewer's case)
    "nearly parallel": ([(2.4, 1760), (4.8, 1692), (92.6, 2422)], [-2.11, -15.3, 1.2], 8.0),
    # very different SDs
    "mixed SDs": ([(0, 1500), (25, 2000), (110, 900)], [4.0, -6.0, 3.0], (10.0, 10.0, 1.5)),
}


@pytest.mark.parametrize("name", list(CASES))
def test_wild_risk_agrees_with_a_brute_force_integral(write_sheet, name):
    b = dfkit.read_bearings(_sheet(write_sheet, *CASES[name]))
    fix = locate(b, sheet_checks=False).table.iloc[0]
    reference = _grid_risk(b, fix["lat"], fix["lon"], step=6.0 if name == "nearly parallel" else 10.0)
    # quadrature along the lines (two bearings left), Laplace's method (three), 32 points for the shares
    assert fix["wild_risk"] == pytest.approx(reference, rel=0.15, abs=0.002)


def test_a_fix_resting_on_one_bearing_is_flagged_and_says_which(write_sheet):
    # two nearly parallel lines and a third 25° off that they cannot check (brute force: 15 % risk)
    stations, offsets = CASES["lever"]
    path = _sheet(write_sheet, stations, offsets)
    fix = locate(dfkit.read_bearings(path)).table.iloc[0]
    assert fix["status"] == "ambiguous"
    assert fix["wild_risk"] >= 0.05
    assert "may rest on a wild line 4" in fix["reason"]      # line 4: the third bearing (line 1 is the header)
    assert "the other two lines cross at" in fix["reason"] and "one bearing in 20" in fix["reason"]


def test_without_the_weighing_the_same_fix_is_ok(write_sheet):
    stations, offsets = CASES["lever"]
    fix = locate(dfkit.read_bearings(_sheet(write_sheet, stations, offsets)), wild_share=0.0).table.iloc[0]
    assert fix["status"] == "ok"
    assert np.isnan(fix["wild_risk"])            # not weighed: empty, not a reassuring 0


def test_a_well_checked_fix_keeps_a_small_risk(write_sheet):
    stations, offsets = CASES["spread"]
    fix = locate(dfkit.read_bearings(_sheet(write_sheet, stations, offsets))).table.iloc[0]
    assert fix["status"] == "ok"
    assert fix["wild_risk"] < 0.01


def test_a_larger_prior_share_raises_the_risk(write_sheet):
    b = dfkit.read_bearings(_sheet(write_sheet, *CASES["lever, smaller error"]))
    low = locate(b, wild_share=0.01).table["wild_risk"].iloc[0]
    high = locate(b, wild_share=0.2).table["wild_risk"].iloc[0]
    assert 0 < low < high


def test_risk_is_not_weighed_where_nothing_can_be_said(write_sheet):
    # two bearings (nothing checks them) and an estimated SD: NaN, not a number that looks like a verdict
    two = write_sheet("fix,lat,lon,bearing,sd\nA,61.20,24.60,45,5\nA,61.20,24.64,315,5\n")
    assert np.isnan(locate(dfkit.read_bearings(two)).table["wild_risk"].iloc[0])
    stations, offsets = CASES["spread"]
    no_sd = _sheet(write_sheet, stations, offsets).read_text().replace(",5.0", "").replace(",sd", "")
    fix = locate(dfkit.read_bearings(write_sheet(no_sd))).table.iloc[0]
    assert np.isnan(fix["wild_risk"])


@pytest.mark.parametrize("bad", [-0.1, 0.3, 1.0, 2, "5%"])
def test_wild_share_must_be_a_share(write_sheet, bad):
    b = dfkit.read_bearings(_sheet(write_sheet, *CASES["spread"]))
    with pytest.raises(ValueError, match="wild_share"):
        locate(b, wild_share=bad)


def test_inside_shares_match_sampling():
    # the share of a Gaussian inside an ellipse, against 200,000 draws with numpy's generator
    rng = np.random.default_rng(3)
    mean = np.array([120.0, -40.0])
    cov = np.array([[90.0 ** 2, 0.6 * 90 * 40], [0.6 * 90 * 40, 40.0 ** 2]])
    jk = np.linalg.inv(cov)
    j0 = np.array([[1 / 150.0 ** 2, 0.0], [0.0, 1 / 60.0 ** 2]])
    gap = 5.99
    draws = rng.multivariate_normal(mean, cov, 200_000)
    q = np.einsum("ij,jk,ik->i", draws, j0, draws)
    expected = (q <= gap).mean()
    (got,) = inside_shares(np.array([mean[0]]), np.array([mean[1]]), (jk[0, 0:1], jk[0, 1:2], jk[1, 1:2]),
                           [(np.array([j0[0, 0]]), np.array([0.0]), np.array([j0[1, 1]]), np.array([gap]), 0.0, 0.0)])
    assert got[0] == pytest.approx(expected, abs=0.05)       # 32 fixed points: a few per cent


def test_the_command_line_takes_the_share_as_a_number_or_a_percentage(write_sheet, tmp_path, capsys):
    from dfkit.cli import main

    import pandas as pd

    sheet = str(_sheet(write_sheet, *CASES["lever"]))
    out = tmp_path / "f.csv"
    # exit 1: a fix is flagged (README: 0 all ok, 1 some fixes flagged or rows rejected)
    assert main(["fix", sheet, "-o", str(out), "--wild-share", "5%"]) == 1
    t = pd.read_csv(out)
    assert t["status"].tolist() == ["ambiguous"] and t["wild_risk"].iloc[0] >= 0.05
    assert main(["fix", sheet, "-o", str(out), "--wild-share", "0"]) == 0
    assert pd.read_csv(out)["status"].tolist() == ["ok"]
    capsys.readouterr()
    assert main(["fix", sheet, "-o", str(out), "--wild-share", "0.5"]) == 2        # misuse: above the cap
    assert "--wild-share: '0.5' must be a share from 0 to 0.25" in capsys.readouterr().err
