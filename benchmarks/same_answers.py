"""Whether two versions of dfkit give the same fixes and likelihood regions, bit for bit or within a bound.

    .venv/bin/python benchmarks/same_answers.py OLD_DIR [NEW_DIR] [--fixes 20000]

OLD_DIR and NEW_DIR hold a ``dfkit`` package each (e.g. ``git archive main dfkit | tar -x -C /tmp/old``; NEW_DIR
defaults to this checkout). Each version runs in its own process on the same seeded cases:

* ``bench``: bench_regions.py's season (4 bearings, noise 4 deg, SD given), solver and likelihood regions;
* ``bench_unknown_sd``: the same bearings with the SD estimated;
* ``wild_<method>``: four stations 0.5-2 km away, SD 5 deg, the first bearing 40-120 deg off, for every method,
  SD given and estimated (solver only: the cases where later starts and robust weights matter).

Prints, per case and array, "identical" or the largest difference (positions in metres by pyproj's geodesic
inverse, region radii in metres and relative to the radius), and how many fits changed how they ended. Where fixes
moved more than 1e-6 m (Lenth's, Huber's and Andrews' fits with the SD given, Lenth's with it estimated), it also
says which version's answers lie closer to the optimum of the method's objective: the length of one scoring step
from each answer, computed here from pyproj's azimuths and the published functions (Lenth 1981: f' = sin r; Huber
1964 and Andrews 1974: f' = s psi(u / s) cos(r / 2), u = 2 sin(r / 2), the SD as the scale s, c = 1.5), not by dfkit.
Speed is not measured here (bench_regions.py, bench_floor.py); nothing is asserted.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))


def compute(out, n):
    sys.path.insert(0, HERE)
    import bench_regions
    import pyproj

    from dfkit import estimators, regions

    res = {}
    lat, lon, b = bench_regions.season(n, 4, np.random.default_rng(1))
    g = np.repeat(np.arange(n), 4)
    res["bench:in"] = np.stack([lat, lon, b])
    for case, sd in (("bench", 4.0), ("bench_unknown_sd", np.nan)):
        sol = estimators.solve(lat, lon, b, g, n, np.full(len(g), sd))
        reg = regions.likelihood_regions(sol.lat, sol.lon, g, lat, lon, b, sol.range_m, sol.azimuth_from_fix_deg,
                                         sol.residual_deg, sol.region_weight, sol.sd_known, sol.dof, 0.95,
                                         valid=sol.converged, sd_floor_deg=sol.sd_floor_deg)
        res.update({f"{case}:lat": sol.lat, f"{case}:lon": sol.lon, f"{case}:ending": sol.ending,
                    f"{case}:radius": reg.radius_m, f"{case}:centre_x": reg.centre_x, f"{case}:centre_y": reg.centre_y,
                    f"{case}:bounded": reg.bounded, f"{case}:star": reg.star_shaped})
    geod = pyproj.Geod(ellps="WGS84")
    rng = np.random.default_rng(7)
    k = 4
    lat0, lon0 = rng.uniform(46, 49, n), rng.uniform(9, 17, n)
    lo, la, back = geod.fwd(np.repeat(lon0, k), np.repeat(lat0, k), rng.uniform(0, 360, n * k),
                            rng.uniform(500, 2000, n * k))
    bw = (np.asarray(back) + rng.normal(0, 5, n * k)).reshape(n, k)
    bw[:, 0] += rng.uniform(40, 120, n) * rng.choice([-1, 1], n)
    res["wild:in"] = np.stack([np.asarray(la), np.asarray(lo), bw.ravel() % 360])
    for method in ("mle", "huber", "andrews", "lsq", "stansfield"):
        for tag, sd in (("sd", 5.0), ("unknown_sd", np.nan)):
            sol = estimators.solve(la, lo, bw.ravel() % 360, g, n, np.full(n * k, sd), method=method)
            case = f"wild_{method}_{tag}"
            res.update({f"{case}:lat": sol.lat, f"{case}:lon": sol.lon, f"{case}:ending": sol.ending})
    np.savez(out, **res)


#: Scale [deg] of the wild cases' robust objectives, and the tuning constant (dfkit's default for both).
WILD_SD_DEG = 5.0
ROBUST_C = 1.5
#: Cases whose objective this script can write down: the method, the SD [deg] (None: Lenth's, unweighted).
OBJECTIVES = {"bench": ("mle", None), "bench_unknown_sd": ("mle", None), "wild_mle_sd": ("mle", None),
              "wild_mle_unknown_sd": ("mle", None), "wild_huber_sd": ("huber", WILD_SD_DEG),
              "wild_andrews_sd": ("andrews", WILD_SD_DEG)}


def _slope(method, r, s):
    """f'(r) of the method's objective per bearing (Lenth's up to a constant weight)."""
    if method == "mle":
        return np.sin(r)
    u = 2.0 * np.sin(0.5 * r) / s
    c = ROBUST_C
    psi = np.clip(u, -c, c) if method == "huber" else np.where(np.abs(u) < c * np.pi, c * np.sin(u / c), 0.0)
    return s * psi * np.cos(0.5 * r)


def step_to_optimum(geod, inputs, fix_lat, fix_lon, method, sd_deg):
    """Length of one scoring step of the method's objective from each fix [m] (4 bearings per fix)."""
    st_lat, st_lon, bearing = inputs
    m = len(fix_lat)
    g = np.repeat(np.arange(m), 4)
    az_fs, _, d = geod.inv(fix_lon[g], fix_lat[g], st_lon, st_lat)       # fix -> station
    az_sf, _, _ = geod.inv(st_lon, st_lat, fix_lon[g], fix_lat[g])       # station -> fix
    r = np.radians((bearing - np.asarray(az_sf) + 180.0) % 360.0 - 180.0)
    line = np.radians(np.asarray(az_fs) + 180.0)                          # the station's line of sight at the fix
    gx, gy = np.cos(line) / d, -np.sin(line) / d                          # gradient of its azimuth [rad/m]
    f1 = _slope(method, r, np.radians(sd_deg) if sd_deg else 1.0)
    b1, b2 = np.bincount(g, -f1 * gx, m), np.bincount(g, -f1 * gy, m)
    j11, j12, j22 = (np.bincount(g, t, m) for t in (gx * gx, gx * gy, gy * gy))
    det = j11 * j22 - j12 * j12
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.hypot((j22 * b1 - j12 * b2) / det, (j11 * b2 - j12 * b1) / det)


def closer(geod, old, new, case, d, both):
    """Which version's answers lie closer to the optimum, over the fixes that moved more than 1e-6 m."""
    method, sd = OBJECTIVES[case]
    inputs = old["bench:in" if case.startswith("bench") else "wild:in"]
    sel = np.flatnonzero(both)[d > 1e-6]
    sel = sel[(old[case + ":ending"][sel] == 0) & (new[case + ":ending"][sel] == 0)]
    if not len(sel):
        return ""
    s0, s1 = (step_to_optimum(geod, inputs, v[case + ":lat"], v[case + ":lon"], method, sd)[sel] for v in (old, new))
    return (f"; of {len(sel)} optima moved > 1e-6 m, new closer to the optimum in {int((s1 < s0).sum())}, farther in "
            f"{int((s1 > s0).sum())} (one step: old median {np.median(s0):.2g} m, largest {s0.max():.2g} m; new median "
            f"{np.median(s1):.2g} m, largest {s1.max():.2g} m)")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("old")
    ap.add_argument("new", nargs="?", default=os.path.dirname(HERE))
    ap.add_argument("--fixes", type=int, default=20_000)
    ap.add_argument("--_out", help=argparse.SUPPRESS)
    a = ap.parse_args()
    if a._out:
        compute(a._out, a.fixes)
        return
    import pyproj

    geod = pyproj.Geod(ellps="WGS84")
    with tempfile.TemporaryDirectory() as tmp:
        files = []
        for k, root in enumerate((a.old, a.new)):
            out = os.path.join(tmp, f"{k}.npz")
            env = dict(os.environ, PYTHONPATH=os.path.abspath(root))
            subprocess.run([sys.executable, os.path.abspath(__file__), a.old, a.new, "--fixes", str(a.fixes),
                            "--_out", out], check=True, env=env, cwd=tmp)
            files.append(np.load(out))
        old, new = files
        cases = sorted({k.split(":")[0] for k in old.files if not k.endswith(":in")})
        for case in cases:
            same = all(np.array_equal(old[k], new[k], equal_nan=True) for k in old.files if k.startswith(case + ":"))
            if same:
                print(f"{case}: identical")
                continue
            la0, lo0, la1, lo1 = old[case + ":lat"], old[case + ":lon"], new[case + ":lat"], new[case + ":lon"]
            both = np.isfinite(la0) & np.isfinite(la1)
            d = np.asarray(geod.inv(lo0[both], la0[both], lo1[both], la1[both])[2])
            moved = d > 0
            e0, e1 = old[case + ":ending"], new[case + ":ending"]
            msg = (f"{case}: {int(moved.sum())} fixes moved (median {np.median(d[moved]) if moved.any() else 0:.2g} m, "
                   f"largest {d.max() if len(d) else 0:.3g} m); {int((e0 != e1).sum())} endings changed, "
                   f"optimum {int((e0 == 0).sum())} -> {int((e1 == 0).sum())}")
            if case in OBJECTIVES and "wild:in" in old.files:
                msg += closer(geod, old, new, case, d, both)
            if case + ":radius" in old.files:
                r0, r1 = old[case + ":radius"], new[case + ":radius"]
                ok = np.isfinite(r0) & np.isfinite(r1)
                diff = np.abs(r0 - r1)[ok]
                msg += (f"; region radii: largest difference {diff.max() if len(diff) else 0:.3g} m, "
                        f"{(diff / r0[ok]).max() if len(diff) else 0:.2g} of the radius")
            print(msg)


if __name__ == "__main__":
    main()
