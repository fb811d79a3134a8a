r"""Where to take the next bearing: candidate spots ranked by the region they are expected to leave.

For a transmitter at P and a station at range d whose line of sight to P has
azimuth a (at P), a bearing with SD sigma [rad] carries the Fisher information

.. math:: J = u u^T / (d^2 \sigma^2), \qquad u = (\cos a, -\sin a)

in P's east/north plane (u is perpendicular to the line of sight; Torrieri
1984 [1]_). Independent bearings add: J_total = sum J_i, and the Cramer-Rao
bound J_total^-1 is the covariance of an efficient estimate, the one
Stansfield's [4]_ and Lenth's ellipses use. Its p-ellipse has the area

.. math:: A = \pi \, (-2 \ln(1 - p)) / \sqrt{\det J_\mathrm{total}}.

The *expected area after one more bearing from spot c* is this area with
J_total + J_c. Two equal-range bearings crossing at gamma give
det J = sin^2(gamma) / (sigma^4 d^4), so A is proportional to 1/|sin gamma|:
the best crossing is 90 degrees (Dogancay & Hmam 2008 [2]_; Bishop et al.
2010 [3]_ for optimal geometries in general). Ranking spots by A is the
D-optimal choice.

How a spot is scored (``basis``):

``point`` (default)
    A at the current estimate: the textbook value, and what a hand calculation
    gives.
``region``
    The geometric mean of A over 600 positions spread as the estimate's error,
    N(estimate, J^-1), laid out by a deterministic rule (no random numbers):
    the mean of log det J over the region, the Bayesian form of D-optimality
    (K. Chaloner and I. Verdinelli, "Bayesian experimental design: a review",
    Statistical Science 10(3), 273-304, 1995 [from memory]). It hedges against
    the estimate being off, and stays finite for spots at or near the estimate.
    Measured on simulated fixes (``benchmarks/bench_planning.py``) it did not
    pick better spots than ``point`` (judged by the area at the true position),
    and an arithmetic mean, or sampling the exact likelihood, did worse; hence
    the default. The current area is averaged the same way, so ratios compare
    like with like.
``bearing_lines``
    Used when there is no estimate (one bearing so far, or bearings that do not
    cross): the geometric mean of A over positions along the bearing lines,
    evenly spread in range from ``max_range_m / 20`` out to ``max_range_m`` and
    across each line by its SD. This rests on a stated range band, not on data:
    it is weaker than a plan from a fix, and the outputs say so.

Bearing SDs: each bearing's own SD when the fix has them (sheet ``sd``,
``--sd``, a calibration), else the SD estimated from the fix's residuals (weak
with few bearings: it has n - 2 degrees of freedom). The next bearing gets
``next_sd_deg`` or else the fix's SD. Areas use the chi-square scale (the SD
taken as known); with an SD estimated from the fix itself the region ``dfkit
fix`` reports after the bearing is wider (F scale). With no SD at all, spots
are still ranked (for equal SDs the ranking does not depend on the SD) but no
areas are given.

Directions and distances are geodesic (WGS84, :mod:`dfkit.geodesy`); the
information uses the geodesic distance d for the reduced length m12 (their
relative difference is below 1e-6 at 10 km). A grid of spots is laid exactly
in the local azimuthal-equidistant plane of the estimate.

The ranking knows nothing of terrain, reflections, signal strength or access
(:data:`dfkit.cautions.PLAN_CAUTION`).

References
----------
.. [1] D. J. Torrieri, "Statistical theory of passive location systems," IEEE
   Trans. Aerospace and Electronic Systems 20(2), 183-198, 1984 (volume and
   pages from memory).
.. [2] K. Dogancay and H. Hmam, "Optimal angular sensor separation for AOA
   localization," Signal Processing 88(5), 1248-1260, 2008 (from memory).
.. [3] A. N. Bishop, B. Fidan, B. D. O. Anderson, K. Dogancay and P. N.
   Pathirana, "Optimality analysis of sensor-target localization geometries,"
   Automatica 46(3), 479-492, 2010 (from memory).
.. [4] R. G. Stansfield, "Statistical theory of d.f. fixing," J. IEE Part IIIA
   94(15), 762-770, 1947 (from memory).
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from dfkit import geodesy
from dfkit.cautions import PLAN_CAUTION
from dfkit.conventions import wrap360
from dfkit.io import read_table
from dfkit.io.sheet import KNOWN_COLUMNS
from dfkit.locate import WITH_POSITION, Fixes, locate
from dfkit.observations import Bearings, read_stations
from dfkit.policy import DEFAULT_MAX_RANGE_M, NOMINAL_SD_DEG, ONE_SPOT_M
from dfkit.problems import Problem, SheetError
from dfkit.regions import scale_factor

#: How a spot is scored (see the module docstring).
BASES = ("point", "region")
#: Positions averaged over for ``basis='region'`` and along the lines without an estimate.
N_SAMPLES = 600
#: Largest number of candidate spots in one plan (a grid beyond it needs a coarser step).
MAX_SPOTS = 20_000

#: Columns of :attr:`Plan.table`, in order (the spots file's own extra columns follow).
PLAN_COLUMNS = [
    "rank",
    "spot",
    "lat",
    "lon",
    "expected_area_m2",
    "area_ratio",
    "distance_m",
    "azimuth_deg",
    "expected_bearing_deg",
    "crossing_deg",
    "point_area_m2",
    "from_last_m",
    "from_last_deg",
    "east_m",
    "north_m",
    "line",
    "note",
    "fix",
    "tag",
    "fix_status",
    "basis",
    "level",
    "next_sd_deg",
]
#: Column names a spots file cannot carry under their own name (they become ``spot_<name>``).
RESERVED_COLUMNS = set(PLAN_COLUMNS) | {"kind", "caution", "score"}


# --------------------------------------------------------------------------- information


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


# --------------------------------------------------------------------------- spots


@dataclass
class Spots:
    """Candidate spots: ``table`` (``spot``, ``lat``, ``lon``, ``line``, and the file's own extra
    columns), the rows that could not be used (``problems``, each with line, column and reason) and,
    of those, the ones with a label (``rejected``: ``spot``, ``line``, ``reason``), so that a plan
    can list them too."""

    table: pd.DataFrame
    problems: list[Problem] = field(default_factory=list)
    source: str = ""
    rejected: pd.DataFrame = field(
        default_factory=lambda: pd.DataFrame({"spot": [], "line": [], "reason": []})
    )


def read_spots(path, *, stations=None) -> Spots:
    """Read a spots file: a ``spot`` label (or ``name``) plus a position in any of the sheet's forms.

    Positions are lat/lon, UTM (``utm_zone``, ``easting``, ``northing``), ``mgrs``,
    or a ``station`` label from a stations file; every rejected row is reported with
    its line, column and reason, in the same words as for a bearing sheet.

    Parameters
    ----------
    path : str or path-like
        The spots file (CSV; delimiter, encoding and header rules as for a sheet).
    stations : str or path-like, optional
        A stations file, for spots given by a ``station`` label.

    Raises
    ------
    SheetError
        The file cannot be read, or has no ``spot`` (or ``name``) column.
    """
    raw = read_table(path)
    t = raw.table
    label_col = "spot" if "spot" in t.columns else ("name" if "name" in t.columns else None)
    if label_col is None:
        raise SheetError(
            f"{raw.source}: a spots file needs a 'spot' column (a label for each spot) and a "
            f"position; found columns {', '.join(raw.columns)}"
        )
    st_table, st_problems = (None, [])
    if stations is not None:
        st_table, st_problems = read_stations(stations)
    lat, lon, bad, problems = _validate_positions(raw, st_table)
    labels = t[label_col].to_numpy(dtype=object)
    lines = t["line"].to_numpy()
    extra: list[Problem] = []
    missing = labels == ""
    for i in np.flatnonzero(missing & ~bad):
        extra.append(Problem(int(lines[i]), label_col, f"{label_col} label is missing", "error", raw.source))
    bad = bad | missing
    dup = pd.Series(labels).duplicated(keep="first").to_numpy() & ~missing
    for i in np.flatnonzero(dup & ~bad):
        extra.append(
            Problem(
                int(lines[i]),
                label_col,
                f"spot '{labels[i]}' is listed twice; the first is used",
                "error",
                raw.source,
            )
        )
    bad = bad | dup
    keep = ~bad
    table = pd.DataFrame(
        {
            "spot": labels[keep].astype(str),
            "lat": lat[keep],
            "lon": lon[keep],
            "line": lines[keep].astype(int),
        }
    )
    position_cols = {"lat", "lon", "utm_zone", "easting", "northing", "mgrs", "station"}
    for c in raw.columns:
        if c in (label_col, "line") or c in position_cols or (c in KNOWN_COLUMNS and c != "note"):
            continue
        # the file's own columns are carried; names a plan uses itself get a 'spot_' prefix
        name = f"spot_{c}" if c in RESERVED_COLUMNS else c
        table[name] = t[c].to_numpy(dtype=object)[keep]
    problems = sorted(list(st_problems) + problems + extra, key=lambda p: (p.source != raw.source, p.line))
    first_error = {}
    for p in problems:
        if p.severity == "error" and p.source == raw.source and p.line not in first_error:
            first_error[p.line] = f"line {p.line}" + (f", {p.column}" if p.column else "") + f": {p.message}"
    out = bad & ~missing
    rejected = pd.DataFrame(
        {
            "spot": labels[out].astype(str),
            "line": lines[out].astype(int),
            "reason": [first_error.get(int(x), "rejected") for x in lines[out]],
        }
    )
    return Spots(table=table.reset_index(drop=True), problems=problems, source=raw.source, rejected=rejected)


def _validate_positions(raw, stations):
    """The sheet's own position rules, applied to a spots file (the public position parser of
    :mod:`dfkit.observations`): same forms, same checks and messages as a bearing sheet."""
    from dfkit.observations import parse_positions
    from dfkit.observations.rowlog import RowLog

    lines = raw.table["line"].to_numpy()
    log = RowLog(lines, raw.source)
    log.problems.extend(raw.problems)
    pre = {p.line for p in raw.problems if p.severity == "error" and p.line}
    skip = np.isin(lines, list(pre))
    log.bad |= skip
    pos = parse_positions(raw.table, source=raw.source, decimal_comma=raw.decimal_comma, stations=stations,
                          log=log, skip=skip)
    return pos.lat, pos.lon, log.bad.copy(), list(log.problems)


def grid_spots(lat0, lon0, around_m, step_m=None) -> pd.DataFrame:
    """Spots on a square grid within ``around_m`` of (lat0, lon0), laid in its local plane.

    The grid is laid in the exact azimuthal-equidistant plane about the centre
    (distance and azimuth from the centre are exact) and covers the disc of radius
    ``around_m``; the centre itself is a spot.

    Parameters
    ----------
    lat0, lon0 : float
        Centre, WGS84. [°]
    around_m : float
        Radius of the disc of spots. [m]
    step_m : float, optional
        Grid spacing; default ``around_m / 10``. [m]

    Returns
    -------
    pandas.DataFrame
        ``spot`` (``E+500 N-1000``: metres east and north of the centre), ``lat``,
        ``lon``, ``east_m``, ``north_m``.
    """
    if not (around_m is not None and np.isfinite(around_m) and around_m > 0):
        raise ValueError(f"around_m={around_m!r} must be a positive distance in metres")
    step = around_m / 10.0 if step_m is None else float(step_m)
    if not (np.isfinite(step) and step > 0):
        raise ValueError(f"step_m={step_m!r} must be a positive distance in metres")
    n = int(np.floor(around_m / step + 1e-9))
    rows = np.arange(-n, n + 1) * step  # columns within the disc, row by row
    count = (
        int(
            np.sum(2 * np.floor(np.sqrt(np.maximum(around_m**2 * (1 + 1e-9) ** 2 - rows**2, 0.0)) / step) + 1)
        )
        if n < 10**6
        else MAX_SPOTS + 1
    )
    if count > MAX_SPOTS:
        raise ValueError(
            f"step_m={step:g} gives {count} spots within {around_m:g} m (at most {MAX_SPOTS}); "
            "use a larger step_m"
        )
    k = np.arange(-n, n + 1) * step
    x, y = np.meshgrid(k, k[::-1])
    x, y = x.ravel(), y.ravel()
    inside = np.hypot(x, y) <= around_m * (1 + 1e-9)
    x, y = x[inside], y[inside]
    lat, lon = geodesy.from_local(lat0, lon0, x, y)
    labels = [f"E{xx:+.0f} N{yy:+.0f}" for xx, yy in zip(x, y)]
    return pd.DataFrame({"spot": labels, "lat": lat, "lon": lon, "east_m": x, "north_m": y})


# --------------------------------------------------------------------------- the plan


@dataclass
class Plan:
    """A ranked list of spots for the next bearing on one fix (from :func:`plan_next_bearing`).

    Attributes
    ----------
    table : pandas.DataFrame
        One row per candidate spot, best first (columns :data:`PLAN_COLUMNS`; spots
        that are not ranked come last with the reason in ``note``).
    fixes : Fixes
        The fix as :func:`dfkit.locate.locate` solves it now (one row), with its bearings.
    basis : str
        ``region``, ``point`` or ``bearing_lines`` (see the module docstring), or
        ``none`` when there is nothing to plan from.
    level : float
        Probability of the regions whose areas are compared.
    current_area_m2 : float
        Area of the current region on the same basis (NaN without an estimate or an SD). [m²]
    sd_deg : float
        RMS SD of the fix's bearings used in the plan (NaN when none is known). [°]
    sd_source : str
        Where it came from, in words.
    next_sd_deg : float
        SD assumed for the next bearing. [°]
    reference_lat, reference_lon : float
        The point distances and azimuths are measured from: the estimate, or without
        one the weighted centre of the positions considered. [°]
    samples : pandas.DataFrame
        The positions the areas were averaged over (``lat``, ``lon``, ``weight``).
    grid_step_m : float or None
        Grid spacing when the spots are a grid (for shading a surface). [m]
    bands : list of tuple
        Without an estimate: (station lat, lon, bearing, from m, to m) of each bearing's range band.
    notes : list of str
        What the plan rests on, in words (basis, SD, weaknesses).
    problems : list of Problem
        Rejected rows and warnings of the sheet and of the spots file.
    """

    table: pd.DataFrame
    fixes: Fixes
    basis: str
    level: float
    current_area_m2: float
    sd_deg: float
    sd_source: str
    next_sd_deg: float
    reference_lat: float
    reference_lon: float
    samples: pd.DataFrame
    grid_step_m: float | None = None
    bands: list = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    problems: list[Problem] = field(default_factory=list)
    caution: str = PLAN_CAUTION

    @property
    def fix_row(self) -> pd.Series:
        """The fix's row of the fix table (status, reason, position, ellipse)."""
        return self.fixes.table.iloc[0]

    @property
    def best(self) -> pd.Series | None:
        """The top-ranked spot, or None when no spot could be ranked."""
        ranked = self.table[self.table["rank"].notna()]
        return ranked.iloc[0] if len(ranked) else None


def plan_next_bearing(
    bearings: Bearings,
    fix: str,
    *,
    tag: str | None = None,
    spots=None,
    around_m: float | None = None,
    step_m: float | None = None,
    next_sd_deg: float | None = None,
    method: str = "mle",
    level: float = 0.95,
    basis: str = "point",
    n_samples: int = N_SAMPLES,
    max_range_m: float = DEFAULT_MAX_RANGE_M,
    min_distance_m: float = 0.0,
    stations=None,
) -> Plan:
    """Rank candidate spots for the next bearing on one fix, best first.

    Parameters
    ----------
    bearings : Bearings
        From :func:`dfkit.read_bearings` (calibrated or not).
    fix : str
        The fix label.
    tag : str, optional
        The fix's tag, needed when several tags use the label.
    spots : path or pandas.DataFrame, optional
        Candidate spots: a spots file (see :func:`read_spots`) or a table with
        ``spot``, ``lat``, ``lon``. Give this or ``around_m``.
    around_m : float, optional
        Instead of spots, a grid within this distance of the estimate. [m]
    step_m : float, optional
        Grid spacing (default ``around_m / 10``). [m]
    next_sd_deg : float, optional
        SD of the next bearing; default the fix's SD (given, calibrated or estimated). [°]
    method : {'mle', 'huber', 'andrews', 'lsq', 'stansfield'}
        Estimator of the current fix (robust weights carry into the information).
    level : float
        Probability of the regions whose areas are compared, in (0, 1).
    basis : {'point', 'region'}
        Take the area at the estimate (default) or its geometric mean over the current region.
    n_samples : int
        Positions averaged over.
    max_range_m : float
        Without an estimate: the farthest plausible range along a bearing. [m]
    min_distance_m : float
        Spots nearer than this to the estimate are listed but not ranked (e.g. to keep
        away from an animal). [m]
    stations : path, optional
        Stations file for spots given by a ``station`` label.

    Returns
    -------
    Plan

    Raises
    ------
    ValueError
        An unknown fix or an ambiguous label, neither or both of ``spots`` and
        ``around_m``, or a parameter out of range (named in the message).
    SheetError
        The spots file cannot be read.
    """
    if basis not in BASES:
        raise ValueError(f"basis={basis!r} is not one of {', '.join(repr(b) for b in BASES)}")
    if not 0.0 < level < 1.0:
        raise ValueError(f"level={level!r} must be a probability between 0 and 1 (e.g. 0.95)")
    if (spots is None) == (around_m is None):
        raise ValueError(
            "give either spots= (a spots file or table) or around_m= (a grid around the estimate)"
        )
    if step_m is not None and around_m is None:
        raise ValueError("step_m= is the spacing of a grid: give around_m= with it")
    if next_sd_deg is not None and not (0 < next_sd_deg < 90):
        raise ValueError(f"next_sd_deg={next_sd_deg!r} must be a bearing SD in degrees, between 0 and 90")
    if not (np.isfinite(max_range_m) and max_range_m > 0):
        raise ValueError(f"max_range_m={max_range_m!r} must be a positive distance in metres")
    if not (np.isfinite(min_distance_m) and min_distance_m >= 0):
        raise ValueError(f"min_distance_m={min_distance_m!r} must be a distance in metres, 0 or more")
    if int(n_samples) < 10:
        raise ValueError(f"n_samples={n_samples!r} must be at least 10")

    sub = _select_fix(bearings, fix, tag)
    fixes = locate(sub, method=method, level=level)
    row = fixes.table.iloc[0]
    fb = fixes.bearings
    candidates = _candidate_spots(spots, stations)
    spot_table = candidates.table
    problems = list(bearings.problems) + list(candidates.problems)
    if not len(fb):
        plan = _empty_plan(
            fixes,
            spot_table,
            around_m,
            level,
            problems,
            f"fix {fix!r} has no usable bearing (status {row['status']}): nothing to plan from",
        )
        plan.table = _with_rejected(plan.table, candidates.rejected, row, "none", level)
        return plan

    sds = _plan_sds(fb, row, next_sd_deg)
    notes = list(sds.notes)
    where = _positions_considered(fb, row, sds, basis, int(n_samples), max_range_m)
    notes += where.notes
    if around_m is not None:
        spot_table = grid_spots(where.ref_lat, where.ref_lon, around_m, step_m)
        spot_table["line"] = pd.NA
    if len(spot_table) > MAX_SPOTS:
        raise ValueError(f"spots: {len(spot_table)} spots given; at most {MAX_SPOTS} in one plan")

    expected, current = _expected_areas(where, spot_table, sds, level)
    table = _with_rejected(
        _ranked_table(where, spot_table, expected, current, sds, row, level, min_distance_m),
        candidates.rejected,
        row,
        where.basis,
        level,
    )
    if len(spot_table) and table["rank"].isna().all():
        notes.append("no spot could be ranked (see the note column)")
    return Plan(
        table=table,
        fixes=fixes,
        basis=where.basis,
        level=level,
        current_area_m2=current if sds.known else np.nan,
        sd_deg=float(np.sqrt(np.mean(sds.sd_deg**2))) if sds.known else np.nan,
        sd_source=sds.source if sds.known else "",
        next_sd_deg=sds.next_sd_deg if sds.known else np.nan,
        reference_lat=where.ref_lat,
        reference_lon=where.ref_lon,
        samples=pd.DataFrame({"lat": where.lat, "lon": where.lon, "weight": where.weight}),
        grid_step_m=(around_m / 10.0 if step_m is None else float(step_m)) if around_m is not None else None,
        bands=where.bands,
        notes=notes,
        problems=problems,
    )


@dataclass(frozen=True, eq=False)
class _SDs:
    """Bearing SDs of a plan: each existing bearing's [°], the next one's [°], and how they were chosen."""

    sd_deg: np.ndarray
    next_sd_deg: float
    known: bool  # False: nominal SDs, used for ranking only (no areas reported)
    source: str
    notes: list


def _plan_sds(fb: pd.DataFrame, row: pd.Series, next_sd_deg) -> _SDs:
    sd_i, source, known = _bearing_sds(fb, row)
    notes = []
    if next_sd_deg is not None:
        nsd, nsd_source = float(next_sd_deg), "given for the next bearing"
        if not known:
            sd_i, known = np.full(len(fb), nsd), True
            source = "none known; the next bearing's SD was assumed for every bearing"
    elif known:
        nsd, nsd_source = float(np.sqrt(np.mean(sd_i**2))), "the fix's SD"
    if known:
        notes.append(
            f"bearing SD {np.sqrt(np.mean(sd_i**2)):.2f}° ({source}); next bearing {nsd:.2f}° ({nsd_source})"
        )
    else:
        sd_i, nsd = np.full(len(fb), NOMINAL_SD_DEG), NOMINAL_SD_DEG
        notes.append(
            "no bearing SD is known (no sd in the sheet, no --sd, too few bearings to estimate one): "
            "spots are ranked, but areas need an SD (sd column, --sd or --next-sd)"
        )
    if row["sd_source"] == "estimated":
        notes.append(
            f"the SD is estimated from this fix's own {int(row['n_used'])} bearings "
            f"({int(row['n_used']) - 2} degree{'' if int(row['n_used']) == 3 else 's'} of freedom): a weak "
            "estimate; calibrate or give --sd"
        )
    dof = fb["sd_dof"].to_numpy(float) if "sd_dof" in fb.columns else np.zeros(0)
    if row["sd_source"] == "estimated" or np.isfinite(dof).any():
        notes.append(
            "areas here take the SD as known (chi-square scale); dfkit fix widens its region by an F "
            "scale for an SD estimated from the fix or measured on few trials, so its areas are larger "
            "(the ranking is the same)"
        )
    return _SDs(sd_i, nsd, known, source, notes)


@dataclass(frozen=True, eq=False)
class _Where:
    """Where the transmitter may be: the reference point, the positions averaged over (with weights), the
    existing bearings' stations and information weights (w / sigma^2 [1/rad²]), and how this was decided."""

    basis: str
    ref_lat: float
    ref_lon: float
    lat: np.ndarray
    lon: np.ndarray
    weight: np.ndarray
    st_lat: np.ndarray
    st_lon: np.ndarray
    info_w: np.ndarray
    has_estimate: bool
    last: int  # position of the most recent bearing
    bands: list
    notes: list


def _positions_considered(fb, row, sds: _SDs, basis, n_samples, max_range_m) -> _Where:
    status = row["status"]
    has_pos = status in WITH_POSITION
    w = fb["weight"].to_numpy(float) if has_pos else np.ones(len(fb))
    w = np.where(np.isfinite(w), w, 1.0)
    st_lat, st_lon = fb["lat"].to_numpy(float), fb["lon"].to_numpy(float)
    info_w = w / np.radians(sds.sd_deg) ** 2
    notes, bands = [], []
    if has_pos:
        ref_lat, ref_lon = float(row["lat"]), float(row["lon"])
        used = basis
        if basis == "region":
            e = _terms(*_inverse_pair(ref_lat, ref_lon, st_lat, st_lon), info_w)
            j_now = np.array([[e[0].sum(), e[1].sum()], [e[1].sum(), e[2].sum()]])
            lat, lon, wt = _region_samples(ref_lat, ref_lon, j_now, n_samples)
            if lat is None:
                used = "point"
                notes.append("the current information matrix is singular; areas are taken at the estimate")
            else:
                notes.append(
                    f"expected areas are geometric means over {len(lat)} positions spread as the "
                    "estimate's error (normal, its covariance)"
                )
        if used == "point":
            lat, lon, wt = np.array([ref_lat]), np.array([ref_lon]), np.array([1.0])
            if basis == "point":
                notes.append("expected areas are taken at the current estimate (basis 'point')")
        if status != "ok":
            notes.append(f"the fix is '{status}': {row['reason']}")
    else:
        used = "bearing_lines"
        r_min = max_range_m / 20.0
        lat, lon, wt, bands = _line_samples(
            st_lat, st_lon, fb["true_bearing"].to_numpy(float), sds.sd_deg, r_min, max_range_m, n_samples
        )
        c_lat, c_lon = geodesy.group_centroid(lat, lon, np.zeros(len(lat), np.int64), 1, wt)
        ref_lat, ref_lon = float(c_lat[0]), float(c_lon[0])
        n = len(fb)
        notes.append(
            f"no estimate yet ({n} usable bearing{'s' if n != 1 else ''}, status '{status}'): spots are "
            f"ranked by the expected area (geometric mean) over positions along the bearing "
            f"line{'s' if n != 1 else ''} from {r_min:.0f} m to {max_range_m:.0f} m (--max-range; a stated "
            "band, not data); distances and azimuths are from the middle of those positions. This is "
            "weaker than a plan from a fix."
        )
        if status != "too_few":
            notes.append(f"the fix is '{status}': {row['reason']}")
    return _Where(
        used,
        ref_lat,
        ref_lon,
        lat,
        lon,
        wt / wt.sum(),
        st_lat,
        st_lon,
        info_w,
        has_pos,
        _last_bearing(fb),
        bands,
        notes,
    )


def _expected_areas(where: _Where, spot_table, sds: _SDs, level):
    """Expected area after a bearing from each spot, and the current area, on the plan's basis (the
    geometric mean over the positions considered; a single position for basis 'point')."""
    ex = _terms(
        *_inverse_pair(where.lat[:, None], where.lon[:, None], where.st_lat[None, :], where.st_lon[None, :]),
        where.info_w[None, :],
    )
    e11, e12, e22 = (v.sum(axis=1) for v in ex)
    w = where.weight
    current = (
        float(np.exp(np.sum(w * np.log(ellipse_area_m2(e11, e12, e22, level)))))
        if where.has_estimate
        else np.nan
    )
    sp_lat = spot_table["lat"].to_numpy(float)
    sp_lon = spot_table["lon"].to_numpy(float)
    next_w = 1.0 / np.radians(sds.next_sd_deg) ** 2
    expected = np.full(len(sp_lat), np.nan)
    chunk = max(1, 2_000_000 // len(w))  # bounded memory for large grids
    for a in range(0, len(sp_lat), chunk):
        b = slice(a, a + chunk)
        c11, c12, c22 = _terms(
            *_inverse_pair(where.lat[:, None], where.lon[:, None], sp_lat[None, b], sp_lon[None, b]), next_w
        )
        area = ellipse_area_m2(e11[:, None] + c11, e12[:, None] + c12, e22[:, None] + c22, level)
        expected[b] = np.exp(np.sum(w[:, None] * np.log(area), axis=0))
    return expected, current


def _ranked_table(where: _Where, spot_table, expected, current, sds: _SDs, row, level, min_distance_m):
    """The plan's table: geometry seen from the reference point, notes, ranks, best first."""
    sp_lat = spot_table["lat"].to_numpy(float)
    sp_lon = spot_table["lon"].to_numpy(float)
    ref = (where.ref_lat, where.ref_lon)
    az_ref, _, dist = geodesy.inverse(*ref, sp_lat, sp_lon)
    az_back, _, _ = geodesy.inverse(sp_lat, sp_lon, *ref)
    r_terms = _terms(*_inverse_pair(*ref, where.st_lat, where.st_lon), where.info_w)
    j11, j12, j22 = (t.sum() for t in r_terms)
    p11, p12, p22 = _terms(az_ref, dist, 1.0 / np.radians(sds.next_sd_deg) ** 2)
    point = ellipse_area_m2(j11 + p11, j12 + p12, j22 + p22, level)
    used = where.info_w > 0
    st_az, _, _ = geodesy.inverse(*ref, where.st_lat[used], where.st_lon[used])
    at_ref = dist < ONE_SPOT_M  # no direction from a point to itself
    diff = np.abs(((az_ref[:, None] - st_az[None, :]) + 90.0) % 180.0 - 90.0)
    crossing = np.where(at_ref, np.nan, diff.min(axis=1)) if diff.shape[1] else np.full(len(sp_lat), np.nan)
    walk_az, _, walk = geodesy.inverse(where.st_lat[where.last], where.st_lon[where.last], sp_lat, sp_lon)
    x_ref, y_ref = geodesy.to_local(*ref, sp_lat, sp_lon)

    note = [[] for _ in range(len(sp_lat))]
    if where.has_estimate:
        m2 = j11 * x_ref**2 + 2 * j12 * x_ref * y_ref + j22 * y_ref**2
        for i in np.flatnonzero(m2 <= float(scale_factor(level)) ** 2):
            note[i].append(
                f"inside the current {100 * level:g}% region: a bearing here is strong, but you may be "
                "near the transmitter, where bearings become unreliable (and animals are disturbed)"
            )
    near_st = geodesy.chord_distance_m(
        sp_lat[:, None], sp_lon[:, None], where.st_lat[None, :], where.st_lon[None, :]
    )
    for i in np.flatnonzero((near_st < ONE_SPOT_M).any(axis=1)):
        note[i].append("a station of this fix: a repeat bearing from here adds little")
    too_near = dist < min_distance_m
    for i in np.flatnonzero(too_near):
        note[i].append(f"nearer than {min_distance_m:g} m to the estimate (min_distance_m): not ranked")
    at_point = at_ref & (where.basis == "point")
    for i in np.flatnonzero(at_point & ~too_near):
        note[i].append(
            "at the estimate itself: a bearing needs some distance to the transmitter (basis 'point'): "
            "not ranked"
        )
    for i in np.flatnonzero(~too_near & ~at_point & ~np.isfinite(expected)):
        note[i].append("a bearing from here runs along the existing ones and adds no crossing: not ranked")

    # best first: smallest expected area, then the shorter walk, then the label
    score = np.where(too_near | at_point | ~np.isfinite(expected), np.inf, expected)
    order = np.lexsort((spot_table["spot"].to_numpy(dtype=str), walk, score))
    n_ranked = int(np.isfinite(score).sum())
    rank = pd.array([*range(1, n_ranked + 1)] + [pd.NA] * (len(order) - n_ranked), dtype="Int64")
    hide = np.full(len(sp_lat), np.nan)
    expected = np.where(at_point, np.nan, expected)  # no direction, no meaningful area
    point = np.where(at_ref, np.nan, point)
    ratio = expected / current if where.has_estimate and np.isfinite(current) else hide
    table = pd.DataFrame(
        {
            "rank": rank,
            "spot": spot_table["spot"].to_numpy(dtype=object)[order],
            "lat": sp_lat[order],
            "lon": sp_lon[order],
            "expected_area_m2": (expected if sds.known else hide)[order],
            "area_ratio": ratio[order],
            "distance_m": dist[order],
            "azimuth_deg": np.where(at_ref, np.nan, wrap360(az_ref))[order],
            "expected_bearing_deg": np.where(at_ref, np.nan, wrap360(az_back))[order],
            "crossing_deg": crossing[order],
            "point_area_m2": (point if sds.known else hide)[order],
            "from_last_m": walk[order],
            "from_last_deg": wrap360(walk_az)[order],
            "east_m": x_ref[order],
            "north_m": y_ref[order],
            "line": spot_table["line"].to_numpy(dtype=object)[order],
            "note": ["; ".join(note[i]) for i in order],
            "fix": row["fix"],
            "tag": row["tag"],
            "fix_status": row["status"],
            "basis": where.basis,
            "level": level,
            "next_sd_deg": sds.next_sd_deg if sds.known else np.nan,
        }
    )
    for c in spot_table.columns:
        if c not in table.columns:
            table[c] = spot_table[c].to_numpy(dtype=object)[order]
    return table


def plan_sheet(sheet, fix: str, *, options=None, read=None, **kwargs) -> Plan:
    """Read a sheet and plan the next bearing on one fix: the Python form of ``dfkit plan``.

    ``read`` is a dict of :class:`~dfkit.observations.ReadOptions` fields
    (``{"sd": 5, "window_min": 90}``); other keyword arguments go to
    :func:`plan_next_bearing`.
    """
    from dfkit.observations import read_bearings

    b = read_bearings(sheet, options, **(read or {}))
    return plan_next_bearing(b, fix, **kwargs)


# --------------------------------------------------------------------------- helpers


def _inverse_pair(lat1, lon1, lat2, lon2):
    az, _, d = geodesy.inverse(lat1, lon1, lat2, lon2)
    return az, d


def _select_fix(bearings: Bearings, fix, tag) -> Bearings:
    fi = bearings.fix_index
    hit = fi[fi["fix"] == fix]
    if tag is not None:
        hit = hit[hit["tag"] == tag]
    if not len(hit):
        known = fi["fix"].astype(str).tolist()
        listed = ", ".join(repr(x) for x in known[:12]) + (" ..." if len(known) > 12 else "")
        where = f" with tag {tag!r}" if tag is not None else ""
        raise ValueError(
            f"fix={fix!r}: no fix of that label{where} in {bearings.source or 'the bearings'}; "
            f"the fixes are {listed or 'none'}"
        )
    if len(hit) > 1:
        tags = ", ".join(repr(t) for t in hit["tag"])
        raise ValueError(f"fix={fix!r} is used by tags {tags}: give tag= to say which")
    return bearings.select(fixes=[fix], tags=[hit["tag"].iloc[0]])


def _candidate_spots(spots, stations) -> Spots:
    if spots is None:
        return Spots(pd.DataFrame({"spot": [], "lat": [], "lon": [], "line": []}))
    if isinstance(spots, (str, os.PathLike)):
        return read_spots(spots, stations=stations)
    if isinstance(spots, Spots):
        return spots
    if isinstance(spots, pd.DataFrame):
        missing = [c for c in ("spot", "lat", "lon") if c not in spots.columns]
        if missing:
            raise ValueError(
                f"spots= table lacks column{'s' if len(missing) > 1 else ''} {', '.join(missing)}"
            )
        t = spots.copy()
        lat = pd.to_numeric(t["lat"], errors="coerce").to_numpy(float)
        lon = pd.to_numeric(t["lon"], errors="coerce").to_numpy(float)
        bad = ~np.isfinite(lat) | ~np.isfinite(lon) | (np.abs(lat) > 90) | (np.abs(lon) > 360)
        if bad.any():
            first = t.index[np.flatnonzero(bad)[0]]
            raise ValueError(f"spots= row {first}: lat/lon must be finite degrees (lat -90..90)")
        t["spot"] = t["spot"].astype(str)
        if "line" not in t.columns:
            t["line"] = pd.NA
        return Spots(t.reset_index(drop=True))
    raise ValueError(f"spots= must be a path to a spots file or a DataFrame, not {type(spots).__name__}")


def _bearing_sds(fb: pd.DataFrame, row: pd.Series):
    """Each bearing's SD for the plan, where it came from, and whether any SD is known."""
    sd = fb["sd"].to_numpy(float)
    given = len(sd) and np.isfinite(sd).all()
    if given and row["sd_source"] != "estimated":
        kinds = sorted({str(s) for s in fb["sd_source"] if str(s)})
        words = {"sheet": "the sheet's sd column", "option": "--sd", "calibration": "a beacon calibration"}
        source = ("given: " + ", ".join(words.get(k, k) for k in kinds)) if kinds else "given"
        return sd, source, True
    if row["sd_source"] == "estimated" and np.isfinite(row["sd_deg"]):
        return np.full(len(fb), float(row["sd_deg"])), "estimated from the fix's residuals", True
    return np.full(len(fb), np.nan), "", False


def _normal_points(n):
    """n points whose empirical distribution follows the 2-D standard normal, equally weighted.

    A deterministic rule (no random numbers, so a plan never changes between runs):
    radii at the mid-quantiles of the chi distribution with 2 degrees of freedom,
    r_i = sqrt(-2 ln(1 - (i + 1/2)/n)), and angles advancing by the golden angle
    (Vogel's spiral; H. Vogel, "A better way to construct the sunflower head",
    Mathematical Biosciences 44, 179-189, 1979 [from memory]).
    """
    i = np.arange(int(n)) + 0.5
    r = np.sqrt(-2.0 * np.log1p(-i / n))
    t = np.arange(int(n)) * np.pi * (3.0 - np.sqrt(5.0))
    return np.column_stack([r * np.cos(t), r * np.sin(t)])


def _region_samples(lat0, lon0, j_now, n):
    """Positions spread as the current estimate's error: N(estimate, J^-1) in its local plane."""
    try:
        chol = np.linalg.cholesky(np.linalg.inv(j_now))
    except np.linalg.LinAlgError:
        return None, None, None
    xy = _normal_points(n) @ chol.T
    lat, lon = geodesy.from_local(lat0, lon0, xy[:, 0], xy[:, 1])
    return lat, lon, np.ones(len(lat))


def _line_samples(st_lat, st_lon, theta_deg, sd_deg, r_min, r_max, n):
    """Positions along each bearing line: ranges evenly spread over [r_min, r_max] and directions spread
    across the line as N(bearing, SD), by the same deterministic rule as :func:`_normal_points`."""
    from scipy.special import ndtri

    nb = len(st_lat)
    per = max(int(np.ceil(n / nb)), 1)
    j = np.arange(per) + 0.5
    rr = r_min + (r_max - r_min) * j / per
    offset = ndtri(np.mod(j * (np.sqrt(5.0) - 1.0) / 2.0, 1.0))  # golden-ratio sequence -> normal quantiles
    idx = np.repeat(np.arange(nb), per)
    az = theta_deg[idx] + np.tile(offset, nb) * sd_deg[idx]
    lat, lon = geodesy.forward(st_lat[idx], st_lon[idx], az, np.tile(rr, nb))
    bands = [
        (float(st_lat[i]), float(st_lon[i]), float(theta_deg[i]), float(r_min), float(r_max))
        for i in range(nb)
    ]
    return lat, lon, np.ones(len(idx)), bands


def _last_bearing(fb: pd.DataFrame) -> int:
    """Position (0-based) of the most recent bearing: the latest time, else the last line."""
    t = fb["time"]
    if t.notna().any():
        return int(np.flatnonzero((t == t.max()).to_numpy())[-1])
    return int(np.argmax(fb["line"].to_numpy()))


def _with_rejected(
    table: pd.DataFrame, rejected: pd.DataFrame, row: pd.Series, basis: str, level: float
) -> pd.DataFrame:
    """The plan's table with the rejected spots of the spots file listed last (no position, no rank)."""
    if not len(rejected):
        return table
    extra = pd.DataFrame(
        {
            "spot": rejected["spot"].to_numpy(dtype=object),
            "line": rejected["line"].to_numpy(),
            "note": ["rejected: " + r for r in rejected["reason"]],
        }
    )
    extra["fix"], extra["tag"], extra["fix_status"] = row["fix"], row["tag"], row["status"]
    extra["basis"], extra["level"] = basis, level
    out = (
        pd.concat([table, extra], ignore_index=True)
        if len(table)
        else extra.reindex(columns=list(dict.fromkeys(list(table.columns) + list(extra.columns))))
    )
    out["rank"] = out["rank"].astype("Int64")
    return out


def _empty_plan(fixes, spot_table, around_m, level, problems, why) -> Plan:
    t = pd.DataFrame({c: pd.Series(dtype=object) for c in PLAN_COLUMNS})
    if around_m is None and len(spot_table):
        t = pd.DataFrame(
            {
                "spot": spot_table["spot"],
                "lat": spot_table["lat"],
                "lon": spot_table["lon"],
                "line": spot_table["line"],
            }
        )
        for c in PLAN_COLUMNS:
            if c not in t.columns:
                t[c] = np.nan
        t = t[PLAN_COLUMNS]
        t["note"] = why
    row = fixes.table.iloc[0]
    t["fix"], t["tag"], t["fix_status"], t["basis"], t["level"] = (
        row["fix"],
        row["tag"],
        row["status"],
        "none",
        level,
    )
    t["rank"] = pd.array([pd.NA] * len(t), dtype="Int64")
    return Plan(
        table=t.reset_index(drop=True),
        fixes=fixes,
        basis="none",
        level=level,
        current_area_m2=np.nan,
        sd_deg=np.nan,
        sd_source="",
        next_sd_deg=np.nan,
        reference_lat=np.nan,
        reference_lon=np.nan,
        samples=pd.DataFrame({"lat": [], "lon": [], "weight": []}),
        grid_step_m=None,
        notes=[why],
        problems=problems,
    )
