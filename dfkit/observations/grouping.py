"""Which bearings form one fix.

* A fix is identified by its tag **and** its label: two tags that both number their
  fixes 1, 2, 3 have different fixes.
* A label whose bearings (of one tag) are more than
  :data:`dfkit.policy.SPLIT_LABEL_GAP_H` hours apart is **split**: a sheet that
  numbers fixes per day reuses labels, and bearings of another day are another fix.
  Each part is labelled ``"<label> (<first time, UTC>)"`` and a warning names the
  split; a bearing of such a label without a time is refused (it cannot be placed).
* Unlabelled bearings of one tag are grouped by time: a fix goes on while each
  bearing follows the previous one within the window (``--window``, default 20 min,
  common practice, no single source), so a walk from station to station with
  bearings 11-12 minutes apart stays one fix. Such a fix is labelled
  ``"<tag> <first time, UTC>"``.
* A sheet with neither labels nor times makes one fix per tag.
"""

from __future__ import annotations

from datetime import datetime, timezone

import numpy as np
import pandas as pd

from dfkit.observations.rowlog import RowLog


def _stamp(t: float) -> str:
    return datetime.fromtimestamp(float(t), timezone.utc).strftime("%Y-%m-%dT%H:%MZ")


def group_fixes(labels, tags, times, *, window_s: float, split_gap_s: float, log: RowLog, notes: list[str]):
    """Fix label of every row (after splitting and time grouping) and how it was grouped.

    Returns
    -------
    fix : ndarray of str
        The fix label of each row ('' for rows in no fix).
    grouped_by : ndarray of str
        'label', 'split' (a label split by time), 'window', 'sheet' or ''.
    """
    labels = np.asarray(labels, dtype=object)
    tags = np.asarray(tags, dtype=object)
    times = np.asarray(times, float)
    fix = labels.copy()
    grouped_by = np.where(labels != "", "label", "").astype(object)
    timed = np.isfinite(times)
    _split_labels(fix, grouped_by, labels, tags, times, timed, split_gap_s, log, notes)

    unl = labels == ""
    if not unl.any():
        return fix, grouped_by
    usable = ~log.bad
    if not (timed & usable).any() and not (labels != "").any():
        who = unl & usable
        fix[who] = np.where(tags[who] != "", tags[who], "fix")
        grouped_by[who] = "sheet"
        if who.any():
            notes.append("no fix labels and no times: all bearings of each tag were taken as one fix")
            log.warn(log.mask([np.flatnonzero(who)[0]]), "fix",
                     "no fix labels and no times in the sheet: all bearings of each tag form one fix")
        return fix, grouped_by
    log.reject(unl & ~timed & usable, "fix", "no fix label and no time: dfkit cannot tell which bearings belong together")
    idx = np.flatnonzero(unl & timed)
    if not len(idx):
        return fix, grouped_by
    order = idx[np.lexsort((times[idx], tags[idx].astype(str)))]
    t = times[order]
    g_tag = tags[order]
    new = np.ones(len(order), bool)
    new[1:] = (g_tag[1:] != g_tag[:-1]) | (np.diff(t) > window_s)
    gid = np.cumsum(new) - 1
    starts = order[new]
    used = set(labels[labels != ""].tolist()) | set(fix[fix != ""].tolist())
    names = []
    for i in starts:
        base = f"{tags[i] or 'untagged'} {_stamp(times[i])}"
        label, k = base, 2
        while label in used:
            label, k = f"{base} #{k}", k + 1
        used.add(label)
        names.append(label)
    fix[order] = np.asarray(names, dtype=object)[gid]
    grouped_by[order] = "window"
    ng = len(starts)
    notes.append(f"{len(idx)} unlabelled bearings grouped into {ng} {'fix' if ng == 1 else 'fixes'} by tag: a fix goes "
                 f"on while each bearing follows the previous one within {window_s / 60:g} min (--window)")
    return fix, grouped_by


def _split_labels(fix, grouped_by, labels, tags, times, timed, split_gap_s, log, notes):
    lab = np.flatnonzero((labels != "") & timed)
    if len(lab) < 2:
        return
    codes = pair_codes(tags[lab], labels[lab])
    order = np.lexsort((times[lab], codes))
    rows = lab[order]
    c = codes[order]
    t = times[rows]
    brk = np.zeros(len(rows), bool)
    brk[1:] = (c[1:] == c[:-1]) & (np.diff(t) > split_gap_s)
    if not brk.any():
        return
    split_keys = np.unique(c[brk])
    in_split = np.isin(c, split_keys)
    part_start = np.ones(len(rows), bool)
    part_start[1:] = (c[1:] != c[:-1]) | brk[1:]
    part = np.cumsum(part_start) - 1
    first_t = t[part_start]
    sel = rows[in_split]
    fix[sel] = [f"{labels[i]} ({_stamp(first_t[p])})" for i, p in zip(sel, part[in_split])]
    grouped_by[sel] = "split"
    for k in split_keys:
        kk = np.flatnonzero(c == k)
        r = rows[kk]
        n_parts = int(part_start[kk].sum())
        gaps = np.diff(t[kk])
        tag = tags[r[0]]
        who = f"fix '{labels[r[0]]}'" + (f" of tag '{tag}'" if tag else "")
        notes.append(f"{who} has bearings {gaps.max() / 3600:.1f} h apart: split into {n_parts} fixes "
                     f"(more than {split_gap_s / 3600:g} h apart is not one fix)")
        second = r[np.flatnonzero(brk[kk])[0]]
        log.warn(log.mask([second]), "fix", f"{who} starts again here, {gaps.max() / 3600:.1f} h after its previous "
                                            f"bearing: split into {n_parts} fixes labelled '{labels[r[0]]} (time)'",
                 rejected_too=True)
        untimed = (labels == labels[r[0]]) & (tags == tag) & ~timed
        log.reject(untimed, "time", f"{who} has bearings on different occasions and this one has no time: "
                                    "dfkit cannot tell which of them it belongs to")
    notes.append("fix labels split by time are written '<label> (<first bearing, UTC>)'")


def pair_codes(tag, fix, mask=None) -> np.ndarray:
    """One integer per distinct (tag, label) pair, in order of first appearance (-1 where ``mask`` is False)."""
    ct, _ = pd.factorize(np.asarray(tag, dtype=object))
    cf, uf = pd.factorize(np.asarray(fix, dtype=object))
    combined = ct.astype(np.int64) * (len(uf) + 1) + cf
    keep = np.ones(len(combined), bool) if mask is None else np.asarray(mask, bool)
    codes = np.full(len(combined), -1, np.int64)
    codes[keep], _ = pd.factorize(combined[keep])
    return codes


def fix_identities(fix, tag, bad, lines, ids=None):
    """Fix id of every row and the fix index: one fix per (tag, label), in order of first appearance.

    Rejected rows with a label still make their fix exist (so it is reported); rows
    with neither a label nor a group belong to no fix (id -1). ``ids`` from an
    earlier call on the same labels may be passed to skip recomputing them.
    """
    fix = np.asarray(fix, dtype=object)
    tag = np.asarray(tag, dtype=object)
    if ids is None:
        ids = pair_codes(tag, fix, fix != "")
    m = int(ids.max()) + 1 if len(ids) else 0
    first = np.full(m, -1, np.int64)
    valid = np.flatnonzero(ids >= 0)
    if len(valid):
        uniq, pos = np.unique(ids[valid], return_index=True)
        first[uniq] = valid[pos]
    rejected = [[] for _ in range(m)]
    for i in np.flatnonzero(bad & (ids >= 0)):
        rejected[ids[i]].append(int(lines[i]))
    fix_index = pd.DataFrame({"fix": fix[first] if m else [], "tag": tag[first] if m else [],
                              "rejected_lines": rejected})
    fix_index.index.name = "fix_id"
    return ids, fix_index
