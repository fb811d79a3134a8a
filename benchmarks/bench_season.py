"""Speed of the season store on a season-sized sheet: import vs `dfkit fix`, filtered queries, home ranges.

    .venv/bin/python benchmarks/bench_season.py [--fixes 100000] [--rounds 3]

1. Builds a sheet of N fixes x 4 bearings (noise 4 deg) on 20 tags over 180 days, with times and observers,
   from pyproj geodesics (as benchmarks/bench_fix.py, plus tags and times so filters have work to do).
2. Runs `dfkit fix SHEET -o out.csv` and `dfkit season add STORE SHEET` (into a new store) in turn, `rounds`
   times, in subprocesses; prints wall and CPU seconds of each and the ratio of each pair.
3. Imports the same sheet again (nothing is added) and times it.
4. Times filtered queries on the store (in process, after opening it) and one `dfkit season show -o sel.csv`.
5. Times home ranges of one tag (kernel href, kernel LSCV, MCP).
Nothing is asserted: the numbers go into DEVELOPERS.md, not into tests.
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time

import numpy as np
import pandas as pd


def make_sheet(path, n_fix, rng):
    """bench_fix's sheet (4 bearings per fix, noise 4 deg), plus a tag, a time and an observer per bearing."""
    sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
    import bench_fix

    k = 4
    bench_fix.make_sheet(path, n_fix, rng)
    sheet = pd.read_csv(path, dtype={"fix": str})
    start = np.datetime64("2026-04-01T00:00:00")
    fix_t = start + np.sort(rng.uniform(0, 180 * 86400, n_fix)).astype("timedelta64[s]")
    t = np.repeat(fix_t, k) + np.tile(np.arange(k) * 240, n_fix).astype("timedelta64[s]")
    sheet.insert(1, "tag", np.repeat(np.array([f"T{i:02d}" for i in range(20)])[rng.integers(0, 20, n_fix)], k))
    sheet.insert(2, "time", np.char.add(np.datetime_as_string(t, unit="s"), "Z"))
    sheet["observer"] = np.where(np.arange(n_fix * k) % 2, "A", "B")
    sheet.to_csv(path, index=False)


def run(cmd):
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    r = subprocess.run(cmd, capture_output=True, text=True)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return wall, cpu, r


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--fixes", type=int, default=100_000)
    ap.add_argument("--rounds", type=int, default=3)
    a = ap.parse_args()
    py = sys.executable
    with tempfile.TemporaryDirectory() as tmp:
        sheet = os.path.join(tmp, "season.csv")
        make_sheet(sheet, a.fixes, np.random.default_rng(1))
        print(f"sheet: {a.fixes} fixes, {4 * a.fixes} bearings, 20 tags, 180 days")
        store = os.path.join(tmp, "season.gpkg")
        pairs = []
        for k in range(a.rounds):
            fw, fc, _ = run([py, "-m", "dfkit", "fix", sheet, "-o", os.path.join(tmp, "out.csv")])
            if os.path.exists(store):
                os.unlink(store)
            sw, sc, r = run([py, "-m", "dfkit", "season", "add", store, sheet])
            pairs.append((fw, fc, sw, sc))
            print(f"round {k + 1}: fix {fw:.1f} s wall / {fc:.1f} s cpu; season add {sw:.1f} s wall / {sc:.1f} s cpu;"
                  f" ratio wall {sw / fw:.2f}, cpu {sc / fc:.2f} (exit {r.returncode})")
        med = [statistics.median(p[i] for p in pairs) for i in range(4)]
        print(f"median: fix {med[0]:.1f} s wall, {med[1]:.1f} s cpu; season add {med[2]:.1f} s wall, {med[3]:.1f} s cpu;"
              f" paired ratio wall {statistics.median(p[2] / p[0] for p in pairs):.2f}, "
              f"cpu {statistics.median(p[3] / p[1] for p in pairs):.2f}")
        print(f"store size {os.path.getsize(store) / 2**20:.0f} MiB")
        w, c, r = run([py, "-m", "dfkit", "season", "add", store, sheet])
        print(f"importing the same sheet again: {w:.1f} s wall, {c:.1f} s cpu; {r.stderr.strip().splitlines()[-3]}")

        from dfkit.season import SeasonFilter, SeasonStore
        from dfkit.season.query import parse_time

        with SeasonStore.open(store) as s:
            filters = {
                "one tag": SeasonFilter(tags=("T03",)),
                "one month": SeasonFilter(start=parse_time("2026-06-01"), before=parse_time("2026-06-30", end=True)),
                "tag + week + ok": SeasonFilter(tags=("T07",), start=parse_time("2026-07-01"),
                                                before=parse_time("2026-07-07", end=True), statuses=("ok",)),
                "ok, area <= 0.5 km2, >= 4 bearings": SeasonFilter(statuses=("ok",), max_area_m2=5e5, min_bearings=4),
                "everything": SeasonFilter(),
            }
            for name, flt in filters.items():
                times = []
                for _ in range(3):
                    t0 = time.perf_counter()
                    n = len(s.fixes(flt))
                    times.append(time.perf_counter() - t0)
                print(f"query {name!r}: {n} fixes in {min(times) * 1e3:.0f} ms (best of 3, to a DataFrame)")
            one = s.fixes(SeasonFilter(tags=("T03",), statuses=("ok",)))
        w, c, _ = run([py, "-m", "dfkit", "season", "show", store, "--tag", "T03", "--from", "2026-06-01", "--to",
                       "2026-06-30", "-o", os.path.join(tmp, "sel.csv")])
        print(f"dfkit season show --tag --from --to -o sel.csv: {w:.2f} s wall (whole process, with start-up)")

        from dfkit.homerange import home_ranges

        for label, kw in (("kernel href", {"method": "kde"}), ("kernel lscv", {"method": "kde", "bandwidth": "lscv"}),
                          ("mcp", {"method": "mcp", "levels": (0.95, 1.0)})):
            t0 = time.perf_counter()
            home_ranges(one, **kw)
            print(f"home range, {label}, one tag of {len(one)} fixes: {time.perf_counter() - t0:.2f} s")


if __name__ == "__main__":
    main()
