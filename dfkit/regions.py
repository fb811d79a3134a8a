"""Confidence regions: likelihood-ratio regions, error ellipses at a stated probability, and error polygons.

Likelihood-ratio region (the honest one; :func:`likelihood_regions`): with
S(x) = sum_i v_i r_i(x)^2, r_i(x) the geodesic residual of bearing i at a
candidate point x and v_i = 1/sigma_i^2 (times the robust weight),

* SD known: R = { x : S(x) - S_min <= chi2_2(level) };
* SD estimated from n >= 3 bearings (v_i the robust weights alone):
  R = { x : S(x) <= S_min (1 + 2/(n - 2) F(2, n - 2; level)) }, i.e.
  S_min + 2 s^2 F(2, n - 2; level) with s^2 = S_min / (n - 2); s is never taken below
  the fix's SD floor (:mod:`dfkit.locate.resolution`), which only widens the region

(E. M. L. Beale, "Confidence regions in non-linear estimation", J. R. Statist.
Soc. B 22(1), 41-88, 1960; D. M. Bates & D. G. Watts, *Nonlinear Regression
Analysis and Its Applications*, Wiley, 1988, sec. 6.1 [section from memory]).
With two bearings and a known SD, S at the true point is exactly chi-square with
2 degrees of freedom under Gaussian bearing errors and S_min = 0 where the lines
cross in front of both stations, so the region's coverage is exact; it may be
unbounded (nearly parallel lines), which is said, and it is then drawn to a
stated range. It is traced by marching rays from the minimum of S in the fix's
exact local plane, vectorised over all fixes; rays are checked for
star-shapedness, and fixes spanning hundreds of kilometres are refined with
exact geodesic residuals.

Ellipse: the region (P - P^)^T Cov^-1 (P - P^) <= k^2 in the local east/north
plane of the fix, drawn on the ellipsoid through the exact azimuthal
equidistant projection about the fix.

* Bearing SD known (sheet ``sd`` or ``--sd``): k^2 is the ``level`` quantile of
  chi-square with 2 degrees of freedom, k = sqrt(-2 ln(1 - level)).
* SD estimated from the fix's own n bearings: k^2 = 2 F(level; 2, n - 2)
  (the joint confidence region of a linear regression; e.g. Draper & Smith,
  *Applied Regression Analysis*, 3rd ed., 1998, ch. 5 [from memory]).

Error polygon: the area common to every bearing's wedge of +/- 1 SD. It is
shown for comparison only: its size has no probability meaning and is a poor
guide to the real error (Nams, V. O. & Boutin, S., "What is wrong with error
polygons?", J. Wildl. Manage. 55(1), 172-176, 1991 [volume and pages from memory]).
"""

from __future__ import annotations

from dataclasses import dataclass, fields
from functools import lru_cache

import numpy as np

from dfkit import geodesy
from dfkit.estimators.groups import solve2


def scale_factor(level, dof=None):
    """k such that the k-scaled covariance ellipse has coverage ``level``.

    Parameters
    ----------
    level : float or array_like
        Probability in (0, 1).
    dof : None or array_like of int
        None (or non-positive entries) for a known bearing SD (chi-square, 2 dof);
        otherwise the residual degrees of freedom n - 2 of an estimated SD
        (F with 2 and dof degrees of freedom).

    >>> round(float(scale_factor(0.95)), 6)
    2.447747
    """
    level = np.asarray(level, float)
    # Both quantiles have closed forms for 2 numerator degrees of freedom (checked against
    # scipy.stats in tests/test_estimators.py):
    #   chi2_2:   P(X <= x) = 1 - exp(-x/2)           =>  x = -2 ln(1 - p)
    #   F(2, m):  P(X <= x) = 1 - (1 + 2x/m)^(-m/2)   =>  x = (m/2) ((1 - p)^(-2/m) - 1)
    chi2 = -2.0 * np.log1p(-level)
    if dof is None:
        return np.sqrt(chi2)
    dof = np.asarray(dof, float)
    known = ~(dof > 0)
    m = np.where(known, 1.0, dof)
    with np.errstate(invalid="ignore", over="ignore"):
        f = (m / 2.0) * np.expm1(-(2.0 / m) * np.log1p(-level))
    return np.where(known, np.sqrt(chi2), np.sqrt(2.0 * f))


def chi2_sf(x, dof):
    """Upper tail P(X > x) of chi-square with integer ``dof`` degrees of freedom (arrays).

    Exact finite series for dof <= 200 (Abramowitz & Stegun 1964, eq. 26.4.4 and 26.4.5 [from
    memory]; checked against scipy.stats.chi2 in the tests), the Wilson-Hilferty cube-root
    approximation above (E. B. Wilson & M. M. Hilferty, Proc. Natl. Acad. Sci. 17, 684-688, 1931).
    NaN where dof < 1.
    """
    x = np.asarray(x, float)
    dof = np.asarray(dof)
    if x.size == 1 and dof.size == 1:
        # one value at a time (the wild risk's bisections ask the same few values again for every chunk of the
        # sheet): remembered by its bits, the answer of the same call on one-element arrays
        one = _chi2_sf_one(int(x.reshape(1).view(np.int64)[0]), dof.reshape(1)[0].item(), dof.dtype.str)
        return np.full(np.broadcast_shapes(x.shape, dof.shape), one)
    return _chi2_sf(*np.broadcast_arrays(x, dof))


@lru_cache(maxsize=4096)
def _chi2_sf_one(x_bits, dof, dof_type):
    """:func:`_chi2_sf` of one value, given as the bits of a float64 and the dof with its numpy type."""
    return float(_chi2_sf(np.array([x_bits], np.int64).view(float), np.array([dof], np.dtype(dof_type)))[0])


def _chi2_sf(x, dof):
    """:func:`chi2_sf` of arrays of one shape."""
    from math import erfc, sqrt

    out = np.full(x.shape, np.nan)
    h = np.maximum(x, 0.0) / 2.0
    for k in np.unique(dof[(dof >= 1) & (dof <= 200)]):
        sel = dof == k
        hx = h[sel]
        if k % 2 == 0:
            term = np.exp(-hx)
            acc = term.copy()
            for j in range(1, int(k) // 2):
                term = term * hx / j
                acc += term
        else:
            rx = np.sqrt(2.0 * hx)
            acc = np.array([erfc(v / sqrt(2.0)) for v in rx])
            term = np.sqrt(4.0 * hx / np.pi) * np.exp(-hx)
            for j in range(1, (int(k) + 1) // 2):
                acc += term
                term = term * 2.0 * hx / (2 * j + 1)
        out[sel] = np.clip(acc, 0.0, 1.0)
    big = dof > 200
    if big.any():
        kk = dof[big].astype(float)
        z = ((x[big] / kk) ** (1.0 / 3.0) - (1.0 - 2.0 / (9.0 * kk))) / np.sqrt(2.0 / (9.0 * kk))
        out[big] = np.array([0.5 * erfc(v / sqrt(2.0)) for v in z])
    return out


@dataclass(frozen=True)
class Ellipses:
    """Axes of many ellipses: ``semi_major_m``, ``semi_minor_m`` [m],
    ``orientation_deg`` (azimuth of the major axis, [0, 180) clockwise from true
    north) and ``area_m2`` [m²]."""

    semi_major_m: np.ndarray
    semi_minor_m: np.ndarray
    orientation_deg: np.ndarray
    area_m2: np.ndarray


def ellipse_axes(cov_en, k) -> Ellipses:
    """Axes of the k-scaled ellipses of east/north covariances, shape (m, 2, 2)."""
    cov = np.asarray(cov_en, float).reshape(-1, 2, 2)
    k = np.broadcast_to(np.asarray(k, float), (cov.shape[0],))
    a, b, c = cov[:, 0, 0], cov[:, 0, 1], cov[:, 1, 1]
    with np.errstate(invalid="ignore"):
        return _axes(a, b, c, k)


def _axes(a, b, c, k) -> Ellipses:
    half_tr = (a + c) / 2.0
    rad = np.sqrt(((a - c) / 2.0) ** 2 + b**2)
    lam1 = half_tr + rad
    lam2 = np.maximum(half_tr - rad, 0.0)
    # Major-axis direction: angle t from east with tan 2t = 2b/(a-c); azimuth = 90 - t.
    t = 0.5 * np.arctan2(2.0 * b, a - c)
    orient = geodesy.remainder(90.0 - np.degrees(t), 180.0)          # np.mod, bit for bit
    major = k * np.sqrt(lam1)
    minor = k * np.sqrt(lam2)
    return Ellipses(major, minor, orient, np.pi * major * minor)


def ellipse_polygon(lat, lon, semi_major_m, semi_minor_m, orientation_deg, n_vertices=72):
    """An ellipse as a closed ring of (lat, lon) vertices on the ellipsoid.

    The ellipse is drawn in the fix's local azimuthal equidistant plane and
    mapped back exactly (distance and azimuth from the fix are preserved).
    Longitudes are unwrapped so the ring is continuous across the antimeridian.
    """
    t = np.linspace(0.0, 2.0 * np.pi, int(n_vertices) + 1)
    u = semi_major_m * np.cos(t)      # along the major axis
    v = semi_minor_m * np.sin(t)
    az = np.radians(orientation_deg)
    x = u * np.sin(az) + v * np.cos(az)
    y = u * np.cos(az) - v * np.sin(az)
    plat, plon = geodesy.from_local(lat, lon, x, y)
    plon = lon + (plon - lon + 180.0) % 360.0 - 180.0
    plat[-1], plon[-1] = plat[0], plon[0]
    return plat, plon


def error_polygon(station_lat, station_lon, bearing_deg, sd_deg, fix_lat, fix_lon):
    """The area common to every bearing's wedge bearing +/- sd, as (lat, lon) rings.

    Computed in the fix's local plane. Returns None when the wedges have no
    common area (or fewer than two bearings). For comparison only: see the module
    docstring for why this has no probability meaning.
    """
    from shapely.geometry import Polygon

    slat = np.asarray(station_lat, float)
    slon = np.asarray(station_lon, float)
    if len(slat) < 2:
        return None
    az_fs, az_sf, dist = geodesy.inverse(fix_lat, fix_lon, slat, slon)
    sx, sy = dist * np.sin(np.radians(az_fs)), dist * np.cos(np.radians(az_fs))
    # the bearing's direction in the fix's plane (exact along the geodesic through the fix)
    plane_bearing = np.asarray(bearing_deg, float) - az_sf + az_fs + 180.0
    reach = 4.0 * float(np.max(np.hypot(sx, sy))) + 1.0
    region = None
    for x0, y0, b, s in zip(sx, sy, plane_bearing, np.broadcast_to(sd_deg, slat.shape)):
        angles = np.radians(np.linspace(b - s, b + s, 9))
        pts = [(x0, y0)] + [(x0 + reach * np.sin(a), y0 + reach * np.cos(a)) for a in angles]
        wedge = Polygon(pts)
        region = wedge if region is None else region.intersection(wedge)
        if region.is_empty:
            return None
    if region is None or region.is_empty or region.geom_type != "Polygon":
        return None
    x, y = np.asarray(region.exterior.coords).T
    plat, plon = geodesy.from_local(fix_lat, fix_lon, x, y)
    plon = fix_lon + (plon - fix_lon + 180.0) % 360.0 - 180.0
    return plat, plon


def split_ring(lat, lon):
    """Split a polygon ring with continuous longitudes at the antimeridian (RFC 7946 section 3.1.9).

    Returns a list of rings ([lon, lat] lists, counter-clockwise, closed).
    """
    from shapely.geometry import Polygon, box
    from shapely.geometry.polygon import orient

    poly = Polygon(np.column_stack([lon, lat]))
    if not poly.is_valid:
        poly = poly.buffer(0)
    rings = []
    for k in range(-2, 3):
        part = poly.intersection(box(-180.0 + 360 * k, -90.0, 180.0 + 360 * k, 90.0))
        if part.is_empty:
            continue
        geoms = getattr(part, "geoms", [part])
        for gpart in geoms:
            if gpart.geom_type != "Polygon" or gpart.area == 0:
                continue
            gpart = orient(gpart, 1.0)
            coords = np.asarray(gpart.exterior.coords)
            coords[:, 0] -= 360 * k
            rings.append([[float(x), float(y)] for x, y in coords])
    return rings


# --------------------------------------------------------------------------------------------------
# Likelihood-ratio regions

#: Rays per region: the area uses the trapezoid rule on rho^2, exact to high order for smooth rings.
N_RAYS = 32
#: Regions are drawn (and called unbounded) out to this many times the largest station range [m].
DRAW_RANGE_FACTOR = 20.0
#: Bounds of the drawing range [m].
DRAW_RANGE_MIN_M = 5_000.0
DRAW_RANGE_MAX_M = 2_000_000.0
#: A ray whose S at the covariance ellipse's edge is within this fraction of the threshold gap is
#: settled by the quadratic correction alone (its error is about a quarter of the square of that fraction).
NEAR_QUADRATIC = 1e-2
#: A ray is settled by a model only where (|f| / gap + MODEL_REACH_PAD) times the radius is within
#: MODEL_REACH of the distance the point may move before a residual can wrap (about the nearest station's).
MODEL_REACH = 0.06
MODEL_REACH_PAD = 0.02
#: Fixes whose plane residuals may differ from geodesic ones by more than this fraction of a bearing SD
#: at the region's edge are refined with exact geodesic residuals.
PLANE_TOLERANCE = 0.01
#: While at least this share of a batch's rays is searched, all of them are evaluated as whole arrays.
WHOLE_BATCH = 0.3
#: Batches of fixes whose minima of S are found together (that step's arrays are (fixes, bearings) only).
MINIMUM_BATCHES = 10
#: :meth:`_Rays.above` sums the first this many bearings' terms on every ray, the rest only where those do not
#: already show S > T (about 90 % do with two of four bearings on the benchmark sheet).
ABOVE_PREFIX = 2
#: The doubled-angle bound of :func:`_s_at_infinity` must clear T by this fraction of the fix's summed weights before
#: the rays' own sums are skipped (the two differ by rounding only, some 1e-15 of the summed weights).
DOUBLED_MARGIN = 1e-9
#: Elements per block of the long element-wise chains along the rays (:func:`_model_roots`, :meth:`_Rays._f_whole`):
#: a batch's 64,000 rays make arrays of 512 KiB, a dozen of them alive at once spill out of a core's 2 MiB L2 cache;
#: in blocks of about 8,000 (64 KiB an array) the same operations on the same elements ran 1.3-1.8 times faster
#: (measured on this benchmark's batches; each element's arithmetic is unchanged, so the answers are the same bits).
RAY_BLOCK = 8192
_EARTH_R = 6_371_000.0
_TWO_PI = 2.0 * np.pi


def _wrap(a):
    return (a + np.pi) % _TWO_PI - np.pi


@dataclass
class LikelihoodRegions:
    """Likelihood-ratio regions of many fixes (see the module docstring).

    Per fix (length m): ``fix_lat``, ``fix_lon`` the fix [°]; ``has_region``;
    ``centre_x``, ``centre_y`` the minimum of S in the fix's plane [m east/north
    of the fix]; ``radius_m`` (m, n_rays) distance from that centre to the edge
    along each ray; ``bounded``; ``area_m2`` (NaN when unbounded); ``reach_m``
    farthest distance from the fix to the edge (the drawing range when
    unbounded); ``draw_range_m``; ``star_shaped`` (every ray leaves the region
    once); ``s_min`` and ``threshold`` (the region is S <= threshold).
    ``ray_azimuth_deg`` (n_rays,) the rays' azimuths [°].

    The bearings (grouped by ``g``) are kept so that :meth:`contains` can test
    any point exactly with geodesic residuals.
    """

    fix_lat: np.ndarray
    fix_lon: np.ndarray
    has_region: np.ndarray
    centre_x: np.ndarray
    centre_y: np.ndarray
    radius_m: np.ndarray
    ray_azimuth_deg: np.ndarray
    bounded: np.ndarray
    area_m2: np.ndarray
    reach_m: np.ndarray
    draw_range_m: np.ndarray
    star_shaped: np.ndarray
    s_min: np.ndarray
    threshold: np.ndarray
    level: float
    g: np.ndarray
    station_lat: np.ndarray
    station_lon: np.ndarray
    bearing_deg: np.ndarray
    weight: np.ndarray

    def __len__(self) -> int:
        return len(self.fix_lat)

    def ring(self, i, n_vertices=None):
        """The region of fix ``i`` as a closed ring of (lat, lon) arrays (longitudes unwrapped),
        or None when it has none. ``n_vertices`` resamples the rays (default: the rays themselves)."""
        if not self.has_region[i]:
            return None
        rho = self.radius_m[i]
        psi = np.radians(self.ray_azimuth_deg)
        if n_vertices and n_vertices != len(psi):
            # periodic linear interpolation of the radius in azimuth
            t = np.linspace(0.0, _TWO_PI, int(n_vertices), endpoint=False)
            rho = np.interp(t, np.append(psi, _TWO_PI), np.append(rho, rho[0]))
            psi = t
        x = self.centre_x[i] + rho * np.sin(psi)
        y = self.centre_y[i] + rho * np.cos(psi)
        lat, lon = geodesy.from_local(self.fix_lat[i], self.fix_lon[i], x, y)
        lon = self.fix_lon[i] + (lon - self.fix_lon[i] + 180.0) % 360.0 - 180.0
        return np.append(lat, lat[0]), np.append(lon, lon[0])

    def rings(self, rows):
        """Regions of fixes ``rows`` as closed rings, vectorised: (rows, lat, lon) with lat, lon of shape
        (len(rows), n_rays + 1) [°], longitudes unwrapped about each fix."""
        rows = np.asarray(rows, np.int64)
        psi = np.radians(self.ray_azimuth_deg)[None, :]
        rho = self.radius_m[rows]
        x = self.centre_x[rows, None] + rho * np.sin(psi)
        y = self.centre_y[rows, None] + rho * np.cos(psi)
        lat0 = self.fix_lat[rows, None]
        lon0 = self.fix_lon[rows, None]
        lat, lon = geodesy.forward(lat0, lon0, np.degrees(np.arctan2(x, y)), np.hypot(x, y))
        lon = lon0 + (lon - lon0 + 180.0) % 360.0 - 180.0
        return rows, np.concatenate([lat, lat[:, :1]], axis=1), np.concatenate([lon, lon[:, :1]], axis=1)

    def statistic(self, lat, lon):
        """S(x) - threshold at one point per fix (arrays of length m), with exact geodesic residuals.

        Negative or zero inside the region; NaN for fixes without a region.
        """
        lat = np.broadcast_to(np.asarray(lat, float), self.fix_lat.shape)
        lon = np.broadcast_to(np.asarray(lon, float), self.fix_lat.shape)
        m = len(self.fix_lat)
        ok = np.isfinite(lat) & np.isfinite(lon)
        sel = ok[self.g]
        az, _, _ = geodesy.inverse(self.station_lat[sel], self.station_lon[sel], lat[self.g[sel]],
                                   lon[self.g[sel]])
        r = _wrap(np.radians(self.bearing_deg[sel] - az))
        s = np.bincount(self.g[sel], self.weight[sel] * r * r, m)
        return np.where(self.has_region & ok, s - self.threshold, np.nan)

    def contains(self, lat, lon):
        """Whether each fix's region holds the point (lat[i], lon[i]) (bool array; False without a region).

        Exact: the likelihood-ratio criterion with geodesic residuals, not the drawn ring, so it
        also answers for unbounded regions beyond their drawing range.
        """
        with np.errstate(invalid="ignore"):
            return np.nan_to_num(self.statistic(lat, lon), nan=1.0) <= 0.0


#: The fields of :class:`LikelihoodRegions` held per bearing, and those shared by every fix.
PER_BEARING_FIELDS = ("g", "station_lat", "station_lon", "bearing_deg", "weight")
SHARED_FIELDS = ("ray_azimuth_deg", "level")


def put_rows(regions, other, rows, other_rows=None):
    """Put into ``regions``, in place, the fixes ``rows`` as ``other`` draws them (regions of the same fixes drawn
    otherwise, at ``other_rows`` of it: by default the same rows): per-fix fields replaced at those rows, the
    bearings' and the shared ones kept."""
    take = rows if other_rows is None else other_rows
    for f in fields(regions):
        if f.name not in PER_BEARING_FIELDS and f.name not in SHARED_FIELDS:
            getattr(regions, f.name)[rows] = getattr(other, f.name)[take]


def _f2(level, dof):
    """The level quantile of F(2, dof), closed form (module scale_factor); dof > 0."""
    with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
        return (dof / 2.0) * np.expm1(-(2.0 / dof) * np.log1p(-level))


def region_threshold(s_min, known, dof, level, known_dof=None, sd_floor_rad=None):
    """The region's bound on S.

    S_min + chi2_2(level) with a known SD; S_min + 2 F(2, known_dof; level) when the known SD was itself
    measured with ``known_dof`` degrees of freedom (a calibration on a finite number of trials: then
    (S - S_min)/2 over the SD's own chi-square is F-distributed); S_min + 2 s^2 F(2, dof) when the SD
    is estimated from the fix (dof = n - 2, s^2 = S_min / dof, but at least ``sd_floor_rad``^2 where given).
    """
    level = np.asarray(level, float)          # one level, or one per fix
    chi2 = -2.0 * np.log1p(-level)
    dof = np.asarray(dof, float)
    m = np.where(dof > 0, dof, 1.0)
    f = _f2(level, m)
    known_bound = np.broadcast_to(chi2, np.shape(s_min)).astype(float)
    if known_dof is not None:
        kd = np.asarray(known_dof, float)
        fin = np.isfinite(kd) & (kd > 0)
        known_bound = np.where(fin, 2.0 * _f2(level, np.where(fin, kd, 1.0)), chi2)
    s2 = s_min / m
    if sd_floor_rad is not None:
        s2 = np.fmax(s2, np.asarray(sd_floor_rad, float) ** 2)
    return np.where(known, s_min + known_bound, np.where(dof > 0, s_min + 2.0 * f * s2, np.nan))


def likelihood_regions(fix_lat, fix_lon, g, station_lat, station_lon, bearing_deg, range_m, azimuth_from_fix_deg,
                       residual_deg, weight, known, dof, level, *, known_dof=None, sd_floor_deg=None, valid=None,
                       n_rays=N_RAYS, chunk=2_000) -> LikelihoodRegions:
    """Likelihood-ratio regions of many fixes (module docstring), vectorised.

    Parameters
    ----------
    fix_lat, fix_lon : array_like, shape (m,)
        The fixes. [°]
    g : array_like of int, shape (N,)
        Fix of each bearing.
    station_lat, station_lon, bearing_deg : array_like, shape (N,)
        Stations [°] and observed true bearings [°].
    range_m, azimuth_from_fix_deg, residual_deg : array_like, shape (N,)
        Geodesic distance [m] and azimuth [°] from the fix to each station, and each bearing's
        residual at the fix [°] (as :class:`dfkit.estimators.Solution` gives them).
    weight : array_like, shape (N,)
        Each bearing's weight in S [rad⁻²]: 1/SD² (times a robust weight) with a known SD,
        the robust weight (1 for other methods) when the SD is estimated; 0 leaves it out.
    known : array_like of bool, shape (m,)
        Whether the fix's SD is known (chi-square bound) or estimated (F bound).
    dof : array_like of int, shape (m,)
        Residual degrees of freedom of an estimated SD (n_used - 2).
    level : float or array_like, shape (m,)
        Probability in (0, 1), or one per fix (:attr:`LikelihoodRegions.level` is then the first).
    known_dof : array_like, shape (m,), optional
        Degrees of freedom of a known SD measured on finitely many trials (inf or NaN: exact).
    sd_floor_deg : array_like, shape (m,), optional
        Smallest SD an estimated SD may take (:func:`region_threshold`; default 0). [°]
    valid : array_like of bool, shape (m,), optional
        Fixes to compute (default: all with a finite position and at least two weighted bearings).
    n_rays : int
        Rays per region.
    chunk : int
        Fixes per vectorised batch (bounds the memory).
    """
    fix_lat = np.asarray(fix_lat, float)
    fix_lon = np.asarray(fix_lon, float)
    m = len(fix_lat)
    given = np.asarray(level, float)
    if not ((given > 0.0) & (given < 1.0)).all():
        raise ValueError(f"level={level!r} must be a probability between 0 and 1 (e.g. 0.95)")
    levels = np.broadcast_to(given, (m,))
    g = np.asarray(g, np.int64)
    # the bearings' arrays are converted (weights without NaN, degrees to radians) batch by batch, not as whole
    # copies held through the loop (same values: each is converted element by element)
    weight = np.asarray(weight, float)
    d = np.asarray(range_m, float)
    az_deg = np.asarray(azimuth_from_fix_deg, float)
    r0_deg = np.asarray(residual_deg, float)
    known = np.asarray(known, bool)
    dof = np.asarray(dof)
    kdof = np.full(m, np.inf) if known_dof is None else np.asarray(known_dof, float)
    floor = np.zeros(m) if sd_floor_deg is None else np.radians(np.broadcast_to(np.asarray(sd_floor_deg, float), (m,)))
    n_w = np.bincount(g, (weight > 0).astype(float), m)       # NaN weights count as 0, as nan_to_num makes them
    ok = np.isfinite(fix_lat) & np.isfinite(fix_lon) & (n_w >= 2) & (known | (dof > 0))
    if valid is not None:
        ok &= np.asarray(valid, bool)
    finite_b = np.isfinite(d) & np.isfinite(az_deg) & np.isfinite(r0_deg)      # finite in degrees as in radians
    ok &= np.bincount(g, (~finite_b).astype(float), m) == 0
    del n_w, finite_b
    psi = np.arange(n_rays) * (_TWO_PI / n_rays)
    out = dict(centre_x=np.full(m, np.nan), centre_y=np.full(m, np.nan), radius_m=np.full((m, n_rays), np.nan),
               bounded=np.zeros(m, bool), star_shaped=np.ones(m, bool), s_min=np.full(m, np.nan),
               threshold=np.full(m, np.nan), draw_range_m=np.full(m, np.nan))
    spread = np.zeros(m)
    np.maximum.at(spread, g, np.where(np.isfinite(d), d, 0.0))
    draw = np.clip(DRAW_RANGE_FACTOR * spread, DRAW_RANGE_MIN_M, DRAW_RANGE_MAX_M)
    # bearings grouped by fix: a sheet's fixes are usually in order already (then no permutation is held)
    order = None if len(g) < 2 or bool((g[1:] >= g[:-1]).all()) else np.argsort(g, kind="stable")
    counts = np.bincount(g, minlength=m)
    offsets = np.concatenate(([0], np.cumsum(counts)[:-1]))
    slat_all = np.asarray(station_lat, float)
    slon_all = np.asarray(station_lon, float)
    bearing_all = np.asarray(bearing_deg, float)
    # Fixes with the same number of bearings are marched together as (fixes, bearings, rays) arrays. The minimum of
    # S is found for MINIMUM_BATCHES batches at a time: its arrays are (fixes, bearings) only, and in batches of
    # ``chunk`` fixes numpy's per-call cost was most of its time (each fix's steps are its own: same bits).
    for n in np.unique(counts[ok]):
        fixes_n = np.flatnonzero(ok & (counts == n))
        step = max(1, chunk * 4 // int(n))
        for m0 in range(0, len(fixes_n), step * MINIMUM_BATCHES):
            fm = fixes_n[m0:m0 + step * MINIMUM_BATCHES]
            idx_m = offsets[fm][:, None] + np.arange(n)[None, :]       # (fixes, n)
            if order is not None:
                idx_m = order[idx_m]
            az_m = np.radians(az_deg[idx_m])
            d_m = d[idx_m]
            sx_m, sy_m = d_m * np.sin(az_m), d_m * np.cos(az_m)
            phi_m = np.radians(r0_deg[idx_m])
            phi_m += az_m
            phi_m += np.pi
            del az_m, d_m
            trig_m = (np.sin(phi_m), np.cos(phi_m))
            v_m = np.nan_to_num(weight[idx_m], copy=False)
            low_m = _minimum(trig_m, sx_m, sy_m, v_m)
            pending = []
            for k0 in range(0, len(fm), step):
                b = slice(k0, k0 + step)
                before = len(pending)
                args, kw = _batch(b, fm, idx_m, sx_m, sy_m, phi_m, v_m, trig_m, low_m, known, dof, kdof, floor,
                                  levels, psi, draw, fix_lat, fix_lon, slat_all, slon_all, bearing_all, spread)
                res = _march(*args, **kw, pending=pending)
                del args, kw                        # views of the minimum batch's arrays: not held past it
                for key, val in res.items():
                    out[key][fm[b]] = val
                out["draw_range_m"][fm[b]] = draw[fm[b]]
                del res
                if len(pending) > before:           # rows of this batch, counted within the minimum batch
                    pending[-1] = (pending[-1][0] + k0, *pending[-1][1:])
                last = k0 + step >= len(fm)
                if pending and (last or sum(len(p[0]) for p in pending) >= step // 2):
                    # the rays still searched after POOL_AFTER steps, several batches' together (their fixes'
                    # regions are made again from the search's end)
                    rows = np.concatenate([p[0] for p in pending])
                    first = np.cumsum([0] + [len(p[0]) * len(psi) for p in pending[:-1]])
                    resume = (np.concatenate([p[1] for p in pending]), np.concatenate([p[2] for p in pending]),
                              np.concatenate([p[3] + o for p, o in zip(pending, first)]),
                              *(np.concatenate([p[j] for p in pending]) for j in (4, 5, 6)))
                    pending.clear()
                    args, kw = _batch(rows, fm, idx_m, sx_m, sy_m, phi_m, v_m, trig_m, low_m, known, dof, kdof,
                                      floor, levels, psi, draw, fix_lat, fix_lon, slat_all, slon_all,
                                      bearing_all, spread)
                    res = _march(*args, **kw, resume=resume)
                    del args, kw, resume
                    for key, val in res.items():
                        out[key][fm[rows]] = val
                    del rows, res
    rad = out["radius_m"]
    with np.errstate(invalid="ignore"):
        area = np.empty(m)
        reach = np.empty(m)
        su, cu = np.sin(psi), np.cos(psi)
        for k0 in range(0, m, chunk):       # in batches: (fixes, rays) temporaries were the run's memory peak
            sl = slice(k0, k0 + chunk)
            area[sl] = 0.5 * np.sum(rad[sl] * rad[sl], axis=1) * (_TWO_PI / n_rays)
            x = out["centre_x"][sl, None] + rad[sl] * su
            y = out["centre_y"][sl, None] + rad[sl] * cu
            # the farthest point by its squared distance, then hypot of that one point only (hypot on every ray
            # was about 4 % of the regions' time; same values on the 100,000-fix benchmark); NaN rows stay NaN:
            # a NaN in x or y makes x x + y y NaN, and np.argmax takes the first NaN as the largest
            far = np.argmax(x * x + y * y, axis=1)[:, None]
            reach[sl] = np.hypot(np.take_along_axis(x, far, 1)[:, 0], np.take_along_axis(y, far, 1)[:, 0])
    has = ok & np.isfinite(rad).all(axis=1)
    bounded = has & out["bounded"]
    return LikelihoodRegions(
        fix_lat=fix_lat, fix_lon=fix_lon, has_region=has, centre_x=out["centre_x"], centre_y=out["centre_y"],
        radius_m=rad, ray_azimuth_deg=np.degrees(psi), bounded=bounded,
        area_m2=np.where(bounded, area, np.nan), reach_m=np.where(has, reach, np.nan),
        draw_range_m=out["draw_range_m"], star_shaped=out["star_shaped"] & has, s_min=out["s_min"],
        threshold=out["threshold"], level=float(given.flat[0]) if given.size else np.nan, g=g, station_lat=np.asarray(station_lat, float),
        station_lon=np.asarray(station_lon, float), bearing_deg=np.asarray(bearing_deg, float),
        weight=np.nan_to_num(np.where(ok[g], weight, 0.0), copy=False))


def _angle(y, x, out=None):
    """arctan2(y, x) as arctan(y / x), turned by pi where x < 0: the same angle to an ulp or two, and about twice
    as fast (numpy's arctan is vectorised, its arctan2 not). NaN where x = y = 0 (arctan2 gives 0)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        r = np.divide(y, x, out=out)
        np.arctan(r, out=r)          # in place: one array, not two
    back = np.signbit(x)
    if back.any():
        r[back] += np.copysign(np.pi, y[back])
    return r


def _residual(sp, cp, dx, dy):
    """Signed angle from the direction (dx, dy) to the observed direction phi [rad], without wrapping
    (``sp``, ``cp`` the sine and cosine of phi, computed once per batch)."""
    y, x = sp * dy - cp * dx, sp * dx + cp * dy
    r = _angle(y, x)
    bad = np.isnan(r)
    if bad.any():                 # a point on a station
        r[bad] = np.arctan2(y[bad], x[bad])
    return r


def _at(trig, sx, sy, px, py):
    """Offsets, squared distances, residuals and bearing gradients at one point per fix (bearings (M, n);
    ``trig`` the sine and cosine of the observed directions)."""
    dx = px[:, None] - sx
    dy = py[:, None] - sy
    d2 = np.maximum(dx * dx + dy * dy, 1e-18)
    return dx, dy, d2, _residual(trig[0], trig[1], dx, dy), dy / d2, -dx / d2


def _local(trig, sx, sy, v, px, py):
    """S at one point per fix (px, py), half its gradient's negative b, Gauss-Newton's matrix J = sum v g g^T
    and half the Hessian H = J - sum v r dg/dP, dg/dP = [[-2xy, x2-y2], [x2-y2, 2xy]]/d^4 (bearings (M, n))."""
    dx, dy, d2, r, gx, gy = _at(trig, sx, sy, px, py)
    vr = v * r
    j11, j12, j22 = _bearing_sum(v * gx * gx), _bearing_sum(v * gx * gy), _bearing_sum(v * gy * gy)
    k = vr / (d2 * d2)
    kxy, kxx = _bearing_sum(k * dx * dy), _bearing_sum(k * (dx * dx - dy * dy))
    return (_bearing_sum(vr * r), np.stack([_bearing_sum(vr * gx), _bearing_sum(vr * gy)], 1),
            np.stack([j11, j12, j22], 1), np.stack([j11 + 2 * kxy, j12 - kxx, j22 - 2 * kxy], 1))


def _bearing_sum(x):
    """x.sum(1) of an (M, n) array. With fewer than 8 bearings numpy adds them one after the other (its pairwise
    summation starts at 8 terms; tests/test_regions.py checks the equality), and the columns added in that order
    give the same bits several times faster than the reduction over a short axis (up to the sign of a zero: a row
    of -0.0 only sums to -0.0 here, 0.0 in numpy)."""
    n = x.shape[1]
    if n >= 8 or n < 2:
        return x.sum(1)
    return _rows_added(x.T)


def _solve2(m, b):
    """m^-1 b for symmetric 2x2 matrices m = (m11, m12, m22) (rows), 0 where singular."""
    x, y, _ = solve2(m[:, 0], m[:, 1], m[:, 2], b[:, 0], b[:, 1])
    st = np.stack([x, y], 1)
    return np.where(np.isfinite(st), st, 0.0)


def _positive(m):
    return (m[:, 0] > 0) & (m[:, 0] * m[:, 2] - m[:, 1] ** 2 > 0)


def _minimum(trig, sx, sy, v, iterations=20):
    """The minimum of S in the plane, from the fix (the origin).

    The fix is the minimum of the geodesic S, so the plane's minimum is close and Newton's method (the full
    Hessian where it is positive definite, else Gauss-Newton's matrix) settles in two or three steps; a step is
    accepted only if S does not grow, else halved; a fix is done when its next step would be under 1e-6 m. Returns x, y, S and, at the minimum, Gauss-Newton's matrix
    and half the Hessian, each (M, 3) as (11, 12, 22).
    """
    M = sx.shape[0]
    P = np.zeros((M, 2))
    S, b, J, H = _local(trig, sx, sy, v, P[:, 0], P[:, 1])
    live = np.arange(M)
    for _ in range(iterations):
        if not len(live):
            break
        hl, bl = H[live], b[live]
        step = _solve2(hl, bl)
        gauss = np.flatnonzero(~_positive(hl))          # Gauss-Newton's matrix only where the Hessian is not positive
        if len(gauss):
            step[gauss] = _solve2(J[live[gauss]], bl[gauss])
        far = np.hypot(step[:, 0], step[:, 1]) > 1e-6      # a step shorter than that would change nothing
        live, step = live[far], step[far]
        if not len(live):
            break
        lam = np.ones(len(live))
        trying = np.arange(len(live))
        accepted = np.zeros(len(live), bool)
        for _h in range(30):
            if not len(trying):
                break
            rows = live[trying]
            new = P[rows] + lam[trying, None] * step[trying]
            if len(rows) == M:          # every fix tries (rows is then 0 .. M - 1): the arrays as they are
                out = _local(trig, sx, sy, v, new[:, 0], new[:, 1])
            else:
                out = _local(_rows(trig, rows), sx[rows], sy[rows], v[rows], new[:, 0], new[:, 1])
            ok = out[0] <= S[rows] * (1 + 1e-12) + 1e-300
            if len(rows) == M and ok.all():     # every fix takes its step: the new arrays are the state
                P, (S, b, J, H) = new, out
            else:
                ra = rows[ok]
                P[ra] = new[ok]
                S[ra], b[ra], J[ra], H[ra] = out[0][ok], out[1][ok], out[2][ok], out[3][ok]
            accepted[trying[ok]] = True
            trying = trying[~ok]
            lam[trying] *= 0.5
        moved = np.where(accepted, lam * np.hypot(step[:, 0], step[:, 1]), 0.0)
        live = live[accepted & (moved > 1e-6)]
    return P[:, 0], P[:, 1], S, J, H


def _rows(trig, rows):
    return trig[0][rows], trig[1][rows]


def _ray_f(trig, sx, sy, v, cx, cy, rho, ux, uy, T):
    """f = S - T along every ray, shape (M, K), bearings (M, n) (the rare search for a last crossing)."""
    px = (cx[:, None] + rho * ux)[:, None, :]
    py = (cy[:, None] + rho * uy)[:, None, :]
    r = _residual(trig[0][:, :, None], trig[1][:, :, None], px - sx[:, :, None], py - sy[:, :, None])
    return (v[:, :, None] * r * r).sum(1) - T[:, None]


class _Rays:
    """The rays of a batch (fix j, ray k; ray i = j K + k) as functions of the radius rho.

    With a = centre - station (per bearing), u = (sin psi, cos psi) the ray's direction and phi the observed
    direction, the point's offset from the station is d = a + rho u and the bearing's residual is
    atan2(A + rho B, C + rho D) with A = a x phi, C = a . phi, B = sin(phi - psi), D = cos(phi - psi) (phi taken
    as the unit vector (sin phi, cos phi)); its derivative in rho is E / |d|^2 with E = a_x u_y - a_y u_x, the
    same all along the ray. A, C, the weights v and a = (a_x, a_y) are held (n, M), stacked in one array, B and D
    (n, M K), stacked too, so that the rays still searched take their parts in two gathers: a sum over the
    bearings adds rows. E is formed where it is used (:meth:`f`), not held.
    """

    def __init__(self, trig, sx, sy, v, cx, cy, T, psi):
        sp, cp = (np.ascontiguousarray(t.T) for t in trig)
        su, cu = np.sin(psi), np.cos(psi)
        self.n, self.M, self.K = n, M, K = sp.shape[0], sp.shape[1], len(psi)
        # each array is formed in its place in the stacks, by the same operations as on its own
        self._fix = np.empty((5, n, M))
        self.A, self.C, self.v, self.ax, self.ay = self._fix
        np.subtract(cx[None, :], sx.T, out=self.ax)
        np.subtract(cy[None, :], sy.T, out=self.ay)
        np.multiply(sp, self.ay, out=self.A)
        self.A -= cp * self.ax
        np.multiply(sp, self.ax, out=self.C)
        self.C += cp * self.ay
        self.v[...] = v.T
        self._ray = np.empty((2, n, M * K))
        self.B, self.D = self._ray
        # bearing by bearing and in blocks of fixes (small temporaries), each fix's sine and cosine repeated along
        # its rays and the rays' tiled along the fixes: flat products, the same as the broadcast ones (whose inner
        # loops of K elements ran at half the speed)
        rows = max(1, RAY_BLOCK // K)
        cu_t, su_t, t = np.tile(cu, rows), np.tile(su, rows), np.empty(rows * K)
        for k in range(n):
            for a in range(0, M, rows):
                e = min(M, a + rows) - a
                spz, cpz = np.repeat(sp[k, a:a + e], K), np.repeat(cp[k, a:a + e], K)
                Bz, Dz = self.B[k, a * K:(a + e) * K], self.D[k, a * K:(a + e) * K]
                cuz, suz, tz = cu_t[:e * K], su_t[:e * K], t[:e * K]
                np.multiply(spz, cuz, out=Bz)
                np.multiply(cpz, suz, out=tz)
                Bz -= tz
                np.multiply(spz, suz, out=Dz)
                np.multiply(cpz, cuz, out=tz)
                Dz += tz
        self.su, self.cu = su, cu
        self.T = T
        self.unweighted = np.where(self.v > 0, 0.0, np.inf) if (self.v <= 0).any() else None

    def _parts(self, i):
        """(A, C, v, a_x, a_y) of the rays' fixes, (B, D) of the rays, T of their fixes and (u_y, u_x) of the rays,
        shaped to broadcast to (n, rays) or, for every ray (``i`` None), to (n, M, K)."""
        if i is None:
            n, M, K = self.n, self.M, self.K
            return (*(a[:, :, None] for a in self._fix), *(a.reshape(n, M, K) for a in self._ray),
                    self.T[:, None], self.cu, self.su)
        j, k = np.divmod(i, self.K)
        return (*np.take(self._fix, j, axis=2), *np.take(self._ray, i, axis=2), self.T[j], self.cu[k], self.su[k])

    def f(self, rho, i=None, slope=True):
        """f = S - T and its derivative in rho at radius ``rho`` on rays ``i`` (flat indices; None: all), and the
        largest move along each ray within which no residual can wrap past pi (where S may jump); f alone when
        not ``slope``."""
        if i is None and slope:
            out = self._f_whole(rho)
            if out is not None:
                return out
        return self._f_rows(rho, i, slope)

    def _f_whole(self, rho):
        """:meth:`f` on every ray, one bearing at a time: the same operations on each element as
        :meth:`_f_rows` (the same bits), on (fixes, rays) arrays reused from bearing to bearing instead of whole
        (bearings, fixes, rays) ones, a block of about RAY_BLOCK rays (whole fixes) at a time so that they stay in
        the cache. None where a point lies on a station (then :meth:`_f_rows` redoes it)."""
        n, M, K = self.n, self.M, self.K
        rho = rho.reshape(M, K)
        B, D = (a.reshape(n, M, K) for a in self._ray)
        f, slope, safe = np.empty((M, K)), np.empty((M, K)), np.empty((M, K))
        rows = max(1, RAY_BLOCK // K)
        cross, dot, r, vr, t, u = (np.empty((min(rows, M), K)) for _ in range(6))
        for a in range(0, M, rows):
            z = slice(a, a + rows)
            if a + rows > M:            # the last, shorter block
                cross, dot, r, vr, t, u = (x[:M - a] for x in (cross, dot, r, vr, t, u))
            rho_z, f_z, slope_z, safe_z = rho[z], f[z], slope[z], safe[z]
            for k in range(n):
                A, C, v = self.A[k][z, None], self.C[k][z, None], self.v[k][z, None]
                np.multiply(B[k][z], rho_z, out=cross)
                cross += A
                np.multiply(D[k][z], rho_z, out=dot)
                dot += C
                _angle(cross, dot, out=r)
                np.multiply(v, r, out=vr)
                if k == 0:
                    np.multiply(vr, r, out=f_z)
                else:
                    np.multiply(vr, r, out=t)
                    f_z += t
                cross *= cross
                dot *= dot
                cross += dot
                np.maximum(cross, 1e-18, out=cross)          # |d|^2
                np.multiply(self.ax[k][z, None], self.cu, out=t)
                np.multiply(self.ay[k][z, None], self.su, out=u)
                t -= u                                       # E of bearing k
                t /= cross
                t *= vr
                if k == 0:
                    slope_z[...] = t
                else:
                    slope_z += t
                s = _safe_move(r, cross, room=dot, out=cross)
                if self.unweighted is not None:
                    s += self.unweighted[k][z, None]
                if k == 0:
                    safe_z[...] = s
                else:
                    np.minimum(safe_z, s, out=safe_z)
        if np.isnan(f).any():     # a point on a station
            return None
        f -= self.T[:, None]
        slope *= 2.0
        return f.ravel(), slope.ravel(), safe.ravel()

    def _f_rows(self, rho, i=None, slope=True):
        """:meth:`f` as (bearings, rays) arrays."""
        # The sums over the bearings (f, and the slope 2 sum v r E / |d|^2) add the rows in order, as numpy's
        # sum(0) adds them (the same bits); the move's bound reuses the buffers of dot and r.
        A, C, v, ax, ay, B, D, T, uy, ux = self._parts(i)
        rho = rho if i is not None else rho.reshape(self.M, self.K)
        cross = B * rho
        cross += A
        dot = D * rho
        dot += C
        r = _angle(cross, dot)
        vr, f = _weighted_sum(v, r)
        if np.isnan(f).any():     # a point on a station
            r = np.arctan2(cross, dot)
            vr, f = _weighted_sum(v, r)
        f -= T
        if not slope:
            return f.ravel()
        cross *= cross
        dot *= dot
        cross += dot
        np.maximum(cross, 1e-18, out=cross)
        e = ax * uy
        e -= ay * ux               # E of each bearing
        e /= cross
        e *= vr
        slope = _rows_added(e)
        # how far the point may move before a residual can wrap past pi: a move of s turns the direction from a
        # station at distance |d| by at most s / (|d| - s)
        safe = _safe_move(r, cross, room=dot, out=r)
        if self.unweighted is not None:          # bearings left out never limit the move
            safe += self.unweighted[:, :, None] if i is None else self.unweighted[:, i // self.K]
        safe = safe.min(axis=0)
        return f.ravel(), 2.0 * slope.ravel(), safe.ravel()

    def above(self, rho):
        """Whether S > T at radius ``rho`` on every ray, shown without arctan: r^2 >= sin^2 r =
        cross^2 / (cross^2 + dot^2), so S >= sum v cross^2 / |d|^2; False where that bound does not show it.
        Bearing by bearing, the rows added in order (as numpy's sum(0) adds them).

        The terms are not negative (where the weights are not), and a sum of such terms in floating point never
        falls as terms are added (rounding to nearest is monotone): a ray whose sum over the first
        ABOVE_PREFIX bearings already exceeds T is above, and only the others (about a tenth on the benchmark
        sheet) take the later bearings' terms, gathered, in the same order. (A later term is NaN only where the
        point is a station itself; S there is at least the first bearings' bound too, so the whole sum's answer,
        an evaluation of S, would find it outside as well.)"""
        n, M, K = self.n, self.M, self.K
        rho = rho.reshape(M, K)
        B, D = (a.reshape(n, M, K) for a in self._ray)
        first = ABOVE_PREFIX if n > ABOVE_PREFIX and not (self.v < 0).any() else n
        bound = np.empty((M, K))
        rows = max(1, RAY_BLOCK // K)
        cross, dot = np.empty((min(rows, M), K)), np.empty((min(rows, M), K))
        for a in range(0, M, rows):         # in blocks of fixes, as in _f_whole
            z = slice(a, a + rows)
            if a + rows > M:
                cross, dot = cross[:M - a], dot[:M - a]
            rho_z, bound_z = rho[z], bound[z]
            for k in range(first):
                np.multiply(B[k][z], rho_z, out=cross)
                cross += self.A[k][z, None]
                np.multiply(D[k][z], rho_z, out=dot)
                dot += self.C[k][z, None]
                cross *= cross
                dot *= dot
                dot += cross
                np.divide(cross, dot, out=cross)
                cross *= self.v[k][z, None]
                if k == 0:
                    bound_z[...] = cross
                else:
                    bound_z += cross
        out = (bound > self.T[:, None]).ravel()
        if first == n:
            return out
        rest = np.flatnonzero(~out)
        j = rest // K
        r, b = rho.ravel()[rest], bound.ravel()[rest]
        del cross, dot, bound
        for k in range(first, n):
            c = self.B[k][rest]
            c *= r
            c += self.A[k][j]
            d = self.D[k][rest]
            d *= r
            d += self.C[k][j]
            c *= c
            d *= d
            d += c
            np.divide(c, d, out=c)
            c *= self.v[k][j]
            b += c
        out[rest] = b > self.T[j]
        return out



def _safe_move(r, d2, *, room, out):
    """How far a point may move before a residual r [rad] of a station at squared distance d2 can wrap past pi: a
    move of s turns the direction by at most s / (|d| - s), so s = |d| (pi - |r|) / (pi - |r| + 1). In place:
    ``room`` is scratch, the answer is written to ``out`` (either may be the buffer of ``r`` or ``d2``, once read)."""
    np.abs(r, out=room)
    np.subtract(np.pi, room, out=room)
    s = np.sqrt(d2, out=out)
    s *= room
    room += 1.0
    s /= room
    return s


def _weighted_sum(v, r):
    """v r and the sum over the rows (the first axis) of v r r, ((v r) r) added row by row in order."""
    vr = v * r
    t = vr * r
    return vr, _rows_added(t)


def _rows_added(t):
    """t[0] + t[1] + ... in that order (a new array)."""
    out = t[0].copy()
    for k in range(1, t.shape[0]):
        out += t[k]
    return out


def _model_roots(r, f, df, gap, curv):
    """:func:`_model_roots_block` in blocks of RAY_BLOCK rays (1-D arrays of one length): element by element the same
    operations, so the same bits."""
    n = len(r)
    if n <= 2 * RAY_BLOCK:
        return _model_roots_block(r, f, df, gap, curv)
    x, y, quadratic = np.empty(n), np.empty(n), np.empty(n, bool)
    for a in range(0, n, RAY_BLOCK):
        z = slice(a, a + RAY_BLOCK)
        x[z], y[z], quadratic[z] = _model_roots_block(r[z], f[z], df[z], gap[z], curv[z])
    return x, y, quadratic


def _model_roots_block(r, f, df, gap, curv):
    """Where two models of S - S_min along a ray reach ``gap``, as radii: both are flat at the centre (S's minimum)
    and have S - T = f and slope df at radius r; the cubic c2 rho^2 + c3 rho^3, and the quartic that also has
    S's curvature at the centre, ``curv`` rho^2 + c3 rho^3 + c4 rho^4 (NaN where that is not known). Each root
    by Newton's method: a step on f, two on the cubic, two on the quartic from the cubic's root. Also whether the
    slope is near a quadratic's, |df r - 2 (f + gap)| <= (f + gap) / 4 (a condition of settling at the quartic's
    root, formed here from the models' own f + gap and df r)."""
    # The steps are written in place and the models' constant multiples (2 c2, 3 c3, ...) formed once: the same
    # operations, in the same order, as ((c2 + c3 x) x x - gap) / ((2 c2 + 3 c3 x) x) and its quartic alike.
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        g = f + gap
        s = df * r
        c3 = s - 2.0 * g
        quadratic = np.abs(c3) <= 0.25 * g           # |s - 2 g| <= g / 4, with s - 2 g formed once
        g3 = 3.0 * g
        c2 = g3 - s
        c2_2, c3_3 = 2.0 * c2, 3.0 * c3
        x = f / s
        np.subtract(1.0, x, out=x)
        for _ in range(2):
            num = c3 * x
            num += c2
            num *= x
            num *= x
            num -= gap
            den = c3_3 * x
            den += c2_2
            den *= x
            num /= den
            x -= num
        del c2, c3, c2_2, c3_3
        q2 = curv * r
        q2 *= r
        q2_2 = 2.0 * q2
        q3 = 4.0 * g
        q3 -= q2_2
        q3 -= s
        q4 = q2 + s
        q4 -= g3
        del g, s, g3
        q3_3, q4_4 = 3.0 * q3, 4.0 * q4
        y = x
        for _ in range(2):
            num = q4 * y
            num += q3
            num *= y
            num += q2
            num *= y
            num *= y
            num -= gap
            den = q4_4 * y
            den += q3_3
            den *= y
            den += q2_2
            den *= y
            num /= den
            y = y - num if y is x else np.subtract(y, num, out=y)
    x *= r
    y *= r
    return x, y, quadratic


def _taylor(A, C, ax, ay, v, psi, order, lowest=2):
    """Taylor coefficients s_lowest .. s_order of S along every ray about the centre c, shape (.., M, K), and the
    distance from c to the nearest weighted station (M,), the series' radius of convergence. Bearings first, (n, M):
    ``A``, ``C`` as in :class:`_Rays`, (``ax``, ``ay``) = c - station, ``v`` the weights.

    With the point's offset from a station written as the complex number Z = y + i x (north, east), the ray's
    point is Z_a + rho e^(i psi), Z_a the centre's offset; the residual phi - arg Z is then
    r_0 - Im log(1 + rho e^(i psi) / Z_a) = sum_j Im(b_j e^(i j psi)) rho^j with b_0 = i r_0 and
    b_j = (-1)^j Z_a^-j / j (the logarithm's series, convergent for rho < |Z_a|). S's coefficient s_k is
    sum_i v_i sum_(j + l = k) a_j a_l, and Im(X) Im(Y) = (Re(X conj Y) - Re(X Y)) / 2 gathers it, per fix, into
    harmonics of psi: s_k(psi) = sum_h Re(c_(k,h) e^(i h psi)), h = k, k - 2, ..., summed for all rays at once."""
    za = ay + 1j * ax
    inv = -1.0 / za
    b = [1j * _angle(A, C), inv]
    for j in range(2, order + 1):
        b.append(b[-1] * inv)
    for j in range(2, order + 1):
        b[j] /= j
    # v b_j only for the j the pairs below take (j >= l, j + l >= lowest)
    vb = {j: v * b[j] for j in range((lowest - 1) // 2 + 1, order + 1)}
    M = A.shape[1]
    out = np.empty((order + 1 - lowest, M, len(psi)))
    for k in range(lowest, order + 1):
        c = np.zeros((M, k + 1), complex)
        for j in range(k, (k - 1) // 2, -1):     # pairs j >= l = k - j; (l, j) adds the same, conjugated
            l = k - j
            half = 0.5 if j == l else 1.0
            c[:, j - l] += half * (vb[j] * np.conj(b[l])).sum(0)
            c[:, k] -= half * (vb[j] * b[l]).sum(0)
        # Re(c e^(i h psi)) = Re c cos(h psi) - Im c sin(h psi)
        h = np.arange(k % 2, k + 1, 2)
        coef = np.concatenate([c[:, h].real, c[:, h[h > 0]].imag], axis=1)
        basis = np.concatenate([np.cos(np.outer(h, psi)), -np.sin(np.outer(h[h > 0], psi))])
        np.einsum("mh,hk->mk", coef, basis, out=out[k - lowest])      # not a BLAS call: tiny, and single-threaded
    dist = np.where(v > 0, np.abs(za), np.inf).min(axis=0)
    return out, dist


#: The first guess's Newton step on S's Taylor polynomial is taken only within this share of the series' radius of
#: convergence (the distance from the centre to the nearest station).
SERIES_REACH = 0.5


def _series_guess(rays, psi, gap, rho, use):
    """First guesses: where ``use`` (S's Hessian positive definite, the guess not cut to the drawing range), ``rho``
    is the root of the quadratic term of S's Taylor polynomial along the ray, s_2 rho^2 = gap; one Newton step on
    s_2 rho^2 + s_3 rho^3 + s_4 rho^4 = gap (:func:`_taylor`) from there, kept where it moves the guess by less than
    half and the guess lies within SERIES_REACH of the series' radius of convergence. Only a guess: the search still
    evaluates S at it and settles the ray by its own rules (it leaves about 5 % of the rays for a second evaluation
    on the benchmark sheet, against 19 % from the quadratic guess)."""
    (s3, s4), dist = _taylor(rays.A, rays.C, rays.ax, rays.ay, rays.v, psi, 4, lowest=3)
    # s_2 x^2 = gap at x = rho, so the step is -x (s_3 x + s_4 x^2) / (2 s_2 + 3 s_3 x + 4 s_4 x^2), s_2 = gap / x^2
    # (rows of fixes, RAY_BLOCK rays at a time: the same operations on each element)
    out = np.empty_like(rho)
    reach = SERIES_REACH * dist
    rows = max(1, RAY_BLOCK // rho.shape[1])
    for a in range(0, len(rho), rows):
        z = slice(a, a + rows)
        r, s3z, s4z = rho[z], s3[z], s4[z]
        s3z *= r
        s4z *= r
        s4z *= r
        with np.errstate(divide="ignore", invalid="ignore"):
            two_s2 = 2.0 * gap[z, None] / (r * r)
            step = (s3z + s4z) / (two_s2 + 3.0 * s3z + 4.0 * s4z)
        good = (np.abs(step) < 0.5) & (r < reach[z, None]) & use[z]
        step *= r
        out[z] = np.where(good, r - step, r)
    return out


def _edges(rays, rho, R, gap, curv, start=0, stop=60, state=None):
    """The edge S = T on every ray (flat arrays: first guesses, drawing ranges, gaps T - S_min, S's curvature
    along the ray at the centre or NaN).

    A safeguarded search keeping a bracket [lo, hi] with f(lo) < 0 < f(hi): each step goes to the root of the
    quartic model or else the cubic one (:func:`_model_roots`), else Newton's, else bisects (or doubles towards
    the drawing range), and bisects a bracket that has not halved in a step. A ray is settled at the quartic's root
    without a further evaluation when the two models' roots agree to 1e-4 of the radius, |f| within 15 % of the
    gap; or at the cubic's root when |f| <= NEAR_QUADRATIC of the gap and the root is within 1 % of the radius;
    either only where the radius is small enough against the nearest station's distance (MODEL_REACH: the
    models' errors are then far below the search's tolerance). It is done after a last Newton step when
    |f| <= 1e-3 of the gap and that step is within 5e-4 of the radius; where it stands when the bracket is within
    1e-5 of the radius, or when it reaches the drawing range still inside.
    While many rays are left, all of them are evaluated at once, cheaper than gathering them. Steps ``start`` to
    ``stop`` - 1 are taken (60 in all); ``state`` takes up a search stopped earlier (f at the radii, the rays still
    searched, their brackets lo and hi and last widths). Returns the radii, f at them (0 where settled by a model)
    and the state (the rays still searched after ``stop``, none after 60 steps).

    The promise, ray by ray: where S crosses T smoothly, the radius is within 5e-4 of itself of the crossing
    (tests/test_regions.py checks it against scipy's brentq; the models settle a ray only where their error is
    far below that, see MODEL_REACH); where S jumps across T instead (a residual wrapping past pi, behind a
    station), the radius is within 5e-4 of the jump's position (the bracket rule stops within 1e-5 of it; a model
    never settles a ray across a place where a residual may wrap). Where S comes back below
    T farther out, :func:`_star_check` finds it.
    """
    # lo, hi and width are read only on rays still searched after a step, which that step wrote (step 0 forms its
    # brackets from f itself, and no bracket has a width yet), and step 0 writes f on every ray: none is filled first
    lo = np.empty_like(rho)
    hi = np.empty_like(rho)
    width = np.empty_like(rho)
    if state is None:
        f_at = np.empty_like(rho)
        live = np.arange(len(rho))
    else:                            # a search taken up again after ``start`` steps (:func:`_march`'s ``resume``)
        f_at, live = state[0], state[1]
        lo[live], hi[live], width[live] = state[2:]
    for step_no in range(start, stop):
        if not len(live):
            break
        at = slice(None) if len(live) == len(rho) else live
        r, R_l, gap_l = rho[at], R[at], gap[at]
        if len(live) >= WHOLE_BATCH * len(rho):
            f, df, safe = (a[at] for a in rays.f(rho))
        else:
            f, df, safe = rays.f(r, live)
        neg = f < 0
        if step_no == 0:
            # every bracket is still [0, inf) and the first guesses are finite and positive: max(0, r) is r, so
            # lo is r where S < T and 0 elsewhere (r times neg), hi is r where S >= T and inf elsewhere (r / ~neg),
            # the same arrays as the np.where of the later steps, at a fraction of their cost
            with np.errstate(divide="ignore"):
                lo_l = r * neg
                hi_l = r / ~neg
        else:
            lo_l, hi_l = lo[at], hi[at]
            lo_l = np.where(neg, np.maximum(lo_l, r), lo_l)
            hi_l = np.where(neg, hi_l, np.minimum(hi_l, r))
        top = np.minimum(hi_l, R_l)
        cubic, quartic, quadratic = _model_roots(r, f, df, gap_l, curv[at])
        quartic_in = (quartic > lo_l) & (quartic < top)          # False for NaN
        af = np.abs(f)
        # the models' error grows with the radius over the nearest station's distance (S's higher terms) and with
        # how far they extrapolate (|f| / gap); this bound keeps it under about 1e-4 of the radius on the
        # benchmark's 3.2 million rays (under 2.5e-4 up to 1.5 times the bound), SD given or estimated
        near = (af + MODEL_REACH_PAD * gap_l) * r <= MODEL_REACH * gap_l * safe
        by_quartic = quartic_in & (np.abs(quartic - cubic) <= 1e-4 * quartic) & (af <= 0.15 * gap_l) & quadratic
        by_quartic &= np.abs(quartic - r) < safe
        by_quartic &= near
        new_rho = np.where(by_quartic, quartic, r)
        f_l = np.where(by_quartic, 0.0, f)
        # the rays the quartic does not settle (about 5 % on the first step): the cubic's test, then for those it
        # does not settle either, the Newton rule, the bracket's width, the drawing range and the next step
        other = np.flatnonzero(~by_quartic)
        r_o, c_o, af_o, gap_o, lo_o, top_o = r[other], cubic[other], af[other], gap_l[other], lo_l[other], top[other]
        cubic_in = (c_o > lo_o) & (c_o < top_o)
        dc = np.abs(c_o - r_o)
        by_cubic = cubic_in & (af_o <= NEAR_QUADRATIC * gap_o) & (dc <= 1e-2 * r_o) & near[other] & (dc < safe[other])
        settled = other[by_cubic]
        new_rho[settled] = c_o[by_cubic]
        f_l[settled] = 0.0
        f_at[at] = f_l
        # what the rest needs is gathered: the arrays over every ray searched go (the memory peak of a step where
        # few rays settle, as with an estimated SD)
        del cubic, af, lo_l, top, near, safe, quadratic, by_quartic, f_l
        kept = ~by_cubic
        rest = other[kept]
        r_s, f_s, df_s, af_s, gap_s = r_o[kept], f[rest], df[rest], af_o[kept], gap_o[kept]
        lo_s, hi_s, top_s, R_s = lo_o[kept], hi_l[rest], top_o[kept], R_l[rest]
        cubic_in, c_o = cubic_in[kept], c_o[kept]
        with np.errstate(divide="ignore", invalid="ignore"):
            newton = r_s - f_s / df_s
        newton_in = (newton > lo_s) & (newton < top_s)
        close = (af_s <= 1e-3 * gap_s) & (af_s <= 5e-4 * df_s * r_s)      # Newton's step within 5e-4 of the radius
        done = close | (hi_s - lo_s <= 1e-5 * r_s) | (neg[rest] & (r_s >= R_s))
        # a ray done by the Newton rule takes that last step: its error is then about the square of the step's
        last = close & newton_in
        new_rho[rest[last]] = newton[last]
        keep = np.flatnonzero(~done)                    # the next step only for the rays still searched
        go = rest[keep]
        lo_g, hi_g, rg = lo_s[keep], hi_s[keep], live[go]
        # a bracket (lo > 0, hi finite) that has not halved since the last one is bisected
        w = np.where((lo_g > 0) & np.isfinite(hi_g), hi_g - lo_g, np.inf)
        # (at step 0 every width before is inf, and no w exceeds half of it)
        slow = np.isfinite(w) & (w > 0.5 * width[rg]) if step_no else np.zeros(len(w), bool)
        width[rg] = w
        plain = np.where(np.isfinite(hi_g), 0.5 * (lo_g + hi_g), np.minimum(2.0 * r_s[keep], R_s[keep]))
        step = np.where(newton_in[keep], newton[keep], plain)
        step = np.where(cubic_in[keep], c_o[keep], step)
        step = np.where(quartic_in[go], quartic[go], step)
        new_rho[go] = np.where(slow, plain, step)
        rho[at] = new_rho
        lo[rg], hi[rg] = lo_g, hi_g            # the brackets are read again on the rays still searched only
        live = rg
        # this step's arrays go before the next evaluation of S (else they would be held through it)
        del r, R_l, gap_l, f, df, neg, hi_l, quartic, cubic_in, quartic_in
        del new_rho, other, r_o, c_o, af_o, gap_o, lo_o, top_o, dc, by_cubic, settled, kept
        del rest, r_s, f_s, df_s, af_s, gap_s, lo_s, hi_s, top_s
        del R_s, newton, newton_in, close, done, last, keep, go, lo_g, hi_g, rg, w, slow, plain, step
    return rho, f_at, (live, lo[live], hi[live], width[live])


def _star_check(rays, trig, sx, sy, v, cx, cy, T, rho, open_ray, R, ux, uy):
    """Star-shapedness: S must stay above T beyond every edge found. S is probed at three times the radius (first
    by the bound of :meth:`_Rays.above`, then exactly where it is not enough); rays found back inside are drawn to
    their last exit. Returns the fixes' flags (``rho``, ``open_ray`` are updated)."""
    M, K = rho.shape
    star = np.ones(M, bool)
    probe = np.minimum(3.0 * rho, R).ravel()
    doubt = np.flatnonzero(~open_ray.ravel() & (probe > rho.ravel() * 1.0001) & ~rays.above(probe))
    if not len(doubt):
        return star
    fp = rays.f(probe[doubt], doubt, slope=False)
    back = np.zeros(M * K, bool)
    back[doubt] = fp < 0
    back = back.reshape(M, K)
    rows = np.flatnonzero(back.any(axis=1))
    if len(rows):
        star[rows] = False
        sub = (_rows(trig, rows), sx[rows], sy[rows], v[rows], cx[rows], cy[rows])
        new, still_open = _last_crossing(*sub, np.minimum(3.0 * rho[rows], R[rows]), R[rows], ux, uy, T[rows])
        b = back[rows]
        rho[rows] = np.where(b, new, rho[rows])
        open_ray[rows] |= b & still_open
    return star


def _s_at_infinity(rays, trig, phi, v, psi, T):
    """The least plane limit of S far out, sum v wrap(phi - psi)^2, over the rays' directions and the bearings'
    mean direction. Where sum v sin^2(phi - psi) (no larger) already reaches T on every ray, only the mean
    direction is computed. ``trig`` the sines and cosines of ``phi``."""
    M = phi.shape[0]
    c = _bearing_sum(v * trig[1])
    s = _bearing_sum(v * trig[0])
    mean = np.arctan2(s, c)[:, None]

    def limit(r, w):
        r -= _TWO_PI * np.rint(r * (1.0 / _TWO_PI))        # wrapped to [-pi, pi] (only its square is used)
        return (w[:, :, None] * r * r).sum(1).min(axis=1)

    s_inf = limit(phi[:, :, None] - mean[:, None, :], v)
    # sum v sin^2(phi - psi) = (sum v - sum v cos 2(phi - psi)) / 2 is at least (sum v - |sum v e^(2i phi)|) / 2 in
    # every direction psi; where that clears T by far more than rounding can move the rays' own sums (DOUBLED_MARGIN),
    # no ray's sum is below T and they are not formed (a fix whose s_inf is below T needs none either)
    sv = _bearing_sum(v)
    c2 = _bearing_sum(v * ((trig[1] - trig[0]) * (trig[1] + trig[0])))
    s2 = _bearing_sum(v * (2.0 * trig[0] * trig[1]))
    least = 0.5 * (sv - np.hypot(c2, s2))
    rows = np.flatnonzero((s_inf >= T) & ~(least - DOUBLED_MARGIN * sv >= T))
    if not len(rows):
        return s_inf
    # sum v sin^2(phi - psi) = sum v B B, bearing by bearing (the rows added in order, as sum(0) adds them)
    B = rays.B.reshape(rays.n, M, -1)
    bound = t = None
    for k in range(rays.n):
        Bk = B[k][rows]
        t = np.multiply(rays.v[k][rows, None], Bk, out=t)
        t *= Bk
        if bound is None:
            bound = t.copy()
        else:
            bound += t
    low = rows[bound.min(axis=1) < T[rows]]
    if len(low):
        s_inf[low] = np.minimum(s_inf[low], limit(phi[low][:, :, None] - psi[None, None, :], v[low]))
    return s_inf


def _batch(b, fm, idx_m, sx_m, sy_m, phi_m, v_m, trig_m, low_m, known, dof, kdof, floor, level, psi, draw, fix_lat,
           fix_lon, slat_all, slon_all, bearing_all, spread):
    """:func:`_march`'s arguments for rows ``b`` of a minimum batch (fixes ``fm``, bearings ``idx_m``)."""
    fx, idx = fm[b], idx_m[b]
    return ((sx_m[b], sy_m[b], phi_m[b], v_m[b], known[fx], dof[fx], kdof[fx], floor[fx], level[fx], psi, draw[fx],
             fix_lat[fx], fix_lon[fx]),
            dict(station_lat=slat_all[idx], station_lon=slon_all[idx], theta=np.radians(bearing_all[idx]),
                 spread=spread[fx], trig=(trig_m[0][b], trig_m[1][b]), low=tuple(a[b] for a in low_m)))


#: Rays still searched after this many steps are set aside and searched on together with those of the other batches
#: of the same minimum batch (:func:`_march`'s ``pending``): about 0.2 % of the rays, which took ten or so more
#: steps each batch, each step costing mostly numpy's per-call overhead.
POOL_AFTER = 2
#: ... unless their fixes are more than this share of the batch's (then the batch searches on by itself: the pool's
#: arrays stay well below a batch's); the pool is searched once it holds half a batch of fixes.
POOL_SHARE = 0.1


def _march(sx, sy, phi, v, known, dof, kdof, floor, level, psi, draw, fix_lat, fix_lon, *, station_lat, station_lon,
           theta, spread, trig, low, pending=None, resume=None):
    """The regions of one batch of fixes (bearings (M, n); ``trig`` the sines and cosines of ``phi``, ``low`` what
    :func:`_minimum` gives for them).

    With a list ``pending``, the search stops after POOL_AFTER steps; the fixes with rays still searched get
    their regions from what was found so far, and their search is appended to ``pending`` (rows of the batch,
    radii and f of their rays, the rays still searched and their brackets) to be taken up again by a call with
    ``resume`` on those rows (gathered from several batches): each ray's steps are its own, so the answers are those
    of one search to the end."""
    M, K = phi.shape[0], len(psi)
    cx, cy, s_min, J, H = low
    T = region_threshold(s_min, known, dof, level, kdof, floor)
    ux, uy = np.sin(psi)[None, :], np.cos(psi)[None, :]
    # First guess: S's quadratic model about its minimum, with the full Hessian where it is positive definite,
    # then the root of S's Taylor polynomial along the ray where that is positive definite.
    pos = _positive(H)[:, None]
    q = np.where(pos, H, J)
    # q11 ux ux + 2 q12 ux uy + q22 uy uy, in that order, in two (fixes, rays) arrays instead of seven
    quad = np.multiply(q[:, :1], ux)
    quad *= ux
    t = np.multiply(2 * q[:, 1:2], ux)
    t *= uy
    quad += t
    np.multiply(q[:, 2:], uy, out=t)
    t *= uy
    quad += t
    del t
    R = draw[:, None] * np.ones((1, K))
    curv = quad if pos.all() else np.where(pos, quad, np.nan)          # (only read from here on)
    rays = _Rays(trig, sx, sy, v, cx, cy, T, psi)
    if resume is None:
        with np.errstate(divide="ignore", invalid="ignore"):
            rho = np.sqrt((T - s_min)[:, None] / quad)
        half = 0.5 * draw[:, None]          # 0.5 R, per fix (the same values, broadcast along the rays)
        fine = np.isfinite(rho) & (rho > 0)
        plain = fine & (rho < half)
        rho = np.where(fine, np.minimum(rho, half), half)
        plain &= pos
        rho = _series_guess(rays, psi, T - s_min, rho, plain)
        del fine, plain
        stop = 60 if pending is None else POOL_AFTER
        rho, f, state = _edges(rays, rho.ravel(), R.ravel(), np.repeat(T - s_min, K), curv.ravel(), stop=stop)
    else:
        rho, f, state = _edges(rays, resume[0], R.ravel(), np.repeat(T - s_min, K), curv.ravel(), start=POOL_AFTER,
                               state=resume[1:])
    del q, quad
    live = state[0]
    if pending is not None and len(live):
        rows, at = np.unique(live // K, return_inverse=True)
        if len(rows) > POOL_SHARE * M:          # too many to set aside: this batch searches on
            rho, f, _ = _edges(rays, rho, R.ravel(), np.repeat(T - s_min, K), curv.ravel(), start=POOL_AFTER,
                               state=(f, *state))
        else:
            ray = at * K + live % K             # the rays still searched, numbered within the rows set aside
            pending.append((rows, rho.reshape(M, K)[rows].ravel(), f.reshape(M, K)[rows].ravel(), ray, *state[1:]))
    rho, f = rho.reshape(M, K), f.reshape(M, K)
    open_ray = (f < 0) & (rho >= draw[:, None] * (1 - 1e-9))
    if open_ray.any():
        rho[open_ray] = R[open_ray]
    star = _star_check(rays, trig, sx, sy, v, cx, cy, T, rho, open_ray, R, ux, uy)
    s_inf = _s_at_infinity(rays, trig, phi, v, psi, T)
    bounded = ~open_ray.any(axis=1) & (s_inf >= T)
    res = dict(centre_x=cx, centre_y=cy, radius_m=rho, bounded=bounded, star_shaped=star, s_min=s_min,
               threshold=T)
    _refine_large(res, sx, sy, phi, v, psi, spread, known, dof, floor, fix_lat, fix_lon, station_lat, station_lon, theta,
                  R, open_ray)
    return res


def _last_crossing(trig, sx, sy, v, cx, cy, probe, R, ux, uy, T):
    """Where S climbs back above T beyond ``probe`` (bisection up to the drawing range)."""
    lo = probe.copy()
    hi = R.copy()
    fR = _ray_f(trig, sx, sy, v, cx, cy, hi, ux, uy, T)
    for _ in range(40):
        mid = 0.5 * (lo + hi)
        fm = _ray_f(trig, sx, sy, v, cx, cy, mid, ux, uy, T)
        lo = np.where(fm < 0, mid, lo)
        hi = np.where(fm < 0, hi, mid)
    still_open = fR < 0
    return np.where(still_open, R, hi), still_open


def _refine_large(res, sx, sy, phi, v, psi, spread, known, dof, floor, fix_lat, fix_lon, station_lat, station_lon,
                  theta, R, open_ray):
    """Fixes spanning hundreds of kilometres: redo the edge with exact geodesic residuals (secant steps)."""
    rho = res["radius_m"]
    with np.errstate(invalid="ignore", divide="ignore"):
        sd = np.where(known, 1.0 / np.sqrt(np.maximum(v.max(axis=1), 1e-300)),
                      np.fmax(np.sqrt(res["s_min"] / np.maximum(dof, 1)), floor))
        # a fix with a NaN radius is never refined, so the largest radius of the others is a plain max
        # (np.nanmax's copy is not needed), the open rays counted as 0
        top = (np.where(open_ray, 0.0, rho) if open_ray.any() else rho).max(axis=1)
        err = top * spread / _EARTH_R**2
        need = np.isfinite(rho).all(axis=1) & (err > PLANE_TOLERANCE * sd)
    if not need.any():
        return
    K = len(psi)
    n = phi.shape[1]
    for i in np.flatnonzero(need):
        slat, slon, th, vv = station_lat[i], station_lon[i], theta[i], v[i]

        def f_exact(rr):
            x = res["centre_x"][i] + rr * np.sin(psi)
            y = res["centre_y"][i] + rr * np.cos(psi)
            plat, plon = geodesy.from_local(fix_lat[i], fix_lon[i], x, y)
            a, _, _ = geodesy.inverse(np.repeat(slat, K), np.repeat(slon, K), np.tile(plat, n), np.tile(plon, n))
            r = _wrap(th.repeat(K) - np.radians(a))
            return (vv.repeat(K) * r * r).reshape(n, K).sum(axis=0) - res["threshold"][i]

        closed = ~open_ray[i]
        rr = rho[i].copy()
        f0 = f_exact(rr)
        r1 = rr * np.where(f0 > 0, 0.99, 1.01)
        f1 = f_exact(r1)
        for _ in range(8):
            with np.errstate(divide="ignore", invalid="ignore"):
                r2 = r1 - f1 * (r1 - rr) / (f1 - f0)
            good = closed & np.isfinite(r2) & (r2 > 0)
            r2 = np.where(good, np.minimum(r2, R[i]), r1)
            rr, f0 = r1, f1
            r1 = r2
            f1 = f_exact(r1)
            if np.all(np.abs(f1[closed]) <= 1e-6 * res["threshold"][i]):
                break
        rho[i] = np.where(closed, r1, rho[i])
