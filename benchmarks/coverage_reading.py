"""Coverage where the step of an observer position depends on how it was written: trailing zeros and whole km.

    cd /tmp && PYTHONPATH=CHECKOUT .venv/bin/python CHECKOUT/benchmarks/coverage_reading.py [--fixes 2000]
        [--sd 2] [--seed 3] [--ranges 200,800] [--formats ...]

Fixes from ``tests/simulation.py`` (geographiclib truth; 4 observers 360/4 apart, ranges uniform in ``--ranges``,
Gaussian bearing noise of ``--sd`` degrees, the sheet's sd column the true SD); the observers' positions are
written as:

* ``fixed4``: every cell ``%.4f`` (a writer of a fixed number of decimals: trailing zeros kept);
* ``mixed6_4``: per fix two GPS rows (``%.6f``) and two ``%.4f`` rows;
* ``pad3as4``: positions taken to 3 decimals, written ``%.4f`` (every cell ends in 0: the zeros pad);
* ``pad3as4_quoted``: the same with a quoted note column (the reader's text path);
* ``utm100``: UTM easting and northing rounded to 100 m (pyproj), about 1 row in 100 on whole km.

Per format: share of fixes ``ok``; share of ``ok`` fixes whose 95 % likelihood region holds the truth
(:meth:`dfkit.locate.Fixes.contains`) with its binomial SE; median reach of the ok regions; the same for the fixes
with a row whose value alone misleads (both coordinates written ending in 0; UTM on whole km in both); rows read
with each step.
Nothing is asserted (run once with ``PYTHONPATH`` on the version before, once on the version after).
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time

import numpy as np
import pyproj

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "tests"))
from simulation import scenario  # noqa: E402

FORMATS = ("fixed4", "mixed6_4", "pad3as4", "pad3as4_quoted", "utm100")


def write_sheet(path, sc, fmt, sd):
    """Write the sheet; returns per fix whether some row of it is written so that its value alone misleads
    (both coordinates end in 0 as written; UTM both on whole km)."""
    n_fix, n = sc["lat"].shape
    lat, lon = sc["lat"], sc["lon"]
    if fmt == "utm100":
        tf = pyproj.Transformer.from_crs(4326, 32632, always_xy=True)      # zone 32: 6-12 E
        e, nn = tf.transform(lon, lat)
        cells = [[f"32N,{round(e[i, j], -2):.0f},{round(nn[i, j], -2):.0f}" for j in range(n)] for i in range(n_fix)]
        head = "utm_zone,easting,northing"
    else:
        head = "lat,lon"
        cells = []
        for i in range(n_fix):
            row = []
            for j in range(n):
                if fmt == "fixed4" or (fmt == "mixed6_4" and j >= 2):
                    row.append(f"{lat[i, j]:.4f},{lon[i, j]:.4f}")
                elif fmt == "mixed6_4":
                    row.append(f"{lat[i, j]:.6f},{lon[i, j]:.6f}")
                else:
                    row.append(f"{round(lat[i, j], 3):.4f},{round(lon[i, j], 3):.4f}")
            cells.append(row)
    def odd(c):
        parts = c.split(",")[-2:]
        if fmt == "utm100":
            return all(int(v) % 1000 == 0 for v in parts)
        return all(v.endswith("0") for v in parts)

    affected = np.array([any(odd(c) for c in row) for row in cells])
    quoted = fmt.endswith("_quoted")
    with open(path, "w", encoding="utf-8") as fh:
        fh.write(f"fix,{head},bearing,sd" + (",note" if quoted else "") + "\n")
        for i in range(n_fix):
            for j in range(n):
                fh.write(f"F{i},{cells[i][j]},{sc['bearing'][i, j]:.1f},{sd:g}" + (',"x"' if quoted else "") + "\n")
    return affected


def cell(sc, fmt, sd):
    import dfkit
    from dfkit.locate import locate

    with tempfile.TemporaryDirectory() as d:
        path = os.path.join(d, "sheet.csv")
        affected = write_sheet(path, sc, fmt, sd)
        b = dfkit.read_bearings(path)
    t = b.table
    steps = (np.round(t["position_step_north_m"].to_numpy(float)) if "position_step_north_m" in t
             else np.zeros(len(t)))
    vals, counts = np.unique(steps, return_counts=True)
    fx = locate(b)
    ok = (fx.table["status"] == "ok").to_numpy()
    inside = np.asarray(fx.contains(sc["truth_lat"], sc["truth_lon"]), bool)
    cover = inside[ok].mean() if ok.any() else np.nan
    se = np.sqrt(cover * (1 - cover) / max(ok.sum(), 1))
    reach = np.nanmedian(fx.table["region_reach_m"].to_numpy(float)[ok]) if ok.any() else np.nan
    sel = ok & affected
    return dict(ok=ok.mean(), cover=cover, se=se, reach=reach, n_aff=int(affected.sum()),
                cover_aff=inside[sel].mean() if sel.any() else np.nan,
                reach_aff=np.nanmedian(fx.table["region_reach_m"].to_numpy(float)[sel]) if sel.any() else np.nan,
                steps=", ".join(f"{v:.0f} m: {c}" for v, c in zip(vals, counts)))


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--fixes", type=int, default=2000)
    ap.add_argument("--sd", type=float, default=2.0)
    ap.add_argument("--seed", type=int, default=3)
    ap.add_argument("--ranges", default="200,800")
    ap.add_argument("--formats", default=",".join(FORMATS))
    a = ap.parse_args(argv)
    import dfkit

    ranges = tuple(float(v) for v in a.ranges.split(","))
    print(f"dfkit from {os.path.dirname(dfkit.__file__)}", file=sys.stderr)
    print("| positions | ok | ok: region | ± | median reach m | fixes with a row ending in 0s / on whole km: n, ok: "
          "region, median reach m | rows by step (north-south) |\n|---|---|---|---|---|---|---|")
    t0 = time.process_time()
    sc = scenario(a.fixes, 4, a.sd, np.random.default_rng(a.seed), ranges=ranges)
    for fmt in a.formats.split(","):
        r = cell(sc, fmt, a.sd)
        print(f"| {fmt} | {100 * r['ok']:.1f} % | {100 * r['cover']:.1f} % | {100 * r['se']:.1f} | {r['reach']:.0f} | "
              f"{r['n_aff']}, {100 * r['cover_aff']:.1f} %, {r['reach_aff']:.0f} | {r['steps']} |", flush=True)
    print(f"\n{a.fixes} fixes of 4 bearings, SD {a.sd:g}°, ranges {a.ranges} m, seed {a.seed}; "
          f"{time.process_time() - t0:.0f} s CPU", file=sys.stderr)


if __name__ == "__main__":
    main()
