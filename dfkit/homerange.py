r"""Home ranges from a season's fixes: minimum convex polygons and fixed-kernel utilisation distributions.

Each tag's fixes are projected onto a local equal-area plane (Lambert azimuthal
equal-area, centred on the tag's fixes; Snyder 1987, pp. 182-190), where planar
areas are true areas, and the polygons are mapped back to WGS84.

**Minimum convex polygon** (Mohr 1947): the level's fraction of fixes closest to
their arithmetic mean centre (the ⌈p n⌉ nearest; all fixes at p = 1), and the
convex hull of those.

**Fixed kernel** (Worton 1989, 1995; Seaman & Powell 1996; Silverman 1986): the
utilisation distribution

.. math:: \hat f(x) = \frac{1}{n h^2} \sum_i K\left(\frac{x - X_i}{h}\right),
          \qquad K(u) = \frac{1}{2\pi} e^{-|u|^2/2},

on a grid; the p isopleth is the smallest region {f̂ >= c} holding probability
mass p (cells sorted by density, mass accumulated to p). Bandwidth:

* ``href``: h = σ n^(-1/6), σ = √((s_x² + s_y²)/2) with sample variances
  (n - 1 in the denominator), the normal-optimal width for two dimensions
  (Silverman 1986, eq. 4.14) with Worton's (1995) σ;
* ``lscv``: least-squares cross-validation, minimising (normal kernel, D_ij the
  distances between fixes)

  LSCV(h) = 1/(4π n h²) + 1/(2π n² h²) Σ_{i<j} exp(-D²/(4h²))
            - 2/(π n (n-1) h²) Σ_{i<j} exp(-D²/(2h²)),

  i.e. ∫f̂² - (2/n) Σ f̂_{-i}(X_i) written out for the normal kernel (checked by
  quadrature in tests/test_homerange.py). When the minimum runs to the smallest
  width tried (repeated fixes, fixes on a grid) h_ref is used instead, with a warning;
* a number of metres.

**Widened kernels** (``widen=True``, dfkit's own option): each fix's kernel is
the normal N(X_i, h² I + Σ_i), where Σ_i is the fix's own error covariance (the
``cov_ee_m2``, ``cov_en_m2``, ``cov_nn_m2`` columns when present, else rebuilt
from its ellipse axes, orientation and level). Poorly located fixes spread their
weight instead of pinning the range; well located ones barely change.

References
----------
Mohr, C. O. (1947). Table of equivalent populations of North American small
mammals. American Midland Naturalist 37(1), 223-249 [pages from memory].
Worton, B. J. (1989). Kernel methods for estimating the utilization distribution
in home-range studies. Ecology 70(1), 164-168.
Worton, B. J. (1995). Using Monte Carlo simulation to evaluate kernel-based home
range estimators. J. Wildl. Manage. 59(4), 794-800 [from memory].
Seaman, D. E. & Powell, R. A. (1996). An evaluation of the accuracy of kernel
density estimators for home range analysis. Ecology 77(7), 2075-2085.
Silverman, B. W. (1986). Density Estimation for Statistics and Data Analysis.
Chapman & Hall, London [equation number from memory].
Snyder, J. P. (1987). Map Projections: A Working Manual. USGS Professional Paper 1395.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from dfkit import geodesy, regions
from dfkit.policy import MIN_RANGE_FIXES

METHODS = ("mcp", "kde")
#: Grid cells per bandwidth (cell = h / this) and the most cells along one axis.
CELLS_PER_BANDWIDTH = 4
MAX_CELLS = 600


# ------------------------------------------------------------------ planar pieces

def mcp(x, y, level: float = 1.0):
    """Minimum convex polygon of the ⌈level·n⌉ points closest to their mean centre.

    Parameters
    ----------
    x, y : array_like
        Planar coordinates. [m]
    level : float
        Share of points kept, in (0, 1].

    Returns
    -------
    polygon : shapely.Polygon or None
        None when fewer than 3 points are kept or they are collinear.
    n_kept : int
    """
    import shapely

    x = np.asarray(x, float)
    y = np.asarray(y, float)
    _check_level(level)
    n = len(x)
    k = min(n, math.ceil(level * n - 1e-9))
    d2 = (x - x.mean()) ** 2 + (y - y.mean()) ** 2
    keep = np.argsort(d2, kind="stable")[:k]
    if k < 3:
        return None, k
    hull = shapely.convex_hull(shapely.multipoints(np.column_stack([x[keep], y[keep]])))
    return (hull if hull.geom_type == "Polygon" and hull.area > 0 else None), k


def reference_bandwidth(x, y) -> float:
    """h_ref = σ n^(-1/6) with σ = √((s_x² + s_y²)/2) (sample variances). [m]"""
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    sigma = math.sqrt((np.var(x, ddof=1) + np.var(y, ddof=1)) / 2.0)
    return sigma * len(x) ** (-1.0 / 6.0)


#: Up to this many pairs of fixes LSCV sums over every pair; beyond, over a histogram of their squared
#: distances (:data:`LSCV_BINS` bins, equal in log d²; their relative width is about 1 %).
LSCV_EXACT_PAIRS = 2_000_000
LSCV_BINS = 8000


def _pair_d2(x, y):
    """Squared distances of all pairs: (values, counts). Exact for few pairs, else a log-binned histogram."""
    n = len(x)
    if n * (n - 1) // 2 <= LSCV_EXACT_PAIRS:
        i, j = np.triu_indices(n, k=1)
        d2 = (x[i] - x[j]) ** 2 + (y[i] - y[j]) ** 2
        return d2, np.ones_like(d2)
    span = max(float(np.ptp(x)), float(np.ptp(y)), 1e-9)
    lo, hi = math.log(1e-12 * span * span), math.log(2.0 * span * span)
    step = (hi - lo) / (LSCV_BINS - 1)
    counts = np.zeros(LSCV_BINS + 1)                 # bin 0: coincident fixes (d = 0)
    for s in range(0, n - 1, 1000):
        rows = np.arange(s, min(s + 1000, n - 1))
        dx = x[rows, None] - x[None, :]
        dy = y[rows, None] - y[None, :]
        d2 = (dx * dx + dy * dy)[np.arange(n)[None, :] > rows[:, None]]
        with np.errstate(divide="ignore"):
            idx = np.where(d2 > 0, np.clip((np.log(d2) - lo) / step, 0, LSCV_BINS - 1).astype(np.int64) + 1, 0)
        counts += np.bincount(idx, minlength=LSCV_BINS + 1)
    centres = np.concatenate(([0.0], np.exp(lo + (np.arange(LSCV_BINS) + 0.5) * step)))
    keep = counts > 0
    return centres[keep], counts[keep]


def lscv_score(x, y, h, *, pairs=None):
    """LSCV(h) of the normal kernel (see the module docstring), for one or many h [m].

    ``pairs`` (from the private pair-distance helper) saves recomputing the distances.
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    n = len(x)
    h = np.atleast_1d(np.asarray(h, float))
    d2, w = pairs if pairs is not None else _pair_d2(x, y)
    out = np.empty(len(h))
    for k, hk in enumerate(h):
        s4 = np.exp(-d2 / (4 * hk * hk)) @ w
        s2 = np.exp(-d2 / (2 * hk * hk)) @ w
        out[k] = (1 / (4 * np.pi * n * hk * hk) + s4 / (2 * np.pi * n * n * hk * hk)
                  - 2 * s2 / (np.pi * n * (n - 1) * hk * hk))
    return out if np.ndim(out) and len(out) > 1 else float(out[0])


def lscv_bandwidth(x, y) -> tuple[float, str]:
    """The LSCV bandwidth, or h_ref when LSCV has no interior minimum.

    Returns
    -------
    h : float
        Bandwidth. [m]
    warning : str
        '' when LSCV found a minimum; otherwise why h_ref was used.
    """
    from scipy.optimize import minimize_scalar

    x = np.asarray(x, float)
    y = np.asarray(y, float)
    href = reference_bandwidth(x, y)
    if len(x) < 3 or not href > 0:
        return href, "LSCV needs at least 3 distinct fixes; h_ref used"
    pairs = _pair_d2(x, y)
    grid = href * np.geomspace(0.02, 4.0, 60)
    scores = lscv_score(x, y, grid, pairs=pairs)
    k = int(np.nanargmin(scores))
    if not np.isfinite(scores[k]) or k == 0:
        return href, ("LSCV kept shrinking the bandwidth (repeated or gridded fixes?): no minimum, h_ref used")
    if k == len(grid) - 1:
        return href, "LSCV found no minimum below 4 h_ref; h_ref used"
    res = minimize_scalar(lambda h: lscv_score(x, y, h, pairs=pairs), bracket=(grid[k - 1], grid[k], grid[k + 1]),
                          method="brent", options={"xtol": 1e-10})
    return float(res.x), ""


@dataclass(frozen=True)
class Density:
    """A utilisation distribution on a grid: cell centres ``gx``, ``gy`` [m], ``f`` [1/m²] (shape (ny, nx))."""

    gx: np.ndarray
    gy: np.ndarray
    f: np.ndarray

    @property
    def cell_m2(self) -> float:
        return float((self.gx[1] - self.gx[0]) * (self.gy[1] - self.gy[0]))


def kernel_density(x, y, h: float, cov=None, *, cells_per_bandwidth: int = CELLS_PER_BANDWIDTH,
                   max_cells: int = MAX_CELLS) -> Density:
    """The kernel estimate on a grid reaching 4 kernel SDs beyond the outermost points.

    Parameters
    ----------
    x, y : array_like
        Points. [m]
    h : float
        Bandwidth. [m]
    cov : array_like, shape (n, 2, 2), optional
        Each point's own error covariance, added to h² I (widened kernels). [m²]
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    if not h > 0:
        raise ValueError(f"bandwidth h={h!r} must be a positive number of metres")
    reach = h if cov is None else math.sqrt(h * h + float(np.nanmax(np.linalg.eigvalsh(cov)[:, 1])))
    lo_x, hi_x = x.min() - 4 * reach, x.max() + 4 * reach
    lo_y, hi_y = y.min() - 4 * reach, y.max() + 4 * reach
    cell = max(h / cells_per_bandwidth, max(hi_x - lo_x, hi_y - lo_y) / max_cells)
    gx = np.arange(lo_x, hi_x + cell, cell)
    gy = np.arange(lo_y, hi_y + cell, cell)
    n = len(x)
    if cov is None:
        # separable: f = (1/n) Gy^T Gx with Gx[i, j] = phi_h(gx_j - x_i)
        f = np.zeros((len(gy), len(gx)))
        for s in range(0, n, 4096):
            gxm = np.exp(-0.5 * ((gx[None, :] - x[s:s + 4096, None]) / h) ** 2)
            gym = np.exp(-0.5 * ((gy[None, :] - y[s:s + 4096, None]) / h) ** 2)
            f += gym.T @ gxm
        f /= n * 2 * np.pi * h * h
    else:
        cov = np.asarray(cov, float) + h * h * np.eye(2)
        det = cov[:, 0, 0] * cov[:, 1, 1] - cov[:, 0, 1] ** 2
        inv = np.stack([cov[:, 1, 1], -cov[:, 0, 1], cov[:, 0, 0]], axis=1) / det[:, None]
        X, Y = np.meshgrid(gx, gy)
        f = np.zeros(X.shape)
        step = max(1, int(2e7 // X.size))
        for s in range(0, n, step):
            dx = X[None] - x[s:s + step, None, None]
            dy = Y[None] - y[s:s + step, None, None]
            q = (inv[s:s + step, 0, None, None] * dx * dx + 2 * inv[s:s + step, 1, None, None] * dx * dy
                 + inv[s:s + step, 2, None, None] * dy * dy)
            f += (np.exp(-0.5 * q) / (2 * np.pi * np.sqrt(det[s:s + step]))[:, None, None]).sum(axis=0)
        f /= n
    return Density(gx, gy, f)


def isopleth(density: Density, level: float):
    """The smallest region holding probability mass ``level``: (shapely polygon(s) in the plane, threshold).

    Cells are sorted by density and their mass (density x cell area) accumulated
    until it reaches ``level`` of the grid's total; the region is the filled
    contour of the density at that threshold.
    """
    import contourpy
    import shapely

    _check_level(level, allow_one=False)
    f = density.f
    flat = np.sort(f.ravel())[::-1]
    mass = np.cumsum(flat) * density.cell_m2
    k = int(np.searchsorted(mass, level * mass[-1]))
    c = float(flat[min(k, len(flat) - 1)])
    gen = contourpy.contour_generator(density.gx, density.gy, f, fill_type=contourpy.FillType.OuterOffset)
    points, offsets = gen.filled(c, np.inf)
    polys = []
    for pts, off in zip(points, offsets):
        rings = [pts[off[r]:off[r + 1]] for r in range(len(off) - 1)]
        polys.append(shapely.Polygon(rings[0], rings[1:]))
    geom = shapely.union_all(polys) if polys else shapely.Polygon()
    return geom, c


# ------------------------------------------------------------------ covariances of fixes

def fix_covariances(table: pd.DataFrame) -> np.ndarray:
    """Each fix's east/north error covariance, shape (m, 2, 2) [m²]; NaN where the fix has none.

    From ``cov_ee_m2``, ``cov_en_m2``, ``cov_nn_m2`` when the table has them;
    otherwise rebuilt from the ellipse: the axes are k√λ with k the ellipse's
    scale factor (chi-square for a given SD, F(2, n-2) for an estimated one; see
    :func:`dfkit.regions.scale_factor`), so λ = (axis / k)², along the major-axis
    azimuth and across it. For fixes whose SD came from beacon trials (``sd_source``
    'calibration') the fix table does not say how many trials, so the chi-square scale is
    used: their rebuilt covariance is then slightly too large (by F(2, n-1)/chi-square,
    e.g. about 11 % in variance for 30 trials at 95 %), i.e. their kernels are widened a
    little more than they should be.
    """
    m = len(table)
    if {"cov_ee_m2", "cov_en_m2", "cov_nn_m2"} <= set(table.columns):
        ee, en, nn = (pd.to_numeric(table[c], errors="coerce").to_numpy(float)
                      for c in ("cov_ee_m2", "cov_en_m2", "cov_nn_m2"))
        return np.stack([np.stack([ee, en], -1), np.stack([en, nn], -1)], -2)
    a = pd.to_numeric(table["semi_major_m"], errors="coerce").to_numpy(float)
    b = pd.to_numeric(table["semi_minor_m"], errors="coerce").to_numpy(float)
    az = np.radians(pd.to_numeric(table["orientation_deg"], errors="coerce").to_numpy(float))
    level = pd.to_numeric(table["level"], errors="coerce").to_numpy(float)
    estimated = table["sd_source"].astype(str).to_numpy() == "estimated" if "sd_source" in table else np.zeros(m, bool)
    n_used = pd.to_numeric(table.get("n_used", pd.Series(np.full(m, np.nan))), errors="coerce").to_numpy(float)
    dof = np.where(estimated, n_used - 2, 0)
    with np.errstate(invalid="ignore"):
        k = regions.scale_factor(np.where(np.isfinite(level), level, 0.95), np.nan_to_num(dof))
    l1, l2 = (a / k) ** 2, (b / k) ** 2
    u = np.stack([np.sin(az), np.cos(az)], -1)          # major axis (east, north)
    v = np.stack([np.cos(az), -np.sin(az)], -1)
    return l1[:, None, None] * u[:, :, None] * u[:, None, :] + l2[:, None, None] * v[:, :, None] * v[:, None, :]


# ------------------------------------------------------------------ per tag, on the ellipsoid

@dataclass
class HomeRanges:
    """Home ranges, one row per tag and level.

    Attributes
    ----------
    table : pandas.DataFrame
        ``tag``, ``method``, ``level``, ``area_m2``, ``n_fixes``, ``bandwidth_m``
        (NaN for MCP), ``bandwidth_from``, ``status`` ('ok', 'few_fixes': computed
        from fewer than the recommended number of fixes, 'no_range': none could
        be computed), ``note``, ``centre_lat``, ``centre_lon`` and ``geometry``
        (shapely, longitude/latitude, continuous across ±180; None when no range).
    warnings : list of str
    """

    table: pd.DataFrame
    warnings: list[str] = field(default_factory=list)

    def summary(self) -> dict[str, int]:
        s = self.table["status"]
        return {"ok": int((s == "ok").sum()), "flagged": int((s != "ok").sum())}


def home_ranges(fixes: pd.DataFrame, *, method: str = "kde", levels=(0.5, 0.95), bandwidth="href",
                widen: bool = False, statuses=("ok",), tags=None) -> HomeRanges:
    """Home ranges of every tag of a fix table.

    Parameters
    ----------
    fixes : pandas.DataFrame
        A fix table (``tag``, ``lat``, ``lon``, ``status``; for ``widen`` the
        ellipse or covariance columns).
    method : {'mcp', 'kde'}
    levels : sequence of float
        Probability levels (MCP: share of fixes) in (0, 1]; 1 only for MCP.
    bandwidth : 'href', 'lscv' or float
        Kernel bandwidth rule, or metres.
    widen : bool
        Widen each fix's kernel by its own error covariance (kernel only).
    statuses : sequence of str or None
        Fix statuses used (default only 'ok'); None uses every fix with a position.
    tags : iterable of str, optional
        Tags to report even when none of their fixes is usable (they get a
        'no_range' row), e.g. every tag of the input file.
    """
    import pyproj
    import shapely

    if method not in METHODS:
        raise ValueError(f"method={method!r} is not one of {', '.join(repr(m) for m in METHODS)}")
    levels = tuple(float(v) for v in levels)
    for lv in levels:
        _check_level(lv, allow_one=(method == "mcp"))
    if isinstance(bandwidth, str) and bandwidth not in ("href", "lscv"):
        raise ValueError(f"bandwidth={bandwidth!r} must be 'href', 'lscv' or a number of metres")
    if not isinstance(bandwidth, str) and not (float(bandwidth) > 0 and math.isfinite(float(bandwidth))):
        raise ValueError(f"bandwidth={bandwidth!r} must be a positive number of metres")
    if widen and method != "kde":
        raise ValueError("widen=True needs method='kde' (a convex polygon has no kernel to widen)")
    t = fixes
    if statuses is not None:
        t = t[t["status"].astype(str).isin(statuses)]
    lat = pd.to_numeric(t["lat"], errors="coerce").to_numpy(float)
    lon = pd.to_numeric(t["lon"], errors="coerce").to_numpy(float)
    has = np.isfinite(lat) & np.isfinite(lon)
    t = t[has]
    lat, lon = lat[has], lon[has]
    rows, warnings = [], []
    all_tags = sorted({str(x) for x in fixes["tag"]} | {str(x) for x in (tags or ())})
    tags = t["tag"].astype(str).to_numpy()
    for tag in all_tags:
        sel = tags == tag
        n = int(sel.sum())
        base = dict(tag=tag, method=method, n_fixes=n, bandwidth_m=np.nan, bandwidth_from="", note="",
                    centre_lat=np.nan, centre_lon=np.nan)
        if n < 3:
            for lv in levels:
                rows.append({**base, "level": lv, "area_m2": np.nan, "status": "no_range", "geometry": None,
                             "note": f"{n} usable fix{'es' if n != 1 else ''}; a range needs at least 3"})
            continue
        clat, clon = geodesy.group_centroid(lat[sel], lon[sel], np.zeros(n, np.int64), 1)
        clat, clon = float(clat[0]), float(clon[0])
        plane = pyproj.Transformer.from_crs(
            "EPSG:4326", pyproj.CRS.from_proj4(f"+proj=laea +lat_0={clat} +lon_0={clon} +datum=WGS84 +units=m"),
            always_xy=True)
        x, y = plane.transform(lon[sel], lat[sel])
        x, y = np.asarray(x), np.asarray(y)
        few = n < MIN_RANGE_FIXES
        note = (f"only {n} fixes; at least {MIN_RANGE_FIXES} are recommended (common practice; see "
                "README)") if few else ""
        base.update(centre_lat=clat, centre_lon=clon)
        h, h_from = np.nan, ""
        cov = None
        if method == "kde":
            if bandwidth == "href":
                h, h_from = reference_bandwidth(x, y), "href"
            elif bandwidth == "lscv":
                h, why = lscv_bandwidth(x, y)
                h_from = "lscv" if not why else "href (lscv failed)"
                if why:
                    warnings.append(f"tag {tag}: {why}")
                    note = "; ".join(v for v in (note, why) if v)
            else:
                h, h_from = float(bandwidth), "given"
            if widen:
                cov = fix_covariances(t[sel])
                missing = ~np.isfinite(cov).all(axis=(1, 2))
                if missing.any():
                    cov[missing] = 0.0
                    msg = f"{int(missing.sum())} fixes without a covariance kept the plain kernel"
                    warnings.append(f"tag {tag}: {msg}")
                    note = "; ".join(v for v in (note, msg) if v)
                h_from += " + fix covariance"
            density = kernel_density(x, y, h, cov) if h > 0 else None
        for lv in levels:
            why = "the fixes are collinear or identical: no area"
            if method == "mcp":
                poly, kept = mcp(x, y, lv)
                if kept < 3:
                    why = f"the {lv * 100:g}% level keeps {kept} fixes; a polygon needs 3"
                if poly is not None:
                    poly = shapely.segmentize(poly, max(poly.length / 400.0, 1.0))
            else:
                poly = isopleth(density, lv)[0] if density is not None else None
            if poly is None or poly.is_empty:
                rows.append({**base, "level": lv, "area_m2": np.nan, "status": "no_range", "geometry": None,
                             "bandwidth_m": h, "bandwidth_from": h_from, "note": why})
                continue
            area = float(poly.area)
            geo = _to_lonlat(poly, plane, clon)
            rows.append({**base, "level": lv, "area_m2": area, "status": "few_fixes" if few else "ok",
                         "geometry": geo, "bandwidth_m": h, "bandwidth_from": h_from, "note": note})
    cols = ["tag", "method", "level", "area_m2", "n_fixes", "bandwidth_m", "bandwidth_from", "status", "note",
            "centre_lat", "centre_lon", "geometry"]
    return HomeRanges(pd.DataFrame(rows, columns=cols), warnings)


def _to_lonlat(poly, plane, clon):
    """A polygon in the tag's equal-area plane back to longitude/latitude, continuous about ``clon``."""
    import shapely

    def back(xy):
        lon, lat = plane.transform(xy[:, 0], xy[:, 1], direction="INVERSE")
        return np.column_stack([clon + ((np.asarray(lon) - clon + 180) % 360 - 180), lat])

    return shapely.transform(poly, back)


def _check_level(level, allow_one=True):
    if not (0.0 < level < 1.0 or (allow_one and level == 1.0)):
        top = "1]" if allow_one else "1)"
        raise ValueError(f"level={level!r} must be in (0, {top} (e.g. 0.95)")
