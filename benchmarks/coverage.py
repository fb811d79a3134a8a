"""Coverage study: do dfkit's 95 % regions hold the transmitter 95 % of the time?

    .venv/bin/python benchmarks/coverage.py [--fixes 2000] [--sd 5] [--seed 1] [--methods mle,andrews]
                                            [--n 2,3,4,5,6] [--only clean|outlier] [--out table.md]
                                            [--geometries spread,random,arc] [--decimals 6]

For every method x SD known/estimated x n = 2..6 bearings x clean/one outlier x crossing
geometry it simulates ``--fixes`` fixes with a known truth (stations 500-2000 m from the
transmitter, exact geodesic bearings from pyproj's Geod plus Gaussian noise of ``--sd``
degrees; with an outlier, one bearing in each fix is a reflection 40-120 degrees off),
writes them as a sheet, solves it with ``dfkit.locate`` and prints, per cell:

* ``region``: share of fixes with a region whose likelihood-ratio region holds the truth
  (exact test, :meth:`dfkit.locate.Fixes.contains`), and ``ellipse`` the same for the
  covariance ellipse;
* ``ok``: share of fixes ``ok``; ``ok: region``: coverage of the region among the ``ok`` fixes alone
  (the promise a user relies on); ``no region``: share left without a region;
* ``median m``: median distance from the fix to the truth over fixes with a position, and
  for outlier cells ``oracle m``: the same for Lenth's fit without the bad bearing;
* ``not ok``: the statuses of the others.

Geometries: ``spread`` (stations around the transmitter, 360/n apart +- 15 degrees) for every n;
for two bearings also crossings of 30, 90 and 150 degrees. Nothing is asserted: the table
goes into DEVELOPERS.md; tests/test_coverage.py holds the key cells within 93-97 % on
smaller seeded runs. The full grid takes a few CPU minutes.
"""

from __future__ import annotations

import argparse
import collections
import os
import sys
import tempfile
import time

import numpy as np
import pyproj

GEOD = pyproj.Geod(ellps="WGS84")


#: Station layouts around the transmitter for three or more bearings: azimuths from it [°] and ranges [m].
GEOMETRIES = {
    "spread": "360/n apart +- 15°, 500-2000 m",
    "random": "azimuths uniform at random, 500-3000 m",
    "arc": "azimuths uniform within a 120° arc (observers along one side), 500-2000 m",
    "walk": "each observer 40-140° on from the last (walking round the transmitter), 400-2500 m",
}


#: How far off the one wild bearing of an outlier cell is [°] (``--wild``): reflections 40-120°, or a bad reading
#: 30-60°.
WILD_RANGES = {"40-120": (40.0, 120.0), "30-60": (30.0, 60.0)}


def simulate(n_fix, n, sd, rng, *, crossing=None, outlier=False, geometry="spread", wild=(40.0, 120.0)):
    lat0 = rng.uniform(46.0, 48.0, n_fix)
    lon0 = rng.uniform(7.0, 10.0, n_fix)
    ranges = {"random": (500, 3000), "walk": (400, 2500)}.get(geometry, (500, 2000))
    if crossing is not None:
        ang = rng.uniform(0, 360, (n_fix, 1)) + np.linspace(0, crossing, n)[None, :]
    elif geometry == "random":
        ang = rng.uniform(0, 360, (n_fix, n))
    elif geometry == "walk":
        ang = rng.uniform(0, 360, (n_fix, 1)) + np.cumsum(
            np.concatenate([np.zeros((n_fix, 1)), rng.uniform(40, 140, (n_fix, n - 1))], axis=1), axis=1)
    elif geometry == "arc":
        ang = rng.uniform(0, 360, (n_fix, 1)) + rng.uniform(0, 120, (n_fix, n))
    else:
        ang = rng.uniform(0, 360, (n_fix, 1)) + np.arange(n)[None, :] * 360.0 / n + rng.normal(0, 15, (n_fix, n))
    dist = rng.uniform(*ranges, (n_fix, n))
    lon_s, lat_s, back = GEOD.fwd(np.repeat(lon0, n), np.repeat(lat0, n), ang.ravel(), dist.ravel())
    true_b = (np.asarray(back) % 360.0).reshape(n_fix, n)     # back azimuth at the station = towards the target
    obs = true_b + rng.normal(0, sd, (n_fix, n))
    bad = np.full(n_fix, -1)
    if outlier:
        # True: one wild bearing in every fix; a share in (0, 1): in that share of fixes, drawn at random
        bad = rng.integers(0, n, n_fix)
        off = rng.uniform(*wild, n_fix) * rng.choice([-1, 1], n_fix)
        if outlier is not True:
            bad = np.where(rng.uniform(size=n_fix) < float(outlier), bad, -1)
        hit = np.flatnonzero(bad >= 0)
        obs[hit, bad[hit]] = true_b[hit, bad[hit]] + off[hit]
    return dict(lat=np.asarray(lat_s).reshape(n_fix, n), lon=np.asarray(lon_s).reshape(n_fix, n),
                bearing=obs % 360.0, tlat=lat0, tlon=lon0, bad=bad)


def read(sc, sd, keep=None, decimals=6):
    """The scenario as Bearings, through a sheet file like a user's (``keep`` masks bearings; bearings written
    with ``decimals`` decimals, 0 for whole degrees as read off a compass)."""
    import dfkit

    n_fix, n = sc["lat"].shape
    keep = np.ones((n_fix, n), bool) if keep is None else keep
    with tempfile.TemporaryDirectory() as d:
        path = os.path.join(d, "sheet.csv")
        with open(path, "w") as fh:
            fh.write("fix,lat,lon,bearing" + (",sd" if sd else "") + "\n")
            for i in range(n_fix):
                for j in range(n):
                    if keep[i, j]:
                        b = round(float(sc["bearing"][i, j]), decimals) % 360.0
                        fh.write(f"F{i},{sc['lat'][i, j]:.9f},{sc['lon'][i, j]:.9f},{b:.{decimals}f}"
                                 + (f",{sd}" if sd else "") + "\n")
        return dfkit.read_bearings(path)


def errors_m(t, sc):
    has = np.isfinite(t["lat"].to_numpy(float))
    err = np.full(len(t), np.nan)
    if has.any():
        _, _, d = GEOD.inv(t["lon"].to_numpy(float)[has], t["lat"].to_numpy(float)[has], sc["tlon"][has],
                           sc["tlat"][has])
        err[has] = d
    return err


def cell(method, known, n, sd, n_fix, rng, *, crossing=None, outlier=False, geometry="spread", decimals=6,
         wild="40-120"):
    from dfkit.locate import WITH_POSITION, locate

    sc = simulate(n_fix, n, sd, rng, crossing=crossing, outlier=outlier, geometry=geometry, wild=WILD_RANGES[wild])
    b = read(sc, sd if known else None, decimals=decimals)
    t0 = time.process_time()
    # a sheet where every fix has a wild bearing trips the sheet-wide SD check (dfkit.locate.sheetwide) and every
    # fix is then flagged; the outlier cells measure each fix on its own, as in a sheet where wild bearings are few
    fx = locate(b, method=method, sheet_checks=not outlier)
    cpu = time.process_time() - t0
    t = fx.table
    status = t["status"].to_numpy()
    with_pos = np.isin(status, WITH_POSITION)
    has_region = with_pos & fx.likelihood.has_region
    has_ellipse = with_pos & np.isfinite(t["semi_major_m"].to_numpy(float))
    in_region = fx.contains(sc["tlat"], sc["tlon"])
    in_ellipse = fx.contains(sc["tlat"], sc["tlon"], kind="ellipse")
    err = errors_m(t, sc)
    kind = ("clean" if not outlier else f"outlier {wild}°" if outlier is True
            else f"{100 * outlier:g} % of fixes with one {wild}° off")
    row = dict(method=method, sd="known" if known else "estimated", n=n,
               data=kind + (" (whole °)" if decimals == 0 else ""),
               geometry=geometry if crossing is None else f"{crossing}°",
               region=in_region[has_region].mean() if has_region.any() else np.nan,
               ellipse=in_ellipse[has_ellipse].mean() if has_ellipse.any() else np.nan,
               ok=(status == "ok").mean(), no_region=1 - has_region.mean(),
               ok_cover=in_region[status == "ok"].mean() if (status == "ok").any() else np.nan,
               median=np.nanmedian(err) if np.isfinite(err).any() else np.nan, oracle=np.nan, cpu=cpu,
               not_ok=", ".join(f"{k} {v}" for k, v in collections.Counter(status[status != "ok"]).most_common()))
    if outlier is True:
        keep = np.ones(sc["lat"].shape, bool)
        keep[np.arange(n_fix), sc["bad"]] = False
        ref = locate(read(sc, sd if known else None, keep, decimals), method="mle").table
        row["oracle"] = np.nanmedian(errors_m(ref, sc))
    return row


def fmt(rows):
    head = ("| method | SD | n | data | geometry | region | ellipse | ok | ok: region | no region | median m | "
            "oracle m | not ok |\n|---|---|---|---|---|---|---|---|---|---|---|---|---|")
    out = [head]
    for r in rows:
        pct = lambda v: "" if not np.isfinite(v) else f"{100 * v:.1f} %"  # noqa: E731
        num = lambda v: "" if not np.isfinite(v) else f"{v:.0f}"  # noqa: E731
        out.append(f"| {r['method']} | {r['sd']} | {r['n']} | {r['data']} | {r['geometry']} | {pct(r['region'])} | "
                   f"{pct(r['ellipse'])} | {pct(r['ok'])} | {pct(r['ok_cover'])} | {pct(r['no_region'])} | {num(r['median'])} | "
                   f"{num(r['oracle'])} | {r['not_ok']} |")
    return "\n".join(out)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--fixes", type=int, default=2000)
    ap.add_argument("--sd", type=float, default=5.0)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--methods", default="mle,huber,andrews,lsq,stansfield")
    ap.add_argument("--n", default="2,3,4,5,6")
    ap.add_argument("--sd-kinds", default="known,estimated")
    ap.add_argument("--only", choices=["clean", "outlier"], default=None)
    ap.add_argument("--geometries", default="spread",
                    help="station layouts for n >= 3, comma-separated: " + "; ".join(f"{k}: {v}" for k, v in GEOMETRIES.items()))
    ap.add_argument("--decimals", type=int, default=6,
                    help="decimals the bearings are written with (0: whole degrees, as read off a compass)")
    ap.add_argument("--wild", choices=list(WILD_RANGES), default="40-120",
                    help="how far off the wild bearing of outlier cells is, in degrees (default 40-120)")
    ap.add_argument("--mixed", type=float, default=None, metavar="SHARE",
                    help="also a cell per n and layout where this share of fixes (e.g. 0.15) has one wild bearing: "
                         "its 'ok: region' is the promise a user relies on in a sheet with some wild bearings")
    ap.add_argument("--areas", action="store_true",
                    help="instead of the table: median region area of ok fixes with the SD estimated against the "
                         "same fixes with the true SD given, per n and layout")
    ap.add_argument("--out", default=None, help="also write the table to this file")
    a = ap.parse_args(argv)
    for g in a.geometries.split(","):
        if g not in GEOMETRIES:
            ap.error(f"--geometries: unknown layout {g!r} (choose from {', '.join(GEOMETRIES)})")
    if a.areas:
        return areas(a)
    rows = []
    t0 = time.process_time()
    for method in a.methods.split(","):
        for kind in a.sd_kinds.split(","):
            known = kind == "known"
            for n in (int(v) for v in a.n.split(",")):
                cells = []
                if n == 2:
                    cells = [dict(crossing=c) for c in (30, 90, 150)] if a.only != "outlier" else []
                else:
                    for g in a.geometries.split(","):
                        if a.only != "outlier":
                            cells.append(dict(geometry=g))
                        if a.only != "clean":
                            cells.append(dict(outlier=True, geometry=g))
                        if a.mixed:
                            cells.append(dict(outlier=a.mixed, geometry=g))
                for kw in cells:
                    rng = np.random.default_rng([a.seed, n, len(rows)])
                    r = cell(method, known, n, a.sd, a.fixes, rng, decimals=a.decimals, wild=a.wild, **kw)
                    rows.append(r)
                    print(fmt([r]).splitlines()[-1], file=sys.stderr, flush=True)
    table = fmt(rows)
    print(table)
    print(f"\n{a.fixes} fixes per cell, bearing SD {a.sd:g}°, seed {a.seed}; "
          f"{time.process_time() - t0:.0f} s CPU in all")
    if a.out:
        with open(a.out, "w") as fh:
            fh.write(table + "\n")


def areas(a):
    """Median region area of the ok fixes, SD estimated against the same fixes with the true SD given: how much a
    measured SD narrows a region (each fix's ratio, and the ratio of the medians)."""
    from dfkit.locate import locate

    print("| method | n | geometry | ok (estimated) | ok (known) | median area estimated km² | median area known km² | "
          "ratio of medians | median of per-fix ratios |\n|---|---|---|---|---|---|---|---|---|")
    for method in a.methods.split(","):
        for n in (int(v) for v in a.n.split(",")):
            for g in a.geometries.split(","):
                rng = np.random.default_rng([a.seed, n, 7])
                sc = simulate(a.fixes, n, a.sd, rng, geometry=g)
                est = locate(read(sc, None, decimals=a.decimals), method=method).table
                kno = locate(read(sc, a.sd, decimals=a.decimals), method=method).table
                ok_e, ok_k = (est["status"] == "ok").to_numpy(), (kno["status"] == "ok").to_numpy()
                ae, ak = est["region_area_m2"].to_numpy(float), kno["region_area_m2"].to_numpy(float)
                both = ok_e & ok_k
                print(f"| {method} | {n} | {g} | {100 * ok_e.mean():.1f} % | {100 * ok_k.mean():.1f} % | "
                      f"{np.median(ae[ok_e]) / 1e6:.3f} | {np.median(ak[ok_k]) / 1e6:.3f} | "
                      f"{np.median(ae[ok_e]) / np.median(ak[ok_k]):.1f} | {np.median(ae[both] / ak[both]):.1f} |",
                      flush=True)


if __name__ == "__main__":
    main()
