"""Per-group calibration from beacon trials: bias, SD, concentration, wild trials, distance check."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from dfkit.calibration.circular import circular_summary
from dfkit.calibration.trials import Trials, read_trials
from dfkit.conventions import wrap180
from dfkit.observations import ReadOptions
from dfkit.policy import (
    DISTANCE_CHECK_ALPHA,
    MAX_WILD_FRACTION,
    MIN_TRIALS_TRUST,
    MIN_TRIALS_USE,
    WILD_TRIAL_MADS,
    WILD_TRIAL_MIN_SCALE_DEG,
)
from dfkit.problems import Problem

#: Columns of a calibration table after the grouping columns.
CALIBRATION_COLUMNS = [
    "group",
    "n",
    "n_wild",
    "bias_deg",
    "bias_se_deg",
    "bias_lo_deg",
    "bias_hi_deg",
    "sd_deg",
    "dof",
    "circular_sd_deg",
    "kappa_mle",
    "kappa",
    "sd_from_kappa_deg",
    "distance_min_m",
    "distance_max_m",
    "distance_rho",
    "distance_p",
    "sd_near_deg",
    "sd_far_deg",
    "status",
    "warning",
]

#: Group statuses: used as stated, used but uncertain, not used.
GROUP_STATUS = {
    "ok": "enough trials; used as measured",
    "few": f"fewer than {MIN_TRIALS_TRUST} usable trials; used, with a region widened for the SD's "
    "own uncertainty",
    "unusable": f"fewer than {MIN_TRIALS_USE} usable trials; not used (its bearings keep their sheet SD "
    "or none)",
}


@dataclass
class Calibration:
    """Bias and SD of the bearing error per group of trials.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per group: a column ``by`` (the grouping columns, joined by ``+``; '' for a single group), one
        column per grouping column holding the group's value, then :data:`CALIBRATION_COLUMNS`.
    by : tuple of str
        The grouping columns (empty: one group for every bearing).
    trials : pandas.DataFrame or None
        Every usable trial with its ``group``, ``error_deg``, ``distance_m``, ``deviation_deg`` (from the
        group's median error), ``wild`` and ``used``; None for a calibration read from a file.
    problems : list of Problem
    notes : list of str
    source : str
    """

    table: pd.DataFrame
    by: tuple = ()
    trials: pd.DataFrame | None = None
    problems: list[Problem] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    source: str = ""

    @property
    def wild(self) -> pd.DataFrame:
        """The trials left out as wild (empty for a calibration read from a file)."""
        if self.trials is None:
            return pd.DataFrame()
        return self.trials[self.trials["wild"]]


def _key(value) -> str:
    """Group values match case-insensitively and ignoring repeated white space."""
    return " ".join(str(value).split()).casefold()


def _resolve_by(table: pd.DataFrame, by) -> tuple:
    if by is None:
        for name in ("antenna", "observer"):
            if name in table.columns and (table[name].astype(str).str.strip() != "").any():
                return (name,)
        return ()
    names = [by] if isinstance(by, str) else list(by)
    names = [
        " ".join(str(n).strip().lower().split()).replace(" ", "_")
        for part in names
        for n in str(part).split(",")
    ]
    names = [n for n in names if n]
    if names in ([], ["all"]):
        return ()
    for n in names:
        if n not in table.columns:
            have = [c for c in table.columns if c not in ("line", "fix_id")]
            raise ValueError(f"by={n!r}: the trials have no column '{n}'; columns: {', '.join(have)}")
        if n in CALIBRATION_COLUMNS or n == "by":
            raise ValueError(
                f"by={n!r} cannot group a calibration: '{n}' is a column of the calibration table"
            )
    return tuple(dict.fromkeys(names))


def _group_label(by, values) -> str:
    if not by:
        return "all"
    return ", ".join(f"{b}={v if v != '' else '(blank)'}" for b, v in zip(by, values))


def _spearman(x, y):
    from scipy.stats import spearmanr

    if len(x) < 10 or np.ptp(x) == 0 or np.ptp(y) == 0:
        return float("nan"), float("nan")
    res = spearmanr(x, y)
    return float(res.statistic), float(res.pvalue)


def _wild_mask(e_deg):
    """Hampel's identifier on errors [°]: (wild mask, deviation from the median [°], threshold [°])."""
    e = np.radians(e_deg)
    c0 = np.arctan2(np.sin(e).mean(), np.cos(e).mean())
    d = wrap180(np.degrees(e - c0))
    med = np.median(d)
    dev = wrap180(d - med)
    scale = max(1.4826 * float(np.median(np.abs(dev))), WILD_TRIAL_MIN_SCALE_DEG)
    limit = WILD_TRIAL_MADS * scale
    return np.abs(dev) > limit, dev, limit


def calibrate(trials, by=None, *, options: ReadOptions | None = None, **read_kwargs) -> Calibration:
    """Bias and SD of the bearing error of each group of beacon trials.

    Parameters
    ----------
    trials : Trials, or a sheet (path, bytes, file-like)
        From :func:`read_trials`, or a trials sheet to read with ``options`` / ``read_kwargs``.
    by : str or sequence of str, optional
        Grouping column(s) (``"antenna"``, ``"antenna,observer"``, ``["observer"]``); ``"all"`` for one group.
        Default: ``antenna`` if the trials have one, else ``observer``, else one group.

    Returns
    -------
    Calibration

    Raises
    ------
    ValueError
        ``by`` names a column the trials do not have.
    """
    if not isinstance(trials, Trials):
        trials = read_trials(trials, options, **read_kwargs)
    t = trials.table
    by = _resolve_by(t, by)
    n = len(t)
    columns = [t[b].to_numpy(dtype=object) for b in by]
    shown = [tuple(str(v).strip() for v in row) for row in zip(*columns)] if by else [()] * n
    keys = ["\x00".join(_key(v) for v in row) for row in shown]
    codes, uniques = pd.factorize(pd.Series(keys, dtype=object)) if n else (np.zeros(0, np.int64), [])
    notes = list(trials.notes)
    rows = []
    tr = pd.DataFrame(
        {
            "line": t["line"].to_numpy(),
            "fix": t["fix"].to_numpy(dtype=object),
            "beacon": t["beacon"].to_numpy(dtype=object),
        }
    )
    for b in by:
        tr[b] = t[b].to_numpy(dtype=object)
    tr["group"] = ""
    tr["distance_m"] = t["distance_m"].to_numpy(float)
    tr["error_deg"] = t["error_deg"].to_numpy(float)
    tr["deviation_deg"] = np.nan
    tr["wild"] = False
    tr["used"] = False
    for k in range(len(uniques)):
        idx = np.flatnonzero(codes == k)
        spellings = list(dict.fromkeys(shown[i] for i in idx))
        values = spellings[0]
        label = _group_label(by, values)
        if len(spellings) > 1:
            notes.append(
                f"{label}: spelled {len(spellings)} ways in the sheet ("
                + "; ".join(", ".join(s) for s in spellings[:4])
                + "), taken as one group"
            )
        e = tr["error_deg"].to_numpy()[idx]
        dist = tr["distance_m"].to_numpy()[idx]
        wild, dev, limit = _wild_mask(e)
        tr.loc[idx, "group"] = label
        tr.loc[idx, "deviation_deg"] = dev
        tr.loc[idx, "wild"] = wild
        tr.loc[idx, "used"] = ~wild
        keep = ~wild
        s = circular_summary(e[keep])
        d_kept = dist[keep]
        absdev = np.abs(wrap180(e[keep] - s.mean_deg))
        rho, p = _spearman(d_kept, absdev)
        sd_near = sd_far = float("nan")
        half = d_kept <= np.median(d_kept) if len(d_kept) else d_kept.astype(bool)
        if keep.sum() >= 10 and half.any() and not half.all():
            sd_near = float(np.sqrt(np.mean(wrap180(e[keep][half] - s.mean_deg) ** 2)))
            sd_far = float(np.sqrt(np.mean(wrap180(e[keep][~half] - s.mean_deg) ** 2)))
        warnings = []
        status = "ok"
        if s.n < MIN_TRIALS_USE:
            status = "unusable"
            warnings.append(f"only {s.n} usable trials (fewer than {MIN_TRIALS_USE}): not used")
        elif s.n < MIN_TRIALS_TRUST:
            status = "few"
            warnings.append(
                f"only {s.n} usable trials (fewer than {MIN_TRIALS_TRUST}): the SD is uncertain by "
                f"about {100 / np.sqrt(2 * (s.n - 1)):.0f} %, so fixes use an F(2, {s.n - 1}) region"
            )
        if wild.any():
            lines = tr["line"].to_numpy()[idx][wild]
            warnings.append(
                f"{int(wild.sum())} wild trial{'s' if wild.sum() > 1 else ''} left out (more than "
                f"{limit:.1f}° from the median error): line{'s' if len(lines) > 1 else ''} "
                + ", ".join(str(x) for x in lines[:8])
                + (" ..." if len(lines) > 8 else "")
            )
            if wild.mean() > MAX_WILD_FRACTION:
                warnings.append(
                    f"{100 * wild.mean():.0f} % of the trials are wild: check the site (reflections) "
                    "and the antenna"
                )
        if np.isfinite(p) and p < DISTANCE_CHECK_ALPHA:
            trend = "grows" if rho > 0 else "shrinks"
            warnings.append(
                f"the error {trend} with distance (Spearman rho {rho:+.2f}, p = {p:.2g}, SD "
                f"{sd_near:.1f}° nearer, {sd_far:.1f}° farther): calibrate at the distances you track "
                "at, or group by a distance band"
            )
        if s.n >= 2 and np.isfinite(s.sd_deg) and s.sd_deg == 0:
            status = "unusable"
            warnings.append("every trial has the same error: no SD can be measured from these trials")
        row = {"by": "+".join(by)}
        for b, v in zip(by, values):
            row[b] = v
        row.update(
            {
                "group": label,
                "n": s.n,
                "n_wild": int(wild.sum()),
                "bias_deg": s.mean_deg,
                "bias_se_deg": s.mean_se_deg,
                "bias_lo_deg": s.mean_lo_deg,
                "bias_hi_deg": s.mean_hi_deg,
                "sd_deg": s.sd_deg,
                "dof": s.n - 1,
                "circular_sd_deg": s.circular_sd_deg,
                "kappa_mle": s.kappa_mle,
                "kappa": s.kappa,
                "sd_from_kappa_deg": s.sd_from_kappa_deg,
                "distance_min_m": float(d_kept.min()) if len(d_kept) else np.nan,
                "distance_max_m": float(d_kept.max()) if len(d_kept) else np.nan,
                "distance_rho": rho,
                "distance_p": p,
                "sd_near_deg": sd_near,
                "sd_far_deg": sd_far,
                "status": status,
                "warning": "; ".join(warnings),
            }
        )
        rows.append(row)
    table = pd.DataFrame(rows, columns=["by", *by, *CALIBRATION_COLUMNS])
    if not len(t):
        notes.append("no usable trials: nothing to calibrate")
    return Calibration(
        table=table, by=by, trials=tr, problems=list(trials.problems), notes=notes, source=trials.source
    )
