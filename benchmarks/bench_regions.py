"""Cost of each stage of locating a season: the solver, the likelihood regions, statuses and hints.

    .venv/bin/python benchmarks/bench_regions.py [--fixes 100000] [--bearings 4] [--method mle] [--unknown-sd]
                                                 [--solve-only] [--repeat 3] [--against OLD_DIR [--pairs 5]]
                                                 [--memory]

``--against OLD_DIR`` (a directory holding another version's ``dfkit``, e.g. from ``git archive main dfkit``) times
``regions.likelihood_regions`` alone, paired in one process: that version's ``regions.py`` and this checkout's
alternate on the same solution (old, new, new, old, ...), and the medians and the per-pair ratios are printed
(steadier than separate runs on a shared machine; the rest of ``dfkit`` is this checkout's for both), and whether
the two versions' last regions are the same bit for bit. With
``--memory`` each version's ``likelihood_regions`` is also run once under ``tracemalloc`` (after the timed pairs):
its traced peak above the memory at the call, what it keeps (its result) and the transient (peak - kept), in MiB.
These do not depend on the machine's load.

To compare the solver with another version, run it with that version first on the path, e.g.
``git archive main | tar -x -C /tmp/dfkit-main`` then
``PYTHONPATH=/tmp/dfkit-main .venv/bin/python benchmarks/bench_regions.py --solve-only``.

Builds N fixes x k bearings (noise 4 deg, SD given) around central Europe with pyproj geodesics, like
bench_fix.py, and times in process, as CPU seconds (time.process_time, steadier than wall time on a
shared machine) and wall seconds: ``estimators.solve``, ``regions.likelihood_regions`` and the whole
``locate`` (solve + regions + statuses + hints + table). Nothing is asserted.
"""

from __future__ import annotations

import argparse
import time

import numpy as np
import pyproj

GEOD = pyproj.Geod(ellps="WGS84")


def season(n_fix, k, rng, sd=4.0):
    lat0 = rng.uniform(46.0, 49.0, n_fix)
    lon0 = rng.uniform(9.0, 17.0, n_fix)
    ang = rng.uniform(0, 360, (n_fix, 1)) + np.arange(k) * 360.0 / k + rng.normal(0, 20, (n_fix, k))
    dist = rng.uniform(400, 2000, (n_fix, k))
    lon_s, lat_s, back = GEOD.fwd(np.repeat(lon0, k), np.repeat(lat0, k), ang.ravel(), dist.ravel())
    return np.asarray(lat_s), np.asarray(lon_s), (np.asarray(back) + rng.normal(0, sd, n_fix * k)) % 360


def timed(label, fn, repeat=1):
    """Run fn ``repeat`` times; print the smallest CPU and wall times."""
    cpu, wall = [], []
    for _ in range(repeat):
        c0, w0 = time.process_time(), time.perf_counter()
        out = fn()
        cpu.append(time.process_time() - c0)
        wall.append(time.perf_counter() - w0)
    print(f"{label:<34} {min(cpu):6.2f} s CPU  {min(wall):6.2f} s wall  (min of {repeat})")
    return out


def traced(fn):
    """(peak above the start, kept, peak - kept) of one call of ``fn`` under tracemalloc [MiB]."""
    import tracemalloc

    tracemalloc.start()
    try:
        start = tracemalloc.get_traced_memory()[0]
        out = fn()
        kept, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    del out
    mib = 2.0 ** 20
    return (peak - start) / mib, (kept - start) / mib, (peak - kept) / mib


def paired(regions, other_dir, sol, g, lat, lon, b, pairs, memory=False):
    """Alternate this checkout's likelihood_regions with ``other_dir``'s; print CPU medians and per-pair ratios."""
    import importlib.util
    import os
    import sys

    path = os.path.join(other_dir, "dfkit", "regions.py")
    spec = importlib.util.spec_from_file_location("other_regions", path)
    other = importlib.util.module_from_spec(spec)
    sys.modules["other_regions"] = other         # dataclasses look their module up
    spec.loader.exec_module(other)
    args = (sol.lat, sol.lon, g, lat, lon, b, sol.range_m, sol.azimuth_from_fix_deg, sol.residual_deg,
            sol.region_weight, sol.sd_known, sol.dof, 0.95)
    kw = dict(valid=sol.converged, sd_floor_deg=sol.sd_floor_deg)
    cpu = {"old": [], "new": []}
    last = {}
    for i in range(pairs):
        order = (("old", other), ("new", regions)) if i % 2 == 0 else (("new", regions), ("old", other))
        for name, mod in order:
            c0 = time.process_time()
            last[name] = mod.likelihood_regions(*args, **kw)
            cpu[name].append(time.process_time() - c0)
    fields = ("has_region", "centre_x", "centre_y", "radius_m", "bounded", "star_shaped", "area_m2", "reach_m",
              "s_min", "threshold", "draw_range_m")
    differ = [f for f in fields if not np.array_equal(getattr(last["old"], f), getattr(last["new"], f), equal_nan=True)]
    print("same regions bit for bit (" + ", ".join(fields) + ")" if not differ else f"regions differ: {differ}")
    del last
    for name, path_ in (("old", path), ("new", regions.__file__)):
        print(f"regions {name}: median {np.median(cpu[name]):.3f} s CPU ({' '.join(f'{x:.2f}' for x in cpu[name])})"
              f"  {path_}")
    ratio = np.array(cpu["new"]) / np.array(cpu["old"])
    print(f"new / old per pair: median {np.median(ratio):.3f} ({' '.join(f'{x:.2f}' for x in ratio)})")
    if memory:
        for name, mod in (("old", other), ("new", regions)):
            peak, kept, transient = traced(lambda: mod.likelihood_regions(*args, **kw))
            print(f"regions {name} traced: peak {peak:.1f} MiB above the call, kept {kept:.1f}, "
                  f"transient {transient:.1f}")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--fixes", type=int, default=100_000)
    ap.add_argument("--bearings", type=int, default=4)
    ap.add_argument("--method", default="mle")
    ap.add_argument("--unknown-sd", action="store_true", help="give no SD (estimated from each fix)")
    ap.add_argument("--solve-only", action="store_true", help="time estimators.solve alone")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--against", help="directory with another version's dfkit: paired timing of the regions")
    ap.add_argument("--pairs", type=int, default=5)
    ap.add_argument("--memory", action="store_true", help="with --against: traced memory of each version's regions")
    a = ap.parse_args()
    from dfkit import estimators

    rng = np.random.default_rng(1)
    lat, lon, b = season(a.fixes, a.bearings, rng)
    g = np.repeat(np.arange(a.fixes), a.bearings)
    sd = np.full(len(g), np.nan if a.unknown_sd else 4.0)
    print(f"{a.fixes} fixes x {a.bearings} bearings, method {a.method}, SD {'unknown' if a.unknown_sd else 'given'}; "
          f"dfkit from {estimators.__file__}")
    sol = timed("estimators.solve", lambda: estimators.solve(lat, lon, b, g, a.fixes, sd, method=a.method),
                a.repeat)
    print(f"  {int(sol.converged.sum())} of {a.fixes} converged")
    if a.solve_only:
        return
    from dfkit import regions

    if a.against:
        paired(regions, a.against, sol, g, lat, lon, b, a.pairs, a.memory)
        return

    timed("regions.likelihood_regions", lambda: regions.likelihood_regions(
        sol.lat, sol.lon, g, lat, lon, b, sol.range_m, sol.azimuth_from_fix_deg, sol.residual_deg,
        sol.region_weight, sol.sd_known, sol.dof, 0.95, valid=sol.converged))
    import pandas as pd

    from dfkit.locate import locate
    from dfkit.observations import Bearings

    # A Bearings as read_bearings would give it (reading is timed by bench_fix.py, not here).
    table = pd.DataFrame({"line": np.arange(len(g)) + 2, "fix_id": g, "fix": [f"F{i}" for i in g], "tag": "",
                          "time": pd.NaT, "lat": lat, "lon": lon, "true_bearing": b, "sd": sd,
                          "sd_source": "sheet"})
    table["time"] = pd.to_datetime(table["time"], utc=True)
    index = pd.DataFrame({"fix": [f"F{i}" for i in range(a.fixes)], "tag": "",
                          "rejected_lines": [[] for _ in range(a.fixes)]})
    bearings = Bearings(table=table, problems=[], fix_index=index, n_rows=len(g))
    fixes = timed("locate (with regions)", lambda: locate(bearings, method=a.method))
    timed("locate (with_regions=False)", lambda: locate(bearings, method=a.method, with_regions=False))
    print(fixes.summary())


if __name__ == "__main__":
    main()
