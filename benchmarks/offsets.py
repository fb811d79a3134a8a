"""One team's compass off: how often do dfkit's per-fix and sheet-wide group tests see it, and what do ok fixes hold?

    .venv/bin/python benchmarks/offsets.py [--hunts 300] [--offsets 0,5,10] [--n 6,9,15] [--seed 5]
                                           [--sd-kinds known,estimated] [--methods mle,andrews]

A hunt: a fox at a random place, three teams (A, B, C) starting 2.5-5 km from it in random directions,
closing in over five rounds (each round 18 % nearer, up to 15° further round); each round every team
takes one bearing: the exact geodesic azimuth (pyproj) plus Gaussian noise of 5°, team C's plus
``--offsets`` degrees. Bearings are written to whole degrees with the team in an ``observer`` column and,
for ``known``, sd 6 (as a club would guess it). The sheet of ``--hunts`` hunts (one fix each, after
``n`` bearings) is located as a whole. Per cell: share of fixes ok, the region's coverage among them,
the share of all fixes that are ok and miss the fox, the share flagged by the per-fix group test, the
share marked by the sheet-wide one, and the sheet-wide warnings. Nothing is asserted; the numbers go into
DEVELOPERS.md (coverage study).
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
    a = ap.parse_args(argv)
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
