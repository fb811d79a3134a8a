"""The Fisher information a bearing carries about the transmitter's position, and the region area it implies."""

from __future__ import annotations

import numpy as np

from dfkit import geodesy
from dfkit.policy import ONE_SPOT_M
from dfkit.regions import scale_factor


def bearing_information(target_lat, target_lon, station_lat, station_lon, sd_deg, weight=1.0):
    """Fisher information about the target position carried by one bearing, per pair (vectorised).

    Parameters
    ----------
    target_lat, target_lon : array_like
        Where the transmitter is assumed to be, WGS84. [°]
    station_lat, station_lon : array_like
        Where the bearing is taken, WGS84. [°]
    sd_deg : array_like
        Bearing standard deviation. [°]
    weight : array_like, optional
        Multiplies the information (a robust weight; 0 drops the bearing).

    Returns
    -------
    j_ee, j_en, j_nn : ndarray
        Entries of the 2x2 information matrix in the target's east/north plane. [1/m²]

    Notes
    -----
    J = u u^T / (d^2 sigma^2) with u = (cos a, -sin a) perpendicular to the line of
    sight, a its azimuth at the target and d the geodesic distance (Torrieri 1984;
    see the module docstring). Distances below 1 m are taken as 1 m.
    """
    az, _, d = geodesy.inverse(target_lat, target_lon, station_lat, station_lon)
    return _terms(az, d, np.asarray(weight, float) / np.radians(np.asarray(sd_deg, float)) ** 2)


def _terms(az_deg, d_m, info_w):
    a = np.radians(az_deg)
    f = info_w / np.maximum(d_m, ONE_SPOT_M) ** 2
    c, s = np.cos(a), np.sin(a)
    return f * c * c, -f * c * s, f * s * s


def ellipse_area_m2(j_ee, j_en, j_nn, level=0.95):
    """Area of the ``level`` ellipse of the covariance J^-1, from the information J. [m²]

    pi k^2 / sqrt(det J) with k^2 = -2 ln(1 - level) (known SD, chi-square with
    2 degrees of freedom). Infinite where J is singular (a single bearing, or
    bearings along one line).

    >>> round(float(ellipse_area_m2(1.0, 0.0, 1.0, level=1 - np.exp(-0.5))), 6)   # unit circle
    3.141593
    """
    k2 = float(scale_factor(level)) ** 2
    det = np.asarray(j_ee, float) * np.asarray(j_nn, float) - np.asarray(j_en, float) ** 2
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(det > 0, np.pi * k2 / np.sqrt(np.where(det > 0, det, 1.0)), np.inf)


def _inverse_pair(lat1, lon1, lat2, lon2):
    az, _, d = geodesy.inverse(lat1, lon1, lat2, lon2)
    return az, d
