"""The floor of `dfkit fix`: the least work any program must do for the same sheet, timed in the same run as dfkit.

    .venv/bin/python benchmarks/bench_floor.py compare [--fixes 10000,100000,250000] [--runs 3] [--loop-sample 300]
                                                       [--loop-method trf|lm]
                                                       [--pyarrow DIR] [--dfkit-args '--jobs 2'] [--before DIR]
    .venv/bin/python benchmarks/bench_floor.py floor SHEET OUT [--columns 30] [--pyarrow DIR]   (one floor run)

The floor process (``floor``) does, in one fresh interpreter, what cannot be avoided:

1. start-up and the imports of numpy, pandas and pyproj;
2. a CSV read with the numeric columns straight into floats (pandas' C parser) and the fix labels as text,
   grouped into fixes with ``pd.factorize``;
3. the minimum exact geodesic work of a solver that works on the ellipsoid: two inverse passes per bearing
   (``pyproj.Geod.inv``, Karney 2013) from a point of its fix, and two direct problems per fix (``Geod.fwd``);
4. one row per fix written as CSV with as many columns as dfkit's fix table (the label as text, the rest
   floats) by a writer in C: pyarrow's ``pyarrow.csv.write_csv`` when pyarrow can be imported (``--pyarrow DIR``
   names a folder holding it, ``pip install --target DIR pyarrow``; it is put on the path only for the write,
   after pandas was imported, so pandas' text columns stay as they are without pyarrow), else the standard
   library's ``csv`` module (in chunks of 10,000 rows).

It prints its stage times (``time.perf_counter``) and its peak memory. ``compare`` builds `bench_fix.py`'s sheets
(N fixes x 4 bearings, SD 4 deg), then runs ``dfkit fix SHEET -o out.csv`` and the floor in turn (A B A B ...,
``--runs`` pairs per size), each in its own process, and reads each child's CPU time and peak memory from
``os.wait4`` (the kernel's own accounting of that child). The ratio dfkit/floor is taken pair by pair, so a
machine whose speed drifts moves both. With ``--pyarrow`` each pair also runs the floor with the csv-module
writer: the memory columns compare against that one (pyarrow's own import is not part of the work), and two
more columns give its CPU time and dfkit's ratio to it. Last, a per-fix ``scipy.optimize.least_squares`` loop (bench_fix.py's, on
the same geodesic residuals with tolerances 1e-12) on a sample of fixes, scaled to all fixes, against dfkit end
to end. Before timing, each version's ``dfkit`` is byte-compiled (``compileall``, as ``pip install`` does for the
floor's packages). Prints a Markdown table of medians with (min-max). ``--before DIR`` (a folder holding another version's
``dfkit`` package, e.g. ``git archive main dfkit | tar -x -C DIR``) runs that version too in each round (A B C ...,
``PYTHONPATH=DIR``; run from outside the checkout, whose ``dfkit`` would otherwise come first) and adds its
CPU time and peak and the ratios after/before, pair by pair. Nothing is asserted: the numbers go into
DEVELOPERS.md with the command that produced them.
"""

from __future__ import annotations

import argparse
import os
import shlex
import statistics
import subprocess
import sys
import tempfile
import time


def floor(sheet, out, columns, writer_path=None):
    t0 = time.perf_counter()
    import numpy as np
    import pandas as pd
    import pyproj

    import resource

    def peak():
        return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024

    stages = {"imports": time.perf_counter() - t0}
    peaks = {"imports": peak()}
    t = time.perf_counter()
    df = pd.read_csv(sheet, dtype={"fix": str, "lat": float, "lon": float, "bearing": float, "sd": float},
                     engine="c")
    codes, labels = pd.factorize(df["fix"])
    lat, lon = df["lat"].to_numpy(), df["lon"].to_numpy()
    m = len(labels)
    stages["read"] = time.perf_counter() - t
    peaks["read"] = peak()
    t = time.perf_counter()
    geod = pyproj.Geod(ellps="WGS84")
    n = np.bincount(codes, minlength=m)
    plat = np.bincount(codes, lat, m) / n          # a point of each fix: the stations' mean
    plon = np.bincount(codes, lon, m) / n
    for _ in range(2):                             # two inverse passes per bearing
        az, _back, dist = geod.inv(plon[codes], plat[codes], lon, lat)
    step_az = np.bincount(codes, az, m) / n        # stand-in for the planar solution's step
    step_d = np.bincount(codes, dist, m) / n * 1e-3
    for _ in range(2):                             # two direct problems per fix
        qlon, qlat, _ = geod.fwd(plon, plat, step_az, step_d)
    stages["geodesics"] = time.perf_counter() - t
    peaks["geodesics"] = peak()
    t = time.perf_counter()
    cols = {"fix": labels.to_numpy(dtype=object), "lat": np.round(qlat, 7), "lon": np.round(qlon, 7)}
    for k in range(columns - 3):
        cols[f"c{k}"] = np.round(step_d * (k + 1), 1)
    if writer_path:    # only now: pandas imported without pyarrow keeps its own string columns
        sys.path.insert(0, writer_path)
    try:
        import pyarrow as pa
        import pyarrow.csv as pacsv

        pacsv.write_csv(pa.table(cols), out)
        writer = "pyarrow"
    except ImportError:
        import csv

        with open(out, "w", newline="") as fh:
            w = csv.writer(fh, lineterminator="\n")
            w.writerow(list(cols))
            for start in range(0, m, 10_000):        # in chunks: the floor keeps few Python objects alive
                w.writerows(zip(*(c[start:start + 10_000].tolist() for c in cols.values())))
        writer = "csv module"
    stages["write"] = time.perf_counter() - t
    peaks["write"] = peak()
    stages["total"] = time.perf_counter() - t0
    print(f"floor: {m} fixes, {len(df)} bearings, writer {writer}; "
          + ", ".join(f"{k} {v:.2f} s" for k, v in stages.items()) + "; peak MiB after "
          + ", ".join(f"{k} {v:.0f}" for k, v in peaks.items()))


def _child(cmd, env=None):
    """Run one command; (wall s, CPU s, peak MiB, exit status) from the kernel's accounting of that child."""
    t0 = time.perf_counter()
    p = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env)
    _, status, ru = os.wait4(p.pid, 0)
    wall = time.perf_counter() - t0
    p.returncode = os.waitstatus_to_exitcode(status)
    return wall, ru.ru_utime + ru.ru_stime, ru.ru_maxrss / 1024, p.returncode


def _compile(pkg):
    import compileall

    if not compileall.compile_dir(pkg, quiet=1, force=False):
        print(f"bench_floor: could not byte-compile {pkg}; its imports are compiled on every run", file=sys.stderr)


def _med(xs):
    return f"{statistics.median(xs):.2f} ({min(xs):.2f}-{max(xs):.2f})"


def compare(a):
    import numpy as np

    here = os.path.dirname(os.path.abspath(__file__))
    sys.path.insert(0, here)
    import bench_fix

    import dfkit
    from dfkit.locate import FIX_COLUMNS

    # Byte-compile each version's modules first, as `pip install` does: an editable checkout is compiled on its
    # first run, and where PYTHONDONTWRITEBYTECODE is set it never is, so every run would recompile about
    # 0.25 s of dfkit sources that the floor's installed packages do not.
    for pkg in [os.path.dirname(dfkit.__file__)] + ([os.path.join(a.before, "dfkit")] if a.before else []):
        _compile(pkg)
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for n_fix in [int(x) for x in a.fixes.split(",")]:
            sheet = os.path.join(tmp, f"s{n_fix}.csv")
            lat, lon, b = bench_fix.make_sheet(sheet, n_fix, np.random.default_rng(1))
            dfk = [sys.executable, "-m", "dfkit", "fix", sheet, "-o", os.path.join(tmp, "out.csv"),
                   *shlex.split(a.dfkit_args)]
            flo = [sys.executable, os.path.abspath(__file__), "floor", sheet, os.path.join(tmp, "floor.csv"),
                   "--columns", str(len(FIX_COLUMNS))] + (["--pyarrow", a.pyarrow] if a.pyarrow else [])
            plain = [x for x in flo if x != "--pyarrow" and x != a.pyarrow]
            got = {"dfkit": [], "floor": [], "plain": [], "before": []}
            for _ in range(a.runs):
                if a.before:
                    got["before"].append(_child(dfk, env=dict(os.environ, PYTHONPATH=os.path.abspath(a.before))))
                got["dfkit"].append(_child(dfk))
                got["floor"].append(_child(flo))
                if a.pyarrow:
                    got["plain"].append(_child(plain))
            d, f = got["dfkit"], got["floor"]
            if a.pyarrow:     # memory against the floor whose writer needs no library of its own
                f = [(x[0], x[1], y[2], x[3]) for x, y in zip(f, got["plain"])]
            rows.append((n_fix, d, f, got["before"], got["plain"]))
            print(f"{n_fix} fixes: dfkit exit {d[0][3]}, floor exit {f[0][3]}", file=sys.stderr)
        # the per-fix optimiser loop, on the last size's fixes
        rng = np.random.default_rng(2)
        idx = rng.choice(len(lat), size=min(a.loop_sample, len(lat)), replace=False)
        bench_fix.loop_solve(lat[0], lon[0], b[0], a.loop_method)    # scipy's import is not part of the loop
        t0 = time.process_time()
        for i in idx:
            bench_fix.loop_solve(lat[i], lon[i], b[i], a.loop_method)
        per_fix = (time.process_time() - t0) / len(idx)
    print("| fixes | dfkit CPU s | floor CPU s | CPU ratio | dfkit wall s | floor wall s | wall ratio "
          "| dfkit peak MiB | floor peak MiB | peak ratio | scipy loop / dfkit |"
          + (" csv-module floor CPU s | CPU ratio to it |" if a.pyarrow else ""))
    print("|---|---|---|---|---|---|---|---|---|---|---|" + ("---|---|" if a.pyarrow else ""))
    for n_fix, d, f, _, plain in rows:
        cpu_r = [x[1] / y[1] for x, y in zip(d, f)]
        wall_r = [x[0] / y[0] for x, y in zip(d, f)]
        mem_r = [x[2] / y[2] for x, y in zip(d, f)]
        loop = per_fix * n_fix / statistics.median(x[1] for x in d)
        more = (f" {_med([x[1] for x in plain])} | {_med([x[1] / y[1] for x, y in zip(d, plain)])} |"
                if a.pyarrow else "")
        print(f"| {n_fix:,} | {_med([x[1] for x in d])} | {_med([x[1] for x in f])} | {_med(cpu_r)} "
              f"| {_med([x[0] for x in d])} | {_med([x[0] for x in f])} | {_med(wall_r)} "
              f"| {_med([x[2] for x in d])} | {_med([x[2] for x in f])} | {_med(mem_r)} | {loop:.0f}x |" + more)
    print(f"scipy least_squares loop ({a.loop_method}): {1e3 * per_fix:.2f} ms CPU per fix ({len(idx)} fixes sampled)")
    if a.before:
        print("\n| fixes | before CPU s | after CPU s | after/before CPU | before peak MiB | after peak MiB "
              "| after/before peak |")
        print("|---|---|---|---|---|---|---|")
        for n_fix, d, _, b, _ in rows:
            print(f"| {n_fix:,} | {_med([x[1] for x in b])} | {_med([x[1] for x in d])} "
                  f"| {_med([x[1] / y[1] for x, y in zip(d, b)])} | {_med([x[2] for x in b])} "
                  f"| {_med([x[2] for x in d])} | {_med([x[2] / y[2] for x, y in zip(d, b)])} |")


def main():
    ap = argparse.ArgumentParser()
    sub = ap.add_subparsers(dest="what", required=True)
    f = sub.add_parser("floor")
    f.add_argument("sheet")
    f.add_argument("out")
    f.add_argument("--columns", type=int, default=30)
    f.add_argument("--pyarrow", default=None, help="a folder holding pyarrow, used for the write only")
    c = sub.add_parser("compare")
    c.add_argument("--fixes", default="10000,100000,250000")
    c.add_argument("--runs", type=int, default=3)
    c.add_argument("--loop-sample", type=int, default=300)
    c.add_argument("--loop-method", default="trf", choices=["trf", "lm"],
                   help="least_squares method of the per-fix loop: trf (scipy's default, the tables' loop) or lm")
    c.add_argument("--pyarrow", default=None, help="a folder holding pyarrow, for the floor's write only")
    c.add_argument("--dfkit-args", default="", help="more arguments for dfkit fix (e.g. '--jobs 2')")
    c.add_argument("--before", default=None, help="a folder holding another version's dfkit package, timed too")
    a = ap.parse_args()
    if a.what == "floor":
        floor(a.sheet, a.out, a.columns, a.pyarrow)
    else:
        compare(a)


if __name__ == "__main__":
    main()
