"""The edges of `dfkit fix`: start-up, imports, the run, interpreter exit, and the CSV write, two versions compared.

    .venv/bin/python benchmarks/bench_edges.py pairs --before DIR [--runs 10] -- fix SHEET -o OUT.csv
    .venv/bin/python benchmarks/bench_edges.py pairs --before DIR --runs 20 -- fix --help
    .venv/bin/python benchmarks/bench_edges.py write --before DIR SHEET [--rounds 6] [--repeats 5]

Run from outside the checkout (its ``dfkit`` would come first on the path); DIR holds another version's ``dfkit``
package (``git archive main dfkit | tar -x -C DIR``), the version under test is the one ``import dfkit`` finds
here (``PYTHONPATH=checkout``).

``pairs`` runs the command line (``dfkit ARGS``) in a fresh interpreter per run, the two versions alternated
(A B B A ...), and splits each child's CPU time into: ``start`` (the interpreter before the command's first
line), ``imports`` (``from dfkit.cli import main``), ``run`` (``main()``) and ``exit`` (after ``main`` returns:
teardown), the first three from ``getrusage`` inside the child, the total from ``os.wait4`` outside. Ratios and
differences are taken pair by pair (a machine whose speed drifts moves both), and printed as medians with the
extremes.

``write`` solves SHEET once (this version), keeps the fix table as ``dfkit fix`` writes it to CSV, and times
``write_table`` of it in fresh processes of each version in turn: per round and version the median of
``--repeats`` writes (``time.process_time``); the written files are compared byte for byte.

Nothing is asserted: the numbers go into DEVELOPERS.md with the command that produced them.
"""

from __future__ import annotations

import argparse
import os
import pickle
import statistics
import subprocess
import sys
import tempfile

CHILD = r"""
import resource, sys
def cpu():
    r = resource.getrusage(resource.RUSAGE_SELF)
    return r.ru_utime + r.ru_stime
c0 = cpu()
from dfkit.cli import main
c1 = cpu()
out, sys.argv = sys.argv[1], ["dfkit"] + sys.argv[2:]
rc = main()
c2 = cpu()
with open(out, "w") as fh:
    fh.write(f"{c0} {c1} {c2}")
sys.exit(rc)
"""

WRITER = r"""
import pickle, statistics, sys, time
from dfkit.export.csv import write_table
table = pickle.load(open(sys.argv[1], "rb"))
times = []
for _ in range(int(sys.argv[3])):
    t = time.process_time()
    write_table(table, sys.argv[2])
    times.append(time.process_time() - t)
print(statistics.median(times))
"""


def _env(path):
    return dict(os.environ, PYTHONPATH=os.path.abspath(path)) if path else dict(os.environ)


def _one(path, args, tmp):
    out = os.path.join(tmp, "cpu.txt")
    p = subprocess.Popen([sys.executable, "-c", CHILD, out, *args], env=_env(path), stdout=subprocess.DEVNULL,
                         stderr=subprocess.DEVNULL)
    _, status, ru = os.wait4(p.pid, 0)
    total = ru.ru_utime + ru.ru_stime
    with open(out) as fh:
        c0, c1, c2 = map(float, fh.read().split())
    return {"start": c0, "imports": c1 - c0, "run": c2 - c1, "exit": total - c2, "total": total,
            "status": os.waitstatus_to_exitcode(status)}


def _spread(xs, fmt="{:.3f}"):
    xs = sorted(xs)
    return f"{fmt.format(statistics.median(xs))} ({fmt.format(xs[0])}-{fmt.format(xs[-1])})"


def pairs(a):
    here = os.environ.get("PYTHONPATH", "")
    got = {"before": [], "after": []}
    with tempfile.TemporaryDirectory() as tmp:
        for k in range(a.runs):
            order = [("before", a.before), ("after", here)]
            for name, path in (order if k % 2 == 0 else order[::-1]):
                got[name].append(_one(path, a.args, tmp))
    b, n = got["before"], got["after"]
    print(f"dfkit {' '.join(a.args)}: {a.runs} alternated pairs, CPU s; exit status {b[0]['status']} / "
          f"{n[0]['status']}")
    print("| part | before | after | after/before (pair by pair) | after - before s |")
    print("|---|---|---|---|---|")
    for part in ("start", "imports", "run", "exit", "total"):
        ratios = [y[part] / x[part] for x, y in zip(b, n) if x[part] > 0]
        print(f"| {part} | {_spread([x[part] for x in b])} | {_spread([y[part] for y in n])} "
              f"| {_spread(ratios) if ratios else '-'} | {_spread([y[part] - x[part] for x, y in zip(b, n)])} |")


def write(a):
    import dfkit.cli as cli
    from dfkit.cli.common import solve

    with tempfile.TemporaryDirectory() as tmp:
        args = cli.build_parser().parse_args(["fix", a.sheet, "-o", os.path.join(tmp, "x.csv")])
        b, fixes, _ = solve(args)
        del b
        table = fixes.table
        pkl = os.path.join(tmp, "table.pkl")
        with open(pkl, "wb") as fh:
            pickle.dump(table, fh)
        del fixes, table
        here = os.environ.get("PYTHONPATH", "")
        got = {"before": [], "after": []}
        for k in range(a.rounds):
            order = [("before", a.before), ("after", here)]
            for name, path in (order if k % 2 == 0 else order[::-1]):
                out = os.path.join(tmp, f"{name}.csv")
                r = subprocess.run([sys.executable, "-c", WRITER, pkl, out, str(a.repeats)], env=_env(path),
                                   capture_output=True, text=True, check=True)
                got[name].append(float(r.stdout))
        with open(os.path.join(tmp, "before.csv"), "rb") as f1, open(os.path.join(tmp, "after.csv"), "rb") as f2:
            same = f1.read() == f2.read()
    b, n = got["before"], got["after"]
    print(f"write_table of {a.sheet}'s fix table: {a.rounds} alternated rounds, median of {a.repeats} writes each "
          f"(CPU s); same bytes: {same}")
    print(f"before {_spread(b)}, after {_spread(n)}, after/before {_spread([y / x for x, y in zip(b, n)])}")


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    sub = ap.add_subparsers(dest="what", required=True)
    p = sub.add_parser("pairs")
    p.add_argument("--before", required=True)
    p.add_argument("--runs", type=int, default=10)
    p.add_argument("args", nargs=argparse.REMAINDER, help="after --: the dfkit command line")
    w = sub.add_parser("write")
    w.add_argument("--before", required=True)
    w.add_argument("sheet")
    w.add_argument("--rounds", type=int, default=6)
    w.add_argument("--repeats", type=int, default=5)
    a = ap.parse_args()
    if a.what == "pairs":
        a.args = a.args[1:] if a.args[:1] == ["--"] else a.args
        pairs(a)
    else:
        write(a)


if __name__ == "__main__":
    main()
