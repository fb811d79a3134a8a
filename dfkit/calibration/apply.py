"""Using a calibration on field bearings: bias removed, the group's SD taken as known."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pandas as pd

from dfkit.calibration.groups import Calibration, _group_label, _key
from dfkit.conventions import wrap360
from dfkit.observations import Bearings


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
