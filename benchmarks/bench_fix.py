"""Speed and memory of `dfkit fix` on a season-sized sheet, against a per-fix optimiser loop.

    .venv/bin/python benchmarks/bench_fix.py [--fixes 100000] [--loop-sample 300]

1. Builds a sheet of N fixes x 4 bearings (noise 4 deg) around central Europe with pyproj geodesics.
2. Times `dfkit fix SHEET -o out.csv` end to end in a subprocess (read, convert, solve, write) and records its
   peak memory (ru_maxrss of the child).
3. Times the same fixes solved one by one with scipy.optimize.least_squares on the same geodesic residuals
   (observed bearing minus pyproj forward azimuth), on a random subsample, and scales per fix.
Prints both and the ratio. Nothing is asserted: numbers go into notes, not into tests.

    .venv/bin/python benchmarks/bench_fix.py --geodesics SHEET

runs `dfkit fix SHEET` in this process instead and counts the geodesic problems pyproj solves (inverse: per
bearing of the sheet; direct: per fix), by the dfkit functions that asked for them, and, per call of
``estimators.solve``, its fixes, planar iterations and endings (where the rounds go: e.g. variants that end on
a station take every start in turn). Counts, not times: they do not depend on the machine's load.
"""

from __future__ import annotations

import argparse
import os
import resource
import subprocess
import sys
import tempfile
import time

import numpy as np
import pyproj

GEOD = pyproj.Geod(ellps="WGS84")


def make_sheet(path, n_fix, rng):
    lat0 = rng.uniform(46.0, 49.0, n_fix)
    lon0 = rng.uniform(9.0, 17.0, n_fix)
    k = 4
    ang = rng.uniform(0, 360, (n_fix, 1)) + np.arange(k) * 90 + rng.normal(0, 20, (n_fix, k))
    dist = rng.uniform(400, 2000, (n_fix, k))
    lon_s, lat_s, back = GEOD.fwd(np.repeat(lon0, k), np.repeat(lat0, k), ang.ravel(), dist.ravel())
    bearing = (np.asarray(back) + rng.normal(0, 4.0, n_fix * k)) % 360
    labels = np.repeat(np.arange(n_fix), k)
    with open(path, "w") as fh:
        fh.write("fix,lat,lon,bearing,sd\n")
        for lab, la, lo, b in zip(labels, lat_s, lon_s, bearing):
            fh.write(f"F{lab},{la:.6f},{lo:.6f},{b:.2f},4\n")
    return np.asarray(lat_s).reshape(n_fix, k), np.asarray(lon_s).reshape(n_fix, k), bearing.reshape(n_fix, k)


def loop_solve(lat, lon, bearing, method="trf"):
    """One fix by scipy's least_squares on the geodesic residuals, tolerances 1e-12. ``method``: scipy's default
    "trf" (the loop of the tables in DEVELOPERS.md), or "lm" (MINPACK's Levenberg-Marquardt, a tighter loop on
    these small problems: the same answers to about 1e-8 degrees in fewer of scipy's Python steps)."""
    from scipy.optimize import least_squares

    def resid(p):
        az, _, _ = GEOD.inv(lon, lat, np.full(len(lat), p[1]), np.full(len(lat), p[0]))
        return np.radians((bearing - np.asarray(az) + 180) % 360 - 180)

    start = (lat.mean(), lon.mean())
    return least_squares(resid, start, xtol=1e-12, ftol=1e-12, method=method).x


def count_geodesics(sheet):
    """Geodesic problems solved by `dfkit fix SHEET`, by asking function; and each solve call's iterations."""
    import collections
    import contextlib
    import importlib
    import io
    import traceback

    from dfkit import cli, estimators, geodesy

    solve_module = importlib.import_module("dfkit.estimators.solve")

    inner = geodesy.GEOD
    counts = collections.Counter()

    def caller():
        frames = [f for f in traceback.extract_stack()[:-2] if f"{os.sep}dfkit{os.sep}" in f.filename]
        names = [f"{os.path.basename(f.filename)}:{f.name}" for f in frames]
        # the first frame outside the solver and geodesy, and the solver's own step that asked
        outside = [n for n in names if not n.startswith(("geodesy.py", "plane.py", "solve.py"))]
        inside = [n for n in names if n.startswith(("solve.py", "plane.py"))]
        return (outside[-1] if outside else "?") + (" > " + inside[-1] if inside else "")

    class Counting:
        def inv(self, lons1, *rest, **kw):
            counts[("inverse", caller())] += len(lons1)
            return inner.inv(lons1, *rest, **kw)

        def fwd(self, lons, *rest, **kw):
            counts[("direct", caller())] += len(lons)
            return inner.fwd(lons, *rest, **kw)

        def __getattr__(self, name):
            return getattr(inner, name)

    calls = []
    real_solve = solve_module.solve

    def solve_counted(*args, **kw):
        sol = real_solve(*args, **kw)
        calls.append((caller(), len(sol.lat), sol.iterations, sol.ending))
        return sol

    geodesy.GEOD = Counting()
    estimators.solve = solve_counted
    try:
        with tempfile.TemporaryDirectory() as tmp, contextlib.redirect_stdout(io.StringIO()), \
                contextlib.redirect_stderr(io.StringIO()):
            cli.main(["fix", sheet, "-o", os.path.join(tmp, "out.csv")])
    except SystemExit:
        pass
    finally:
        geodesy.GEOD = inner
        estimators.solve = real_solve
    n_b = sum(1 for _ in open(sheet)) - 1
    n_f = max(1, calls[0][1]) if calls else 1
    print(f"{n_b} bearings, {n_f} fixes")
    for (kind, who), n in sorted(counts.items(), key=lambda kv: -kv[1]):
        per = f"{n / n_b:.3f} per bearing" if kind == "inverse" else f"{n / n_f:.3f} per fix"
        print(f"  {kind:8s} {n:9d}  {per:18s} {who}")
    for who, m, its, ending in calls:
        slow = its > 30
        names = solve_module.ENDINGS
        ends = ", ".join(f"{names[e]} {c}" for e, c in enumerate(np.bincount(ending, minlength=len(names))) if c)
        print(f"  solve from {who}: {m} fixes, {its.sum()} iterations ({its.mean():.2f} per fix); "
              f"{slow.sum()} fixes took over 30 ({its[slow].sum()} iterations); endings: {ends}")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--fixes", type=int, default=100_000)
    ap.add_argument("--loop-sample", type=int, default=300)
    ap.add_argument("--geodesics", metavar="SHEET", help="count geodesic problems and iterations of dfkit fix SHEET")
    a = ap.parse_args()
    if a.geodesics:
        count_geodesics(a.geodesics)
        return
    rng = np.random.default_rng(1)
    with tempfile.TemporaryDirectory() as tmp:
        sheet = os.path.join(tmp, "season.csv")
        t0 = time.perf_counter()
        lat, lon, b = make_sheet(sheet, a.fixes, rng)
        print(f"built {a.fixes} fixes / {4 * a.fixes} bearings in {time.perf_counter() - t0:.1f} s")

        t0 = time.perf_counter()
        r = subprocess.run([sys.executable, "-m", "dfkit", "fix", sheet, "-o", os.path.join(tmp, "out.csv")],
                           capture_output=True, text=True)
        t_dfkit = time.perf_counter() - t0
        peak_mb = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024
        print(f"dfkit fix end to end: {t_dfkit:.1f} s ({1e6 * t_dfkit / a.fixes:.1f} us per fix), "
              f"peak memory {peak_mb:.0f} MB, exit {r.returncode}")
        print("  " + r.stderr.strip().splitlines()[-2] if r.stderr.strip() else "")

        # The solver alone, in process, on the same bearings (no reading, checking or writing).
        from dfkit import estimators

        groups = np.repeat(np.arange(a.fixes), 4)
        t0 = time.perf_counter()
        sol = estimators.solve(lat.ravel(), lon.ravel(), b.ravel(), groups, a.fixes, np.full(4 * a.fixes, 4.0))
        t_solve = time.perf_counter() - t0
        print(f"dfkit solver alone: {t_solve:.2f} s ({1e6 * t_solve / a.fixes:.1f} us per fix, "
              f"{int(sol.converged.sum())} converged)")

        idx = rng.choice(a.fixes, size=min(a.loop_sample, a.fixes), replace=False)
        t0 = time.perf_counter()
        for i in idx:
            loop_solve(lat[i], lon[i], b[i])
        per_fix = (time.perf_counter() - t0) / len(idx)
        print(f"scipy least_squares one fix at a time: {1e6 * per_fix:.0f} us per fix "
              f"(x {a.fixes} = {per_fix * a.fixes:.0f} s)")
        print(f"ratio (loop / dfkit, per fix, dfkit end to end incl. reading and writing): "
              f"{per_fix * a.fixes / t_dfkit:.1f}x")
        print(f"ratio (loop / dfkit solver alone, per fix): {per_fix * a.fixes / t_solve:.1f}x")


if __name__ == "__main__":
    main()
