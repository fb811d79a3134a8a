"""CPU time of the season store's bearing keys (identity, content, moment) on a synthetic bearing table.

    .venv/bin/python benchmarks/bench_season_keys.py [--rows 400000] [--against REV] [--rounds 2]

``--against REV`` also times ``dfkit/season/keys.py`` as it was at git revision REV (read with ``git show``),
alternating with the current one. Nothing is asserted: the numbers go into DEVELOPERS.md.
"""

from __future__ import annotations

import argparse
import importlib.util
import os
import subprocess
import sys
import tempfile
import time

import numpy as np
import pandas as pd

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def table(n: int) -> pd.DataFrame:
    rng = np.random.default_rng(1)
    return pd.DataFrame({
        "fix": [f"F{i // 4}" for i in range(n)], "tag": [f"T{i % 20}" for i in range(n)],
        "time": pd.Timestamp("2026-05-01", tz="UTC") + pd.to_timedelta(np.arange(n) * 60, unit="s"),
        "lat": rng.uniform(46, 48, n), "lon": rng.uniform(14, 16, n), "true_bearing": rng.uniform(0, 360, n),
        "sd": 3.0, "sd_source": "sheet", "grouped_by": "label", "observer": "ana"})


def keys_at(rev: str):
    text = subprocess.run(["git", "show", f"{rev}:dfkit/season/keys.py"], cwd=ROOT, capture_output=True,
                          text=True, check=True).stdout
    path = os.path.join(tempfile.mkdtemp(), "keys_then.py")
    with open(path, "w") as fh:
        fh.write(text)
    spec = importlib.util.spec_from_file_location("keys_then", path)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--rows", type=int, default=400_000)
    ap.add_argument("--against", default=None)
    ap.add_argument("--rounds", type=int, default=2)
    a = ap.parse_args()
    sys.path.insert(0, ROOT)
    from dfkit.season import keys

    t = table(a.rows)
    versions = [("now", keys)] + ([(a.against, keys_at(a.against))] if a.against else [])
    for _ in range(a.rounds):
        for name, mod in versions:
            t0 = time.process_time()
            mod.bearing_keys(t)
            print(f"{name:>10}: {time.process_time() - t0:.2f} s CPU for {a.rows} bearings", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
