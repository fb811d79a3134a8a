"""The honest check of a calibration: each beacon solved from its own trials with a calibration made without it."""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd

from dfkit import geodesy
from dfkit.calibration.apply import apply
from dfkit.calibration.groups import _resolve_by, calibrate
from dfkit.calibration.trials import Trials, read_trials
from dfkit.observations import Bearings


@dataclass
class BeaconCheck:
    """Result of :func:`leave_one_beacon_out`.

    Attributes
    ----------
    fixes : pandas.DataFrame
        One row per trial fix: ``beacon``, ``fix``, ``n_bearings``, ``status``, ``calibrated`` (every
        bearing's SD came from the calibration), ``semi_major_m``, ``semi_minor_m``, ``miss_m`` (fix to
        beacon [m]),
        ``inside`` (the beacon lies in the region; NA without a region).
    by_beacon : pandas.DataFrame
        Per beacon: ``n_fixes``, ``n_with_region`` (calibrated fixes with a region), ``n_inside``.
    level : float
    n_with_region, n_inside : int
        Over calibrated fixes with a region.
    rate : float
        ``n_inside / n_with_region``.
    interval : tuple of float
        95 % Wilson score interval of ``rate`` (E. B. Wilson, "Probable inference, the law of succession, and
        statistical inference", JASA 22(158), 209-212, 1927; volume and pages from memory).
    notes : list of str
    """

    fixes: pd.DataFrame
    by_beacon: pd.DataFrame
    level: float
    n_with_region: int
    n_inside: int
    rate: float
    interval: tuple
    notes: list[str] = field(default_factory=list)

    def summary(self) -> str:
        if not self.n_with_region:
            return "leave-one-beacon-out: no calibrated fix with a region to check" + (
                f" ({self.notes[0]})" if self.notes else ""
            )
        lo, hi = self.interval
        return (
            f"leave-one-beacon-out: {self.n_inside} of {self.n_with_region} calibrated fixes "
            f"({100 * self.rate:.0f} %, 95 % interval {100 * lo:.0f}-{100 * hi:.0f} %) hold their beacon in "
            f"the {100 * self.level:g} % region"
        )


def wilson_interval(k, n, level=0.95):
    """Wilson score interval of a binomial proportion k/n (Wilson 1927, see :class:`BeaconCheck`)."""
    if n == 0:
        return (float("nan"), float("nan"))
    from scipy.special import ndtri

    z = float(ndtri(0.5 + level / 2))
    p = k / n
    centre = (p + z * z / (2 * n)) / (1 + z * z / n)
    half = z * np.sqrt(p * (1 - p) / n + z * z / (4 * n * n)) / (1 + z * z / n)
    return (float(max(centre - half, 0.0)), float(min(centre + half, 1.0)))


def inside_ellipse(fix_lat, fix_lon, semi_major_m, semi_minor_m, orientation_deg, lat, lon):
    """Whether points lie inside ellipses drawn in the fixes' local azimuthal equidistant planes, and their
    distance from the fix [m] (a NaN ellipse holds nothing)."""
    x, y = geodesy.to_local(fix_lat, fix_lon, lat, lon)
    th = np.radians(np.asarray(orientation_deg, float))
    u = x * np.sin(th) + y * np.cos(th)
    v = x * np.cos(th) - y * np.sin(th)
    with np.errstate(invalid="ignore", divide="ignore"):
        q = (u / np.asarray(semi_major_m, float)) ** 2 + (v / np.asarray(semi_minor_m, float)) ** 2
    return np.asarray(q <= 1.0), np.hypot(x, y)


def _trial_fixes(trials: Trials) -> Bearings:
    """The trials as fixes of their own: one per beacon and round (the sheet's fix), tagged by beacon."""
    t = trials.table.copy()
    key = t["beacon"].astype(str) + "\x00" + t["fix_id"].astype(str)
    codes, uniques = pd.factorize(key)
    t["fix_id"] = codes
    t["tag"] = t["beacon"]
    first = pd.Series(np.arange(len(t))).groupby(codes).first().to_numpy() if len(t) else np.zeros(0, int)
    fix_index = pd.DataFrame(
        {
            "fix": t["fix"].to_numpy(dtype=object)[first],
            "tag": t["beacon"].to_numpy(dtype=object)[first],
            "rejected_lines": [[] for _ in first],
        }
    )
    fix_index.index.name = "fix_id"
    return replace(trials.bearings, table=t, fix_index=fix_index, problems=[])


def leave_one_beacon_out(
    trials, by=None, *, level=0.95, method="mle", options=None, **read_kwargs
) -> BeaconCheck:
    """Solve each beacon from its own trials, calibrated by the *other* beacons' trials, and count hits.

    The trials of one beacon are grouped into fixes by the sheet's fixes (its labels, or its time window),
    split by beacon. For each beacon a calibration is made from every other beacon's trials (same ``by``),
    applied to this beacon's bearings, and the fixes are solved; a fix counts when all its bearings were
    calibrated and it has a region. An honest calibration holds about ``level`` of the beacons.

    Parameters
    ----------
    trials : Trials or sheet
    by : as for :func:`calibrate`
    level : float
        Probability of the regions, in (0, 1).
    method : str
        Estimator (see :mod:`dfkit.estimators`).
    """
    from dfkit.locate import locate

    if not isinstance(trials, Trials):
        trials = read_trials(trials, options, **read_kwargs)
    by = _resolve_by(trials.table, by)
    fixes_b = _trial_fixes(trials)
    beacons = list(dict.fromkeys(trials.table["beacon"].tolist()))
    notes = []
    parts = []
    # wild trials (found by the full calibration) are reflections, not the calibrated error: keep them out
    full = calibrate(trials, by)
    tame = ~full.trials["wild"].to_numpy(bool) if len(trials.table) else np.zeros(0, bool)
    if (~tame).any():
        notes.append(
            f"{int((~tame).sum())} wild trial{'s' if (~tame).sum() != 1 else ''} left out of the fixes"
        )
    if len(beacons) < 2:
        notes.append("needs trials on at least two beacons")
    else:
        for name in beacons:
            mask = (trials.table["beacon"] == name).to_numpy()
            others = replace(trials, table=trials.table[~mask].reset_index(drop=True))
            cal = calibrate(others, by)
            sub = fixes_b.select(mask & tame)
            applied = apply(sub, cal)
            fx = locate(applied, method=method, level=level)
            tb = applied.table
            g = tb["fix_id"].to_numpy(np.int64)
            m = len(fx.table)
            all_cal = np.bincount(g, (tb["sd_source"] == "calibration").to_numpy(float), m) == np.bincount(
                g, minlength=m
            )
            f = fx.table.copy()
            f["beacon"] = name
            f["calibrated"] = all_cal
            blat = float(trials.table.loc[mask, "beacon_lat"].iloc[0])
            blon = float(trials.table.loc[mask, "beacon_lon"].iloc[0])
            has_pos = np.isfinite(f["lat"].to_numpy(float))
            ins = np.zeros(m, bool)
            miss = np.full(m, np.nan)
            if has_pos.any():
                i2, d2 = inside_ellipse(
                    f["lat"].to_numpy(float)[has_pos],
                    f["lon"].to_numpy(float)[has_pos],
                    f["semi_major_m"].to_numpy(float)[has_pos],
                    f["semi_minor_m"].to_numpy(float)[has_pos],
                    f["orientation_deg"].to_numpy(float)[has_pos],
                    blat,
                    blon,
                )
                ins[has_pos], miss[has_pos] = i2, d2
            region = np.isfinite(f["semi_major_m"].to_numpy(float))
            f["miss_m"] = miss
            f["inside"] = pd.array(np.where(region, ins, False), dtype="boolean")
            f.loc[~region, "inside"] = pd.NA
            parts.append(f)
    cols = [
        "beacon",
        "fix",
        "n_bearings",
        "status",
        "calibrated",
        "lat",
        "lon",
        "semi_major_m",
        "semi_minor_m",
        "orientation_deg",
        "miss_m",
        "inside",
    ]
    fixes = pd.concat(parts, ignore_index=True)[cols] if parts else pd.DataFrame(columns=cols)
    counted = (
        fixes["calibrated"].astype(bool) & fixes["inside"].notna()
        if len(fixes)
        else pd.Series([], dtype=bool)
    )
    hits = fixes["inside"].fillna(False).astype(bool) & counted if len(fixes) else counted
    by_beacon = (
        pd.DataFrame(
            {
                "n_fixes": fixes.groupby("beacon", sort=False).size(),
                "n_with_region": counted.groupby(fixes["beacon"], sort=False).sum(),
                "n_inside": hits.groupby(fixes["beacon"], sort=False).sum(),
            }
        )
        if len(fixes)
        else pd.DataFrame(columns=["n_fixes", "n_with_region", "n_inside"])
    )
    n_reg, n_in = int(counted.sum()), int(hits.sum())
    uncal = int((~fixes["calibrated"].astype(bool)).sum()) if len(fixes) else 0
    if uncal:
        notes.append(
            f"{uncal} trial fix{'es' if uncal != 1 else ''} not counted: some bearings had no calibration "
            "group among the other beacons' trials"
        )
    return BeaconCheck(
        fixes=fixes,
        by_beacon=by_beacon,
        level=level,
        n_with_region=n_reg,
        n_inside=n_in,
        rate=n_in / n_reg if n_reg else float("nan"),
        interval=wilson_interval(n_in, n_reg),
        notes=notes,
    )
