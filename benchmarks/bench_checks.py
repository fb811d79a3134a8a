"""Time of the checks that follow the solve in `dfkit.locate` (statuses, hints, rivals, offsets, the table and the
sheet-wide review), stage by stage, on bench_fix.py's sheet.

    .venv/bin/python benchmarks/bench_checks.py [--fixes 100000] [--sheet PATH] [--method mle]

Wall-clock times (time.perf_counter) of each stage, taken by wrapping the functions locate calls (a few calls: no
profiler overhead). ``solve in hints+rivals`` is the solver's share of ``hints`` and ``rivals``; ``after solve and
regions`` is everything locate does after the main solve other than the likelihood regions. Run it against two
versions (PYTHONPATH=one, then the other, alternating) and compare medians: the machine's load moves every number.
Nothing is asserted.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import tempfile
import time

import numpy as np

STAGES = [("classify", "classify"), ("one_bearing_hints", "hints"), ("find_rivals", "rivals"),
          ("fix_offsets", "fix_offsets"), ("_table", "table")]


def timed_locate(sheet, method):
    import dfkit
    from dfkit import estimators, regions
    from dfkit.locate import core, sheetwide

    times = {}

    def wrap(module, name, key):
        f = getattr(module, name)

        def timed(*a, **k):
            t = time.perf_counter()
            out = f(*a, **k)
            times[key] = times.get(key, 0.0) + time.perf_counter() - t
            return out
        setattr(module, name, timed)

    for name, key in STAGES:
        wrap(core, name, key)
    wrap(sheetwide, "review", "review")
    solves, marks = [], {}
    solve = estimators.solve

    def timed_solve(*a, **k):
        t = time.perf_counter()
        out = solve(*a, **k)
        solves.append((t, time.perf_counter()))
        return out
    estimators.solve = timed_solve
    lik = regions.likelihood_regions

    def timed_regions(*a, **k):
        t = time.perf_counter()
        out = lik(*a, **k)
        marks["regions"] = (t, time.perf_counter())
        return out
    regions.likelihood_regions = timed_regions

    bearings = dfkit.read_bearings(sheet)
    t0 = time.perf_counter()
    core.locate(bearings, method=method)
    t1 = time.perf_counter()
    r0, r1 = marks["regions"]
    times["solve in hints+rivals"] = sum(e - s for s, e in solves[1:])
    times["listed stages"] = sum(times[k] for _, k in STAGES) + times["review"]
    times["after solve and regions"] = (t1 - r1) + (r0 - solves[0][1])
    times["locate"] = t1 - t0
    return {k: round(v, 3) for k, v in times.items()}


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--fixes", type=int, default=100_000)
    ap.add_argument("--sheet", help="a bearing sheet (default: bench_fix.py's sheet of --fixes fixes)")
    ap.add_argument("--method", default="mle")
    a = ap.parse_args()
    if a.sheet:
        print(json.dumps(timed_locate(a.sheet, a.method)))
        return
    sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
    from bench_fix import make_sheet

    with tempfile.TemporaryDirectory() as tmp:
        sheet = os.path.join(tmp, "season.csv")
        make_sheet(sheet, a.fixes, np.random.default_rng(1))
        print(json.dumps(timed_locate(sheet, a.method)))


if __name__ == "__main__":
    main()
