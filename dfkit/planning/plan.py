"""Ranking spots for the next bearing of one fix: the plan and its table."""

from __future__ import annotations

import os
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from dfkit import geodesy
from dfkit.cautions import PLAN_CAUTION
from dfkit.conventions import wrap360
from dfkit.locate import Fixes, locate
from dfkit.observations import Bearings
from dfkit.planning.information import _inverse_pair, _terms, ellipse_area_m2
from dfkit.planning.scoring import (
    BASES,
    N_SAMPLES,
    _expected_areas,
    _plan_sds,
    _positions_considered,
    _SDs,
    _Where,
)
from dfkit.planning.spots import MAX_SPOTS, PLAN_COLUMNS, Spots, grid_spots, read_spots
from dfkit.policy import DEFAULT_MAX_RANGE_M, ONE_SPOT_M, WILD_SHARE
from dfkit.problems import Problem
from dfkit.regions import scale_factor


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
    norths : dict
        Each north other than true that the fix's bearings were read in (``magnetic``, ``grid``) and the
        declination or convergence used to give the directions in it too (true = that north + offset). [°]
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
    norths: dict = field(default_factory=dict)
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
    wild_share: float = WILD_SHARE,
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
    wild_share : float
        Prior share of wild bearings the current fix is judged with (:func:`dfkit.locate.locate`).
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
    fixes = locate(sub, method=method, level=level, wild_share=wild_share)
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
    table, norths, north_notes = in_sheet_norths(table, fb)
    notes += north_notes
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
        norths=norths,
    )


#: The directions of a plan's table, each in true north (``<name>_true_deg``).
DIRECTIONS = ("azimuth", "expected_bearing", "from_last")

#: The column of the bearings table that holds each north's offset from true (true = as read + offset).
_OFFSET = {"magnetic": "declination", "grid": "convergence"}


def in_sheet_norths(table: pd.DataFrame, fb: pd.DataFrame):
    """The plan's directions also in the north the fix's bearings were read in, where that is not true north.

    A magnetic bearing was read as ``true = magnetic + D`` and a grid bearing as ``true = grid + gamma``
    (:mod:`dfkit.observations.north`); the plan's true directions are turned back by the same D (or gamma):
    the mean of the values applied to this fix's bearings of that north. Adds ``<direction>_<north>_deg``
    and ``declination_deg`` (or ``convergence_deg``) columns before ``east_m``.

    Returns
    -------
    (table, norths, notes)
        ``norths`` maps each such north to the offset used [°].
    """
    norths: dict[str, float] = {}
    notes: list[str] = []
    if not len(fb) or "north" not in fb.columns:
        return table, norths, notes
    said = fb["north"].astype(str).to_numpy()
    for north, col in _OFFSET.items():
        rows = said == north
        if not rows.any() or col not in fb.columns:
            continue
        vals = fb[col].to_numpy(float)[rows]
        vals = vals[np.isfinite(vals)]
        if not len(vals):
            continue
        off = float(np.mean(vals))
        norths[north] = off
        at = list(table.columns).index("east_m") if "east_m" in table.columns else len(table.columns)
        for name in DIRECTIONS:
            true = table[f"{name}_true_deg"].to_numpy(float) if f"{name}_true_deg" in table.columns else None
            if true is None:
                continue
            table.insert(at, f"{name}_{north}_deg", wrap360(true - off))
            at += 1
        table.insert(at, f"{col}_deg", np.where(np.isfinite(table["lat"].to_numpy(float)), off, np.nan))
        lines = fb["line"].to_numpy()[rows]
        what = "declination" if north == "magnetic" else "grid convergence"
        spread = (f", the mean of {np.min(vals):.2f}° to {np.max(vals):.2f}°" if np.ptp(vals) >= 0.005 else "")
        notes.append(
            f"directions are in true north (columns *_true_deg) and, as {int(rows.sum())} of the fix's "
            f"{len(fb)} bearings were {north} (line{'s' if len(lines) > 1 else ''} "
            f"{', '.join(str(x) for x in lines[:6])}{' ...' if len(lines) > 6 else ''}), in {north} north too "
            f"(*_{north}_deg): {north} = true {'-' if off >= 0 else '+'} {abs(off):.2f}°, the {what} dfkit applied to "
            f"those bearings{spread}"
        )
    if not norths:
        notes.append("directions are in true north (columns *_true_deg), as the fix's bearings were")
    return table, norths, notes


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
            "azimuth_true_deg": np.where(at_ref, np.nan, wrap360(az_ref))[order],
            "expected_bearing_true_deg": np.where(at_ref, np.nan, wrap360(az_back))[order],
            "crossing_deg": crossing[order],
            "point_area_m2": (point if sds.known else hide)[order],
            "from_last_m": walk[order],
            "from_last_true_deg": wrap360(walk_az)[order],
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
