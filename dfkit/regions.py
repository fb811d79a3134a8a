"""Confidence regions: error ellipses at a stated probability, and error polygons.

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

from dataclasses import dataclass

import numpy as np

from dfkit import geodesy


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
    orient = np.mod(90.0 - np.degrees(t), 180.0)
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
