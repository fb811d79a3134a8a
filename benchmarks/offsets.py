"""One team's compass off: how often do dfkit's per-fix and sheet-wide group tests see it, and what do ok fixes hold?

    .venv/bin/python benchmarks/offsets.py [--hunts 300] [--offsets 0,5,10] [--n 6,9,15] [--seed 5]
                                           [--sd-kinds known,estimated] [--methods mle,andrews]
    .venv/bin/python benchmarks/offsets.py --one-each [--fixes 2000] [--offsets 0,1,2,3,5,10] [--seeds 5]

A hunt: a fox at a random place, three teams (A, B, C) starting 2.5-5 km from it in random directions,
closing in over five rounds (each round 18 % nearer, up to 15° further round); each round every team
takes one bearing: the exact geodesic azimuth (pyproj) plus Gaussian noise of 5°, team C's plus
``--offsets`` degrees. Bearings are written to whole degrees with the team in an ``observer`` column and,
for ``known``, sd 6 (as a club would guess it). The sheet of ``--hunts`` hunts (one fix each, after
``n`` bearings) is located as a whole. Per cell: share of fixes ok, the region's coverage among them,
the share of all fixes that are ok and miss the fox, the share flagged by the per-fix group test, the
share marked by the sheet-wide one, and the sheet-wide warnings. Nothing is asserted; the numbers go into
DEVELOPERS.md (coverage study).

``--one-each``: ``--fixes`` fixes of three bearings, stations 500-2000 m from the transmitter spread around it
(120° apart, +- 15°), one bearing each by observers A, B, C, exact azimuths (pyproj) plus noise of 5° (sd 5 given),
observer C's plus the offset; one sheet per offset and seed (``--seeds`` seeds from 1). Per row: ok share, the
region's coverage among ok fixes and among all fixes with a region, the share marked, and the warnings.
"""

from __future__ import annotations

import argparse
import os
import tempfile

import numpy as np
import pyproj

GEOD = pyproj.Geod(ellps="WGS84")


def hunts(n_hunts, off, rng):
    """Rows (hunt, round, team, lat, lon, bearing) and the foxes."""
    fox_lon, fox_lat, _ = GEOD.fwd(np.full(n_hunts, 8.2), np.full(n_hunts, 47.37), rng.uniform(0, 360, n_hunts),
                                   rng.uniform(0, 20000, n_hunts))
    rows = []
    for h in range(n_hunts):
        start = {tm: (rng.uniform(0, 360), rng.uniform(2500, 5000)) for tm in "ABC"}
        for rnd in range(5):
            for tm, (az0, d0) in start.items():
                az = az0 + rng.uniform(-15, 15) * rnd
                lon, lat, back = GEOD.fwd(fox_lon[h], fox_lat[h], az, d0 * (1 - 0.18 * rnd))
                b = (back % 360.0) + rng.normal(0, 5) + (off if tm == "C" else 0.0)
                rows.append((h, rnd, tm, lat, lon, round(b % 360.0) % 360))
    return rows, np.asarray(fox_lat), np.asarray(fox_lon)


def one_each(n_fix, off, rng):
    """Rows (fix, observer, lat, lon, bearing) and the transmitters."""
    lat0, lon0 = rng.uniform(46.0, 48.0, n_fix), rng.uniform(7.0, 10.0, n_fix)
    ang = rng.uniform(0, 360, (n_fix, 1)) + np.arange(3)[None, :] * 120.0 + rng.normal(0, 15, (n_fix, 3))
    dist = rng.uniform(500.0, 2000.0, (n_fix, 3))
    lon, lat, back = GEOD.fwd(np.repeat(lon0, 3), np.repeat(lat0, 3), ang.ravel(), dist.ravel())
    b = np.asarray(back) % 360.0 + rng.normal(0, 5.0, 3 * n_fix)     # back: from the station to the transmitter
    b = (b + np.where(np.tile(np.arange(3), n_fix) == 2, off, 0.0)) % 360.0
    rows = [(i // 3, "ABC"[i % 3], lat[i], lon[i], b[i]) for i in range(3 * n_fix)]
    return rows, lat0, lon0


def run_one_each(a):
    import dfkit
    from dfkit.locate import locate

    print("| C offset | seed | ok | ok: region | all: region | marked | warnings |\n|---|---|---|---|---|---|---|")
    for off in (float(v) for v in a.offsets.split(",")):
        for seed in range(1, a.seeds + 1):
            rows, tlat, tlon = one_each(a.fixes, off, np.random.default_rng([seed, int(off * 10)]))
            with tempfile.TemporaryDirectory() as d:
                path = os.path.join(d, "one.csv")
                with open(path, "w") as fh:
                    fh.write("fix,lat,lon,bearing,sd,observer\n")
                    for i, who, lat, lon, b in rows:
                        fh.write(f"F{i},{lat:.8f},{lon:.8f},{b:.1f},5,{who}\n")
                fx = locate(dfkit.read_bearings(path))
            t = fx.table
            ok = (t["status"] == "ok").to_numpy()
            inside = fx.contains(tlat, tlon)
            marked = t["reason"].str.contains("over the sheet").mean()
            said = " / ".join(w.split(" (")[0] for w in fx.warnings)
            cover = f"{100 * inside[ok].mean():.1f} %" if ok.any() else ""
            print(f"| {off:g}° | {seed} | {100 * ok.mean():.1f} % | {cover} | {100 * np.nanmean(inside):.1f} % | "
                  f"{100 * marked:.1f} % | {said} |", flush=True)


def main(argv=None):
    import dfkit
    from dfkit.locate import locate

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--hunts", type=int, default=300)
    ap.add_argument("--offsets", default="0,5,10")
    ap.add_argument("--n", default="6,9,15")
    ap.add_argument("--seed", type=int, default=5)
    ap.add_argument("--sd-kinds", default="known,estimated")
    ap.add_argument("--methods", default="mle,andrews")
    ap.add_argument("--one-each", action="store_true", help="three bearings per fix, one per observer")
    ap.add_argument("--fixes", type=int, default=2000)
    ap.add_argument("--seeds", type=int, default=5)
    a = ap.parse_args(argv)
    if a.one_each:
        return run_one_each(a)
    print("| method | SD | offset | n | ok | ok: region | ok and missing (of all) | per-fix test | sheet-wide mark | "
          "warnings |\n|---|---|---|---|---|---|---|---|---|---|")
    for off in (float(v) for v in a.offsets.split(",")):
        rows, flat, flon = hunts(a.hunts, off, np.random.default_rng([a.seed, int(off * 10)]))
        for n in (int(v) for v in a.n.split(",")):
            for kind in a.sd_kinds.split(","):
                with tempfile.TemporaryDirectory() as d:
                    path = os.path.join(d, "hunts.csv")
                    with open(path, "w") as fh:
                        fh.write("fix,lat,lon,bearing,observer" + (",sd" if kind == "known" else "") + "\n")
                        for h, rnd, tm, lat, lon, b in rows:
                            if 3 * rnd + "ABC".index(tm) < n:
                                fh.write(f"H{h},{lat:.6f},{lon:.6f},{b}," + tm + (",6" if kind == "known" else "")
                                         + "\n")
                    bearings = dfkit.read_bearings(path)
                for method in a.methods.split(","):
                    fx = locate(bearings, method=method)
                    t = fx.table
                    ok = (t["status"] == "ok").to_numpy()
                    inside = fx.contains(flat, flon)
                    per_fix = t["reason"].str.contains("of the other bearings of this fix").mean()
                    marked = t["reason"].str.contains("over the sheet").mean()
                    said = "; ".join(w.split(":")[0] for w in fx.warnings)
                    cover = f"{100 * inside[ok].mean():.1f} %" if ok.any() else ""
                    print(f"| {method} | {kind} | {off:g}° | {n} | {100 * ok.mean():.1f} % | {cover} | "
                          f"{100 * (ok & ~inside).mean():.1f} % | {100 * per_fix:.1f} % | {100 * marked:.1f} % | "
                          f"{said} |", flush=True)


if __name__ == "__main__":
    main()
