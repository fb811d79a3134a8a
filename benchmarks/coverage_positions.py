"""Coverage with observer positions written to a coarse step: do ``ok`` regions still hold the transmitter 95 %?

    cd /tmp && PYTHONPATH=CHECKOUT .venv/bin/python CHECKOUT/benchmarks/coverage_positions.py [--fixes 2000]
        [--sd 2] [--seed 3] [--ranges 600,2500] [--n 4] [--formats latlon6,latlon4,latlon3,mgrs10,mgrs100,utm100]
        [--sd-kinds known,estimated] [--method mle]

Each fix: a transmitter at a random place near 47.9 N, 91.8 W (the 15T MGRS zone), ``--n`` observers around it
(360/n apart +- 15°, ranges uniform in ``--ranges`` metres), exact geodesic bearings from pyproj's Geod plus
Gaussian noise of ``--sd`` degrees, written to 0.1°. The observers' positions are then written as a field sheet
would (the truth kept exact):

* ``latlon6`` / ``latlon4`` / ``latlon3``: decimal degrees to 6, 4 or 3 decimals (rounded to nearest);
* ``dms1``: degrees, minutes and whole seconds (rounded to nearest);
* ``mgrs10`` / ``mgrs100``: MGRS references of 8 or 6 digits from the ``mgrs`` package, which truncates to the
  square's south-west corner as the MGRS standard writes a reference;
* ``utm100``: UTM zone, easting and northing rounded to the nearest 100 m (pyproj).

Per format and SD kind (``known``: the sheet's sd column holds the true SD; ``estimated``: no SD) the table gives
the share of fixes ``ok`` and ``ok: region``, the share of ok fixes whose 95 % likelihood region holds the truth
(:meth:`dfkit.locate.Fixes.contains`, an exact test), with its binomial standard error, and the median region
reach of the ok fixes. Nothing is asserted; DEVELOPERS.md holds the table (run once with ``PYTHONPATH`` set to the
version before, once to the version after).
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time

import numpy as np
import pyproj

GEOD = pyproj.Geod(ellps="WGS84")
FORMATS = ("latlon6", "latlon4", "latlon3", "dms1", "mgrs10", "mgrs100", "utm100")


def simulate(n_fix, n, sd, ranges, rng):
    lon0, lat0, _ = GEOD.fwd(np.full(n_fix, -91.8), np.full(n_fix, 47.9), rng.uniform(0, 360, n_fix),
                             rng.uniform(0, 20000, n_fix))
    ang = rng.uniform(0, 360, (n_fix, 1)) + np.arange(n)[None, :] * 360.0 / n + rng.uniform(-15, 15, (n_fix, n))
    dist = rng.uniform(*ranges, (n_fix, n))
    lon_s, lat_s, back = GEOD.fwd(np.repeat(lon0, n), np.repeat(lat0, n), ang.ravel(), dist.ravel())
    true_b = (np.asarray(back) % 360.0).reshape(n_fix, n)
    obs = np.round(true_b + rng.normal(0, sd, (n_fix, n)), 1) % 360.0
    return dict(lat=np.asarray(lat_s).reshape(n_fix, n), lon=np.asarray(lon_s).reshape(n_fix, n), bearing=obs,
                tlat=np.asarray(lat0), tlon=np.asarray(lon0))


def _dms(v, pos, neg):
    h = pos if v >= 0 else neg
    s = int(round(abs(v) * 3600))
    return f"{s // 3600}°{(s // 60) % 60:02d}'{s % 60:02d}\"{h}"


def position_cells(fmt, lat, lon):
    """Header and cells of one observer position in format ``fmt``."""
    if fmt.startswith("latlon"):
        k = int(fmt[6:])
        return "lat,lon", f"{lat:.{k}f},{lon:.{k}f}"
    if fmt == "dms1":
        return "lat,lon", f"{_dms(lat, 'N', 'S')},{_dms(lon, 'E', 'W')}"
    if fmt.startswith("mgrs"):
        import mgrs

        prec = {"mgrs10": 4, "mgrs100": 3}[fmt]
        return "mgrs", mgrs.MGRS().toMGRS(lat, lon, MGRSPrecision=prec)
    if fmt == "utm100":
        zone = int((lon + 180) // 6) + 1
        tf = pyproj.Transformer.from_crs(4326, 32600 + zone, always_xy=True)
        e, n = tf.transform(lon, lat)
        return "utm_zone,easting,northing", f"{zone}N,{round(e, -2):.0f},{round(n, -2):.0f}"
    raise ValueError(fmt)


def write_sheet(path, sc, fmt, sd):
    n_fix, n = sc["lat"].shape
    head = position_cells(fmt, sc["lat"][0, 0], sc["lon"][0, 0])[0]
    with open(path, "w", encoding="utf-8") as fh:
        fh.write(f"fix,{head},bearing" + (",sd" if sd else "") + "\n")
        for i in range(n_fix):
            for j in range(n):
                cells = position_cells(fmt, sc["lat"][i, j], sc["lon"][i, j])[1]
                fh.write(f"F{i},{cells},{sc['bearing'][i, j]:.1f}" + (f",{sd:g}" if sd else "") + "\n")


def cell(sc, fmt, sd, method):
    import dfkit
    from dfkit.locate import locate

    with tempfile.TemporaryDirectory() as d:
        path = os.path.join(d, "sheet.csv")
        write_sheet(path, sc, fmt, sd)
        b = dfkit.read_bearings(path)
    fx = locate(b, method=method)
    t = fx.table
    ok = (t["status"] == "ok").to_numpy()
    inside = np.asarray(fx.contains(sc["tlat"], sc["tlon"]), bool)
    cover = inside[ok].mean() if ok.any() else np.nan
    se = np.sqrt(cover * (1 - cover) / max(ok.sum(), 1))
    reach = np.nanmedian(t["region_reach_m"].to_numpy(float)[ok]) if ok.any() else np.nan
    return dict(ok=ok.mean(), cover=cover, se=se, reach=reach)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--fixes", type=int, default=2000)
    ap.add_argument("--n", type=int, default=4)
    ap.add_argument("--sd", type=float, default=2.0)
    ap.add_argument("--seed", type=int, default=3)
    ap.add_argument("--ranges", default="600,2500")
    ap.add_argument("--formats", default=",".join(FORMATS))
    ap.add_argument("--sd-kinds", default="known,estimated")
    ap.add_argument("--method", default="mle")
    a = ap.parse_args(argv)
    import dfkit

    ranges = tuple(float(v) for v in a.ranges.split(","))
    print(f"dfkit from {os.path.dirname(dfkit.__file__)}", file=sys.stderr)
    print("| positions | SD | ok | ok: region | ± | median reach m |\n|---|---|---|---|---|---|")
    t0 = time.process_time()
    for kind in a.sd_kinds.split(","):
        for fmt in a.formats.split(","):
            rng = np.random.default_rng([a.seed, a.n])        # the same fixes for every format and SD kind
            sc = simulate(a.fixes, a.n, a.sd, ranges, rng)
            r = cell(sc, fmt, a.sd if kind == "known" else None, a.method)
            print(f"| {fmt} | {kind} | {100 * r['ok']:.1f} % | {100 * r['cover']:.1f} % | {100 * r['se']:.1f} | "
                  f"{r['reach']:.0f} |", flush=True)
    print(f"\n{a.fixes} fixes of {a.n} bearings per row, SD {a.sd:g}°, ranges {a.ranges} m, method {a.method}, "
          f"seed {a.seed}; {time.process_time() - t0:.0f} s CPU", file=sys.stderr)


if __name__ == "__main__":
    main()
