"""Speed of reading and checking a season-sized sheet (`read_bearings` alone: no solving, no writing).

    .venv/bin/python benchmarks/bench_read.py [--rows 400000] [--kind plain|timed|utm|dms] [--repeat 3] [--sheet PATH]

Builds one sheet of the chosen kind in a temporary folder and times `dfkit.read_bearings` on it in process
(best and median of --repeat runs, wall clock and CPU), with the resident memory (VmRSS, Linux) after the imports and
after the first read: what the read leaves behind, live tables and what the allocator keeps. ``--sheet`` reads
an existing sheet instead (e.g. ``benchmarks/bench_fix.py``'s). Kinds:

* ``plain``: fix, lat, lon, bearing, sd (decimal degrees, labelled fixes);
* ``timed``: tag, time (ISO 8601 with offset), lat, lon, bearing: unlabelled, grouped by the window;
* ``utm``: fix, utm_zone (band letters), easting, northing, bearing;
* ``dms``: fix, lat, lon written as degrees-decimal-minutes with hemisphere letters, bearing.

Nothing is asserted; numbers go into DEVELOPERS.md with the command that produced them.
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import tempfile
import time

import numpy as np


def make_sheet(path, n, kind, rng):
    lat = rng.uniform(46.0, 49.0, n)
    lon = rng.uniform(12.0, 18.0, n)
    b = rng.uniform(0, 360, n)
    with open(path, "w") as fh:
        if kind == "plain":
            fh.write("fix,lat,lon,bearing,sd\n")
            fh.writelines(f"F{i // 4},{la:.6f},{lo:.6f},{x:.1f},4\n" for i, (la, lo, x) in enumerate(zip(lat, lon, b)))
        elif kind == "timed":
            fh.write("tag,time,lat,lon,bearing\n")
            t0 = np.datetime64("2026-05-01T00:00:00")
            secs = np.sort(rng.uniform(0, 150 * 86400, n)).astype("int64")
            stamps = (t0 + secs.astype("timedelta64[s]")).astype(str)
            tags = rng.integers(0, 40, n)
            fh.writelines(f"{150 + t / 1000:.3f},{s}+02:00,{la:.6f},{lo:.6f},{x:.1f}\n"
                          for t, s, la, lo, x in zip(tags, stamps, lat, lon, b))
        elif kind == "utm":
            import pyproj

            tr = pyproj.Transformer.from_crs("EPSG:4326", "EPSG:32633", always_xy=True)
            e, nn = tr.transform(lon, lat)
            fh.write("fix,utm_zone,easting,northing,bearing\n")
            band = np.where(lat >= 48.0, "U", "T")   # GPS-style band letters (T: 40-48 N, U: 48-56 N)
            fh.writelines(f"F{i // 4},33{z},{x:.0f},{y:.0f},{v:.1f}\n"
                          for i, (z, x, y, v) in enumerate(zip(band, e, nn, b)))
        elif kind == "dms":
            fh.write("fix,lat,lon,bearing\n")
            la_m = np.floor(lat * 60000) / 1000          # whole thousandths of a minute: never '60.000'
            lo_m = np.floor(lon * 60000) / 1000
            fh.writelines(f"F{i // 4},{int(a // 60)}°{a % 60:06.3f}'N,E{int(o // 60)} {o % 60:06.3f},{x:.1f}\n"
                          for i, (a, o, x) in enumerate(zip(la_m, lo_m, b)))
        else:
            raise SystemExit(f"unknown --kind {kind}")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--rows", type=int, default=400_000)
    ap.add_argument("--kind", default="plain")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--sheet", default="", help="read this sheet instead of making one")
    a = ap.parse_args()
    sys.path.insert(0, os.path.join(os.path.dirname(__file__), ".."))
    import dfkit

    with tempfile.TemporaryDirectory() as tmp:
        path = a.sheet or os.path.join(tmp, "sheet.csv")
        if not a.sheet:
            make_sheet(path, a.rows, a.kind, np.random.default_rng(1))
        times, cpu, rss = [], [], [_rss_mib()]
        b = None
        for _ in range(a.repeat):
            del b
            t0, c0 = time.perf_counter(), time.process_time()
            b = dfkit.read_bearings(path)
            times.append(time.perf_counter() - t0)
            cpu.append(time.process_time() - c0)
            rss.append(_rss_mib())
        print(f"{a.sheet or a.kind}: {b.n_rows} rows, {len(b.table)} usable, {b.n_rejected} rejected; read_bearings "
              f"best {min(times):.2f} s, median {statistics.median(times):.2f} s, CPU median "
              f"{statistics.median(cpu):.2f} s over {a.repeat} runs; RSS {rss[0]} MiB after imports, {rss[1]} MiB "
              "after the first read")


def _rss_mib():
    try:
        with open("/proc/self/status") as fh:
            return next(int(ln.split()[1]) // 1024 for ln in fh if ln.startswith("VmRSS"))
    except (OSError, StopIteration):
        return -1


if __name__ == "__main__":
    main()
