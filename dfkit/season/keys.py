"""What makes two bearings the same bearing: the identity and content keys of the season store.

A season is built from many sheets, and the same rows often come in twice (a
cumulative export, a sheet imported again after a correction). The store tells
them apart with two keys per bearing, both independent of the file's name, its
row order and its line numbers:

**Identity** (``row_key``): *which* observation a row is.

* With a time: the tag, the time (UTC, to the microsecond) and the observer.
  One observer does not read two bearings on one tag in the same second.
* Without a time: the tag, the fix label and the station position (to 1e-6°,
  about 0.1 m).
* Rows of one sheet with the same identity are numbered in the order they
  appear (1st, 2nd ...), so a bearing read twice is kept twice and importing the
  sheet again still matches row for row.

**Content** (``content_key``): *what* the row says. The fix label, time,
station position (1e-7°), true bearing (1e-6°), the bearing as written with
its unit and north, the SD and where it came from, declination and convergence,
where the position came from, how the row was grouped, and every other non-empty
column of the sheet (``name=value``). Rounding makes the key immune to the
last-bit noise of coordinate conversions; a change of a millimetre is not a
change.

Both are BLAKE2b digests (RFC 7693) of a text made of the fields, 16 bytes (stored as BLOBs).
The scheme has a name (:data:`KEY_SCHEME`), stored in the file: a store made
with another scheme is refused rather than silently treated as all new.
"""

from __future__ import annotations

import hashlib

import numpy as np
import pandas as pd

#: Name of the key scheme (stored in each season file).
KEY_SCHEME = "dfkit-bearing-keys-1"

#: Normalized columns that describe the run, not the observation: never part of the content.
_RUN_COLUMNS = {"line", "fix_id", "residual_deg", "weight", "range_m", "fix_status"}
#: Content fields with a fixed meaning, and their rounding (power of ten) for numbers.
_NUMERIC = {"lat": 7, "lon": 7, "true_bearing": 6, "sd": 6, "declination": 6, "convergence": 6, "bearing": 6,
            "declination_sd": 6}
_TEXT = ["fix", "tag", "sd_source", "unit", "north", "position_from", "grouped_by"]


def _num_text(values, decimals: int) -> pd.Series:
    arr = np.asarray(values, float)
    finite = np.isfinite(arr)
    scaled = np.where(finite, np.round(arr * 10.0**decimals), 0).astype(np.int64).astype(str)
    return pd.Series(np.where(finite, scaled, ""), dtype=object)


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


def bearing_keys(table: pd.DataFrame) -> tuple[np.ndarray, np.ndarray]:
    """Identity and content keys of every bearing of a normalized bearing table.

    Parameters
    ----------
    table : pandas.DataFrame
        ``Bearings.table`` (or ``Fixes.bearings``), in the sheet's row order.

    Returns
    -------
    row_key, content_key : ndarray of bytes
        16 bytes each, one per row.
    """
    n = len(table)
    if n == 0:
        return np.zeros(0, dtype=object), np.zeros(0, dtype=object)
    tag = _text(table["tag"])
    t = pd.to_datetime(table["time"], utc=True)
    us = t.dt.tz_localize(None).to_numpy(dtype="datetime64[us]")
    timed = ~np.isnat(us)
    time_us = np.where(timed, us.astype(np.int64), np.iinfo(np.int64).min)
    observer = _text(table["observer"]) if "observer" in table else pd.Series([""] * n, dtype=object)
    base = _join([pd.Series(np.where(timed, "t", "p"), dtype=object), tag,
                  pd.Series(time_us.astype(str), dtype=object), observer])
    if not timed.all():
        u = ~timed
        place = _join([pd.Series(["p"] * int(u.sum()), dtype=object), tag[u].reset_index(drop=True),
                       _text(table["fix"])[u].reset_index(drop=True),
                       _num_text(table["lat"].to_numpy(float)[u], 6), _num_text(table["lon"].to_numpy(float)[u], 6)])
        base = base.copy()
        base[u] = place.to_numpy()
    ordinal = base.groupby(base, sort=False).cumcount().astype(str)
    row_key = _digest(base.str.cat(ordinal, sep="\x1f"))

    parts = [_text(table[c]) if c in table else pd.Series([""] * n, dtype=object) for c in _TEXT]
    known = set(_NUMERIC) | set(_TEXT) | _RUN_COLUMNS | {"time"}
    for c in sorted(col for col in table.columns if col not in known):
        v = _text(table[c])
        parts.append(pd.Series(np.where(v != "", f"{c}=" + v, ""), dtype=object))
    content_key = _digest(_join(parts), _numeric_bytes(table, time_us))
    return row_key, content_key


def file_hash(path) -> str:
    """SHA-256 of a file's bytes (hex), to recognise a file imported before."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()
