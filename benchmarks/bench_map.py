"""Size and time of a season map against `dfkit fix` on the same sheet, and whether it opens in a browser.

    .venv/bin/python benchmarks/bench_map.py sheet [--fixes 20000] [--out season.csv]
    .venv/bin/python benchmarks/bench_map.py run [--fixes 20000] [--browser]

``sheet`` writes a season sheet: N fixes x 4 bearings (noise 4 deg), 40 tags, one fix per tag every few hours
over 120 days, around central Europe, made with pyproj geodesics from an invented truth. ``run`` builds one,
times `dfkit fix SHEET -o out.csv` and `dfkit map SHEET -o map.html` end to end (one run each; for medians,
time the two commands with a benchmarking tool of your choice, e.g. hyperfine), reports the map's size and,
with ``--browser``, opens it in Debian's Chromium with no network and reports load time, script errors and
how many shapes were drawn. Nothing is asserted: numbers go into DEVELOPERS.md.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time

import numpy as np
import pyproj

GEOD = pyproj.Geod(ellps="WGS84")


def make_season(path, n_fix, seed=1, k=4, n_tags=40):
    """Write a season sheet of ``n_fix`` fixes with ``k`` bearings each; returns the truth (lat, lon)."""
    rng = np.random.default_rng(seed)
    lat0 = rng.uniform(46.0, 49.0, n_fix)
    lon0 = rng.uniform(9.0, 17.0, n_fix)
    tag = np.arange(n_fix) % n_tags
    start = np.datetime64("2026-05-01T05:00:00")
    t_fix = start + ((np.arange(n_fix) // n_tags) * 3 * 3600 + rng.integers(0, 3600, n_fix)).astype("timedelta64[s]")
    ang = rng.uniform(0, 360, (n_fix, 1)) + np.arange(k) * 90 + rng.normal(0, 20, (n_fix, k))
    dist = rng.uniform(400, 2000, (n_fix, k))
    lon_s, lat_s, back = GEOD.fwd(np.repeat(lon0, k), np.repeat(lat0, k), ang.ravel(), dist.ravel())
    bearing = (np.asarray(back) + rng.normal(0, 4.0, n_fix * k)) % 360
    t_b = np.repeat(t_fix, k) + (np.tile(np.arange(k), n_fix) * 240).astype("timedelta64[s]")
    with open(path, "w") as fh:
        fh.write("fix,tag,time,lat,lon,bearing,sd,observer\n")
        for i, (la, lo, b, t) in enumerate(zip(lat_s, lon_s, bearing, t_b)):
            f = i // k
            fh.write(f"F{f},T{tag[f]:02d},{str(t)}Z,{la:.6f},{lo:.6f},{b:.2f},4,{'ABCD'[i % k]}\n")
    return lat0, lon0


def _timed(cmd):
    t0 = time.perf_counter()
    r = subprocess.run(cmd, capture_output=True, text=True)
    return time.perf_counter() - t0, r


def open_in_browser(path):
    from playwright.sync_api import sync_playwright

    args = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
            "--disable-component-update", "--disable-sync", "--no-first-run", "--disable-quic"]
    outside, errors = [], []
    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path="/usr/bin/chromium", args=args)
        page = browser.new_page(viewport={"width": 1300, "height": 800})

        def route(r):
            if r.request.url.startswith(("file:", "data:", "about:")):
                return r.continue_()
            outside.append(r.request.url)
            return r.abort()

        page.route("**/*", route)
        page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
        page.on("pageerror", lambda e: errors.append(str(e)))
        t0 = time.perf_counter()
        page.goto("file://" + os.path.abspath(path), timeout=120_000)
        page.wait_for_function("window.dfkit && window.dfkit.counts", timeout=120_000)
        t_load = time.perf_counter() - t0
        counts = page.evaluate("JSON.stringify(window.dfkit.counts)")
        t0 = time.perf_counter()
        page.check("input[data-kind=bearing]")
        page.wait_for_function("window.dfkit.counts.bearing > 0", timeout=120_000)
        t_bear = time.perf_counter() - t0
        counts_all = page.evaluate("JSON.stringify(window.dfkit.counts)")
        browser.close()
    return t_load, counts, t_bear, counts_all, outside, errors


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("what", choices=["sheet", "run"])
    ap.add_argument("--fixes", type=int, default=20_000)
    ap.add_argument("--out", default="season.csv")
    ap.add_argument("--browser", action="store_true")
    a = ap.parse_args()
    if a.what == "sheet":
        make_season(a.out, a.fixes)
        print(f"wrote {a.out}: {a.fixes} fixes, {4 * a.fixes} bearings")
        return
    with tempfile.TemporaryDirectory() as tmp:
        sheet = os.path.join(tmp, "season.csv")
        make_season(sheet, a.fixes)
        t_fix, r = _timed([sys.executable, "-m", "dfkit", "fix", sheet, "-o", os.path.join(tmp, "out.csv")])
        print(f"dfkit fix: {t_fix:.1f} s (exit {r.returncode})")
        html = os.path.join(tmp, "map.html")
        t_map, r = _timed([sys.executable, "-m", "dfkit", "map", sheet, "-o", html])
        size = os.path.getsize(html) / 1e6 if os.path.exists(html) else float("nan")
        print(f"dfkit map: {t_map:.1f} s (exit {r.returncode}), {size:.1f} MB; ratio map/fix {t_map / t_fix:.2f}")
        if r.returncode not in (0, 1):
            print(r.stderr[-2000:])
        if a.browser:
            t_load, counts, t_bear, counts_all, outside, errors = open_in_browser(html)
            print(f"browser: opened and drawn in {t_load:.1f} s: {counts}; bearings switched on in {t_bear:.1f} s: "
                  f"{counts_all}; outside requests {len(outside)}, script errors {errors[:3]}")


if __name__ == "__main__":
    main()
