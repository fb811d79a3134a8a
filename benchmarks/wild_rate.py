"""Wrong ok fixes on sheets whose wild bearings are more common, or closer, than the prior says.

Each sheet mixes fixes of 3 to 6 bearings (SD 3, 5 or 8°, given), observers 500-2500 m away; each bearing is wild
independently with probability --share, --wild degrees off either side (or, with --per-fix, one bearing of a share
of the fixes). For each way of weighing the wild risk (--rates: the sheet's own rate, the prior alone): the ok
fixes, by number of bearings, and the share of them whose region holds the transmitter, clean and wild apart. An
honest 95 % region holds it in about 95 % of the ok fixes.

    python benchmarks/wild_rate.py --fixes 6000 --share 0.10 --wild 20-60 --ns 3,4
    python benchmarks/wild_rate.py --fixes 20000 --share 0.30 --per-fix --wild 20-60 --ns 3,4,5,6

With PYTHONPATH set to an older tree (before --wild-rate) it runs that tree's one way.
"""
import argparse
import inspect
import os
import sys
import tempfile

import numpy as np
import pyproj

sys.path.append(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))     # after PYTHONPATH
import dfkit  # noqa: E402
from dfkit.locate import locate  # noqa: E402

GEOD = pyproj.Geod(ellps="WGS84")


def make_sheet(path, n_fix, ns, share, wild, per_fix, rng):
    """Write the sheet; return per fix the truth (lat, lon), whether a bearing is wild, and its bearings."""
    n = rng.choice(ns, n_fix)
    lat0, lon0 = 47 + rng.random(n_fix), 8 + rng.random(n_fix)
    g = np.repeat(np.arange(n_fix), n)
    k = len(g)
    az, dist = rng.uniform(0, 360, k), rng.uniform(500, 2500, k)
    sd = rng.choice([3, 5, 8], k)
    slon, slat, back = GEOD.fwd(lon0[g], lat0[g], az, dist)
    err = rng.normal(0, 1, k) * sd
    if per_fix:
        first = np.concatenate([[0], np.cumsum(n)[:-1]])
        pick = first + (rng.random(n_fix) * n).astype(int)
        wild_b = np.zeros(k, bool)
        wild_b[pick[rng.random(n_fix) < share]] = True
    else:
        wild_b = rng.random(k) < share
    off = rng.choice([-1, 1], k) * rng.uniform(*wild, k)
    err = np.where(wild_b, off, err)
    with open(path, "w") as fh:
        fh.write("fix,lat,lon,bearing,sd\n")
        for i, la, lo, b_, s in zip(g, slat, slon, (np.asarray(back) + err) % 360, sd):
            fh.write(f"F{i},{la:.9f},{lo:.9f},{b_:.6f},{s}\n")
    return lat0, lon0, np.bincount(g, wild_b, n_fix) > 0, n


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--fixes", type=int, default=6000)
    ap.add_argument("--share", type=float, default=0.10)
    ap.add_argument("--wild", default="20-60", help="range of a wild bearing's miss [°], either side")
    ap.add_argument("--per-fix", action="store_true", help="--share of the fixes have one wild bearing")
    ap.add_argument("--ns", default="3,4", help="bearings per fix, drawn evenly")
    ap.add_argument("--method", default="andrews")
    ap.add_argument("--rates", default="sheet,prior")
    ap.add_argument("--seed", type=int, default=2)
    a = ap.parse_args()
    lo, hi = map(float, a.wild.split("-"))
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "s.csv")
        lat, lon, wild, n = make_sheet(path, a.fixes, [int(x) for x in a.ns.split(",")], a.share, (lo, hi),
                                       a.per_fix, np.random.default_rng(a.seed))
        b = dfkit.read_bearings(path)
    idx = np.array([int(f[1:]) for f in b.fix_index["fix"]])
    lat, lon, wild, n = lat[idx], lon[idx], wild[idx], n[idx]
    older = "wild_rate" not in inspect.signature(locate).parameters       # a tree from before the sheet's rate
    for rate in (["prior"] if older else a.rates.split(",")):
        fx = locate(b, method=a.method, **({} if older else {"wild_rate": rate}))
        t = fx.table
        if "region_level" not in t:
            t["region_level"] = t["level"]
        ok = (t.status == "ok").to_numpy()
        ins = fx.contains(lat, lon)
        print(f"{rate}: {ok.sum()} ok of {len(t)} ({(t.status == 'ambiguous').sum()} ambiguous), "
              f"{(t.region_level > t.level).sum()} regions widened; ok holding the truth {100 * ins[ok].mean():.1f} %")
        for k in sorted(set(n)):
            s = ok & (n == k)
            print(f"  {k} bearings: {s.sum()} ok, {100 * ins[s].mean():.1f} % hold; clean {100 * ins[s & ~wild].mean():.1f} %"
                  f", wild {(s & wild).sum()} ok of which {100 * ins[s & wild].mean():.1f} % hold")
        if rate == "sheet":
            for text in fx.notes:
                if text.startswith("wild lines"):
                    print("  note:", text)


if __name__ == "__main__":
    main()
