"""Which bearings form one fix.

* A fix is identified by its tag **and** its label: two tags that both number their
  fixes 1, 2, 3 have different fixes.
* A label whose bearings (of one tag) are more than
  :data:`dfkit.policy.SPLIT_LABEL_GAP_H` hours apart is **split**: a sheet that
  numbers fixes per day reuses labels, and bearings of another day are another fix.
  Each part is labelled ``"<label> (<first time, UTC>)"`` and a warning names the
  split (a sheet that splits many labels, as labels restarting every day do, gets one
  warning and one note for them all, naming the first few); a bearing of such a label
  without a time is refused (it cannot be placed).
* Unlabelled bearings of one tag are grouped by time: a fix goes on while each
  bearing follows the previous one within the window (``--window``, default 20 min,
  common practice, no single source), so a walk from station to station with
  bearings 11-12 minutes apart stays one fix. Such a fix is labelled
  ``"<tag> <first time, UTC>"``.
  A labelled bearing of the tag between two unlabelled ones ends the chain: it
  belongs to a fix of its own.
* **Labels written only where a fix starts** (a label, then rows without one, as
  merged cells or a hand-written sheet leave them) are filled down
  (:func:`fill_down`): each unlabelled row takes the label of the nearest labelled
  row of its tag above it. The sheet must show the habit: some labelled row is
  followed by unlabelled rows of its tag, and no label is written on two successive
  rows of a tag (a sheet that labels every row, with a few labels forgotten, is not
  filled: its unlabelled rows are grouped by time, or refused without times, with a
  hint). A warning says so; ``fill_labels=False`` (``--no-fill-labels``) turns it off.
* A sheet with neither labels nor times makes one fix per tag.
"""

from __future__ import annotations

from datetime import datetime, timezone

import numpy as np
import pandas as pd

from dfkit.observations.cells import filled as all_of, pick
from dfkit.observations.rowlog import RowLog


def _stamp(t: float) -> str:
    return datetime.fromtimestamp(float(t), timezone.utc).strftime("%Y-%m-%dT%H:%MZ")


def fill_down(labels, tags, times, *, enabled: bool, log: RowLog, notes: list[str]):
    """Labels (and tags) written only where a fix starts, filled down (see the module docstring).

    Parameters
    ----------
    labels, tags : array_like of str
        The sheet's ``fix`` and ``tag`` cells ('' when empty).
    times : array_like of float
        Each row's time [s since 1970 UTC], NaN without one (for the wording only).
    enabled : bool
        Whether to fill (``fill_labels``); when False, a sheet showing the habit gets a warning.

    Returns
    -------
    labels, tags : ndarray of str
        Filled where the sheet shows the habit (an empty tag takes its label's tag too).
    filled : ndarray of bool
        The rows that took the label above them.
    hints : ndarray of str
        For unlabelled rows that were not filled, why (for their message), else ''.
    """
    labels = np.asarray(labels, dtype=object)
    tags = np.asarray(tags, dtype=object)
    n = len(labels)
    filled = np.zeros(n, bool)
    hints = all_of(n, "")
    lab = labels != ""
    if lab.all() or not lab.any():
        return labels, tags, filled, hints
    idx = np.arange(n, dtype=float)
    at_label = pd.Series(np.where(lab, idx, np.nan))
    head_any = at_label.ffill().to_numpy()
    head_tag = at_label.groupby(pd.Series(tags, dtype=object)).ffill().to_numpy()
    untagged = tags == ""
    head = np.where(untagged, head_any, head_tag)
    cont = ~lab & np.isfinite(head)
    if not cont.any():
        return labels, tags, filled, hints
    h = np.where(cont, head, 0).astype(np.int64)
    tag_eff = np.where(cont & untagged, tags[h], tags).astype(object)
    prev = pd.Series(np.arange(n)).groupby(pd.Series(tag_eff, dtype=object)).shift(1).to_numpy()
    has_prev = np.isfinite(prev)
    p = np.where(has_prev, prev, 0).astype(np.int64)
    twice = lab & has_prev & (labels[p] == labels)
    first = int(np.flatnonzero(cont)[0])
    start = h[first]
    run = int(np.sum(cont & (h == start)))
    where = (f"line {log.lines[start]} '{labels[start]}'" + (f" of tag '{tags[start]}'" if tags[start] else "")
             + f" has {run} {'row' if run == 1 else 'rows'} without a label below it")
    if not twice.any() and enabled:
        labels = np.where(cont, labels[h], labels).astype(object)
        tags = tag_eff
        filled = cont
        k = int(cont.sum())
        log.warn(log.mask([first]), "fix", f"fix labels are written only where a fix starts ({where}): {k} "
                                           f"unlabelled {'row' if k == 1 else 'rows'} took the label of the row above "
                                           "(--no-fill-labels reads them as unlabelled)", rejected_too=True)
        notes.append(f"fix labels filled down: {k} unlabelled {'row' if k == 1 else 'rows'} took the label of the "
                     "nearest labelled row of their tag above them (the sheet writes a label only where a fix starts)")
        return labels, tags, filled, hints
    if twice.any():
        j = int(np.flatnonzero(twice)[0])
        why = (f"the row above it, line {{line}}, is labelled '{{label}}', but labels were not filled down: this sheet "
               f"also writes a label on successive rows (lines {log.lines[p[j]]} and {log.lines[j]}, '{labels[j]}'); "
               "write the label on every row of a fix")
    else:
        why = ("the row above it, line {line}, is labelled '{label}': labels look written only where a fix starts, "
               "but --no-fill-labels is given")
    hints[cont] = [why.format(line=log.lines[h[i]], label=labels[h[i]]) for i in np.flatnonzero(cont)]
    timed = np.isfinite(np.asarray(times, float))
    if (cont & timed).any():
        i = int(np.flatnonzero(cont & timed)[0])
        log.warn(log.mask([i]), "fix", f"no fix label; {hints[i]}. The unlabelled rows were grouped by time",
                 rejected_too=True)
    return labels, tags, filled, hints


def group_fixes(labels, tags, times, *, window_s: float, split_gap_s: float, log: RowLog, notes: list[str],
                filled=None, hints=None, date_only=None):
    """Fix label of every row (after splitting and time grouping) and how it was grouped.

    ``filled`` marks rows whose label was filled down (:func:`fill_down`); ``hints`` adds a reason to the
    refusal of unlabelled rows without a time. ``date_only`` marks times that give only a date (12:00 UTC
    of it): they place a labelled bearing on its day (splits) but group no unlabelled bearing by time; in
    a sheet without labels and without times of day, the bearings of a tag on one date form one fix.

    Returns
    -------
    fix : ndarray of str
        The fix label of each row ('' for rows in no fix).
    grouped_by : ndarray of str
        'label', 'filled' (the label of the row above), 'split' (a label split by time), 'window',
        'sheet' or ''.
    """
    labels = np.asarray(labels, dtype=object)
    tags = np.asarray(tags, dtype=object)
    times = np.asarray(times, float)
    fix = labels.copy()
    unl = labels == ""
    grouped_by = pick(~unl, "label", "")
    if filled is not None:
        grouped_by[np.asarray(filled, bool)] = "filled"
    days = np.zeros(len(labels), bool) if date_only is None else np.asarray(date_only, bool)
    timed = np.isfinite(times)
    _split_labels(fix, grouped_by, labels, tags, times, timed, split_gap_s, log, notes, days)
    timed &= ~days                      # a date alone groups no unlabelled bearing by time

    if not unl.any():
        return fix, grouped_by
    usable = ~log.bad
    if not (timed & usable).any() and not (labels != "").any():
        who = unl & usable
        day = np.array([_stamp(x)[:10] if d else "" for x, d in zip(times[who], days[who])], dtype=object)
        fix[who] = np.where(tags[who] != "", tags[who], "fix") + np.where(day != "", " " + day, "")
        grouped_by[who] = "sheet"
        if who.any():
            each = " on each date" if days[who].any() else ""
            notes.append(f"no fix labels and no times of day: all bearings of each tag{each} were taken as one fix")
            log.warn(log.mask([np.flatnonzero(who)[0]]), "fix", f"no fix labels and no times of day in the sheet: "
                                                               f"all bearings of each tag{each} form one fix")
        return fix, grouped_by
    base_msg = "no fix label and no time: dfkit cannot tell which bearings belong together"
    day_msg = ("no fix label and only a date, no time of day: dfkit cannot tell which bearings of that day belong "
               "together; add the time of day or a fix label")
    hints = np.full(len(labels), "", dtype=object) if hints is None else np.asarray(hints, dtype=object)
    log.reject(unl & ~timed & usable, "fix", lambda ii: [(day_msg if days[i] else base_msg)
                                                         + (f" ({hints[i]})" if hints[i] else "") for i in ii])
    idx = np.flatnonzero(unl & timed)
    if not len(idx):
        return fix, grouped_by
    # labelled bearings of the tag take part in the time order only to end a chain that runs past them
    stops = np.flatnonzero(~unl & timed)
    every = np.concatenate([idx, stops])
    every = every[np.lexsort((every, times[every], tags[every].astype(str)))]
    stop = ~unl[every]
    t = times[every]
    g_tag = tags[every]
    new_all = np.ones(len(every), bool)
    new_all[1:] = (g_tag[1:] != g_tag[:-1]) | (np.diff(t) > window_s) | stop[:-1]
    order = every[~stop]
    new = new_all[~stop]
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
                 f"on while each bearing follows the previous one within {window_s / 60:g} min (--window) and no "
                 "labelled bearing of the tag comes between")
    return fix, grouped_by


def _split_labels(fix, grouped_by, labels, tags, times, timed, split_gap_s, log, notes, days):
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
    first_day = days[rows][part_start]
    sel = rows[in_split]
    fix[sel] = [f"{labels[i]} ({_stamp(first_t[p])[:10] if first_day[p] else _stamp(first_t[p])})"
                for i, p in zip(sel, part[in_split])]
    grouped_by[sel] = "split"
    said = []        # (who, parts, gap [h], line of the second part) per split label, in order
    for k in split_keys:
        kk = np.flatnonzero(c == k)
        r = rows[kk]
        n_parts = int(part_start[kk].sum())
        gaps = np.diff(t[kk])
        tag = tags[r[0]]
        who = f"fix '{labels[r[0]]}'" + (f" of tag '{tag}'" if tag else "")
        second = r[np.flatnonzero(brk[kk])[0]]
        said.append((who, n_parts, gaps.max() / 3600, second, labels[r[0]]))
        untimed = (labels == labels[r[0]]) & (tags == tag) & ~timed
        log.reject(untimed, "time", f"{who} has bearings on different occasions and this one has no time: "
                                    "dfkit cannot tell which of them it belongs to")
    if len(said) <= SPLITS_LISTED:
        for who, n_parts, gap_h, second, label in said:
            notes.append(f"{who} has bearings {gap_h:.1f} h apart: split into {n_parts} fixes "
                         f"(more than {split_gap_s / 3600:g} h apart is not one fix)")
            log.warn(log.mask([second]), "fix", f"{who} starts again here, {gap_h:.1f} h after its previous "
                                                f"bearing: split into {n_parts} fixes labelled '{label} (time)'",
                     rejected_too=True)
    else:   # labels reused every day: one warning and one note for them all, with the first few
        said.sort(key=lambda x: x[3])
        first = "; ".join(f"{who} at line {log.lines[second]} ({n_parts} parts)"
                          for who, n_parts, _, second, _ in said[:SPLITS_SHOWN])
        parts = sum(x[1] for x in said)
        gaps = [x[2] for x in said]
        log.warn(log.mask([said[0][3]]), "fix",
                 f"{len(said)} fix labels start again after more than {split_gap_s / 3600:g} h (labels reused on "
                 f"other days?): each was split by time, {parts} fixes in all; first {first}; and "
                 f"{len(said) - SPLITS_SHOWN} more labels", rejected_too=True)
        span = f"{min(gaps):.1f}" + (f" to {max(gaps):.1f}" if f"{max(gaps):.1f}" != f"{min(gaps):.1f}" else "")
        notes.append(f"{len(said)} fix labels have bearings {span} h apart and were split "
                     f"into {parts} fixes (more than {split_gap_s / 3600:g} h apart is not one fix)")
    notes.append("fix labels split by time are written '<label> (<first bearing, UTC>)'")


#: Split labels described one by one (up to this many); beyond, one warning and one note for them all, naming
#: the first :data:`SPLITS_SHOWN` and counting the rest.
SPLITS_LISTED, SPLITS_SHOWN = 5, 3


def pair_codes(tag, fix, mask=None) -> np.ndarray:
    """One integer per distinct (tag, label) pair, in order of first appearance (-1 where ``mask`` is False)."""
    tag = np.asarray(tag, dtype=object)
    cf, uf = pd.factorize(np.asarray(fix, dtype=object))
    keep = np.ones(len(cf), bool) if mask is None else np.asarray(mask, bool)
    if not len(tag) or (tag == tag[0]).all():
        # one tag (the common sheet has no tag column): the pairs are the labels, already numbered in order of
        # first appearance, so the tag's own pass over the rows and the pairs' second one are not needed
        if keep.all() and (not len(cf) or cf.min() >= 0):
            return cf.astype(np.int64)
        combined = cf.astype(np.int64)
    else:
        ct, _ = pd.factorize(tag)
        combined = ct.astype(np.int64) * (len(uf) + 1) + cf
    codes = np.full(len(combined), -1, np.int64)
    codes[keep], _ = pd.factorize(combined[keep])
    return codes


def fix_identities(fix, tag, bad, lines, ids=None):
    """Fix id of every row and the fix index: one fix per (tag, label), in order of first appearance.

    Rejected rows with a label still make their fix exist (so it is reported); rows
    with neither a label nor a group belong to no fix (id -1). ``ids`` from an
    earlier call on the same labels may be passed to skip recomputing them. A fix
    without rejected rows lists them as one shared empty list that refuses changes
    (:data:`NO_LINES`): a season has far more fixes than rejected rows.
    """
    fix = np.asarray(fix, dtype=object)
    tag = np.asarray(tag, dtype=object)
    if ids is None:
        ids = pair_codes(tag, fix, fix != "")
    m = int(ids.max()) + 1 if len(ids) else 0
    first = np.full(m, -1, np.int64)
    valid = np.flatnonzero(ids >= 0)
    if len(valid):
        v = ids[valid]
        # ids numbered in order of first appearance (pair_codes): a fix's first row is where its id is larger than
        # every id before it; ids numbered otherwise are sorted
        new = np.ones(len(v), bool)
        new[1:] = v[1:] > np.maximum.accumulate(v)[:-1]
        if int(new.sum()) == m and np.array_equal(v[new], np.arange(m)):
            first[:] = valid[new]
        else:
            uniq, pos = np.unique(v, return_index=True)
            first[uniq] = valid[pos]
    rejected = np.empty(m, dtype=object)
    rejected.fill(NO_LINES)
    for i in np.flatnonzero(bad & (ids >= 0)).tolist():
        k = ids[i]
        if rejected[k] is NO_LINES:
            rejected[k] = []
        rejected[k].append(int(lines[i]))
    fix_index = pd.DataFrame({"fix": fix[first] if m else [], "tag": tag[first] if m else [],
                              "rejected_lines": rejected if m else []})
    fix_index.index.name = "fix_id"
    return ids, fix_index


class _NoLines(list):
    """An empty list of rejected lines that refuses to be changed: one is shared by every fix without rejected
    rows (a list per fix would be a Python object per fix: 100,000 of them on a large sheet)."""

    __slots__ = ()

    def _refuse(self, *args, **kwargs):
        raise TypeError("this fix's list of rejected lines is shared and cannot be changed; copy it first "
                        "(list(lines))")

    append = extend = insert = remove = pop = clear = sort = reverse = _refuse
    __setitem__ = __delitem__ = __iadd__ = __imul__ = _refuse

    def __reduce__(self):
        return list, ()           # a copy is an ordinary empty list


#: The rejected lines of every fix that has none (see :class:`_NoLines`).
NO_LINES = _NoLines()
