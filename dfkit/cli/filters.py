"""Options that choose fixes from a season (``season show``, ``ranges``): one meaning everywhere."""

from __future__ import annotations

import argparse


def add_filter_options(p: argparse.ArgumentParser, *, default_status: str | None = None) -> None:
    g = p.add_argument_group("choosing fixes")
    g.add_argument("--tag", action="append", default=None, metavar="TAG",
                   help="keep these tags (repeat, or separate with commas)")
    g.add_argument("--from", dest="start", default=None, metavar="WHEN",
                   help="keep fixes at or after this date/time (2026-06-01 or 2026-06-01T06:00+02:00)")
    g.add_argument("--to", dest="end", default=None, metavar="WHEN",
                   help="keep fixes up to this date/time (a date alone includes that whole day)")
    g.add_argument("--status", default=default_status, metavar="LIST",
                   help="statuses to keep: ok, flagged, failed, located, any, or names such as shallow "
                        f"(default {default_status or 'any'})")
    g.add_argument("--max-area", type=float, default=None, metavar="M2",
                   help="keep fixes whose confidence region is at most this many square metres")
    g.add_argument("--min-bearings", type=int, default=None, metavar="N", help="keep fixes that used at least N bearings")
    g.add_argument("--import", dest="import_ids", action="append", type=int, default=None, metavar="ID",
                   help="keep fixes of this import of a season store (repeat for more)")
    g.add_argument("--tz", default=None, metavar="ZONE", help="time zone of --from/--to given without an offset "
                                                               "(default UTC)")


def filter_from_args(a):
    """The :class:`~dfkit.season.query.SeasonFilter` the options describe (ValueError names the option)."""
    from dfkit.season.query import SeasonFilter, parse_statuses, parse_time

    tags = None
    if a.tag:
        tags = tuple(t.strip() for part in a.tag for t in part.split(",") if t.strip())
    try:
        start = parse_time(a.start, tz=a.tz) if a.start else None
        before = parse_time(a.end, end=True, tz=a.tz) if a.end else None
    except ValueError as err:
        raise ValueError(f"--from/--to: {err}") from None
    except (KeyError, LookupError, OSError):     # an unknown --tz (zoneinfo's errors)
        raise ValueError(f"--tz '{a.tz}' is not a known time zone (use a name like Europe/Vienna or UTC)") from None
    try:
        statuses = parse_statuses(a.status)
    except ValueError as err:
        raise ValueError(f"--status: {err}") from None
    if a.max_area is not None and not a.max_area > 0:
        raise ValueError(f"--max-area {a.max_area:g} must be a positive number of square metres")
    if a.min_bearings is not None and a.min_bearings < 0:
        raise ValueError(f"--min-bearings {a.min_bearings} must be 0 or more")
    return SeasonFilter(tags=tags, start=start, before=before, statuses=statuses, max_area_m2=a.max_area,
                        min_bearings=a.min_bearings,
                        import_ids=tuple(a.import_ids) if a.import_ids else None)
