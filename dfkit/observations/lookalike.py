"""Fix labels and tags written two ways: said with line numbers, never merged.

``F1``, ``f1`` and ``F01`` are three fixes to dfkit, and ``150.412``, ``150.4120`` and
``150.412 MHz`` three tags: a label may mean something by its case, and dfkit cannot know
that a tag column holds frequencies. So spellings that read alike are kept apart, and each
later spelling gets a warning on its first line naming the first spelling it resembles:

* labels (and tags) that differ only in letter case, spaces or leading zeros of a number;
* tags that read as the same frequency: a decimal number, optionally followed by ``MHz``
  (``150.412``, ``150.4120``, ``150.412 MHz``).
"""

from __future__ import annotations

import re
from collections import Counter

import numpy as np
import pandas as pd

from dfkit.observations.rowlog import RowLog

_FREQ = re.compile(r"^\s*(\d+(?:\.\d+)?)\s*(?:mhz)?\s*$", re.IGNORECASE)
# leading zeros of a number: a 0 not after a digit or a decimal point, and the zeros after it, before a digit (the
# literal first lets the scan jump from 0 to 0: a sheet can have 100,000 labels)
_ZEROS = re.compile(r"0(?<![\d.]0)0*(?=\d)")
_SPACE = re.compile(r"\s+")
_SEP = "\x00"


def _label_key(text: str) -> str:
    return _ZEROS.sub("", _SPACE.sub(" ", text.strip()).casefold())


def _tag_key(text: str) -> str:
    m = _FREQ.match(text)
    return f"{float(m.group(1))!r} MHz" if m else _label_key(text)


def _label_keys(values: list) -> list:
    """:func:`_label_key` of many values at once: each rule in one pass over the values joined."""
    text = _SEP.join(values)
    if text.count(_SEP) != len(values) - 1 or "\n" in text:      # a label with a NUL or a line break: one by one
        return [_label_key(v) for v in values]
    if "  " in text or "\t" in text or " " + _SEP in text or _SEP + " " in text:
        text = _SEP.join(_SPACE.sub(" ", v.strip()) for v in values)
    return _ZEROS.sub("", text.casefold()).split(_SEP)


def look_alike(fix_index: pd.DataFrame, ids, log: RowLog) -> None:
    """Warn about tags, and fix labels within one tag, spelled differently but read alike.

    ``fix_index`` holds the ``fix`` and ``tag`` of every fix as written, and ``ids`` the fix of every row
    (-1 for none; :func:`dfkit.observations.grouping.fix_identities`). One warning per later spelling, on its
    first line, in column ``fix`` or ``tag``.
    """
    if len(fix_index) < 2:
        return
    fixes = fix_index["fix"].astype(str).tolist()
    tags = fix_index["tag"].astype(str).tolist()
    firsts = None

    def first_row(k):
        nonlocal firsts
        if firsts is None:
            ids_ = np.asarray(ids)
            ok = np.flatnonzero(ids_ >= 0)
            firsts = np.full(len(fix_index), -1, np.int64)
            firsts[ids_[ok][::-1]] = ok[::-1]
        return int(firsts[k])

    spelled = [t for t in fix_index["tag"].astype(str).unique().tolist() if t]
    if len(spelled) > 1:
        keys = [_tag_key(t) for t in spelled]
        if len(set(keys)) < len(keys):
            where = {t: k for k, t in reversed(list(enumerate(tags)))}       # a tag's first fix
            _say(spelled, keys, ["" for _ in spelled], lambda t: first_row(where[t]), "tag", log, True)
    keys = _label_keys(fixes)
    # the common case: no two spellings read alike, in any tag (with one tag, or none, each label is one fix)
    one_tag = len(spelled) <= 1 and (not spelled or "" not in tags)
    if len(set(keys)) == (len(fixes) if one_tag else len(set(fixes))):
        return
    per_key = Counter(dict(zip(fixes, keys)).values())       # distinct spellings of each key
    where = {}
    for k in [k for k, key in enumerate(keys) if per_key[key] > 1]:
        where.setdefault((tags[k], fixes[k]), k)
    pairs = list(where)
    pkeys = [keys[where[p]] for p in pairs]
    _say([f for _, f in pairs], pkeys, [t for t, _ in pairs], lambda f_t: first_row(where[(f_t[1], f_t[0])]),
         "fix", log, False, tags=[t for t, _ in pairs])


def _say(spellings, keys, within, first_of, column, log, frequency, tags=None):
    groups: dict = {}
    for n, (s, k, w) in enumerate(zip(spellings, keys, within)):
        groups.setdefault((w, k), []).append(n)
    for members in groups.values():
        if len(members) < 2:
            continue
        a = spellings[members[0]]
        ia = first_of(a if tags is None else (a, tags[members[0]]))
        for n in members[1:]:
            b = spellings[n]
            i = first_of(b if tags is None else (b, tags[n]))
            log.warn(log.mask([i]), column,
                     f"{column} '{b}' (line {log.lines[i]}) {_how(a, b, frequency)} '{a}' (line {log.lines[ia]}): "
                     f"kept apart as another {column}; if they are one, write them alike", rejected_too=True)


def _how(a: str, b: str, frequency: bool) -> str:
    """How spelling ``b`` differs from ``a`` (both read alike)."""
    if frequency and _FREQ.match(a) and _FREQ.match(b):
        return "reads as the same frequency as"
    if a.strip().casefold() == b.strip().casefold():
        return "differs only in letter case from"
    if _ZEROS.sub("", a.strip()) == _ZEROS.sub("", b.strip()):
        return "differs only in leading zeros from"
    return "differs only in letter case, spaces or leading zeros from"
