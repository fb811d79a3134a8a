"""Fix-label headers as field sheets spell them (issue: second field trial, reading side). Before, a column headed
``Fix ID`` was taken for dfkit's own result column and discarded, the bearings were grouped by time and two fixes
15 minutes apart merged into one `ok` fix whose region held neither position; ``Fix #`` and ``Fix No`` were not
read as labels at all."""

from pathlib import Path

import numpy as np
import pandas as pd
import pyproj
import pytest

from dfkit import read_bearings
from dfkit.locate import locate

DATA = Path(__file__).parent / "data"
GEOD = pyproj.Geod(ellps="WGS84")

# Two fixes of one tag, no times: three stations around each of two transmitters 11 km apart, exact bearings to
# them by pyproj's geodesics (Karney 2013), so the truth is known independently of dfkit.
TRUTHS = {"1": (46.41, -84.29), "2": (46.51, -84.29)}
OFFSETS = [(225.0, 1400.0), (135.0, 1600.0), (0.0, 1800.0)]    # azimuth from the transmitter [deg], distance [m]


def sheet(header: str, extra: str = "") -> str:
    rows = [f"{header},tag,lat,lon,bearing,sd{',' + extra if extra else ''}"]
    for label, (tlat, tlon) in TRUTHS.items():
        for k, (az, dist) in enumerate(OFFSETS):
            lon, lat, _ = GEOD.fwd(tlon, tlat, az, dist)
            b, _, _ = GEOD.inv(lon, lat, tlon, tlat)
            rows.append(f"{label},150.112,{lat:.7f},{lon:.7f},{b % 360:.2f},3"
                        + (f",{'AB'[k % 2]}" if extra else ""))
    return "\n".join(rows) + "\n"


@pytest.mark.parametrize("header", ["Fix ID", "fix_id", "FIX ID", "Fix #", "Fix#", "Fix No", "Fix No.", "fix no",
                                    "FixNo", "fix_number", "Fix Number", "fix_nr", "Fix Nr.", "Fix-ID", "fixid",
                                    "Fix N°", "fix_num", "Fix Name"])
def test_fix_label_spellings_are_read_as_labels(header):
    b = read_bearings(sheet(header).encode())
    assert sorted(b.fix_index["fix"]) == ["1", "2"]
    assert (b.table.groupby("fix")["line"].count() == 3).all()
    said = [p for p in b.problems if p.column == header]
    assert said and "read as 'fix'" in said[0].message and said[0].severity == "warning"
    fixes = locate(b)
    got = fixes.table.set_index("fix")[["lat", "lon"]]
    for label, (tlat, tlon) in TRUTHS.items():
        _, _, miss = GEOD.inv(got.at[label, "lon"], got.at[label, "lat"], tlon, tlat)
        assert miss < 5.0        # exact bearings meet at the truth


def test_fix_id_beside_a_fix_column_is_kept_and_said():
    text = sheet("fix").replace("fix,tag", "fix,Fix ID,tag", 1)
    rows = text.splitlines()
    rows[1:] = [r.replace(",", ",9,", 1) for r in rows[1:]]   # a user's own numbering, not the label
    b = read_bearings(("\n".join(rows) + "\n").encode())
    assert sorted(b.fix_index["fix"]) == ["1", "2"]
    assert (b.table["fix_id_in_sheet"] == "9").all()
    said = [p for p in b.problems if p.column == "Fix ID"]
    assert said and "not read as the fix label" in said[0].message and "'fix'" in said[0].message


def test_fix_id_in_a_table_dfkit_wrote_is_recomputed():
    """``check -o`` writes fix, fix_id and the result columns: there fix_id is dfkit's own number."""
    text = sheet("fix").replace("fix,tag", "fix_id,fix,true_bearing,tag", 1)
    rows = text.splitlines()
    rows[1:] = [("7," + r.split(",", 1)[0] + ",0," + r.split(",", 1)[1]) for r in rows[1:]]
    b = read_bearings(("\n".join(rows) + "\n").encode())
    assert sorted(b.fix_index["fix"]) == ["1", "2"]
    assert any("fix_id" in p.message and "recomputed" in p.message for p in b.problems)
    assert not any(p.column == "fix_id" and "read as 'fix'" in p.message for p in b.problems)


def test_two_label_spellings_the_first_is_read_the_other_kept():
    text = sheet("Fix ID").replace("Fix ID,", "Fix ID,label,", 1)
    rows = text.splitlines()
    rows[1:] = [r.replace(",", ",x,", 1) for r in rows[1:]]
    b = read_bearings(("\n".join(rows) + "\n").encode())
    assert sorted(b.fix_index["fix"]) == ["1", "2"]
    assert (b.table["label"] == "x").all()
    said = [p for p in b.problems if p.column == "label"]
    assert said and "'Fix ID' read as the fix label" in said[0].message


def test_pairs_of_fixes_fifteen_minutes_apart_stay_800_fixes():
    """800 three-bearing fixes, in 400 pairs 15 min apart (the animal moved 200-600 m between them), header
    'Fix ID'; positions and noisy bearings (SD 5°) simulated with geographiclib by an outside tester, truth beside
    the sheet. Read as labels, every fix is its own: 800 fixes, and the `ok` regions hold the truth at about their
    95 % level (a merged pair held one of its two positions in about 40 %)."""
    b = read_bearings(DATA / "fixid_pairs.csv")
    truth = pd.read_csv(DATA / "fixid_pairs_truth.csv", dtype={"fix": str}).set_index("fix")
    assert len(b.fix_index) == 800
    assert sorted(b.fix_index["fix"]) == sorted(truth.index)
    assert (b.table.groupby("fix")["line"].count() == 3).all()
    fixes = locate(b)
    t = fixes.table
    ok = (t["status"] == "ok").to_numpy()
    assert ok.mean() > 0.9
    held = fixes.contains(truth.loc[t["fix"], "lat"].to_numpy(), truth.loc[t["fix"], "lon"].to_numpy())
    share = held[ok].mean()
    # binomial: 95 % of ~790 fixes has an SD of 0.8 %; 0.91 is five SDs below
    assert share > 0.91, share


def test_a_column_that_looks_like_labels_is_named():
    text = sheet("Set", extra="observer")
    b = read_bearings(text.encode())
    said = [p for p in b.problems if "'set' looks like fix labels" in p.message]
    assert len(said) == 1 and said[0].severity == "warning" and "name it 'fix'" in said[0].message
    assert not any("'observer'" in p.message for p in b.problems)


def test_columns_that_do_not_look_like_labels_are_not_named():
    """An observer on every row of the sheet (one long run) and a measurement that never repeats are not labels."""
    text = sheet("Team").replace("Team,", "Team,temp,", 1)
    rows = text.splitlines()
    rows[1:] = [f"JK,{10 + k * 0.37:.2f}," + r.split(",", 1)[1] for k, r in enumerate(rows[1:])]
    b = read_bearings(("\n".join(rows) + "\n").encode())
    assert not any("looks like fix labels" in p.message for p in b.problems)
    assert np.isin(["team", "temp"], list(b.table.columns)).all()
