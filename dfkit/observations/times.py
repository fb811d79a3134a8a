"""Time cells to UTC instants, as people write them.

Accepted (documented in the README, "The bearing sheet"):

* ISO 8601 (ISO 8601-1:2019; RFC 3339 profile): ``2026-05-03T06:12:00+02:00``,
  ``2026-05-03 06:12Z``, ``20260503T061200Z``, with or without seconds and
  fractions. Parsed in C for whole columns.
* Numeric dates with the year last: ``03.10.2026 16:05``, ``10/03/2026 4:05 PM``,
  ``03-10-2026 16:05:30``. Day-first or month-first is decided for the whole column
  only when the column itself shows it (a day above 12 somewhere), or by
  ``date_format='dmy'|'mdy'`` (``--date-format``); otherwise such a row is refused
  with a message showing both readings. A date whose two numbers are equal
  (05.05.2026) needs no decision.
* Year first with ``/`` or ``.`` (``2026/05/03 06:12``), and English month names
  (``3 May 2026 06:12``, ``May 3, 2026 6:12 PM``, ``03-May-2026``).
* Any form by an explicit ``strptime`` pattern (``date_format='%d.%m.%Y %H:%M'``).
* A separate ``date`` column with a time of day in ``time`` (``06:12``).
* Spreadsheet date cells arrive as ISO text without an offset.
* **A date alone** (``2026-05-03``, ``03.05.2026``, ``3 May 2026``, or a ``date``
  column whose ``time`` is empty) is a coarse time: the day, taken as 12:00 UTC of
  that date (within the same date in every time zone from UTC-12 to UTC+11), with no
  time zone needed. It places a labelled bearing on its day (which fix of a label used
  on several days, the declination of the magnetic model, which changes by about a
  tenth of a degree a year) but cannot group unlabelled bearings or look a position up
  on a GPS track (:attr:`Times.date_only` marks such rows).

A time without an offset is local time in ``tz`` (an IANA name); without ``tz`` it
is refused, never taken as UTC. A local time that does not exist (clocks jumped
forward) is refused; one that occurs twice (clocks went back) is refused unless
``repeated_hour='earlier'|'later'`` says which. Years outside
:data:`dfkit.policy.PLAUSIBLE_YEARS` are refused. Every refusal is per row: one bad
time never makes the sheet unreadable.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from datetime import datetime, timedelta, timezone

import numpy as np
import pandas as pd

from dfkit.observations.cells import _Refused, filled, per_value
from dfkit.policy import PLAUSIBLE_YEARS

#: Keywords of ``date_format`` (``--date-format``).
DATE_ORDERS = ("dmy", "mdy", "ymd")
#: Values of ``repeated_hour`` (``--repeated-hour``).
REPEATED_HOUR = ("earlier", "later")

_ISO_OFFSET = r"^\d{4}-\d{2}-\d{2}[T ]\d{2}:\d{2}(?::\d{2}(?:\.\d+)?)?(?:Z|[+-]\d{2}(?::?\d{2})?)$"
_ISO_NAIVE = r"^\d{4}-\d{2}-\d{2}[T ]\d{2}:\d{2}(?::\d{2}(?:\.\d+)?)?$"
_TIME_ONLY = re.compile(r"^\d{1,2}:\d{2}(?::\d{2}(?:[.,]\d+)?)?(?:\s*[AaPp]\.?[Mm]\.?)?"
                        r"(?:\s*(?:Z|UTC|GMT|[+-]\d{2}(?::?\d{2})?))?$")
_DATE_ONLY_MIDNIGHT = re.compile(r"^(\d{4}-\d{2}-\d{2})[T ]00:00(?::00)?$")

_MONTHS = {m: i + 1 for i, m in enumerate(["jan", "feb", "mar", "apr", "may", "jun", "jul", "aug", "sep", "oct",
                                           "nov", "dec"])}
_MONTHS.update({"sept": 9, "june": 6, "july": 7, "march": 3, "april": 4})
_NUM_DATE = re.compile(r"^(\d{1,4})([-/.])(\d{1,2})\2(\d{1,4})\.?(?=\s|T|,|$)")
_NAME_DATE_DMY = re.compile(r"^(\d{1,2})[\s\-.]*([A-Za-z]{3,9})\.?[\s\-,.]*(\d{4})(?=\s|T|,|$)")
_NAME_DATE_MDY = re.compile(r"^([A-Za-z]{3,9})\.?\s+(\d{1,2})(?:st|nd|rd|th)?,?\s+(\d{4})(?=\s|T|,|$)")
_CLOCK = re.compile(r"^[\sT,]*(\d{1,2}):(\d{2})(?::(\d{2})(?:[.,](\d+))?)?\s*([AaPp])?\.?(?:[Mm]\.?)?"
                    r"\s*(Z|UTC|GMT|(?:UTC|GMT)?\s*[+-]\d{1,2}(?::?\d{2})?)?\s*$")


@dataclass
class Times(_Refused):
    """Parsed time cells: ``seconds`` since 1970-01-01 UTC (NaN where empty or refused),
    ``empty``, ``error`` (a message per refused cell, else ''), ``notes`` (what was
    decided for the whole column, e.g. day-first dates) and ``date_only`` (cells that give
    a date and no time of day, read as 12:00 UTC of that date)."""

    seconds: np.ndarray
    empty: np.ndarray
    error: np.ndarray
    notes: list[str] = field(default_factory=list)
    date_only: np.ndarray | None = None
    known_bad: np.ndarray | None = field(default=None, repr=False, compare=False)   # ``bad``, when already known


def parse_times(cells, *, tz: str | None = None, date_format: str | None = None,
                repeated_hour: str | None = None, dates=None) -> Times:
    """Time cells (and an optional date column) to UTC seconds; see the module docstring.

    Parameters
    ----------
    cells : array_like of str
        The ``time`` column.
    tz : str, optional
        IANA time zone of times written without an offset.
    date_format : str, optional
        'dmy', 'mdy', 'ymd', or a ``strptime`` pattern.
    repeated_hour : {'earlier', 'later'}, optional
        Which instant a local time that occurs twice (clocks going back) means.
    dates : array_like of str, optional
        A separate ``date`` column; combined with times of day.
    """
    text = np.asarray(cells, dtype=object)
    n = len(text)
    error = filled(n, "")
    empty = text == ""
    both = None
    if dates is not None:
        dates = np.asarray(dates, dtype=object)
        text, error = _combine_dates(text, dates)
        # a time cell with its own date beside a date cell: the two must agree (checked once both are read)
        both = (error == "") & (dates != "") & (text != "") & (text == np.asarray(cells, dtype=object))
        fine = error == ""
        empty = (text == "") & fine
        todo = ~empty & fine
    else:                   # no error yet: no cell to compare with ''
        todo = ~empty
    maybe_error = dates is not None        # whether any error may have been written (else none is compared)
    out = np.full(n, np.nan)
    zone = _zone(tz)
    pattern = date_format if date_format and "%" in date_format else None
    if todo.any() and pattern is None:
        s = pd.Series(text[todo], dtype=object)
        idx = np.flatnonzero(todo)
        with_offset = s.str.match(_ISO_OFFSET).to_numpy(dtype=bool)
        if with_offset.any():
            t = pd.to_datetime(s[with_offset], format="ISO8601", utc=True, errors="coerce")
            secs = _epoch(t)
            ok = np.isfinite(secs)
            out[idx[with_offset][ok]] = secs[ok]
            todo[idx[with_offset][ok]] = False
        naive = s.str.match(_ISO_NAIVE).to_numpy(dtype=bool) & todo[idx]
        if naive.any() and zone is not None:
            t = pd.to_datetime(s[naive], format="ISO8601", errors="coerce")
            amb = "NaT" if repeated_hour is None else np.full(int(naive.sum()), repeated_hour == "earlier")
            try:
                loc = pd.DatetimeIndex(t).tz_localize(tz, ambiguous=amb, nonexistent="NaT")
            except Exception:   # pandas refuses some arrays; the slow path explains each row
                loc = pd.DatetimeIndex([pd.NaT] * int(naive.sum()), tz="UTC")
            secs = _epoch(pd.Series(loc))
            ok = np.isfinite(secs)
            out[idx[naive][ok]] = secs[ok]
            todo[idx[naive][ok]] = False
    notes: list[str] = []
    date_only = np.zeros(n, bool)
    if todo.any():
        maybe_error = True
        secs, errs, notes, days = _slow(text[todo], zone, date_format, pattern, repeated_hour, tz)
        out[todo] = secs
        error[todo] = errs
        date_only[todo] = days
    if both is not None and (both & np.isfinite(out)).any():
        maybe_error = True
        _dates_agree(out, text, dates, both & np.isfinite(out), error, tz, date_format)
    lo, hi = PLAUSIBLE_YEARS
    t_lo = datetime(lo, 1, 1, tzinfo=timezone.utc).timestamp()
    t_hi = datetime(hi + 1, 1, 1, tzinfo=timezone.utc).timestamp()
    with np.errstate(invalid="ignore"):
        odd = np.isfinite(out) & ((out < t_lo) | (out >= t_hi))
    for i in np.flatnonzero(odd):
        maybe_error = True
        year = datetime.fromtimestamp(0, timezone.utc) + timedelta(seconds=float(out[i]))
        error[i] = f"'{text[i]}': the year {year.year} is not plausible (dfkit reads years {lo} to {hi})"
    bad = error != "" if maybe_error else np.zeros(n, bool)
    out[bad] = np.nan
    date_only &= ~bad
    return Times(out, empty, error, notes, date_only, known_bad=bad)


def no_times(n: int, *, tz: str | None = None) -> Times:
    """:func:`parse_times` of ``n`` empty cells (a sheet with neither a time nor a date column), without a pass
    over them: every row empty, none refused; ``tz`` is still checked as there."""
    _zone(tz)
    return Times(np.full(n, np.nan), np.ones(n, bool), filled(n, ""), [], np.zeros(n, bool),
                 known_bad=np.zeros(n, bool))


def _epoch(t) -> np.ndarray:
    """Seconds since 1970 of a datetime Series/Index (NaN for NaT)."""
    s = pd.Series(t)
    v = s.to_numpy(dtype="datetime64[ns]") if s.dt.tz is None else s.dt.tz_convert("UTC").dt.tz_localize(None) \
        .to_numpy(dtype="datetime64[ns]")
    out = v.astype("int64").astype(float) / 1e9
    out[np.isnat(v)] = np.nan
    return out


def _zone(tz):
    if not tz:
        return None
    from zoneinfo import ZoneInfo

    return ZoneInfo(tz)


def _dates_agree(out, text, dates, rows, error, tz, date_format):
    """Refuse rows whose time cell holds a date that the date column contradicts.

    The date cell is read alone (as 12:00 UTC of its day); the time cell's own date may be its UTC date or, with
    an offset of up to 14 h either way, the day before or after: a date cell outside those days disagrees."""
    idx = np.flatnonzero(rows)
    d = parse_times(dates[idx], tz=tz or "UTC", date_format=date_format)
    day = 86400.0
    with np.errstate(invalid="ignore"):
        d_day = np.floor(d.seconds / day)
        lo = np.floor((out[idx] - 14 * 3600.0) / day)
        hi = np.floor((out[idx] + 14 * 3600.0) / day)
        off = np.isfinite(d_day) & ((d_day < lo) | (d_day > hi))
    for k in np.flatnonzero(off):
        i = idx[k]
        error[i] = (f"the date column says '{dates[i]}', but the time cell has a date of its own, '{text[i]}', "
                    "on another day: which is right? Keep the date in one of the two cells")


def _combine_dates(times, dates):
    """A separate date column: 'date' + 'time of day' -> one text per row."""
    n = len(times)
    out = times.copy()
    err = filled(n, "")
    d = pd.Series(dates, dtype=object).astype(str).str.strip()
    d = d.str.replace(_DATE_ONLY_MIDNIGHT, r"\1", regex=True).to_numpy(dtype=object)
    t = pd.Series(times, dtype=object).astype(str).str.strip()
    clock = t.str.match(_TIME_ONLY).to_numpy(dtype=bool)
    has_d = d != ""
    join = has_d & clock
    out[join] = [f"{a} {b}" for a, b in zip(d[join], times[join])]
    no_clock = has_d & (times == "")
    out[no_clock] = d[no_clock]                 # a date alone: a coarse time (the module docstring)
    lone_clock = ~has_d & clock
    err[lone_clock] = [f"'{x}' is a time of day without a date (the date column is empty)" for x in times[lone_clock]]
    return out, err


# --------------------------------------------------------------------------- the slow path

def _slow(cells, zone, date_format, pattern, repeated_hour, tz):
    """Cells that are not plain ISO 8601: parsed once per distinct value, then the
    day/month order is decided for the whole column."""
    parts = per_value(cells, lambda u: _split(str(u).strip(), pattern))
    order, notes, conflict = _date_order(parts, date_format)
    secs = np.full(len(cells), np.nan)
    errs = np.full(len(cells), "", dtype=object)
    days = np.zeros(len(cells), bool)
    memo: dict = {}
    for i, p in enumerate(parts):
        key = cells[i]
        if key not in memo:
            memo[key] = _finish(cells[i], p, order, conflict, zone, repeated_hour, tz, date_format)
        secs[i], errs[i] = memo[key]
        days[i] = isinstance(p, dict) and p.get("clock", 0) is None
    return secs, errs, notes, days


def _split(text, pattern):
    """A cell to its pieces: dict(y, a, b, kind, clock, offset) or dict(error=...)."""
    if pattern:
        try:
            dt = datetime.strptime(text, pattern)
        except ValueError:
            return {"error": f"'{text}' does not match the date format '{pattern}'"}
        if not re.search(r"%[HIMSXcTRrp]", pattern):        # a pattern of dates alone
            return {"kind": "ymd", "y": dt.year, "mo": dt.month, "d": dt.day, "clock": None}
        return {"dt": dt}
    iso = text[:-1] + "+00:00" if text.endswith(("z", "Z")) else text
    try:
        dt = datetime.fromisoformat(iso)
        if len(text) < 11 and ":" not in text:
            return {"kind": "ymd", "y": dt.year, "mo": dt.month, "d": dt.day, "clock": None}
        return {"dt": dt}
    except ValueError:
        pass
    if _TIME_ONLY.match(text):
        return {"error": f"'{text}' is a time of day without a date: add a 'date' column, or write the date too "
                         f"(2026-05-03 {text})"}
    if re.fullmatch(r"[+-]?\d+(\.\d+)?", text):
        v = float(text)
        if 20000 <= v <= 80000:
            return {"error": f"'{text}' looks like a spreadsheet date number; format the column as a date before "
                             "saving, or give dfkit the spreadsheet itself (.xlsx, .ods)"}
        return {"error": _not_a_time(text)}
    m = _NUM_DATE.match(text)
    kind = ""
    if m:
        a, b, c = m.group(1), m.group(3), m.group(4)
        rest = text[m.end():]
        if len(a) == 4:
            y, mo, d, kind = int(a), int(b), int(c), "ymd"
        elif len(c) == 4:
            y, mo, d, kind = int(c), int(a), int(b), "?"
        elif len(c) == 2 or len(a) == 2:
            return {"error": f"'{text}' has a two-digit year; write the year in full (2026)"}
        else:
            return {"error": _not_a_time(text)}
        first, second = (mo, d)
    else:
        m = _NAME_DATE_DMY.match(text)
        if m and m.group(2).lower()[:3] in _MONTHS:
            d, mo, y, kind = int(m.group(1)), _MONTHS[m.group(2).lower()[:3]], int(m.group(3)), "named"
        else:
            m = _NAME_DATE_MDY.match(text)
            if m and m.group(1).lower()[:3] in _MONTHS:
                mo, d, y, kind = _MONTHS[m.group(1).lower()[:3]], int(m.group(2)), int(m.group(3)), "named"
            else:
                return {"error": _not_a_time(text)}
        rest = text[m.end():]
        first = second = 0
    c = _CLOCK.match(rest)
    if not c:
        if rest.strip() == "":          # a date alone
            if kind == "?":
                return {"kind": "?", "y": y, "a": first, "b": second, "clock": None, "text": text}
            return {"kind": kind, "y": y, "mo": mo, "d": d, "clock": None}
        return {"error": _not_a_time(text)}
    hh, mm = int(c.group(1)), int(c.group(2))
    ss = int(c.group(3) or 0)
    frac = c.group(4) or ""
    ampm = (c.group(5) or "").upper()
    if ampm:
        if not 1 <= hh <= 12:
            return {"error": f"'{text}': {hh} is not an hour on a 12-hour clock"}
        hh = hh % 12 + (12 if ampm == "P" else 0)
    if hh > 23 or mm > 59 or ss > 59:
        return {"error": f"'{text}' is not a valid time of day"}
    off = _offset(c.group(6) or "")
    if off is False:
        return {"error": _not_a_time(text)}
    micro = int((frac + "000000")[:6]) if frac else 0
    if kind == "?":
        return {"kind": "?", "y": y, "a": first, "b": second, "clock": (hh, mm, ss, micro), "offset": off,
                "text": text}
    return {"kind": kind, "y": y, "mo": mo, "d": d, "clock": (hh, mm, ss, micro), "offset": off}


def _offset(text):
    t = text.replace(" ", "").upper()
    if t in ("", ):
        return None
    if t in ("Z", "UTC", "GMT"):
        return timezone.utc
    t = t.removeprefix("UTC").removeprefix("GMT")
    m = re.fullmatch(r"([+-])(\d{1,2})(?::?(\d{2}))?", t)
    if not m:
        return False
    h, mi = int(m.group(2)), int(m.group(3) or 0)
    if h > 14 or mi > 59:
        return False
    sign = -1 if m.group(1) == "-" else 1
    return timezone(sign * timedelta(hours=h, minutes=mi))


def _date_order(parts, date_format):
    """Decide day-first or month-first for the column: (order, notes, conflict text)."""
    amb = [p for p in parts if isinstance(p, dict) and p.get("kind") == "?"]
    if date_format in ("dmy", "mdy"):
        return date_format, [], ""
    if not amb:
        return "", [], ""
    day_first = [p for p in amb if p["a"] > 12 and p["b"] <= 12]
    month_first = [p for p in amb if p["b"] > 12 and p["a"] <= 12]
    if day_first and month_first:
        ex1, ex2 = day_first[0], month_first[0]
        return "", [], (f"the column has dates that can only be day-first ({ex1['a']:02d}.{ex1['b']:02d}.{ex1['y']}) "
                        f"and others that can only be month-first ({ex2['a']:02d}/{ex2['b']:02d}/{ex2['y']}); "
                        "give --date-format dmy or mdy")
    if day_first:
        p = day_first[0]
        like = p.get("text") or f"{p['a']:02d}.{p['b']:02d}.{p['y']}"       # as the sheet writes it
        return "dmy", [f"numeric dates read day first (day, month, year): the time column has dates like "
                       f"'{like}' that can only be day-first"], ""
    if month_first:
        p = month_first[0]
        like = p.get("text") or f"{p['a']:02d}/{p['b']:02d}/{p['y']}"
        return "mdy", [f"numeric dates read month first (month, day, year): the time column has dates like "
                       f"'{like}' that can only be month-first"], ""
    return "", [], ""


def _finish(text, p, order, conflict, zone, repeated_hour, tz, explicit):
    if "error" in p:
        return np.nan, p["error"]
    if "dt" in p:
        dt = p["dt"]
    else:
        if p["kind"] == "?":
            a, b = p["a"], p["b"]
            if explicit in ("dmy", "mdy"):
                d, mo = (a, b) if explicit == "dmy" else (b, a)
                if mo > 12:
                    return np.nan, f"'{text}' is not a {'day' if explicit == 'dmy' else 'month'}-first date"
            elif a > 12 or b > 12 or a == b:
                d, mo = (a, b) if a > 12 or a == b else (b, a)
            elif order:
                d, mo = (a, b) if order == "dmy" else (b, a)
            elif conflict:
                return np.nan, f"'{text}': {conflict}"
            else:
                dots = " (dates written with dots are usually day-first)" if "." in text.split()[0] else ""
                return np.nan, (f"'{text}' could be {_day_month(a, b)} or {_day_month(b, a)}; nothing in the sheet "
                                f"says which: give --date-format dmy (day first) or mdy (month first){dots}")
        else:
            mo, d = p["mo"], p["d"]
        if p["clock"] is None:          # a date alone: 12:00 UTC of that date
            try:
                return datetime(p["y"], mo, d, 12, tzinfo=timezone.utc).timestamp(), ""
            except ValueError:
                return np.nan, f"'{text}' is not a valid date"
        hh, mm, ss, micro = p["clock"]
        try:
            dt = datetime(p["y"], mo, d, hh, mm, ss, micro, tzinfo=p["offset"])
        except ValueError:
            return np.nan, f"'{text}' is not a valid date"
    if dt.tzinfo is None:
        if zone is None:
            return np.nan, (f"'{text}' has no UTC offset; add one (Z or +02:00) or name the time zone with --tz "
                            "(for example --tz Europe/Vienna or --tz UTC)")
        return _localise(text, dt, zone, repeated_hour, tz)
    return dt.timestamp(), ""


def _localise(text, dt, zone, repeated_hour, tz):
    d0 = dt.replace(tzinfo=zone, fold=0)
    d1 = dt.replace(tzinfo=zone, fold=1)
    back = d0.astimezone(timezone.utc).astimezone(zone).replace(tzinfo=None)
    if back != dt:
        return np.nan, (f"'{text}' did not exist in {tz}: the clocks were put forward over that hour "
                        "(a typing error, or a time zone other than --tz)")
    if d0.utcoffset() != d1.utcoffset():
        if repeated_hour is None:
            return np.nan, (f"'{text}' happened twice in {tz} (the clocks went back): as {_hm(d0)} or {_hm(d1)}; "
                            "give --repeated-hour earlier or later, or write the UTC offset")
        return (d0 if repeated_hour == "earlier" else d1).timestamp(), ""
    return d0.timestamp(), ""


def _hm(d):
    return d.astimezone(timezone.utc).strftime("%H:%MZ")


def _day_month(day, month):
    names = ["January", "February", "March", "April", "May", "June", "July", "August", "September", "October",
             "November", "December"]
    return f"{day} {names[month - 1]}" if 1 <= month <= 12 and 1 <= day <= 31 else "no date"


def _not_a_time(text):
    return (f"'{text}' is not a time dfkit can read; write it like 2026-05-03T06:12:00+02:00, 2026-05-03 04:12Z "
            "or 03.05.2026 06:12 (with --tz)")
