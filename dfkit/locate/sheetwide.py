"""What the whole sheet shows that no single fix can: a group reading off, an SD given too small.

Each fix is judged on its own bearings (:mod:`dfkit.locate.status`); a fault shared by
many fixes is often too small to see in any one of them and plain once they are
pooled. :func:`review` runs on a located sheet and

* pools each observer's, team's, antenna's or receiver's residuals over the fixes
  (:func:`dfkit.locate.offsets.sheet_offsets`): a label that reads off gets a
  sheet-wide warning, and each ``ok`` fix whose position that offset moves by at least
  :data:`dfkit.locate.offsets.SHIFT_SE` standard errors is no longer ``ok``;
* checks the SD given for the sheet (:func:`sd_checks`): among the fixes sharing an SD
  (source and value) the share flagged ``inconsistent`` at p < 0.01 should be about 1 %.
  When it is far more (one-sided binomial test at :data:`SD_CHECK_P`) and the fixes'
  misfits say the SD is at least :data:`SD_TOO_SMALL` times too small (the robust
  estimate below), the sheet gets a warning with the SD the residuals suggest, and those
  fixes' ``ok`` becomes ``inconsistent``: their regions are sized with an SD the sheet
  shows to be too small.

The SD the residuals suggest is the factor k that makes the median of the fixes'
chi-square probabilities F_dof(S / k^2) one half (S the fix's sum of squared residuals
in SDs, dof = n_used - 2): a median, so that the few fixes with a wild bearing do not
set it.
"""

from __future__ import annotations

from dataclasses import replace
from math import lgamma

import numpy as np
import pandas as pd

from dfkit.locate.fixes import KNOWN_SD_SOURCES, WITH_POSITION, has_position, per_bearing
from dfkit.locate.offsets import WHOLE_SHEET, sheet_offsets, whitened_gradients
from dfkit.locate.status import at_minimum
from dfkit.policy import INCONSISTENT_P
from dfkit.regions import chi2_sf

#: Fewest fixes sharing an SD (with at least one degree of freedom each) for the sheet-wide SD check.
MIN_SD_FIXES = 20
#: Level of the one-sided binomial test of the share of inconsistent fixes against INCONSISTENT_P (our choice:
#: a sheet-wide verdict that flags every fix of the group must be rare on a clean sheet).
SD_CHECK_P = 0.001
#: The SD is called too small only when the residuals suggest at least this factor more: a 95 % region sized
#: with an SD 1/1.2 of the true one holds the truth about 87 % of the time (chi-square with 2 dof at
#: 5.99 / 1.44; our choice).
SD_TOO_SMALL = 1.2
#: Two group columns "go together" when this share of the bearings of each label of one is with a single label of
#: the other (our choice: four in five).
TIED_SHARE = 0.8


def review(fixes):
    """The located sheet with its sheet-wide warnings (``fixes.warnings``) and the statuses they change."""
    t = fixes.table
    b = fixes.bearings
    if not len(t) or not len(b):
        return fixes
    status = t["status"].to_numpy(dtype=object).copy()
    reasons = t["reason"].to_numpy(dtype=object).copy()
    has_pos = has_position(status)
    warnings = list(fixes.warnings)
    found = sheet_offsets(t, b, has_pos, azimuth_deg=fixes.azimuth_deg)
    tied = tied_columns(b, [off.column for off in found])
    for off in found:
        if off.column in tied:
            other, share = tied[off.column]
            off.findings = [f"{w}; but in this sheet {off.column}s and {other}s go together ({share:.0%} of the "
                            f"bearings of each {off.column} with one {other}), so an offset said of one may belong to "
                            f"the other" for w in off.findings]
        warnings.extend(off.findings)
        warnings.extend(label_north_mistakes(b, off))
        turns = set(off.offsets.values())
        if len(turns) == 1:
            # one turn shared by every bearing (the whole sheet, or every label of a column alike); the check
            # itself is a likelihood comparison over the whole sheet
            warnings.extend(north_mistake(b, turns.pop()))
        for i, shift in off.marked.items():
            _mark(status, reasons, i, off.reason(shift, calibrated="calibration" in str(t["sd_source"].iat[i])))
    # the SD is judged on the misfit the offsets found above leave: an observer 10° off is not an SD too small
    residual = (without_offsets(t, b, found, azimuth_deg=fixes.azimuth_deg) if any(off.offsets for off in found)
                else None)
    for chk in sd_checks(t, b, has_pos, residual_deg=residual, likelihood=fixes.likelihood):
        warnings.append(chk["text"])
        for i in chk["fixes"]:
            _mark(status, reasons, i, chk["reason"])
    if (status == t["status"].to_numpy(dtype=object)).all() and len(warnings) == len(fixes.warnings):
        return fixes
    t = t.copy(deep=False)         # two columns replaced: the others stay shared (copy-on-write), not copied
    t["status"] = status
    t["reason"] = reasons
    bt = b.copy(deep=False)
    bt["fix_status"] = per_bearing(status, b["fix_id"].to_numpy(dtype=np.int64))
    return replace(fixes, table=t, bearings=bt, warnings=warnings, _regions=fixes._regions)


#: A label's offset is said to match the declination when within this many degrees of it (our choice: a label's
#: offset is known to about 1° from a few dozen bearings, a declination to about 0.5°).
DECLINATION_MATCH_DEG = 2.0
#: Fewest degrees of declination worth checking a shared turn against (below, a compass mistake and a small offset
#: look alike; our choice).
DECLINATION_MIN_DEG = 4.0
#: Fixes re-solved to check a shared turn against the declination (a sample of a big sheet; our choice).
DECLINATION_CHECK_FIXES = 2000


def north_mistake(bearings, turn_deg) -> list[str]:
    """A sheet-wide note when a turn ``turn_deg`` [°] shared by every bearing looks like a north mistake: compass
    bearings read as true north (:func:`_read_as_true`), or true bearings read as magnetic (:func:`_read_as_magnetic`).
    Each is a likelihood comparison rather than the turn itself (a robust fit that drops the turned lines makes the
    turn it shows smaller than it is): up to DECLINATION_CHECK_FIXES fixes solved again by Lenth's likelihood with
    each bearing turned by the declination must leave less than half the squared misfit of the bearings as read."""
    b = bearings
    norths = _norths(b)
    if (norths == "true").mean() >= 0.9:
        return _read_as_true(b, norths == "true", turn_deg)
    if (norths == "magnetic").mean() >= 0.9 and "declination" in b:
        return _read_as_magnetic(b, norths == "magnetic", turn_deg)
    return []


def label_north_mistakes(bearings, off) -> list[str]:
    """A note for each label of a group column named reading off the others (``off``: a
    :class:`dfkit.locate.offsets.SheetOffset`) whose offset is about the declination at its bearings: within
    DECLINATION_MATCH_DEG (or two standard errors of the offset) of +D for magnetic bearings (dfkit added a
    declination that true bearings did not need), or of -D for bearings read as true (compass bearings), D the
    median declination dfkit applied to them (magnetic) or the WMM2025 declination at their stations and times
    (true)."""
    b = bearings
    if off.column == WHOLE_SHEET or off.column not in b or (len(off.offsets) > 1
                                                            and len(set(off.offsets.values())) == 1):
        return []           # (a turn shared by every label is the sheet's: north_mistake)
    labels = b[off.column].astype(str).to_numpy()
    norths = _norths(b)
    out = []
    for label, deg in off.offsets.items():
        rows = labels == str(label)
        if not rows.any():
            continue
        if (norths[rows] == "magnetic").mean() >= 0.9 and "declination" in b:
            d = float(np.nanmedian(b["declination"].to_numpy(float)[rows]))
            want, what = d, "the declination dfkit added to its magnetic bearings"
            advice = (f"if {off.column} {label} wrote true bearings (a GPS compass, or corrected by hand), "
                      "mark its rows true north")
        elif (norths[rows] == "true").mean() >= 0.9:
            dec, _, when = _wmm_declination(b, rows)
            if dec is None or when is not None:       # (no time, or none within the model's life)
                continue
            d = float(np.median(dec))
            want, what = -d, "the magnetic declination at its stations (WMM2025)"
            advice = f"if {off.column} {label} read a magnetic compass, mark its rows magnetic north"
        else:
            continue
        se = (off.se or {}).get(str(label), 0.0)
        if abs(d) < DECLINATION_MIN_DEG or not abs(deg - want) <= max(DECLINATION_MATCH_DEG, 2.0 * se):
            continue
        side = "east" if d > 0 else "west"
        out.append(f"{off.column} {label}'s offset ({abs(deg):.1f}° {'clockwise' if deg > 0 else 'anticlockwise'}) "
                   f"is about {what} ({abs(d):.1f}° {side}): {advice} (a north column) and locate again")
    return out


def _misfit_falls(b, sel, shift):
    """(misfit as read, misfit with each bearing of ``sel`` plus ``shift`` [°]) of the fixes of ``sel`` (at most
    DECLINATION_CHECK_FIXES), each by Lenth's fit, in squared SDs (the sheet's median SD where a bearing has none)."""
    from dfkit import estimators

    g = b["fix_id"].to_numpy(dtype=np.int64)[sel]
    codes, gg = np.unique(g, return_inverse=True)
    lat, lon = b["lat"].to_numpy(float)[sel], b["lon"].to_numpy(float)[sel]
    theta = b["true_bearing"].to_numpy(float)[sel]
    sd = b["sd"].to_numpy(float)[sel] if "sd" in b else np.full(sel.sum(), np.nan)
    sd = np.where(np.isfinite(sd), sd, np.nanmedian(sd) if np.isfinite(sd).any() else 5.0)

    def misfit(bearing):
        sol = estimators.solve(lat, lon, bearing % 360.0, gg, len(codes), sd, method="mle")
        z = sol.residual_deg / sd
        return float(np.nansum(np.where(sol.converged[gg], z * z, np.nan)))

    return misfit(theta), misfit(theta + shift)


def _norths(b):
    """Each bearing's north as read ('true' where the sheet names none)."""
    return b["north"].astype(str).to_numpy() if "north" in b else np.full(len(b), "true")


def _wmm_declination(b, sel):
    """WMM2025 declination [°] at the stations and times of the bearings ``sel``: (declination of each, the
    bearings it is of, None), or (..., "mid-model, no time given") at the middle of the model's life where the
    sheet gives no time; (None, sel, None) where no time lies within the model's life."""
    from dfkit import magnetic

    lat, lon = b["lat"].to_numpy(float), b["lon"].to_numpy(float)
    if "time" not in b or b["time"][sel].isna().all():
        # no time: the declination at the middle of the model's life, to say what to check
        year, when = np.full(len(b), 0.5 * (magnetic.MODEL_START + magnetic.MODEL_END)), "mid-model, no time given"
    else:
        secs = b["time"].to_numpy(dtype="datetime64[s]").astype("int64").astype(float)
        year = magnetic.decimal_year(secs)
        sel = sel & np.isfinite(secs) & magnetic.in_model_life(year)
        when = None
    if not sel.any():
        return None, sel, None
    return magnetic.declination(lat[sel], lon[sel], year[sel]).declination_deg, sel, when


def _first_fixes(b, sel):
    """``sel`` restricted to the bearings of its first DECLINATION_CHECK_FIXES fixes (a sample of a big sheet)."""
    g = b["fix_id"].to_numpy(dtype=np.int64)
    return sel & np.isin(g, np.unique(g[sel])[:DECLINATION_CHECK_FIXES])


def _read_as_true(b, true, turn_deg):
    """Compass bearings taken as true: they read the declination D less than true (magnetic = true - D, east
    positive), so the sheet turns by about -D, and adding the WMM declination at each station and time fits."""
    # every fix solved, whatever its status (a robust fit may have found no answer in a turned fix)
    sel = true & np.isfinite(b["true_bearing"].to_numpy(float)) & np.isfinite(b["lat"].to_numpy(float))
    lat, lon = b["lat"].to_numpy(float), b["lon"].to_numpy(float)
    if not sel.any():
        return []
    at = f"at {np.median(lat[sel]):.2f}, {np.median(lon[sel]):.2f}"
    dec, sel, when = _wmm_declination(b, _first_fixes(b, sel))
    if dec is None:
        return []
    d_med = float(np.median(dec))
    if abs(d_med) < DECLINATION_MIN_DEG or turn_deg * d_med > 0:
        return []
    as_read, as_compass = _misfit_falls(b, sel, dec)
    if not as_compass < 0.5 * as_read:
        return []
    side = "east" if d_med > 0 else "west"
    gain = f"their misfit falls {as_read / max(as_compass, 1e-9):.0f}-fold"
    if when is None:
        return [f"that turn is about the magnetic declination where these bearings were taken "
                f"({abs(d_med):.1f}° {side}, WMM2025 {at}): read as compass bearings, {gain}. If they were read off a magnetic compass, "
                f"give --north magnetic (or a north column) and locate again"]
    return [f"that turn is about the magnetic declination here ({abs(d_med):.1f}° {side}, WMM2025 {at}, {when}): "
            f"read as compass bearings, {gain}. If they were read off a magnetic compass, give the times (a time "
            f"column) and --north magnetic, or --declination {d_med:.1f} for the date they were taken, and locate "
            f"again"]


def _read_as_magnetic(b, magnetic_rows, turn_deg):
    """True bearings taken as magnetic: dfkit added the declination D they did not need, so the sheet turns by
    about +D, and taking the declination off again fits."""
    dec_all = b["declination"].to_numpy(float)
    sel = (magnetic_rows & np.isfinite(dec_all) & np.isfinite(b["true_bearing"].to_numpy(float))
           & np.isfinite(b["lat"].to_numpy(float)))
    sel = _first_fixes(b, sel)
    if not sel.any():
        return []
    dec = dec_all[sel]
    d_med = float(np.median(dec))
    if abs(d_med) < DECLINATION_MIN_DEG or turn_deg * d_med < 0:
        return []
    as_read, as_true = _misfit_falls(b, sel, -dec)
    if not as_true < 0.5 * as_read:
        return []
    side = "east" if d_med > 0 else "west"
    return [f"that turn is about the declination dfkit added to these magnetic bearings ({abs(d_med):.1f}° {side}): "
            f"taken as true north, their misfit falls {as_read / max(as_true, 1e-9):.0f}-fold. If they were true "
            f"bearings already (a GPS compass, or corrected by hand), give --north true (or a north column) and "
            f"locate again"]


def tied_columns(bearings, columns, share: float = TIED_SHARE) -> dict:
    """{column: (other column, share)} for each of ``columns`` whose labels go with one label of another group
    column (:data:`dfkit.locate.offsets.GROUP_COLUMNS`) in at least ``share`` of the bearings: each observer mostly
    with their own antenna. Offsets are fitted one column at a time, so an antenna's offset then shows as its
    carrier's too (a field trial: observer Kim named at 3.2° for antenna y1's 3°)."""
    from dfkit.locate.offsets import group_columns

    if not columns:
        return {}
    cols = group_columns(bearings)
    out = {}
    for c in columns:
        if c not in cols:
            continue
        x = bearings[c].astype(str).str.strip()
        for other in cols:
            if other == c:
                continue
            y = bearings[other].astype(str).str.strip()
            named = (x != "") & (x.str.lower() != "nan") & (y != "") & (y.str.lower() != "nan")
            if named.sum() < 2 or x[named].nunique() < 2:
                continue
            counts = pd.crosstab(x[named], y[named])
            s = float(counts.max(axis=1).sum() / named.sum())
            if s >= share and (c not in out or s > out[c][1]):
                out[c] = (other, s)
    return out


def _mark(status, reasons, i, text):
    if status[i] == "ok":
        status[i] = "inconsistent"
    if text not in reasons[i]:
        reasons[i] = f"{reasons[i]}; {text}" if reasons[i] else text


def without_offsets(table, bearings, found, azimuth_deg=None) -> np.ndarray:
    """Each bearing's residual [°] with the sheet's fitted offsets (``found``, :func:`sheet_offsets`) taken out
    and the fix's position let absorb what it can, in the linearised model of the fix: with v the offsets in SDs
    and X the whitened gradients of the bearings with respect to the position (:mod:`dfkit.locate.offsets`), the
    offsets left in the residuals are P v = v - X (X'X)^-1 X' v, and the residual becomes r - P v.
    ``azimuth_deg``: each bearing's azimuth from its fix (:attr:`dfkit.locate.Fixes.azimuth_deg`; by default
    computed again)."""
    from dfkit.locate.offsets import fix_azimuths

    b = bearings
    m = len(table)
    g = b["fix_id"].to_numpy(dtype=np.int64)
    r = b["residual_deg"].to_numpy(float)
    delta = np.zeros(len(b))
    for off in found:
        if off.offsets and off.column in b:
            names = b[off.column].astype(str).str.strip()
            delta += names.map(off.offsets).fillna(0.0).to_numpy(float)
        elif off.offsets:                        # the whole sheet as one group (no observer column)
            delta += float(next(iter(off.offsets.values())))
    sd = sd_used(b)
    with np.errstate(invalid="ignore", divide="ignore"):
        use = (b["weight"].to_numpy(float) > 0) & np.isfinite(r) & (sd > 0) & (b["range_m"].to_numpy(float) > 0)
    az = fix_azimuths(table, b, g, azimuth_deg)
    s, xe, xn = whitened_gradients(az, b["range_m"].to_numpy(float), sd, use)
    v = np.where(use, np.radians(delta) / s, 0.0)
    Mee, Men, Mnn = (np.bincount(g, xe * xe, m), np.bincount(g, xe * xn, m), np.bincount(g, xn * xn, m))
    qe, qn = np.bincount(g, xe * v, m), np.bincount(g, xn * v, m)
    with np.errstate(invalid="ignore", divide="ignore"):
        det = Mee * Mnn - Men ** 2
        De, Dn = (Mnn * qe - Men * qn) / det, (Mee * qn - Men * qe) / det
        Pv = v - (xe * De[g] + xn * Dn[g])
    return np.where(use & np.isfinite(Pv), r - np.degrees(Pv * s), r)


def fix_misfits(table, bearings, residual_deg=None, likelihood=None):
    """Per fix: S (sum of squared residuals in SDs over the bearings the fit uses) and its degrees of freedom
    (n_used - 2; NaN / 0 where the SD is not known or the fix has no position). ``residual_deg`` replaces the
    bearings' residuals (e.g. :func:`without_offsets`: S then loses what they take out). With the fixes'
    ``likelihood`` regions, S is taken at the angular minimum as the fix's own test takes it
    (:func:`dfkit.locate.status.at_minimum`: least squares stops short of it)."""
    m = len(table)
    g = bearings["fix_id"].to_numpy(dtype=np.int64)
    sd = sd_used(bearings)
    use = bearings["weight"].to_numpy(float) > 0

    def misfit(r):
        with np.errstate(invalid="ignore", divide="ignore"):
            z2 = (r / sd) ** 2
        return np.bincount(g, np.where(use & np.isfinite(z2), z2, 0.0), m)

    own = misfit(bearings["residual_deg"].to_numpy(float))
    S = at_minimum(own, likelihood, str(table["method"].iat[0])) if len(table) else own
    if residual_deg is not None:         # less what the offsets explain (the same at the minimum, linearised)
        S = np.maximum(S - (own - misfit(residual_deg)), 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        use = use & np.isfinite(bearings["residual_deg"].to_numpy(float) / sd)
    n = np.bincount(g, use.astype(float), m)
    known = table["sd_source"].isin(KNOWN_SD_SOURCES).to_numpy()
    dof = np.where(known & table["status"].isin(WITH_POSITION).to_numpy(), n - 2, 0).astype(int)
    return np.where(dof >= 1, S, np.nan), dof


def sd_used(bearings) -> np.ndarray:
    """Each bearing's SD as its fix used it: the SD given, with its observer's rounding where the fix took that in
    (``rounding_sd_deg``, :mod:`dfkit.locate.rounding`)."""
    sd = bearings["sd"].to_numpy(float)
    if "rounding_sd_deg" in bearings:
        sd = np.hypot(sd, bearings["rounding_sd_deg"].to_numpy(float))
    return sd


def binomial_tail(k, n, p) -> float:
    """P(X >= k) for X ~ Binomial(n, p): the sum of the probabilities of k..n, each C(n, i) p^i (1 - p)^(n - i),
    with log C(n, i) carried by the ratio C(n, i + 1) / C(n, i) = (n - i) / (i + 1) (checked against scipy's
    binomial test in tests/test_locate.py)."""
    k, n = int(k), int(n)
    if k <= 0:
        return 1.0
    if k > n:
        return 0.0
    i = np.arange(k, n + 1, dtype=float)
    log_c = lgamma(n + 1) - lgamma(k + 1) - lgamma(n - k + 1) + np.concatenate(
        ([0.0], np.cumsum(np.log((n - i[:-1]) / (i[:-1] + 1)))))
    return float(min(1.0, np.exp(log_c + i * np.log(p) + (n - i) * np.log1p(-p)).sum()))


def suggested_factor(S, dof) -> float:
    """k with median F_dof(S / k^2) = 1/2 (module docstring): by how much the SD looks too small."""
    lo, hi = np.log(1e-3), np.log(1e3)
    for _ in range(60):
        mid = (lo + hi) / 2
        if np.median(1.0 - chi2_sf(S / np.exp(2 * mid), dof)) > 0.5:
            lo = mid
        else:
            hi = mid
    return float(np.exp((lo + hi) / 2))


def _sd_keys(source, sd_deg) -> np.ndarray:
    """Each fix's "source|SD" key (the SD to 3 significant digits), each distinct pair written once."""
    source = np.asarray(source, dtype=object)
    if pd.api.types.infer_dtype(source, skipna=False) != "string":      # not all text: each written alone
        return np.array([f"{s}|{v:.3g}" for s, v in zip(source, sd_deg)], dtype=object)
    cs, src = pd.factorize(source, use_na_sentinel=False)
    cv, val = pd.factorize(np.asarray(sd_deg, float), use_na_sentinel=False)
    codes, pairs = pd.factorize(cs * len(val) + cv)
    text = np.array([f"{src[q // len(val)]}|{val[q % len(val)]:.3g}" for q in pairs], dtype=object)
    return text[codes]


def sd_checks(table, bearings, has_pos, residual_deg=None, likelihood=None) -> list[dict]:
    """Groups of fixes (same SD source and value) whose SD the sheet shows to be too small: each a dict with
    ``text`` (the warning), ``reason`` (for each ok fix) and ``fixes`` (their indices). ``residual_deg``: the
    residuals to judge (default the bearings' own)."""
    S, dof = fix_misfits(table, bearings, residual_deg, likelihood)
    sd = table["sd_deg"].to_numpy(float)
    src = table["sd_source"].to_numpy(dtype=object)
    have = dof >= 1
    out = []
    if have.sum() < MIN_SD_FIXES:
        return out
    keys = _sd_keys(src, sd)
    for key in dict.fromkeys(keys[have]):
        sel = np.flatnonzero(have & (keys == key))
        n = len(sel)
        if n < MIN_SD_FIXES:
            continue
        p = chi2_sf(S[sel], dof[sel])
        k = int((p < INCONSISTENT_P).sum())
        test = binomial_tail(k, n, INCONSISTENT_P)
        if test >= SD_CHECK_P:
            continue
        factor = suggested_factor(S[sel], dof[sel])
        if factor < SD_TOO_SMALL:
            continue
        source, value = key.split("|")
        what = {"given": "given", "calibration": "from the calibration"}.get(source, "given or calibrated")
        suggest = float(value) * factor
        text = (f"the bearing SD of {value}° {what} for {n} fixes looks too small: {k} of them "
                f"({100 * k / n:.1f} %) are inconsistent at p < {INCONSISTENT_P:g} where about "
                f"{100 * INCONSISTENT_P:g} % ({n * INCONSISTENT_P:.0f}) are expected (binomial p = {test:.1g}), "
                f"and their residuals suggest an SD of about {suggest:.1f}° (the median fix's misfit); their "
                f"regions are too small (or every bearing shares one offset: check the declination and the north "
                f"of the bearings). Measure the SD on beacon trials (dfkit calibrate, then --calibration), "
                f"or give the SD the bearings have (sd column or --sd {suggest:.0f})")
        reason = (f"the sheet shows its SD of {value}° to be too small (the residuals of {n} fixes suggest about "
                  f"{suggest:.1f}°, see the summary): this region is sized with {value}° and may miss")
        out.append(dict(text=text, reason=reason, fixes=sel[has_pos[sel]].tolist(), factor=factor, n=n, k=k,
                        p=test))
    return out
