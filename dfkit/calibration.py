r"""Bearing error measured on beacon trials, and its use in every fix.

A *beacon trial* is a bearing taken on a test transmitter (a beacon) placed at a known spot, so its error is
known. A trials sheet is a bearing sheet (every column and reading option of ``dfkit fix``) plus the beacon's
position in one of these forms: ``beacon_lat``/``beacon_lon``; ``beacon_utm_zone``/``beacon_easting``/
``beacon_northing``; ``beacon_mgrs``; or a ``beacon`` label looked up in the stations file. A ``beacon`` label
given beside coordinates is just the beacon's name.

For each trial the error is

    e = wrap180(observed true bearing - geodesic azimuth from the station to the beacon)   [°]

(the azimuth by Karney's algorithm, :mod:`dfkit.geodesy`). Trials are grouped (``by``: an antenna, an
observer, any column; the default is ``antenna`` when the sheet has one, else ``observer``, else one group),
and each group gets:

* **wild trials** left out and listed: an error farther than :data:`~dfkit.policy.WILD_TRIAL_MADS` robust SDs
  (1.4826 x median absolute deviation, at least :data:`~dfkit.policy.WILD_TRIAL_MIN_SCALE_DEG`) from the
  group's median error (Hampel's identifier);
* ``bias_deg``: the circular mean direction of the errors, ē = atan2(S, C) with S, C the mean sine and cosine;
  its standard error ``bias_se_deg`` = sqrt((1 - rho2) / (2 n R²)) with rho2 = mean cos 2(e - ē), and the 95 %
  interval ē ± asin(1.96 se) [1]_ (section 4.4; the section and the asin form are from memory);
* ``sd_deg``: the ordinary sample SD of the errors unwrapped about ē (n - 1 in the denominator), with
  ``dof`` = n - 1 degrees of freedom. **This is the SD a calibrated bearing carries into a fix.** Why this one
  and not the von Mises or circular SD: a fix's covariance is sigma^2 Q^-1, the *second moment* of the angular
  error [3]_, which the sample variance estimates without bias; and for normal errors (n - 1) s^2 / sigma^2 is
  chi-square with n - 1 degrees of freedom, independent of the field bearings, so the fix's region is exactly
  an F(2, n - 1) region (the locate step uses it). The alternatives are reported beside it, and the choice is
  checked by coverage simulations (``tests/test_calibration.py``, ``benchmarks/calibration_study.py``);
* ``circular_sd_deg`` sqrt(-2 ln R) [1]_ [2]_; ``kappa_mle`` the von Mises maximum-likelihood concentration
  A^-1(R) (A = I1/I0, solved exactly); ``kappa`` the same with Fisher's small-sample correction for n <= 15
  ([1]_ eq. 4.41, from memory): kappa* = max(kappa - 2/(n kappa), 0) when kappa < 2, else
  (n - 1)^3 kappa / (n^3 + n); ``sd_from_kappa_deg`` the wrapped-normal SD with the same mean resultant
  length, A(kappa) = exp(-sigma^2 / 2);
* a check whether the error grows (or shrinks) with distance: Spearman's rank correlation of |e - ē| with the
  station-beacon distance (``distance_rho``, ``distance_p``), and the SD of the nearer and farther halves.

:func:`apply` removes each group's bias from the matching bearings of a field sheet and gives them the group's
SD as known; :func:`leave_one_beacon_out` checks the calibration honestly, by solving each beacon from its own
trials with a calibration made without it.

References
----------
.. [1] N. I. Fisher, *Statistical Analysis of Circular Data*, Cambridge University Press, 1993.
.. [2] K. V. Mardia and P. E. Jupp, *Directional Statistics*, Wiley, 2000.
.. [3] R. G. Stansfield, "Statistical theory of d.f. fixing", J. IEE Part IIIA 94(15), 762-770, 1947.
"""

from __future__ import annotations

import csv
import io
import os
from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd

from dfkit import geodesy
from dfkit.conventions import wrap180, wrap360
from dfkit.io import read_table
from dfkit.io.sheet import RawSheet
from dfkit.observations import Bearings, ReadOptions, read_bearings, read_stations
from dfkit.policy import (
    DISTANCE_CHECK_ALPHA,
    MAX_WILD_FRACTION,
    MIN_TRIAL_DISTANCE_M,
    MIN_TRIALS_TRUST,
    MIN_TRIALS_USE,
    WILD_TRIAL_MADS,
    WILD_TRIAL_MIN_SCALE_DEG,
)
from dfkit.problems import Problem, SheetError

#: Beacon position columns of a trials sheet and the station-position column each one stands for.
BEACON_COLUMNS = {
    "beacon_lat": "lat",
    "beacon_lon": "lon",
    "beacon_utm_zone": "utm_zone",
    "beacon_easting": "easting",
    "beacon_northing": "northing",
    "beacon_mgrs": "mgrs",
    "beacon": "station",
}
#: Other spellings of the beacon columns, read as the canonical name (reported as a warning on the header).
BEACON_ALIASES = {
    "beacon_latitude": "beacon_lat",
    "beacon_longitude": "beacon_lon",
    "beacon_long": "beacon_lon",
    "beacon_lng": "beacon_lon",
    "beacon_zone": "beacon_utm_zone",
    "beacon_utm": "beacon_utm_zone",
}
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
_Z95 = 1.959963984540054  # standard normal 97.5 % quantile (scipy.special.ndtri(0.975))


# --------------------------------------------------------------------------- circular statistics


@dataclass(frozen=True)
class CircularSummary:
    """Summary of one sample of angular errors (see the module docstring for each formula).

    Angles in degrees; ``rbar`` is the mean resultant length, ``rho2`` the mean cos 2(e - mean).
    """

    n: int
    mean_deg: float
    rbar: float
    rho2: float
    mean_se_deg: float
    mean_lo_deg: float
    mean_hi_deg: float
    sd_deg: float
    circular_sd_deg: float
    angular_deviation_deg: float
    kappa_mle: float
    kappa: float
    sd_from_kappa_deg: float


def mean_resultant_ratio(kappa):
    """A(kappa) = I1(kappa) / I0(kappa), the mean resultant length of a von Mises distribution [1]_.

    >>> round(float(mean_resultant_ratio(1.0)), 8)
    0.44638997
    """
    from scipy.special import i0e, i1e

    k = np.asarray(kappa, float)
    with np.errstate(invalid="ignore"):
        return np.where(
            np.isinf(k), 1.0, i1e(np.where(np.isinf(k), 1.0, k)) / i0e(np.where(np.isinf(k), 1.0, k))
        )


def kappa_from_rbar(rbar):
    """Maximum-likelihood von Mises concentration: the root kappa of A(kappa) = rbar.

    Starts from the Best & Fisher approximation ([1]_ eq. 4.40) and refines it with Newton steps on A
    (dA/dkappa = 1 - A/kappa - A^2) until the relative change is below 1e-12. ``rbar`` >= 1 gives inf,
    ``rbar`` <= 0 gives 0.

    >>> round(float(kappa_from_rbar(0.9)), 5)
    5.30469
    """
    r = np.asarray(rbar, float)
    rc = np.clip(r, 1e-12, 1 - 1e-15)
    with np.errstate(divide="ignore", invalid="ignore"):
        k = np.where(
            rc < 0.53,
            2 * rc + rc**3 + 5 * rc**5 / 6,
            np.where(rc < 0.85, -0.4 + 1.39 * rc + 0.43 / (1 - rc), 1.0 / (rc**3 - 4 * rc**2 + 3 * rc)),
        )
        for _ in range(50):
            a = mean_resultant_ratio(k)
            step = (a - rc) / (1.0 - a / k - a * a)
            k_new = np.maximum(k - step, k / 10.0)
            done = np.abs(k_new - k) <= 1e-12 * k
            k = k_new
            if np.all(done):
                break
    return np.where(r >= 1.0, np.inf, np.where(r <= 0.0, 0.0, k))


def kappa_small_sample(kappa, n):
    """Fisher's small-sample correction of a von Mises kappa for n <= 15 ([1]_ eq. 4.41, from memory).

    kappa* = max(kappa - 2/(n kappa), 0) when kappa < 2, else (n - 1)^3 kappa / (n^3 + n); kappa itself
    for n > 15.
    """
    k = np.asarray(kappa, float)
    n = np.asarray(n, float)
    with np.errstate(divide="ignore", invalid="ignore"):
        low = np.maximum(k - 2.0 / (n * k), 0.0)
        high = (n - 1) ** 3 * k / (n**3 + n)
    return np.where(n > 15, k, np.where(k < 2, low, high))


def sd_from_kappa(kappa):
    """Wrapped-normal SD with the mean resultant length of a von Mises kappa: sqrt(-2 ln A(kappa)). [°]"""
    a = mean_resultant_ratio(kappa)
    with np.errstate(divide="ignore"):
        return np.degrees(np.sqrt(-2.0 * np.log(a)))


def circular_summary(errors_deg) -> CircularSummary:
    """Bias, spread and concentration of one sample of angular errors [°] (formulas in the module docstring).

    >>> s = circular_summary([-3, 5, 2, -1, 4, 0, -6, 3, 1, -2, 7, 2.5])
    >>> round(s.mean_deg, 6), round(s.rbar, 8)
    (1.042268, 0.99813274)
    """
    e = np.radians(np.asarray(errors_deg, float))
    n = len(e)
    if n == 0:
        nan = float("nan")
        return CircularSummary(0, nan, nan, nan, nan, nan, nan, nan, nan, nan, nan, nan, nan)
    c, s = np.cos(e).mean(), np.sin(e).mean()
    rbar = float(np.hypot(c, s))
    mean = float(np.arctan2(s, c))
    d = (e - mean + np.pi) % (2 * np.pi) - np.pi
    rho2 = float(np.cos(2 * d).mean())
    with np.errstate(divide="ignore", invalid="ignore"):
        se = float(np.sqrt(max(1.0 - rho2, 0.0) / (2 * n * rbar**2))) if n > 1 else float("nan")
        half = np.arcsin(_Z95 * se) if np.isfinite(se) and _Z95 * se < 1 else np.pi
        sd = float(np.std(d, ddof=1)) if n > 1 else float("nan")
        circ = float(np.sqrt(-2.0 * np.log(rbar))) if rbar > 0 else float("inf")
    k_mle = float(kappa_from_rbar(rbar))
    k = float(kappa_small_sample(k_mle, n))
    deg = np.degrees
    return CircularSummary(
        n=n,
        mean_deg=float(deg(mean)),
        rbar=rbar,
        rho2=rho2,
        mean_se_deg=float(deg(se)),
        mean_lo_deg=float(deg(mean - half)) if half < np.pi else float("nan"),
        mean_hi_deg=float(deg(mean + half)) if half < np.pi else float("nan"),
        sd_deg=float(deg(sd)),
        circular_sd_deg=float(deg(circ)),
        angular_deviation_deg=float(deg(np.sqrt(2 * (1 - rbar)))),
        kappa_mle=k_mle,
        kappa=k,
        sd_from_kappa_deg=float(sd_from_kappa(k)),
    )


# --------------------------------------------------------------------------- reading trials


@dataclass
class Trials:
    """Usable beacon trials with their errors, and what could not be used.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per usable trial: the columns of :attr:`dfkit.observations.Bearings.table`, then ``beacon``
        (name: the sheet's ``beacon`` label, else the position as text), ``beacon_lat``, ``beacon_lon`` [°],
        ``beacon_from`` (the form the position was given in), ``azimuth_to_beacon`` (geodesic, from the
        station [°]), ``distance_m`` (station to beacon [m]) and ``error_deg`` (observed true bearing minus
        ``azimuth_to_beacon``, wrapped to [-180, 180) [°]).
    bearings : Bearings
        The same trials as :class:`~dfkit.observations.Bearings` (rows aligned with :attr:`table`), to
        solve them.
    problems : list of Problem
        Every rejected row (bearing or beacon columns) and every warning.
    n_rows : int
        Data rows of the sheet.
    notes : list of str
    source : str
    """

    table: pd.DataFrame
    bearings: Bearings
    problems: list[Problem]
    n_rows: int = 0
    notes: list[str] = field(default_factory=list)
    source: str = ""

    @property
    def n_rejected(self) -> int:
        return len({p.line for p in self.problems if p.severity == "error" and p.line})


def _beacon_positions(raw: RawSheet, stations):
    """Beacon positions from the ``beacon_*`` columns, by the sheet's own position rules.

    Read by :func:`dfkit.observations.parse_positions` with ``prefix='beacon_'`` (and the ``beacon`` label
    looked up in the stations file), so a beacon position is read exactly like a station position: same forms,
    same checks, messages naming the beacon columns and the sheet's line numbers.

    Returns (lat, lon, source, rejected mask, problems), one entry per raw row.
    """
    from dfkit.observations import parse_positions

    pos = parse_positions(raw.table, prefix="beacon_", station_column="beacon", source=raw.source,
                          decimal_comma=raw.decimal_comma, stations=stations, required=False)
    problems = list(pos.problems)
    missing = ~pos.rejected & (pos.source == "")
    lines = raw.table["line"].to_numpy()
    for i in np.flatnonzero(missing):
        problems.append(Problem(int(lines[i]), "", "no beacon position: give beacon_lat and beacon_lon, "
                                "beacon_utm_zone/beacon_easting/beacon_northing, beacon_mgrs, or a beacon label from "
                                "the stations file (--stations)", "error", raw.source))
    return pos.lat, pos.lon, pos.source, pos.rejected | missing, problems


def _beacon_header(raw: RawSheet) -> RawSheet:
    """Canonical names for the beacon columns (other spellings are reported); SheetError if there is none."""
    header_line = int(raw.table["line"].min()) - 1 if len(raw.table) else 1
    renames = {}
    problems = list(raw.problems)
    for c in raw.columns:
        if c in BEACON_ALIASES and BEACON_ALIASES[c] not in raw.columns:
            renames[c] = BEACON_ALIASES[c]
            problems.append(
                Problem(max(header_line, 1), c, f"read as '{BEACON_ALIASES[c]}'", "warning", raw.source)
            )
    columns = [renames.get(c, c) for c in raw.columns]
    if not any(c in BEACON_COLUMNS for c in columns):
        raise SheetError(
            f"{raw.source or 'the sheet'}: a trials sheet needs the beacon's position: beacon_lat and "
            "beacon_lon, beacon_utm_zone/beacon_easting/beacon_northing, beacon_mgrs, or a beacon "
            "label with --stations"
        )
    return replace(raw, table=raw.table.rename(columns=renames), columns=columns, problems=problems)


def read_trials(sheet, options: ReadOptions | None = None, **kwargs) -> Trials:
    """Read a beacon-trials sheet: every bearing and beacon position checked, every error computed.

    Parameters
    ----------
    sheet : path, bytes, file-like or RawSheet
        A bearing sheet plus the beacon position columns (module docstring).
    options : ReadOptions, optional
        Reading options, as for :func:`dfkit.read_bearings` (unit, north, declination, tz, stations,
        track ...); keyword arguments override its fields.

    Returns
    -------
    Trials

    Raises
    ------
    SheetError
        The sheet cannot be read at all, or it has no beacon position column.
    """
    opts = options or ReadOptions()
    if kwargs:
        opts = replace(opts, **kwargs)
    raw = sheet if isinstance(sheet, RawSheet) else read_table(sheet, worksheet=opts.worksheet)
    raw = _beacon_header(raw)
    bearings = read_bearings(raw, opts)
    stations = read_stations(opts.stations)[0] if opts.stations is not None else None
    blat, blon, bsrc, bbad, bproblems = _beacon_positions(raw, stations)
    lines = raw.table["line"].to_numpy()
    row_of = pd.Series(np.arange(len(lines)), index=lines)

    t = bearings.table
    r = row_of.loc[t["line"].to_numpy()].to_numpy() if len(t) else np.zeros(0, np.int64)
    ok = ~bbad[r]
    slat, slon = t["lat"].to_numpy(float), t["lon"].to_numpy(float)
    az, _, dist = geodesy.inverse(slat, slon, blat[r], blon[r])
    az = np.where(ok, az, np.nan)
    dist = np.where(ok, dist, np.nan)
    near = ok & (dist < MIN_TRIAL_DISTANCE_M)
    for i in np.flatnonzero(near):
        bproblems.append(
            Problem(
                int(t["line"].iat[i]),
                "",
                f"the station is {dist[i]:.1f} m from the beacon "
                f"(under {MIN_TRIAL_DISTANCE_M:g} m): too close for a bearing to mean anything",
                "error",
                raw.source,
            )
        )
    ok &= ~near

    sel = bearings.select(ok)
    label = (
        raw.table["beacon"].to_numpy(dtype=object)
        if "beacon" in raw.columns
        else np.full(len(lines), "", object)
    )
    names = [lab if lab != "" else f"{a:.6f}, {b:.6f}" for lab, a, b in zip(label[r], blat[r], blon[r])]
    table = sel.table.copy()
    table["beacon"] = np.asarray(names, dtype=object)[ok] if len(names) else np.zeros(0, object)
    table["beacon_lat"] = blat[r][ok]
    table["beacon_lon"] = blon[r][ok]
    table["beacon_from"] = bsrc[r][ok]
    table["azimuth_to_beacon"] = az[ok]
    table["distance_m"] = dist[ok]
    table["error_deg"] = wrap180(table["true_bearing"].to_numpy(float) - az[ok])
    table = table.reset_index(drop=True)

    # Trials are not grouped into fixes: the reader's word on how it grouped a sheet without fix labels and
    # times ("all bearings of each tag form one fix") means nothing here.
    problems = sorted(
        [p for p in bearings.problems if not (p.column == "fix" and p.message.startswith(_ONE_FIX_WORDS))]
        + bproblems, key=lambda p: (p.source != raw.source, p.line, p.severity != "error")
    )
    notes = [n for n in bearings.notes if not n.startswith(_ONE_FIX_WORDS)]
    if "sd" in raw.columns or opts.sd is not None:
        notes.append("the sheet's sd (or --sd) is not used: the calibration measures the SD")
    sel = replace(sel, problems=problems, notes=notes, table=table)
    return Trials(
        table=table, bearings=sel, problems=problems, n_rows=len(lines), notes=notes, source=raw.source
    )


#: How :mod:`dfkit.observations.grouping` begins its word on a sheet without fix labels and times.
_ONE_FIX_WORDS = "no fix labels and no times"


# --------------------------------------------------------------------------- calibrating


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


# --------------------------------------------------------------------------- reading a calibration back


def read_calibration(path) -> Calibration:
    """Read a calibration table written by ``dfkit calibrate -o CAL.csv`` (or by hand).

    Needs ``n``, ``bias_deg`` and ``sd_deg``; ``dof`` (default n - 1), ``status`` and ``by`` (the grouping
    columns joined by ``+``, one value for the whole file; needed when there is more than one group) are read
    when present. A row that cannot be used is reported with its line, column and reason, and its group is not
    used.

    Raises
    ------
    SheetError
        The file cannot be read, lacks a needed column, or names a grouping column it does not have.
    """
    name = os.fspath(path) if isinstance(path, (str, os.PathLike)) else "calibration"
    try:
        with open(path, "rb") as fh:
            text = fh.read().decode("utf-8-sig")
    except OSError as err:
        raise SheetError(f"{name}: cannot read the calibration ({err.strerror or err})") from None
    except UnicodeDecodeError:
        raise SheetError(f"{name}: the calibration is not UTF-8 text") from None
    lines = text.splitlines()
    first = next((i for i, ln in enumerate(lines) if ln.strip() and not ln.lstrip().startswith("#")), None)
    if first is None:
        raise SheetError(f"{name}: the calibration is empty (expected a header with n, bias_deg, sd_deg)")
    delim = max([",", ";", "\t"], key=lambda d: (lines[first].count(d), d == ","))
    reader = csv.reader(io.StringIO("\n".join(lines)), delimiter=delim)
    header = None
    records = []
    for row in reader:
        ln = reader.line_num
        if not row or all(not c.strip() for c in row) or row[0].lstrip().startswith("#"):
            continue
        if header is None:
            header = [" ".join(c.strip().lower().split()).replace(" ", "_") for c in row]
            header_line = ln
            continue
        records.append((ln, [c.strip() for c in row] + [""] * (len(header) - len(row))))
    missing = [c for c in ("n", "bias_deg", "sd_deg") if c not in header]
    if missing:
        raise SheetError(
            f"{name}: line {header_line}: a calibration needs the column(s) {', '.join(missing)}"
        )
    col = {c: j for j, c in enumerate(header)}
    by_values = {r[col["by"]] for _, r in records} if "by" in col else {""}
    if len(by_values) > 1:
        raise SheetError(
            f"{name}: the 'by' column differs between rows ({', '.join(sorted(by_values))}); "
            "one calibration groups all its rows the same way"
        )
    by_text = by_values.pop() if by_values else ""
    by = tuple(b for b in by_text.split("+") if b)
    for b in by:
        if b not in col:
            raise SheetError(
                f"{name}: line {header_line}: the calibration is grouped by '{b}' but has no '{b}' column"
            )
    if not by and len(records) > 1:
        raise SheetError(f"{name}: {len(records)} groups but no 'by' column saying what they are grouped by")
    problems: list[Problem] = []

    def number(ln, r, c, lo, hi, what):
        cell = r[col[c]] if c in col else ""
        try:
            v = float(cell.replace(",", ".") if delim != "," else cell)
        except ValueError:
            problems.append(Problem(ln, c, f"'{cell}' is not a number", "error", name))
            return None
        if not (np.isfinite(v) and lo <= v <= hi):
            problems.append(Problem(ln, c, f"{v:g} is not a usable {what}", "error", name))
            return None
        return v

    out = []
    seen: dict[tuple, int] = {}
    for ln, r in records:
        vals = tuple(r[col[b]] for b in by)
        nn = number(ln, r, "n", 1, np.inf, "number of trials")
        bias = number(ln, r, "bias_deg", -180, 180, "bias (degrees, -180 to 180)")
        sd = number(ln, r, "sd_deg", 1e-9, 90, "bearing SD (degrees, above 0 and below 90)")
        dof = (
            number(ln, r, "dof", 1, np.inf, "number of degrees of freedom")
            if "dof" in col and r[col["dof"]]
            else (nn - 1 if nn is not None else None)
        )
        status = r[col["status"]].strip().lower() if "status" in col else "ok"
        if status not in GROUP_STATUS:
            problems.append(
                Problem(
                    ln, "status", f"unknown status '{status}'; use {', '.join(GROUP_STATUS)}", "error", name
                )
            )
            continue
        if None in (nn, bias, sd) or (dof is None) or dof < 1:
            if dof is not None and dof < 1 and nn is not None:
                problems.append(Problem(ln, "n", "one trial cannot give an SD", "error", name))
            continue
        key = tuple(_key(v) for v in vals)
        if key in seen:
            problems.append(
                Problem(
                    ln,
                    by[0] if by else "",
                    f"group {_group_label(by, vals)} is listed twice "
                    f"(first on line {seen[key]}); the first is used",
                    "error",
                    name,
                )
            )
            continue
        seen[key] = ln
        row = {"by": "+".join(by)}
        row.update(dict(zip(by, vals)))
        row.update(
            {
                "group": _group_label(by, vals),
                "n": int(nn),
                "bias_deg": bias,
                "sd_deg": sd,
                "dof": dof,
                "status": status,
                "line": ln,
            }
        )
        out.append(row)
    table = pd.DataFrame(
        out, columns=["by", *by, "group", "n", "bias_deg", "sd_deg", "dof", "status", "line"]
    )
    return Calibration(table=table, by=by, trials=None, problems=problems, source=name)


# --------------------------------------------------------------------------- using a calibration


def apply(bearings: Bearings, cal: Calibration) -> Bearings:
    """Bearings with each matching group's bias removed and its SD used as known.

    A bearing matches a calibration group when its values in the grouping columns equal the group's
    (ignoring case and repeated spaces; a calibration with no grouping columns matches every bearing). A
    matching bearing gets ``true_bearing`` minus the group's ``bias_deg``, ``sd`` = the group's ``sd_deg``,
    ``sd_source`` = 'calibration', ``sd_dof`` = the group's ``dof`` (the locate step widens the region for it)
    and ``bias_removed_deg``. Other bearings keep the sheet's ``sd`` (or ``--sd``) or none, in which case
    their fix's SD is estimated from its residuals. Groups with status 'unusable' are not used. The notes
    say how many bearings took which path.

    Parameters
    ----------
    bearings : Bearings
        From :func:`dfkit.read_bearings`; not already calibrated.
    cal : Calibration
        From :func:`calibrate` or :func:`read_calibration`.

    Returns
    -------
    Bearings
        A new object; ``bearings`` is not changed.

    Raises
    ------
    ValueError
        The bearings were already calibrated (the bias would be removed twice).
    """
    t = bearings.table.copy()
    if "bias_removed_deg" in t.columns and t["bias_removed_deg"].notna().any():
        raise ValueError(
            "bearings= are already calibrated: applying a calibration twice would remove the bias twice"
        )
    n = len(t)
    usable = cal.table[cal.table["status"] != "unusable"] if len(cal.table) else cal.table
    match = np.full(n, -1, np.int64)
    notes = list(bearings.notes)
    absent = [b for b in cal.by if b not in t.columns or not (t[b].astype(str).str.strip() != "").any()]
    if n and len(usable):
        if not cal.by:
            match[:] = 0
        elif absent:
            notes.append(
                f"calibration: the calibration is by {', '.join(cal.by)}, but the sheet has no "
                f"{' or '.join(absent)} values: no bearing could be matched to it"
            )
        else:
            match = _match(t, usable, cal.by)
    hit = match >= 0
    set_aside = np.zeros(n, bool)  # bearings of groups with too few trials to use
    unused = cal.table[cal.table["status"] == "unusable"] if len(cal.table) else cal.table
    if n and len(unused) and cal.by and not absent:
        set_aside = ~hit & (_match(t, unused, cal.by) >= 0)
    src_before = (
        t["sd_source"].to_numpy(dtype=object).copy() if "sd_source" in t.columns else np.full(n, "", object)
    )
    bias = np.full(n, np.nan)
    sd_dof = t["sd_dof"].to_numpy(float).copy() if "sd_dof" in t.columns else np.full(n, np.nan)
    if hit.any():
        g = match[hit]
        bias[hit] = usable["bias_deg"].to_numpy(float)[g]
        t.loc[hit, "true_bearing"] = wrap360(t["true_bearing"].to_numpy(float)[hit] - bias[hit])
        t.loc[hit, "sd"] = usable["sd_deg"].to_numpy(float)[g]
        t.loc[hit, "sd_source"] = "calibration"
        sd_dof[hit] = usable["dof"].to_numpy(float)[g]
    t["bias_removed_deg"] = bias
    t["sd_dof"] = sd_dof
    labels = (
        usable["group"].to_numpy(dtype=object)
        if "group" in usable.columns
        else np.array(
            [_group_label(cal.by, row) for row in zip(*(usable[b] for b in cal.by))]
            if cal.by
            else ["all"] * len(usable),
            dtype=object,
        )
    )
    t["calibration_group"] = np.where(hit, labels[np.maximum(match, 0)] if len(usable) else "", "")

    # what took which path
    parts = []
    if hit.any():
        per = pd.Series(t["calibration_group"].to_numpy(dtype=object)[hit]).value_counts(sort=False)
        parts.append(
            f"{int(hit.sum())} bearing{'s' if hit.sum() != 1 else ''} calibrated ("
            + ", ".join(f"{k}: {v}" for k, v in per.items())
            + ")"
        )
        replaced = int((hit & np.isin(src_before, ["sheet", "option"])).sum())
        if replaced:
            parts.append(f"{replaced} of them had an sd in the sheet or --sd, replaced by the calibration")
    sd_now = t["sd"].to_numpy(float) if n else np.zeros(0)
    kept = ~hit & np.isfinite(sd_now)
    none = ~hit & ~np.isfinite(sd_now)
    if kept.any():
        which = _unmatched(t, kept & ~set_aside, usable, cal.by) if cal.by and not absent else ""
        parts.append(f"{int(kept.sum())} kept the sheet's sd or --sd (no usable calibration group"
                     + (": " + which if which else "") + ")")
    if (set_aside & none).any():
        k = int((set_aside & none).sum())
        parts.append(
            f"{k} belong{'s' if k == 1 else ''} to a group with too few trials to use and ha"
            f"{'s' if k == 1 else 've'} no sd"
        )
    if (none & ~set_aside).any():
        k = int((none & ~set_aside).sum())
        which = _unmatched(t, none & ~set_aside, usable, cal.by) if cal.by and not absent else ""
        parts.append(f"{k} ha{'ve' if k != 1 else 's'} no matching group and no sd" + (": " + which if which else ""))
    if none.any():
        parts.append("a fix with a bearing of unknown SD estimates its SD from its own residuals")
    if not parts:
        parts.append("no bearings")
    notes.append("calibration " + (cal.source or "") + ": " + "; ".join(parts))
    few = usable["status"].to_numpy() == "few" if len(usable) else np.zeros(0, bool)
    for gname, n_trials in zip(labels[few], usable["n"].to_numpy()[few]):
        if (t["calibration_group"] == gname).any():
            notes.append(
                f"calibration: {gname} rests on only {n_trials} trials: the regions of its fixes are "
                f"widened for it (F(2, {n_trials - 1}) instead of chi-square)"
            )
    if n and hit.any() and (~hit).any():
        g = t["fix_id"].to_numpy(np.int64)
        m = int(g.max()) + 1
        n_cal = np.bincount(g, hit.astype(float), m)
        n_unknown = np.bincount(g, none.astype(float), m)
        mixed = int(((n_cal > 0) & (n_unknown > 0)).sum())
        if mixed:
            notes.append(
                f"calibration: {mixed} fix{'es mix' if mixed != 1 else ' mixes'} calibrated bearings with "
                "bearings of unknown SD: such a fix estimates its SD from its residuals (calibrate the "
                "other antennas or give their sd)"
            )
    return replace(bearings, table=t, notes=notes, problems=list(bearings.problems) + list(cal.problems))


def _unmatched(t: pd.DataFrame, rows, groups: pd.DataFrame, by) -> str:
    """Which group values of ``rows`` found no calibration group, on which lines, and the group a value was
    probably meant to be (the same letters and digits: 'H adcock' for 'H-adcock')."""
    import difflib

    rows = np.asarray(rows, bool)
    if not rows.any():
        return ""
    known = [tuple(str(v) for v in row) for row in zip(*(groups[b].to_numpy(dtype=object) for b in by))]

    def loose(values):
        return "|".join("".join(ch for ch in str(v).casefold() if ch.isalnum()) for v in values)

    by_loose = {loose(k): k for k in known}
    values = list(zip(*(t[b].to_numpy(dtype=object)[rows] for b in by)))
    lines = t["line"].to_numpy()[rows] if "line" in t.columns else np.zeros(int(rows.sum()), int)
    seen: dict = {}
    for v, ln in zip(values, lines):
        seen.setdefault(tuple(str(x) for x in v), []).append(int(ln))
    parts = []
    for v, lns in list(seen.items())[:5]:
        where = f"line{'s' if len(lns) > 1 else ''} {', '.join(str(x) for x in lns[:6])}" + (
            " ..." if len(lns) > 6 else "")
        guess = by_loose.get(loose(v))
        if guess is None:
            close = difflib.get_close_matches(loose(v), list(by_loose), n=1, cutoff=0.8)
            guess = by_loose[close[0]] if close else None
        text = " ".join(f"{b} '{x}'" if x != "" else f"{b} (blank)" for b, x in zip(by, v)) + f" ({where}"
        text += (f": did you mean {' '.join(repr(x) for x in guess)}?)" if guess else ")")
        parts.append(text)
    if len(seen) > 5:
        parts.append(f"{len(seen) - 5} more values")
    groups_text = ", ".join(" ".join(k) for k in known[:8]) + (" ..." if len(known) > 8 else "")
    return ", ".join(parts) + (f"; the calibration has {'+'.join(by)} {groups_text}" if known else "")


def _match(t: pd.DataFrame, groups: pd.DataFrame, by) -> np.ndarray:
    """Row of ``groups`` whose ``by`` values equal each bearing's (ignoring case and spacing), or -1."""
    lookup = {
        tuple(_key(v) for v in row): k
        for k, row in enumerate(zip(*(groups[b].to_numpy(dtype=object) for b in by)))
    }
    cells = zip(*(t[b].to_numpy(dtype=object) for b in by))
    return np.array([lookup.get(tuple(_key(v) for v in row), -1) for row in cells], np.int64)


# --------------------------------------------------------------------------- an honest check


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
