"""What makes two bearings the same bearing: the identity and content keys of the season store.

A season is built from many sheets, and the same rows often come in twice (a
cumulative export, a sheet imported again after a correction). The store tells
them apart with keys per bearing, all independent of the file's name, its row
order and its line numbers:

**Identity** (``row_key``): *which* observation a row is.

* With a time: the tag, the time (UTC, to the microsecond), the observer, the
  station position (to 1e-6°, about 0.1 m) and the fix label as the sheet gave
  it (a label dfkit made from a time window is left out; a label split by time
  counts as written, without its ``(time)`` suffix). Two crews taking bearings
  on one tag in the same minute from two places are two observations.
* Without a time: the tag, the fix label, the observer and the station position.
* Rows of one sheet with the same identity are numbered in the order they
  appear (1st, 2nd ...), so a bearing read twice is kept twice and importing the
  sheet again still matches row for row.

**Content** (``content_key``): *what* the row says. The fix label, time,
station position (1e-7°), true bearing (1e-6°), the bearing as written with
its unit and north, the SD and where it came from, declination and convergence,
where the position came from, how the row was grouped, and every other non-empty
column of the sheet (``name=value``). Rounding makes the key immune to the
last-bit noise of coordinate conversions; a change of a millimetre is not a
change. Same identity, other content: a changed bearing (a corrected reading or SD).

**Moment** (``moment_key``, timed rows only): the tag, time and observer, without
the place or label. A new bearing whose moment is already stored was taken at the
same instant as a stored one but elsewhere or under another label: a second crew,
or a corrected station position. It is stored, and the import says so.

All are BLAKE2b digests (RFC 7693) of a text made of the fields, 16 bytes (stored as BLOBs).
The scheme has a name (:data:`KEY_SCHEME`), stored in the file; a store made with
an earlier scheme is migrated when opened (:mod:`dfkit.season.store`).
"""

from __future__ import annotations

import hashlib
import re
from typing import NamedTuple

import numpy as np
import pandas as pd

#: Name of the key scheme (stored in each season file).
KEY_SCHEME = "dfkit-bearing-keys-2"
#: Key schemes of earlier stores, which :mod:`dfkit.season.store` migrates.
OLD_KEY_SCHEMES = ("dfkit-bearing-keys-1",)

#: Normalized columns that describe the run, not the observation: never part of the content.
_RUN_COLUMNS = {"line", "fix_id", "residual_deg", "weight", "range_m", "fix_status",
                # worked out from the positions as read, and from the fit (dfkit.locate.rounding)
                "position_step_east_m", "position_step_north_m", "rounding_sd_deg"}
#: Content fields with a fixed meaning, and their rounding (power of ten) for numbers.
_NUMERIC = {"lat": 7, "lon": 7, "true_bearing": 6, "sd": 6, "declination": 6, "convergence": 6, "bearing": 6,
            "declination_sd": 6}
_TEXT = ["fix", "tag", "sd_source", "unit", "north", "position_from", "grouped_by"]


def _text(values) -> pd.Series:
    s = pd.Series(values, dtype=object).reset_index(drop=True)
    return s.where(s.notna(), "").astype(str)


def _digest(texts, prefix=None) -> np.ndarray:
    texts = texts.tolist() if hasattr(texts, "tolist") else texts
    if prefix is None:
        return np.array([hashlib.blake2b(t.encode("utf-8"), digest_size=16).digest() for t in texts], dtype=object)
    return np.array([hashlib.blake2b(p + t.encode("utf-8"), digest_size=16).digest()
                     for p, t in zip(prefix, texts)], dtype=object)


def _join(parts: list[pd.Series]) -> pd.Series:
    first, rest = parts[0], parts[1:]
    return first.str.cat(rest, sep="\x1f") if rest else first


def _numeric_bytes(table: pd.DataFrame, time_us: np.ndarray) -> list[bytes]:
    """The time and the numeric content fields of each row, rounded to integers, as bytes."""
    n = len(table)
    missing = np.iinfo(np.int64).min
    rec = np.full((n, len(_NUMERIC) + 1), missing, np.int64)
    rec[:, 0] = time_us
    for k, (c, d) in enumerate(_NUMERIC.items(), start=1):
        if c in table:
            arr = pd.to_numeric(table[c], errors="coerce").to_numpy(float)
            finite = np.isfinite(arr)
            rec[finite, k] = np.round(arr[finite] * 10.0**d).astype(np.int64)
    width = rec.shape[1] * 8
    buf = rec.astype("<i8").tobytes()
    return [buf[i * width:(i + 1) * width] for i in range(n)]


class BearingKeys(NamedTuple):
    """Keys of each bearing (16-byte ``bytes`` each; ``moment_key`` is None for rows without a time)."""

    row_key: np.ndarray
    content_key: np.ndarray
    moment_key: np.ndarray


#: The suffix :mod:`dfkit.observations.grouping` gives a label split by time: ``"S (2026-06-01T06:00Z)"``.
_SPLIT_SUFFIX = re.compile(r" \(\d{4}-\d\d-\d\dT\d\d:\d\dZ\)$")


def _given_labels(table: pd.DataFrame, n: int) -> pd.Series:
    """The fix label as the sheet gave it: '' where dfkit made it (a time window, one fix per sheet)."""
    fix = _text(table["fix"]) if "fix" in table else pd.Series([""] * n, dtype=object)
    how = _text(table["grouped_by"]) if "grouped_by" in table else pd.Series(["label"] * n, dtype=object)
    split = how == "split"
    if split.any():
        fix = fix.copy()
        fix[split] = fix[split].str.replace(_SPLIT_SUFFIX, "", regex=True)
    return fix.where(how.isin(["label", "split"]), "")


def _time_us(table: pd.DataFrame) -> tuple[np.ndarray, np.ndarray]:
    t = pd.to_datetime(table["time"], utc=True)
    us = t.dt.tz_localize(None).to_numpy(dtype="datetime64[us]")
    timed = ~np.isnat(us)
    return np.where(timed, us.astype(np.int64), np.iinfo(np.int64).min), timed


def _int_rows(columns) -> list[bytes]:
    """Integer columns as one little-endian byte string per row."""
    rec = np.ascontiguousarray(np.stack(columns, axis=1).astype("<i8"))
    width = rec.shape[1] * 8
    buf = rec.tobytes()
    return [buf[i * width:(i + 1) * width] for i in range(rec.shape[0])]


def _scaled(values, decimals: int) -> np.ndarray:
    arr = np.asarray(values, float)
    finite = np.isfinite(arr)
    return np.where(finite, np.round(np.where(finite, arr, 0.0) * 10.0**decimals), np.iinfo(np.int64).min
                    ).astype(np.int64)


def identity_keys(table: pd.DataFrame, group=None) -> tuple[np.ndarray, np.ndarray]:
    """Identity and moment keys of every bearing (see the module's description).

    Parameters
    ----------
    table : pandas.DataFrame
        Bearing table with ``tag``, ``time``, ``lat``, ``lon``, ``fix`` and, where the sheet has them,
        ``observer`` and ``grouped_by``.
    group : array_like, optional
        Rows are numbered among the rows of their group with the same identity (default: one group, the
        sheet); the store's migration numbers the rows of each import.

    Returns
    -------
    row_key, moment_key : ndarray of bytes
        16 bytes each; ``moment_key`` is None for rows without a time.
    """
    n = len(table)
    if n == 0:
        return np.zeros(0, dtype=object), np.zeros(0, dtype=object)
    tag = _text(table["tag"]).tolist()
    time_us, timed = _time_us(table)
    observer = _text(table["observer"]).tolist() if "observer" in table else [""] * n
    label = np.where(timed, _given_labels(table, n), _text(table["fix"])).tolist()
    # identity: (timed?, time, station to 1e-6 deg) as integers, then tag, observer and label as text
    ints = _int_rows([timed.astype(np.int64), time_us, _scaled(table["lat"], 6), _scaled(table["lon"], 6)])
    base = _digest([f"{a}\x1f{b}\x1f{c}" for a, b, c in zip(tag, observer, label)], ints)
    # a bearing read twice in one sheet (or import) is numbered: 0 keeps the base key, k > 0 hashes it with k
    groups = pd.Series(base) if group is None else pd.Series(list(zip(np.asarray(group).tolist(), base)))
    ordinal = groups.groupby(groups, sort=False).cumcount().to_numpy()
    row_key = base.copy()
    for i in np.flatnonzero(ordinal):
        row_key[i] = hashlib.blake2b(base[i] + b"\x1f%d" % ordinal[i], digest_size=16).digest()
    moment = _digest([f"m\x1f{a}\x1f{b}" for a, b in zip(tag, observer)], _int_rows([time_us]))
    moment_key = np.where(timed, moment, None)
    return row_key, moment_key


def bearing_keys(table: pd.DataFrame) -> BearingKeys:
    """Identity, content and moment keys of every bearing of a normalized bearing table.

    Parameters
    ----------
    table : pandas.DataFrame
        ``Bearings.table`` (or ``Fixes.bearings``), in the sheet's row order.

    Returns
    -------
    BearingKeys
        ``row_key``, ``content_key`` (16 bytes each, one per row) and ``moment_key`` (None without a time).
    """
    n = len(table)
    if n == 0:
        empty = np.zeros(0, dtype=object)
        return BearingKeys(empty, empty.copy(), empty.copy())
    row_key, moment_key = identity_keys(table)
    time_us, _ = _time_us(table)

    parts = [_text(table[c]) if c in table else pd.Series([""] * n, dtype=object) for c in _TEXT]
    known = set(_NUMERIC) | set(_TEXT) | _RUN_COLUMNS | {"time"}
    for c in sorted(col for col in table.columns if col not in known):
        v = _text(table[c])
        parts.append(pd.Series(np.where(v != "", f"{c}=" + v, ""), dtype=object))
    content_key = _digest(_join(parts), _numeric_bytes(table, time_us))
    return BearingKeys(row_key, content_key, moment_key)


def file_hash(path) -> str:
    """SHA-256 of a file's bytes (hex), to recognise a file imported before."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()
