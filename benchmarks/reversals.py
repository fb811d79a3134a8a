"""Reversal hints: how often does dfkit tell the user to turn a bearing by 180 degrees, and is it right?

    .venv/bin/python benchmarks/reversals.py [--fixes 1200] [--sd 5] [--seed 1] [--n 3,4,5] [--method mle]

Simulates fixes as benchmarks/coverage.py does (``--layout`` random by default: observers in
random directions 500-3000 m from the transmitter; exact geodesic bearings plus Gaussian
noise of ``--sd`` degrees), once clean and once with one bearing per fix turned by 180
degrees (read from the back of the antenna), with the SD given and estimated, and counts
in the reasons:

* ``single``: fixes told "line L looks reversed"; on clean data every one is false, with a
  reversal ``right`` / ``wrong`` say whether L is the turned line;
* ``either``: fixes told "either line L is reversed ..., or ..." (line K is wild, or every bearing
  is right as read); with a reversal, ``either right`` counts those where L or a K is the turned line;
* ``flagged``: fixes that are not ok (only those are examined for hints).

Nothing is asserted; the numbers go into DEVELOPERS.md. To run another version, put it first on
``PYTHONPATH`` (see bench_regions.py).
"""

from __future__ import annotations

import argparse
import importlib.util
import os
import re
import time

import numpy as np

_spec = importlib.util.spec_from_file_location("coverage_study", os.path.join(os.path.dirname(__file__),
                                                                               "coverage.py"))
study = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(study)

_SINGLE = re.compile(r"line (\d+) looks reversed")
_EITHER = re.compile(r"either line (\d+) is reversed")
_WILD = re.compile(r"line (\d+) is wild")


def cell(n, sd, known, reversed_, n_fix, rng, method, layout):
    from dfkit.locate import locate

    sc = study.simulate(n_fix, n, sd, rng, geometry=layout)
    turned = np.full(n_fix, -1)
    if reversed_:
        turned = rng.integers(0, n, n_fix)
        sc["bearing"][np.arange(n_fix), turned] = (sc["bearing"][np.arange(n_fix), turned] + 180.0) % 360.0
    t0 = time.process_time()
    t = locate(study.read(sc, sd if known else None), method=method).table
    cpu = time.process_time() - t0
    line_of = 2 + np.arange(n_fix) * n + turned          # the sheet's line of the turned bearing (header: 1)
    row = dict(n=n, sd="known" if known else "estimated", data="one reversed" if reversed_ else "clean",
               fixes=n_fix, flagged=int((t["status"] != "ok").sum()), single=0, right=0, wrong=0, either=0,
               either_right=0, cpu=cpu)
    for i, reason in enumerate(t["reason"].astype(str)):
        single = {int(x) for x in _SINGLE.findall(reason)}
        either = [int(x) for x in _EITHER.findall(reason)] + [int(x) for x in _WILD.findall(reason)]
        if single:
            row["single"] += 1
            row["right" if line_of[i] in single else "wrong"] += reversed_
        if either:
            row["either"] += 1
            row["either_right"] += int(reversed_ and line_of[i] in either)
    return row


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--fixes", type=int, default=1200)
    ap.add_argument("--sd", type=float, default=5.0)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--n", default="3,4,5")
    ap.add_argument("--method", default="mle")
    ap.add_argument("--layout", default="random", choices=sorted(study.GEOMETRIES))
    a = ap.parse_args(argv)
    print("| n | SD | data | fixes | flagged | single | single right | single wrong | either | either right |")
    print("|---|---|---|---|---|---|---|---|---|---|")
    t0 = time.process_time()
    for n in (int(v) for v in a.n.split(",")):
        for known in (True, False):
            for rev in (False, True):
                rng = np.random.default_rng([a.seed, n, known, rev])
                r = cell(n, a.sd, known, rev, a.fixes, rng, a.method, a.layout)
                dash = lambda v: str(v) if rev else ""  # noqa: E731
                print(f"| {r['n']} | {r['sd']} | {r['data']} | {r['fixes']} | {r['flagged']} | {r['single']} | "
                      f"{dash(r['right'])} | {dash(r['wrong'])} | {r['either']} | {dash(r['either_right'])} |",
                      flush=True)
    print(f"\nmethod {a.method}, bearing SD {a.sd:g}°, layout {a.layout}, seed {a.seed}; "
          f"{time.process_time() - t0:.0f} s CPU in all")


if __name__ == "__main__":
    main()
