"""The exact local plane of a fix, and residuals in it.

Every fix is solved in its own plane: the ellipsoidal azimuthal equidistant
projection centred at the fix's current estimate (built from the geodesic
inverse problem, :mod:`dfkit.geodesy`). In that plane a station S_i lies at its
exact geodesic distance and azimuth from the centre, and its observed bearing
theta_i (true, at the station) becomes the plane direction
``phi_i = r_i + mu_i``: ``r_i = theta_i - alpha_i`` is the residual against the
geodesic azimuth alpha_i from the station to the centre, ``mu_i`` the plane
direction from the station to the centre. At the centre the plane residuals
*are* the geodesic residuals; away from it they are within about
rho d / R^2 radians of them (rho the distance from the centre, d the station's
range, R the Earth's radius), which the solver removes by re-centring.

Angles here are compass angles in radians (clockwise from north; x east, y north).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from dfkit import geodesy

TWO_PI = 2.0 * np.pi


def wrap_pi(a):
    """Wrap angles to [-pi, pi). [rad] (numpy's remainder, bit for bit: :func:`dfkit.geodesy.remainder`)"""
    return geodesy.remainder(np.add(a, np.pi), TWO_PI) - np.pi


@dataclass
class PlaneGeometry:
    """Bearings about the centres of their fixes (one entry per bearing, radians and metres).

    ``sx``, ``sy`` station in the plane; ``r`` residual at the centre (exact geodesic
    residual); ``az`` azimuth from the centre to the station; ``d`` distance from the
    centre to the station; ``sp``, ``cp`` sin and cos of the observed bearing as a plane
    direction phi (phi itself is not kept: nothing reads it, and each geometry held is
    one array per bearing smaller).
    """

    sx: np.ndarray
    sy: np.ndarray
    r: np.ndarray
    az: np.ndarray
    d: np.ndarray
    sp: np.ndarray
    cp: np.ndarray

    _FIELDS = ("sx", "sy", "r", "az", "d", "sp", "cp")

    def take(self, sel) -> "PlaneGeometry":
        """Rows ``sel`` (a view for a slice, a copy for a mask or indices)."""
        return PlaneGeometry(*(getattr(self, k)[sel] for k in self._FIELDS))

    def share(self, other: "PlaneGeometry") -> None:
        """Take all of ``other``'s rows by holding its arrays (``put`` of every row, without the copy)."""
        for k in self._FIELDS:
            setattr(self, k, getattr(other, k))

    def copy(self) -> "PlaneGeometry":
        return PlaneGeometry(*(getattr(self, k).copy() for k in self._FIELDS))

    def put(self, sel, other: "PlaneGeometry") -> None:
        for k in self._FIELDS:
            getattr(self, k)[sel] = getattr(other, k)

    def copy_rows(self, sel, other: "PlaneGeometry") -> None:
        """Rows ``sel`` of ``other`` into the same rows here (one field at a time: no copy of the whole)."""
        for k in self._FIELDS:
            getattr(self, k)[sel] = getattr(other, k)[sel]


def geometry(station_lat, station_lon, theta_deg, centre_lat, centre_lon) -> PlaneGeometry:
    """Exact plane geometry of bearings about a centre (arrays of equal length)."""
    az_cs, az_sc, d = geodesy.inverse(centre_lat, centre_lon, station_lat, station_lon)
    a = np.radians(az_cs)
    del az_cs
    r = wrap_pi(np.radians(theta_deg - az_sc))
    del az_sc
    phi = a + np.pi                         # mu, the plane direction from the station to the centre
    phi += r                                # r + mu
    sp, cp = np.sin(phi), np.cos(phi)
    del phi
    return PlaneGeometry(sx=d * np.sin(a), sy=d * np.cos(a), r=r, az=a, d=np.maximum(d, 1e-9), sp=sp, cp=cp)


def residuals(sp, cp, sx, sy, x, y, at=None):
    """Plane residuals of bearings at points (x, y), with the offsets and squared distances.

    ``sp``, ``cp`` are sin and cos of the observed plane directions; with ``at`` (an index per bearing),
    each bearing's point is ``(x[at], y[at])``. Returns r [rad], dx, dy [m] (point minus station) and
    d2 [m^2].
    """
    dx, dy, d2, t = _offsets(sx, sy, x, y, at)
    across, along = _components(sp, cp, dx, dy, t)
    # the signed angle from (dx, dy) to the direction phi, in (-pi, pi], without wrapping
    r = np.arctan2(across, along, out=t)
    return r, dx, dy, d2


def _offsets(sx, sy, x, y, at=None):
    """dx, dy (point minus station, the point ``(x[at], y[at])`` with ``at``), d2 = max(dx^2 + dy^2, 1e-18)
    and a spare array of their size.

    In-place arithmetic keeps few per-bearing arrays alive at once; the values are those of the formula."""
    if at is None:
        dx = x - sx
        dy = y - sy
    else:                                   # gathered straight into the arrays of the offsets
        dx = x[at]
        dx -= sx
        dy = y[at]
        dy -= sy
    with np.errstate(over="ignore"):
        d2 = dx * dx
        t = np.multiply(dy, dy)
        d2 += t
    np.maximum(d2, 1e-18, out=d2)
    return dx, dy, d2, t


def _components(sp, cp, dx, dy, t):
    """The components of the direction phi across (sp dy - cp dx) and along (sp dx + cp dy) the offset
    (dx, dy); ``t`` is overwritten."""
    across = sp * dy
    np.multiply(cp, dx, out=t)
    across -= t
    along = sp * dx
    np.multiply(cp, dy, out=t)
    along += t
    return across, along


def sin_cos_residuals(sp, cp, sx, sy, x, y, at=None):
    """As :func:`residuals`, but sin r and cos r in place of r (no arctan2: the two components of the
    direction phi in the frame of (dx, dy), divided by their length). Returns sin r, cos r, dx, dy, d2."""
    dx, dy, d2, t = _offsets(sx, sy, x, y, at)
    sn, cs = _components(sp, cp, dx, dy, t)
    h = np.sqrt(d2, out=t)                  # = hypot(across, along), (sp, cp) being a unit vector
    sn /= h
    cs /= h
    del h, t
    if (d2 <= 1e-18).any():                 # a point on a station: r = 0, as arctan2(0, 0)
        on = d2 <= 1e-18
        sn[on], cs[on] = 0.0, 1.0
    return sn, cs, dx, dy, d2


def bearing_gradient(dx, dy, d2):
    """Gradient of the predicted bearing atan2(dx, dy) with respect to the point [rad/m]."""
    return dy / d2, -dx / d2
