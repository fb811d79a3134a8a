"""Scoring a spot: the bearing SDs used and the positions over which the expected area is taken."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from dfkit import geodesy
from dfkit.locate import WITH_POSITION
from dfkit.planning.information import _inverse_pair, _terms, ellipse_area_m2
from dfkit.policy import NOMINAL_SD_DEG

#: How a spot is scored (see the module docstring).
BASES = ("point", "region")

#: Positions averaged over for ``basis='region'`` and along the lines without an estimate.
N_SAMPLES = 600


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
