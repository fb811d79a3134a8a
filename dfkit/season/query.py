"""Choosing fixes from a season: by tag, time, status, region size and number of bearings.

One :class:`SeasonFilter` says what to keep. It answers in SQL for the season
store (where indexes make it fast) and as a boolean mask for a fix table read
from a CSV file, with the same meaning (a test checks the two agree).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

from dfkit.locate import STATUS_MEANING, WITH_POSITION

#: Names that stand for several statuses.
STATUS_GROUPS = {
    "flagged": tuple(s for s in WITH_POSITION if s != "ok"),
    "failed": tuple(s for s in STATUS_MEANING if s not in WITH_POSITION),
    "located": tuple(WITH_POSITION),
}


def parse_statuses(text: str | None) -> tuple[str, ...] | None:
    """``'ok,shallow'`` or ``'flagged'`` -> the statuses; ``'any'`` or None -> None (no filter)."""
    if text is None:
        return None
    out: list[str] = []
    for part in (p.strip().lower() for p in str(text).split(",")):
        if not part:
            continue
        if part in ("any", "all"):
            return None
        if part in STATUS_GROUPS:
            out.extend(STATUS_GROUPS[part])
        elif part in STATUS_MEANING:
            out.append(part)
        else:
            names = ", ".join(list(STATUS_MEANING) + list(STATUS_GROUPS) + ["any"])
            raise ValueError(f"status '{part}' is not one of {names}")
    return tuple(dict.fromkeys(out))


def parse_time(text: str, *, end: bool = False, tz: str | None = None) -> pd.Timestamp:
    """A filter bound from ISO 8601 text, as a UTC time.

    A date alone (``2026-06-01``) means that whole day: as a start its first
    instant, as an end (``end=True``) the first instant of the next day. A time
    without an offset is taken in ``tz`` (default UTC). Returns, for an end, the
    first instant *not* included.
    """
    try:
        t = pd.Timestamp(str(text).strip())
    except (ValueError, TypeError):
        raise ValueError(f"'{text}' is not a date or time (write 2026-06-01 or 2026-06-01T06:30+02:00)") from None
    if t is pd.NaT:
        raise ValueError(f"'{text}' is not a date or time")
    date_only = len(str(text).strip()) <= 10
    if t.tzinfo is None:
        t = t.tz_localize(tz or "UTC")
    t = t.tz_convert("UTC")
    if end:
        t = t + (pd.Timedelta(days=1) if date_only else pd.Timedelta(milliseconds=1))
    return t


@dataclass(frozen=True)
class SeasonFilter:
    """Which fixes to keep; every field None keeps everything.

    Attributes
    ----------
    tags : tuple of str, optional
        Transmitter ids to keep.
    start : pandas.Timestamp, optional
        Keep fixes at or after this time (UTC).
    before : pandas.Timestamp, optional
        Keep fixes strictly before this time (UTC). Fixes without a time are
        dropped when either time bound is given.
    statuses : tuple of str, optional
        Fix statuses to keep (see :data:`STATUS_GROUPS` for group names).
    max_area_m2 : float, optional
        Keep fixes whose confidence region is at most this large; fixes
        without a region are dropped. [m²]
    min_bearings : int, optional
        Keep fixes that used at least this many bearings.
    import_ids : tuple of int, optional
        Keep fixes of these imports (season store only).
    """

    tags: tuple[str, ...] | None = None
    start: pd.Timestamp | None = None
    before: pd.Timestamp | None = None
    statuses: tuple[str, ...] | None = None
    max_area_m2: float | None = None
    min_bearings: int | None = None
    import_ids: tuple[int, ...] | None = None

    def __post_init__(self):
        if self.max_area_m2 is not None and not (self.max_area_m2 > 0 and math.isfinite(self.max_area_m2)):
            raise ValueError(f"max_area_m2={self.max_area_m2!r} must be a positive number of square metres")
        if self.min_bearings is not None and self.min_bearings < 0:
            raise ValueError(f"min_bearings={self.min_bearings!r} must be 0 or more")

    def where(self) -> tuple[str, list]:
        """An SQL condition on the store's ``fixes`` table and its parameters."""
        from dfkit.season.gpkg import datetime_text

        terms, params = [], []
        if self.tags is not None:
            terms.append(f"tag IN ({', '.join('?' * len(self.tags))})" if self.tags else "0")
            params += list(self.tags)
        for bound, op in ((self.start, ">="), (self.before, "<")):
            if bound is not None:
                terms.append(f"time {op} ?")
                params.append(datetime_text(pd.Series([bound]))[0])
        if self.statuses is not None:
            terms.append(f"status IN ({', '.join('?' * len(self.statuses))})" if self.statuses else "0")
            params += list(self.statuses)
        if self.max_area_m2 is not None:
            terms.append("area_m2 <= ?")
            params.append(float(self.max_area_m2))
        if self.min_bearings is not None:
            terms.append("n_used >= ?")
            params.append(int(self.min_bearings))
        if self.import_ids is not None:
            terms.append(f"import_id IN ({', '.join('?' * len(self.import_ids))})" if self.import_ids else "0")
            params += [int(i) for i in self.import_ids]
        return (" AND ".join(terms) if terms else "1"), params

    def mask(self, table: pd.DataFrame) -> np.ndarray:
        """The rows of a fix table this filter keeps (same meaning as :meth:`where`)."""
        keep = np.ones(len(table), bool)
        if self.tags is not None:
            keep &= table["tag"].astype(str).isin(self.tags).to_numpy()
        if self.start is not None or self.before is not None:
            t = pd.to_datetime(table["time"], utc=True)
            has = t.notna().to_numpy()
            keep &= has
            if self.start is not None:
                keep &= np.where(has, (t >= self.start).to_numpy(), False)
            if self.before is not None:
                keep &= np.where(has, (t < self.before).to_numpy(), False)
        if self.statuses is not None:
            keep &= table["status"].astype(str).isin(self.statuses).to_numpy()
        if self.max_area_m2 is not None:
            area = pd.to_numeric(table["area_m2"], errors="coerce").to_numpy(float)
            with np.errstate(invalid="ignore"):
                keep &= area <= self.max_area_m2
        if self.min_bearings is not None:
            n = pd.to_numeric(table["n_used"], errors="coerce").to_numpy(float)
            with np.errstate(invalid="ignore"):
                keep &= n >= self.min_bearings
        if self.import_ids is not None:
            if "import_id" in table:
                keep &= table["import_id"].isin(self.import_ids).to_numpy()
            else:
                keep &= False
        return keep

    def describe(self) -> str:
        """The filter in words, for reports."""
        parts = []
        if self.tags is not None:
            parts.append("tag " + ", ".join(self.tags))
        if self.start is not None:
            parts.append(f"from {self.start:%Y-%m-%d %H:%M} UTC")
        if self.before is not None:
            parts.append(f"before {self.before:%Y-%m-%d %H:%M} UTC")
        if self.statuses is not None:
            parts.append("status " + ", ".join(self.statuses))
        if self.max_area_m2 is not None:
            parts.append(f"region at most {self.max_area_m2:g} m²")
        if self.min_bearings is not None:
            parts.append(f"at least {self.min_bearings} bearing{'' if self.min_bearings == 1 else 's'}")
        if self.import_ids is not None:
            parts.append("import " + ", ".join(str(i) for i in self.import_ids))
        return "; ".join(parts) if parts else "all fixes"
