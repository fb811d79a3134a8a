"""Planning the next bearing: speed, and whether averaging over the region picks better spots.

    .venv/bin/python benchmarks/bench_planning.py [--hunts 300] [--seed 7] [--skip-study]
                                                  [--skip-speed]

1. Speed: `plan_next_bearing` on the sample hunt with its 12 spots, and on grids of about 300, 2,800 and
   14,000 spots, for basis 'point' and 'region' (600 positions); wall time and peak memory (ru_maxrss) of
   this process.
2. Study: invented hunts (a transmitter, 2-3 or 3-5 stations at 0.5-4 km, bearings with SD 3, 5 or 8 deg,
   10 candidate spots at 0.3-6 km). Each basis picks its best spot; each pick is judged by the 95 % area its
   bearing would give at the *true* position (Fisher information with pyproj geodesics, independent of
   dfkit's code), as a ratio to the best spot an oracle that knows the truth would pick. Printed: the
   geometric and arithmetic mean of that ratio, how often the oracle's spot was picked, the 90th percentile,
   and how often the bases agree.
Nothing is asserted: numbers go into DEVELOPERS.md, not into tests.
"""

from __future__ import annotations

import argparse
import os
import resource
import sys
import tempfile
import time

import numpy as np
import pandas as pd
import pyproj

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))

from dfkit.observations import read_bearings  # noqa: E402
from dfkit.planning import plan_next_bearing, read_spots  # noqa: E402

GEOD = pyproj.Geod(ellps="WGS84")
HERE = os.path.dirname(os.path.abspath(__file__))
SAMPLES = os.path.join(HERE, "..", "sample_bearings")


def peak_mb():
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def speed():
    b = read_bearings(os.path.join(SAMPLES, "hunt.csv"), window_min=90)
    spots = read_spots(os.path.join(SAMPLES, "hunt_spots.csv"))
    cases = [
        ("12 spots (sample hunt)", dict(spots=spots)),
        ("grid 3000 m / 300 m", dict(around_m=3000.0, step_m=300.0)),
        ("grid 3000 m / 100 m", dict(around_m=3000.0, step_m=100.0)),
        ("grid 4000 m / 60 m", dict(around_m=4000.0, step_m=60.0)),
    ]
    print("speed (fox-2 of the sample hunt, 8 bearings)")
    for name, kw in cases:
        for basis in ("point", "region"):
            t0 = time.perf_counter()
            p = plan_next_bearing(b, "fox-2", basis=basis, **kw)
            dt = time.perf_counter() - t0
            print(f"  {name:<24} {basis:<7} {len(p.table):>6} spots  {dt:7.3f} s   peak {peak_mb():6.0f} MB")
    from dfkit.maps.plan import plan_map

    print("map (plan_map(...).html(), basis 'point')")
    for name, kw in cases[:3]:
        p = plan_next_bearing(b, "fox-2", **kw)
        t0 = time.perf_counter()
        page = plan_map(p).html()
        dt = time.perf_counter() - t0
        print(f"  {name:<24} {len(page) / 1e6:6.2f} MB  {dt:6.2f} s   peak {peak_mb():6.0f} MB")


def area_at(lat, lon, stations, sd_deg, k2=-2.0 * np.log(0.05)):
    la = np.array([s[0] for s in stations])
    lo = np.array([s[1] for s in stations])
    az, _, d = GEOD.inv(np.full(len(la), lon), np.full(len(la), lat), lo, la)
    a = np.radians(az)
    f = 1.0 / (np.asarray(d) ** 2 * np.radians(sd_deg) ** 2)
    j11, j12, j22 = np.sum(f * np.cos(a) ** 2), -np.sum(f * np.cos(a) * np.sin(a)), np.sum(f * np.sin(a) ** 2)
    return np.pi * k2 / np.sqrt(j11 * j22 - j12**2)


def study(n_hunts, seed, n_range, spot_range, label):
    rng = np.random.default_rng(seed)
    res = {"point": [], "region": [], "oracle": []}
    skipped = 0
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "h.csv")
        for _ in range(n_hunts):
            tlat, tlon = 47 + rng.uniform(-1, 1), 15 + rng.uniform(-1, 1)
            nb = int(rng.integers(*n_range))
            sd = float(rng.choice([3.0, 5.0, 8.0]))
            lon_s, lat_s, back = GEOD.fwd(
                np.full(nb, tlon), np.full(nb, tlat), rng.uniform(0, 360, nb), rng.uniform(500, 4000, nb)
            )
            brg = (
                np.asarray(back) + rng.normal(0, sd, nb)
            ) % 360.0  # back azimuth: at the station, towards the truth
            with open(path, "w") as fh:
                fh.write("fix,lat,lon,bearing,sd\n")
                for la, lo, bb in zip(lat_s, lon_s, brg):
                    fh.write(f"H,{float(la)!r},{float(lo)!r},{float(bb)!r},{sd}\n")
            b = read_bearings(path)
            slon, slat, _ = GEOD.fwd(
                np.full(10, tlon), np.full(10, tlat), rng.uniform(0, 360, 10), rng.uniform(*spot_range, 10)
            )
            spots = pd.DataFrame({"spot": [f"s{k}" for k in range(10)], "lat": slat, "lon": slon})
            pp = plan_next_bearing(b, "H", spots=spots, basis="point")
            if pp.fix_row["status"] not in ("ok", "shallow", "long_span"):
                skipped += 1
                continue
            pr = plan_next_bearing(b, "H", spots=spots, basis="region")
            stations = list(zip(lat_s, lon_s))
            truth = {
                s: area_at(tlat, tlon, stations + [(la, lo)], sd)
                for s, la, lo in zip(spots["spot"], slat, slon)
            }
            res["point"].append(truth[pp.best["spot"]])
            res["region"].append(truth[pr.best["spot"]])
            res["oracle"].append(min(truth.values()))
    o = np.array(res["oracle"])
    print(f"study: {label}: {len(o)} hunts ({skipped} without a position skipped), seed {seed}")
    for k in ("point", "region"):
        r = np.array(res[k]) / o
        picked = np.mean(r < 1 + 1e-9)
        print(
            f"  {k:<7} area at the truth / oracle's: geometric mean {np.exp(np.mean(np.log(r))):.3f}, "
            f"mean {r.mean():.3f}, 90th pct {np.quantile(r, 0.9):.3f}; oracle's spot picked {picked:.1%}"
        )
    same = np.mean(np.array(res["point"]) == np.array(res["region"]))
    print(f"  the two bases pick the same spot in {same:.1%}")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--hunts", type=int, default=300)
    ap.add_argument("--seed", type=int, default=7)
    ap.add_argument("--skip-study", action="store_true")
    ap.add_argument("--skip-speed", action="store_true")
    a = ap.parse_args()
    if not a.skip_speed:
        speed()
    if not a.skip_study:
        study(a.hunts, a.seed, (2, 4), (300.0, 5000.0), "2-3 bearings, spots 0.3-5 km")
        study(a.hunts, a.seed + 1, (3, 6), (1000.0, 6000.0), "3-5 bearings, spots 1-6 km")


if __name__ == "__main__":
    main()
