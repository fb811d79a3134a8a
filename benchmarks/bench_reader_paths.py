"""Speed of reading sheets and writing tables, on the common case and on the awkward ones.

    .venv/bin/python benchmarks/bench_reader_paths.py [--rows 400000] [--repeat 3] [--cases plain,quoted]

Cases (each the best of --repeat runs, in process):

* ``plain``: a quote-free UTF-8 sheet (the fast path, pandas' C parser);
* ``quoted``: the same sheet with one quoted note (the careful per-row path);
* ``one_cp1252_line``: the plain sheet with one Windows-1252 byte (per-line decoding);
* ``comments``: the plain sheet with a comment line every 100 lines;
* ``wide_header_empty``: a header of 50,000 empty columns and a few rows (must stay linear);
* ``write_table``: writing the normalized table of the plain sheet as CSV, with and without the formula guard.

Nothing is asserted: numbers go into DEVELOPERS.md, not into tests.
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time

import numpy as np


def _plain(n, rng):
    lat = 47 + rng.uniform(0, 0.1, n)
    lon = 15 + rng.uniform(0, 0.1, n)
    b = rng.uniform(0, 360, n)
    rows = [f"F{i // 4},{la:.6f},{lo:.6f},{bb:.2f},4,ok" for i, (la, lo, bb) in enumerate(zip(lat, lon, b))]
    return "fix,lat,lon,bearing,sd,note\n" + "\n".join(rows) + "\n"


def _best(func, repeat):
    best = float("inf")
    out = None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = func()
        best = min(best, time.perf_counter() - t0)
    return best, out


def main():
    from dfkit.export.csv import write_table
    from dfkit.io.sheet import read_sheet
    from dfkit.observations import read_bearings

    ap = argparse.ArgumentParser()
    ap.add_argument("--rows", type=int, default=400_000)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--cases", default="", help="comma-separated case names (default: all)")
    a = ap.parse_args()
    rng = np.random.default_rng(1)
    plain = _plain(a.rows, rng)
    lines = plain.split("\n")
    cases = {
        "plain": plain.encode(),
        "quoted": plain.replace(",ok\n", ',"a, b"\n', 1).encode(),
        "one_cp1252_line": plain.encode().replace(b",ok\n", b",B\xf6schung\n", 1),
        "comments": "\n".join("# checked" if i % 100 == 50 else ln for i, ln in enumerate(lines)).encode(),
        "wide_header_empty": ("fix,lat,lon,bearing" + "," * 50_000 + "\nA,47,15,45\nA,47,15.02,315\n").encode(),
    }
    with tempfile.TemporaryDirectory() as tmp:
        for name, data in cases.items():
            path = os.path.join(tmp, f"{name}.csv")
            with open(path, "wb") as fh:
                fh.write(data)
            if a.cases and name not in a.cases.split(","):
                continue
            t_raw, raw = _best(lambda: read_sheet(path), a.repeat)
            t_all, _ = _best(lambda: read_bearings(path), 1)
            print(f"{name:<20} read_sheet {t_raw:6.2f} s   read_bearings {t_all:6.2f} s   "
                  f"({len(raw.table)} rows, {len(raw.columns)} columns)")
        b = read_bearings(os.path.join(tmp, "plain.csv"))
        out = os.path.join(tmp, "out.csv")
        t_g, _ = _best(lambda: write_table(b.table, out), a.repeat)
        try:
            t_v, _ = _best(lambda: write_table(b.table, out, guard_formulas=False), a.repeat)
        except TypeError:
            t_v = float("nan")
        print(f"{'write_table':<20} guarded {t_g:6.2f} s   verbatim {t_v:6.2f} s   ({len(b.table)} rows)")


if __name__ == "__main__":
    main()
