"""The result of locating: one row per fix with its status, and each fix's region.

Statuses (``status`` column). A fix is ``ok`` only at a verified optimum of its
method, with every bearing it uses in front of it, a finite positive
covariance, a bounded likelihood region, and no competing explanation
(:mod:`dfkit.locate.rivals`). The others say what happened:

===============  =========  ==========================================================
status           position   meaning
===============  =========  ==========================================================
ok               yes        position and confidence region can be trusted as stated
ambiguous        yes        another set of the bearings fits as well at another place
                            that the region does not reach (one of the lines named
                            is wild, but the bearings cannot tell which)
inconsistent     yes        the bearings disagree more than their SD allows (a wild
                            bearing, or an SD too small for this fix)
near_observer    yes        the fix lies beside an observer, where that bearing fits
                            almost any point: the fix leans on the other bearings
unbounded        yes        the confidence region is open: it reaches past the
                            stated drawing range along the bearings
no_region        yes        two bearings and no known SD (or a degenerate
                            covariance): nothing to size a region with
shallow          yes        the bearing lines cross at less than 20 degrees (common
                            practice limit): the position is weak along them
long_span        yes        two successive bearings are further apart than the window,
                            or the fix lasts more than 3 windows: the transmitter
                            may have moved between them
too_few          no         fewer than two usable bearings
one_spot         no         all bearings taken from one spot: they cannot cross
parallel         no         the bearing lines are parallel and do not cross
diverging        no         the bearing lines do not meet in front of the observers
behind           no         the best point lies behind an observer whose bearing
                            points away from it
on_station       no         the best point creeps onto an observer's own station (a
                            sign that another bearing disagrees badly)
collapsed        no         the robust weights left too few bearings to fix a point
no_optimum       no         the fit settled on a saddle or a flat valley, not a
                            maximum of the likelihood
no_convergence   no         the estimate did not settle (or stalled at a point that
                            is no solution, from every start tried)
===============  =========  ==========================================================
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from dfkit.problems import Problem
from dfkit.regions import LikelihoodRegions

STATUS_MEANING = {
    "ok": "position and confidence region can be trusted as stated",
    "inconsistent": "the bearings disagree more than their SD allows",
    "near_observer": "the fix lies beside an observer, whose bearing hardly constrains it",
    "unbounded": "the confidence region is open along the bearings",
    "no_region": "a position, but nothing to size a confidence region with",
    "shallow": "the bearing lines cross at a shallow angle; the position is weak along them",
    "long_span": "the bearings are too far apart in time; the transmitter may have moved",
    "ambiguous": "another set of the bearings fits as well at another place, outside the region, or the fix may rest "
                 "on one wild bearing (wild_risk of 1 - level or more), or its stations' positions can be read at "
                 "another place (a UTM zone letter S that nothing in the fix settles)",
    "too_few": "fewer than two usable bearings",
    "one_spot": "all bearings were taken from one spot",
    "parallel": "the bearing lines are parallel and do not cross",
    "diverging": "the bearing lines do not meet in front of the observers",
    "behind": "the best point lies behind an observer whose bearing points away from it",
    "on_station": "the best point creeps onto an observer's station",
    "collapsed": "the robust weights left too few bearings",
    "no_optimum": "the fit settled on a saddle or flat valley, not a maximum",
    "no_convergence": "the estimate did not settle",
}
#: Statuses that come with a position.
#: The ``sd_source`` values of a fix whose SD is known (given or calibrated), not estimated from its residuals.
KNOWN_SD_SOURCES = ("given", "calibration", "given+calibration")
WITH_POSITION = ("ok", "ambiguous", "inconsistent", "near_observer", "unbounded", "no_region", "shallow", "long_span")


def status_in(status, words) -> np.ndarray:
    """Whether each status (an array of words) is one of ``words``: one hash pass (np.isin sorts the text)."""
    return pd.Series(np.asarray(status, dtype=object), copy=False).isin(words).to_numpy(dtype=bool)


def has_position(status) -> np.ndarray:
    """Whether each status (an array of words) comes with a position (:data:`WITH_POSITION`)."""
    return status_in(status, WITH_POSITION)


FIX_COLUMNS = [
    "fix", "tag", "time", "lat", "lon", "n_bearings", "n_used", "method", "sd_deg", "sd_source", "level",
    "semi_major_m", "semi_minor_m", "orientation_deg", "area_m2",
    "region_area_m2", "region_bounded", "region_reach_m", "wild_risk", "region_level",
    "cov_ee_m2", "cov_en_m2", "cov_nn_m2",
    "status", "reason", "crossing_deg", "span_min", "max_residual_deg", "kappa", "iterations", "converged",
    "rejected_lines",
]


@dataclass
class Fixes:
    """Results of :func:`dfkit.locate.locate`.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per fix of the input, in input order (columns :data:`FIX_COLUMNS`):
        position, the covariance ellipse (``semi_major_m`` ...), the likelihood
        region (``region_area_m2``, NaN when open; ``region_bounded``;
        ``region_reach_m`` the farthest its edge lies from the fix), ``wild_risk`` (the chance that the
        region misses because one bearing is wild, :mod:`dfkit.locate.wild`; NaN where not weighed),
        ``region_level`` (the probability the region and ellipse are drawn at if every bearing is good: the level,
        or level + wild_risk for an ok fix whose risk is 0.5 % or more, so that it holds the transmitter with the
        level's probability counting that risk), the east/north
        covariance of the position (``cov_ee_m2``, ``cov_en_m2``, ``cov_nn_m2``),
        ``sd_source`` ('given', 'calibration', 'given+calibration' when every
        bearing has an SD; 'estimated' from the fix's own residuals), status and reason.
    bearings : pandas.DataFrame
        The usable bearings with ``residual_deg``, ``weight`` and ``range_m``
        against their fix (NaN where the fix has no position) and ``fix_status``.
    problems : list of Problem
        The input problems (rejected rows and warnings).
    notes : list of str
        What dfkit did that the user should know.
    source : str
        Where the bearings came from.
    warnings : list of str
        What the whole sheet shows that no single fix can (:mod:`dfkit.locate.sheetwide`): an observer,
        team, antenna or receiver reading off, an SD given too small.
    likelihood : LikelihoodRegions or None
        Each fix's likelihood-ratio region, in the rows' order (None when not computed): rays,
        bounds and the exact test behind :meth:`contains`.
    regions : pandas.DataFrame or None
        The same regions as drawable shapes, built on first use (the hook exports, maps and the
        season store read): ``fix_id`` (the row), ``geometry`` (a shapely Polygon, or MultiPolygon
        when split at the antimeridian, in longitude/latitude), ``bounded``, ``area_m2``
        (NaN when open), ``reach_m`` and ``drawn_to_m`` (how far an open region is drawn).
    azimuth_deg : ndarray or None
        Each bearing's geodesic azimuth to its station [°], in the rows of ``bearings``, as the solver left it:
        taken at its last plane's centre, within ``tol_m`` of the written fix (so not bit for bit the azimuth from
        the written position; about 3e-6° apart on the samples). None when not kept. The sheet-wide checks reuse
        it instead of a second geodesic pass.
    """

    table: pd.DataFrame
    bearings: pd.DataFrame
    problems: list[Problem] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    source: str = ""
    likelihood: LikelihoodRegions | None = None
    warnings: list[str] = field(default_factory=list)
    _regions: pd.DataFrame | None = field(default=None, repr=False)
    azimuth_deg: np.ndarray | None = field(default=None, repr=False)

    @property
    def regions(self) -> pd.DataFrame | None:
        if self._regions is None and self.likelihood is not None:
            self._regions = self._region_table()
        return self._regions

    @regions.setter
    def regions(self, value) -> None:
        self._regions = value

    def _region_table(self) -> pd.DataFrame:
        from shapely.geometry import MultiPolygon, Polygon

        from dfkit.regions import split_ring

        L = self.likelihood
        rows, lat, lon = L.rings(self._region_rows())
        geoms = _simple_regions(lat, lon)       # most rings at once; the rest (antimeridian, invalid) one by one
        for i in np.flatnonzero(pd.isna(geoms)):
            parts = [Polygon(p) for p in split_ring(lat[i], lon[i])]
            geoms[i] = parts[0] if len(parts) == 1 else MultiPolygon(parts)
        return pd.DataFrame({"fix_id": rows, "geometry": list(geoms), "bounded": L.bounded[rows],
                             "area_m2": L.area_m2[rows], "reach_m": L.reach_m[rows],
                             "drawn_to_m": np.where(L.bounded[rows], np.nan, L.draw_range_m[rows])})

    def _region_rows(self) -> np.ndarray:
        has_pos = self.table["status"].isin(WITH_POSITION).to_numpy()
        return np.flatnonzero(has_pos & self.likelihood.has_region)

    def summary(self) -> dict[str, int]:
        """Counts of fixes that are ok, flagged (position, with a caveat) and failed (no position)."""
        s = self.table["status"]
        counts = s.value_counts()      # one pass over the fixes: a count per status word (missing ones left out)
        ok = int(counts.get("ok", 0))
        placed = int(sum(counts.get(word, 0) for word in WITH_POSITION))
        return {"ok": ok, "flagged": placed - ok, "failed": len(s) - placed}

    def _row(self, fix, tag=None) -> int:
        t = self.table
        if isinstance(fix, (int, np.integer)) and not isinstance(fix, bool) and tag is None and \
                not (t["fix"] == fix).any():
            return int(fix)
        sel = t["fix"] == fix
        if tag is not None:
            sel &= t["tag"] == tag
        rows = np.flatnonzero(sel.to_numpy())
        if len(rows) != 1:
            raise KeyError(f"fix={fix!r}" + (f", tag={tag!r}" if tag is not None else "") +
                           (" matches several fixes: give tag=" if len(rows) > 1 else " is not a fix of this table"))
        return int(rows[0])

    def region_ring(self, fix, tag=None, *, n_vertices=None):
        """The likelihood region of one fix (label, or row number) as a closed ring of (lat, lon) arrays.

        Longitudes are unwrapped (continuous across the antimeridian; split them with
        :func:`dfkit.geometry.split_ring`). None when the fix has no region. An unbounded
        region is drawn to its ``draw_range_m``.
        """
        if self.likelihood is None:
            return None
        return self.likelihood.ring(self._row(fix, tag), n_vertices)

    def region_rings(self, *, n_vertices=None):
        """Every fix's likelihood region: a list of (row number, (lat, lon) ring), for fixes with a position
        and a region (see :meth:`region_ring`)."""
        if self.likelihood is None:
            return []
        return [(int(i), self.likelihood.ring(int(i), n_vertices)) for i in self._region_rows()]

    def contains(self, lat, lon, *, kind="region"):
        """Whether each fix's confidence region holds a point (one point per fix, or one for all).

        Parameters
        ----------
        lat, lon : float or array_like, shape (n_fixes,)
            The point(s). [°]
        kind : {'region', 'ellipse'}
            The likelihood-ratio region (exact, with geodesic residuals; also beyond an open
            region's drawing range) or the covariance ellipse.

        Returns
        -------
        ndarray of bool, one per fix row (False where the fix has no such region).
        """
        t = self.table
        m = len(t)
        lat = np.broadcast_to(np.asarray(lat, float), (m,))
        lon = np.broadcast_to(np.asarray(lon, float), (m,))
        has_pos = t["status"].isin(WITH_POSITION).to_numpy()
        if kind == "region":
            if self.likelihood is None:
                raise ValueError("kind='region': these fixes were located without regions (with_regions=False)")
            return self.likelihood.contains(lat, lon) & has_pos
        if kind != "ellipse":
            raise ValueError(f"kind={kind!r} is not one of 'region', 'ellipse'")
        from dfkit import geodesy

        a = t["semi_major_m"].to_numpy(float)
        ok = has_pos & np.isfinite(a) & (a > 0)
        out = np.zeros(m, bool)
        if ok.any():
            x, y = geodesy.to_local(t["lat"].to_numpy(float)[ok], t["lon"].to_numpy(float)[ok], lat[ok], lon[ok])
            th = np.radians(t["orientation_deg"].to_numpy(float)[ok])
            u = x * np.sin(th) + y * np.cos(th)            # along the major axis
            v = x * np.cos(th) - y * np.sin(th)
            out[ok] = (u / a[ok]) ** 2 + (v / t["semi_minor_m"].to_numpy(float)[ok]) ** 2 <= 1.0
        return out


def _simple_regions(lat, lon):
    """What :func:`dfkit.regions.split_ring` gives, for the rings that lie within (-180, 180) and are valid,
    computed for all of them at once by the same GEOS operations (intersection with the world box, then
    counter-clockwise orientation, exterior kept); None for the other rings."""
    import shapely

    out = np.full(len(lat), None, dtype=object)
    if not len(lat):
        return out
    inside = (lon.max(axis=1) < 180.0) & (lon.min(axis=1) > -180.0)
    idx = np.flatnonzero(inside)
    polys = shapely.polygons(np.stack([lon[idx], lat[idx]], axis=-1))
    ok = shapely.is_valid(polys)
    idx, polys = idx[ok], polys[ok]
    part = shapely.intersection(polys, shapely.box(-180.0, -90.0, 180.0, 90.0))
    ok = (shapely.get_type_id(part) == 3) & (shapely.area(part) > 0)        # one polygon
    part = shapely.orient_polygons(part[ok], exterior_cw=False)
    out[idx[ok]] = shapely.polygons(shapely.get_exterior_ring(part))
    return out


def per_bearing(words, g):
    """A text array of the fixes (one word per fix) taken to their bearings: the column pandas makes of
    ``words[g]``, made as pandas' own text array of the fixes' words (its type inferred from one cell per fix)
    and taken to the bearings. Handing pandas the object array ``words[g]`` makes it infer the type of each of the
    bearings' cells, with transient copies of about five times the column (16 MB at 400,000 bearings)."""
    return pd.Series(words, copy=False).array.take(g)
