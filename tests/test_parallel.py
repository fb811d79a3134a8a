"""Fixes solved in chunks on several workers are those of one job: the same CSV bytes, the same regions."""

from __future__ import annotations

import numpy as np
import pyproj
import pytest

from dfkit import read_bearings
from dfkit.cli import main
from dfkit.export import write_fixes
from dfkit.locate import locate
from dfkit.locate.core import locate_chunk
from dfkit.locate.parallel import chunks, locate_in_chunks
from dfkit.locate.sheetwide import review

GEOD = pyproj.Geod(ellps="WGS84")


def _sheet(path, n_fix=240, seed=4):
    """Fixes of 2-5 bearings around a known transmitter (pyproj geodesics, noise 3 deg), with awkward ones mixed in:
    parallel bearings, a wild bearing, a fix whose rows are all rejected, two tags sharing labels; rows shuffled."""
    rng = np.random.default_rng(seed)
    lines = ["tag,fix,lat,lon,bearing,sd,note"]
    for i in range(n_fix):
        k = 2 + i % 4
        lat0, lon0 = rng.uniform(46, 49), rng.uniform(9, 17)
        az = rng.uniform(0, 360) + np.arange(k) * 360 / k + rng.normal(0, 15, k)
        lon_s, lat_s, back = GEOD.fwd(np.full(k, lon0), np.full(k, lat0), az, rng.uniform(400, 3000, k))
        b = (np.asarray(back) + rng.normal(0, 3, k)) % 360
        if i % 37 == 5:
            b[0] = (b[0] + 100) % 360           # one wild bearing
        if i % 41 == 7:
            b[:] = b[0]                         # all the same direction from nearby stations
        tag = "T1" if i % 2 else "T2"
        for j in range(k):
            bearing = "bad" if i % 53 == 9 else f"{b[j]:.2f}"
            lines.append(f"{tag},{i // 2},{lat_s[j]:.6f},{lon_s[j]:.6f},{bearing},3,n{j}")
    body = lines[1:]
    rng.shuffle(body)                           # a fix's rows are spread over the sheet
    path.write_text("\n".join(lines[:1] + body) + "\n")
    return path


def test_chunks_cover_every_fix_once():
    b = read_bearings(_sheet_bytes())
    parts = chunks(b, 3, min_fixes=50)
    assert parts[0][0] == 0 and parts[-1][1] == len(b.fix_index)
    assert all(a[1] == c[0] for a, c in zip(parts, parts[1:]))
    assert len(parts) == 3


def _sheet_bytes():
    import tempfile
    from pathlib import Path

    with tempfile.TemporaryDirectory() as tmp:
        return _sheet(Path(tmp) / "s.csv").read_bytes()


@pytest.mark.parametrize("use", ["processes", "threads"])
def test_same_csv_bytes_and_regions_as_one_job(tmp_path, use):
    b = read_bearings(_sheet(tmp_path / "s.csv"))
    one = locate(b)
    many = review(locate_in_chunks(b, locate_chunk, jobs=3, use=use, min_fixes=50, method="mle", level=0.95,
                                   window_min=None, robust_c=None, with_regions=True))
    assert set(one.table["status"]) > {"ok"}                      # the awkward fixes are there
    write_fixes(one, tmp_path / "one.csv")
    write_fixes(many, tmp_path / "many.csv")
    assert (tmp_path / "one.csv").read_bytes() == (tmp_path / "many.csv").read_bytes()
    assert one.bearings.equals(many.bearings)
    assert np.array_equal(one.azimuth_deg, many.azimuth_deg)       # put back in the bearings' order
    for name in ("radius_m", "centre_x", "area_m2", "g", "station_lat", "bearing_deg", "has_region"):
        assert np.array_equal(getattr(one.likelihood, name), getattr(many.likelihood, name), equal_nan=True), name
    # the exact test of a point against every fix's region: each fix's own position, shifted 200 m north
    lat = np.nan_to_num(one.table["lat"].to_numpy(), nan=47.0) + 0.0018
    lon = np.nan_to_num(one.table["lon"].to_numpy(), nan=13.0)
    assert np.array_equal(one.likelihood.contains(lat, lon), many.likelihood.contains(lat, lon))


def test_cli_jobs_gives_the_same_file(tmp_path):
    # (a sheet this small is one chunk: this checks the option's path; the chunking is checked above)
    sheet = _sheet(tmp_path / "s.csv", n_fix=120)
    a, c = tmp_path / "a.csv", tmp_path / "c.csv"
    assert main(["fix", str(sheet), "-o", str(a)]) == main(["fix", str(sheet), "-o", str(c), "--jobs", "2"])
    assert a.read_bytes() == c.read_bytes()


def test_bad_jobs_are_refused(tmp_path, capsys):
    sheet = _sheet(tmp_path / "s.csv", n_fix=4)
    assert main(["fix", str(sheet), "-o", str(tmp_path / "x.csv"), "--jobs", "-1"]) == 2
    assert "--jobs -1" in capsys.readouterr().err
    with pytest.raises(ValueError, match="jobs=-2 must be a whole number"):
        locate(read_bearings(sheet), jobs=-2)
