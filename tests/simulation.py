"""Simulated fixes with a known truth, built with geographiclib (Karney 2013), independently of dfkit.

Stations stand 500-2000 m from a transmitter; each observes the exact geodesic
azimuth to it plus Gaussian noise; optionally one bearing per fix is replaced by a
reflection 40-120 degrees off.
"""

from __future__ import annotations

import numpy as np
from geographiclib.geodesic import Geodesic

WGS = Geodesic.WGS84


def scenario(n_fix, n, sd_deg, rng, *, crossing_deg=None, outlier=False, ranges=(500.0, 2000.0), layout="spread",
             wild=(40.0, 120.0)):
    """Arrays (n_fix, n) of station lat/lon and observed bearings, the truth, and the wild bearing's index.

    ``crossing_deg``: the stations' azimuths from the transmitter span this angle (for two
    bearings, their crossing angle); otherwise they are spread around it (``layout`` "spread",
    360/n apart +- 15 degrees), uniform at random ("random"), or uniform within a 120-degree
    arc ("arc": observers along one side).
    """
    lat0 = rng.uniform(46.0, 48.0, n_fix)
    lon0 = rng.uniform(7.0, 10.0, n_fix)
    if crossing_deg is not None:
        ang = rng.uniform(0, 360, (n_fix, 1)) + np.linspace(0, crossing_deg, n)[None, :]
    elif layout == "random":
        ang = rng.uniform(0, 360, (n_fix, n))
    elif layout == "arc":
        ang = rng.uniform(0, 360, (n_fix, 1)) + rng.uniform(0, 120, (n_fix, n))
    else:
        ang = rng.uniform(0, 360, (n_fix, 1)) + np.arange(n)[None, :] * 360.0 / n + rng.normal(0, 15, (n_fix, n))
    dist = rng.uniform(*ranges, (n_fix, n))
    lat = np.empty((n_fix, n))
    lon = np.empty((n_fix, n))
    true_b = np.empty((n_fix, n))
    for i in range(n_fix):
        for j in range(n):
            d = WGS.Direct(lat0[i], lon0[i], ang[i, j], dist[i, j])
            lat[i, j], lon[i, j] = d["lat2"], d["lon2"]
            true_b[i, j] = (d["azi2"] + 180.0) % 360.0      # azi2 points away from the transmitter
    obs = true_b + rng.normal(0, sd_deg, (n_fix, n))
    bad = np.full(n_fix, -1)
    if outlier:
        # True: one bearing ``wild`` degrees off in every fix; a share in (0, 1): in that share of the fixes
        bad = rng.integers(0, n, n_fix)
        off = rng.uniform(*wild, n_fix) * rng.choice([-1, 1], n_fix)
        if outlier is not True:
            bad = np.where(rng.uniform(size=n_fix) < float(outlier), bad, -1)
        hit = np.flatnonzero(bad >= 0)
        obs[hit, bad[hit]] = true_b[hit, bad[hit]] + off[hit]
    return dict(lat=lat, lon=lon, bearing=obs % 360.0, truth_lat=lat0, truth_lon=lon0, bad=bad)


def sheet_text(sc, sd_deg=None):
    """The scenario as a bearing sheet (fix labels F0, F1, ...), with an sd column when given."""
    n_fix, n = sc["lat"].shape
    rows = ["fix,lat,lon,bearing" + (",sd" if sd_deg else "")]
    for i in range(n_fix):
        for j in range(n):
            rows.append(f"F{i},{sc['lat'][i, j]:.9f},{sc['lon'][i, j]:.9f},{sc['bearing'][i, j]:.6f}"
                        + (f",{sd_deg}" if sd_deg else ""))
    return "\n".join(rows) + "\n"


def distance_m(lat1, lon1, lat2, lon2):
    return np.array([WGS.Inverse(a, b, c, d)["s12"] for a, b, c, d in zip(lat1, lon1, lat2, lon2)])


def disc_misfits(table, flat, flon, step=10.0):
    """Each bearing's residual in SDs (lines x points) at the points of a grid of ``step`` m within twice the
    farthest observer's range of (flat, flon) (the wild risk's prior disc): the brute-force integrals of the wild-risk
    tests sum over these points. Geodesics by pyproj (Karney 2013), not dfkit's."""
    import pyproj

    geod = pyproj.Geod(ellps="WGS84")
    lats, lons, brs, sds = (table[c].to_numpy(float) for c in ("lat", "lon", "true_bearing", "sd"))
    n = len(lats)
    _, _, ranges = geod.inv(lons, lats, np.full(n, flon), np.full(n, flat))
    reach = 2.0 * ranges.max()
    xs = np.arange(-reach, reach + step, step)
    x, y = (a.ravel() for a in np.meshgrid(xs, xs))
    disc = x * x + y * y <= reach * reach
    x, y = x[disc], y[disc]
    glon, glat, _ = geod.fwd(np.full(len(x), flon), np.full(len(x), flat), np.degrees(np.arctan2(x, y)),
                             np.hypot(x, y))
    z = [np.radians((br - geod.inv(np.full(len(glat), lo), np.full(len(glat), la), glon, glat)[0] + 180.0) % 360.0
                    - 180.0) / np.radians(sd) for la, lo, br, sd in zip(lats, lons, brs, sds)]
    return np.array(z), np.radians(sds)
