"""Reading options: sheet-wide defaults, validated like sheet values.

The library raises :class:`OptionError` (a ``ValueError``) naming the parameter
(``sd=1e-150 ...``); the command line names its flag instead (``--sd 1e-150 ...``)
through :attr:`OptionError.param` and :data:`dfkit.cli.common.FLAGS`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from dfkit.conventions import DEGREES_PER_UNIT
from dfkit.observations.times import DATE_ORDERS, REPEATED_HOUR
from dfkit.policy import (
    DEFAULT_TRACK_GAP_S, DEFAULT_WINDOW_MIN, MAX_TRACK_GAP_S, MAX_WILD_SHARE, MAX_WINDOW_MIN, MIN_SD_DEG,
)

#: Values of ``utm_letters`` (``--utm-letters``): how a zone letter that can be both is read.
UTM_LETTERS = ("auto", "band", "hemisphere")
#: Values of ``position_rounding`` (``--position-rounding``): whether observer positions are as precise as written.
POSITION_ROUNDING = ("auto", "none")


class OptionError(ValueError):
    """An option with a value dfkit cannot use.

    Attributes
    ----------
    param : str
        The Python parameter name (``'sd'``, ``'window_min'``...).
    value : object
        The value given.
    reason : str
        Why it is refused and what to give instead.
    """

    def __init__(self, param: str, value, reason: str):
        self.param, self.value, self.reason = param, value, reason
        super().__init__(f"{param}={value!r} {reason}")


@dataclass(frozen=True)
class ReadOptions:
    """Sheet-wide defaults and helpers; a value in the sheet always wins.

    Attributes
    ----------
    unit : {'deg', 'mil', 'grad'}
        Unit of bearings whose row has no ``unit``.
    north : {'true', 'magnetic', 'grid'}
        Reference of bearings whose row has no ``north``.
    sd : float, optional
        Bearing standard deviation for rows without ``sd``, at least
        :data:`dfkit.policy.MIN_SD_DEG` and below 90. [°]
    declination : float, optional
        Declination for magnetic rows without ``declination`` (instead of the model),
        within -180..180. [° east]
    tz : str, optional
        IANA time zone (``Europe/Vienna``) for times written without an offset.
    date_format : str, optional
        'dmy' or 'mdy' for numeric dates whose order the sheet does not show, 'ymd',
        or a ``strptime`` pattern (``'%d.%m.%Y %H:%M'``).
    repeated_hour : {'earlier', 'later'}, optional
        Which instant a local time that occurs twice (clocks going back) means;
        without it such rows are refused.
    window_min : float
        Largest gap between successive bearings of one fix when grouping unlabelled
        bearings of a tag; also the gap that flags a labelled fix (0 < window <=
        :data:`dfkit.policy.MAX_WINDOW_MIN`). [min]
    stations : path or DataFrame, optional
        A stations file: a ``station`` label column plus the position columns of a sheet.
    track : path or Track, optional
        A GPX track giving positions to rows that have a time but no position.
    track_gap_s : float
        Largest time between a bearing and the nearest track point (0 < gap <=
        :data:`dfkit.policy.MAX_TRACK_GAP_S`). [s]
    grid_crs : str, optional
        Projected CRS (``EPSG:27700``...) whose grid north ``north=grid`` refers to,
        for rows that are not given in UTM.
    utm_letters : {'auto', 'band', 'hemisphere'}
        How UTM zone letters are read when a letter (``S``) can be both a latitude
        band and a hemisphere; 'auto' decides from evidence in the sheet and refuses
        rows where there is none.
    worksheet : str, optional
        Which sheet of a spreadsheet file to read (default: the first).
    fill_labels : bool
        Whether fix labels written only where a fix starts are filled down (when the
        sheet shows that habit; see :mod:`dfkit.observations.grouping`).
    position_rounding : {'auto', 'none'}
        'auto': each observer position is as precise as it was written (lat/lon to 3
        decimals: about 110 m; a 6-digit MGRS reference: 100 m), and a fix with a known
        SD allows for that (:mod:`dfkit.observations.precision`, :mod:`dfkit.locate.rounding`);
        'none': positions are exact whatever their digits (surveyed points, made-up examples).
    """

    unit: str = "deg"
    north: str = "true"
    sd: float | None = None
    declination: float | None = None
    tz: str | None = None
    date_format: str | None = None
    repeated_hour: str | None = None
    window_min: float = DEFAULT_WINDOW_MIN
    stations: object = None
    track: object = None
    track_gap_s: float = DEFAULT_TRACK_GAP_S
    grid_crs: str | None = None
    utm_letters: str = "auto"
    worksheet: str | None = None
    fill_labels: bool = True
    position_rounding: str = "auto"


def _number(param, value):
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise OptionError(param, value, "is not a number") from None
    if not math.isfinite(v):
        raise OptionError(param, value, "must be a finite number")
    return v


def _choice(param, value, choices):
    if value not in choices:
        raise OptionError(param, value, f"is not one of {', '.join(map(str, choices))}")


def check_options(o: ReadOptions) -> None:
    """Raise :class:`OptionError` for the first option dfkit cannot use."""
    _choice("unit", o.unit, tuple(DEGREES_PER_UNIT))
    _choice("north", o.north, ("true", "magnetic", "grid"))
    _choice("utm_letters", o.utm_letters, UTM_LETTERS)
    _choice("position_rounding", o.position_rounding, POSITION_ROUNDING)
    if not isinstance(o.fill_labels, (bool, np.bool_)):
        raise OptionError("fill_labels", o.fill_labels, "must be True or False")
    if o.sd is not None:
        v = _number("sd", o.sd)
        if not MIN_SD_DEG <= v < 90:
            raise OptionError("sd", o.sd, f"is not a usable bearing SD: give degrees from {MIN_SD_DEG:g} (far "
                                          "below any DF antenna's accuracy) to below 90")
    if o.declination is not None:
        v = _number("declination", o.declination)
        if abs(v) > 180:
            raise OptionError("declination", o.declination, "is outside -180..180 degrees east")
    v = _number("window_min", o.window_min)
    if not 0 < v <= MAX_WINDOW_MIN:
        raise OptionError("window_min", o.window_min, f"must be a positive number of minutes, at most "
                                                      f"{MAX_WINDOW_MIN:g} (bearings further apart are not one fix)")
    v = _number("track_gap_s", o.track_gap_s)
    if not 0 < v <= MAX_TRACK_GAP_S:
        raise OptionError("track_gap_s", o.track_gap_s, f"must be a positive number of seconds, at most "
                                                        f"{MAX_TRACK_GAP_S:g} (a longer gap makes the position a guess)")
    if o.repeated_hour is not None:
        _choice("repeated_hour", o.repeated_hour, REPEATED_HOUR)
    if o.date_format is not None and o.date_format not in DATE_ORDERS and "%" not in str(o.date_format):
        raise OptionError("date_format", o.date_format,
                          "is neither dmy, mdy, ymd nor a strptime pattern like '%d.%m.%Y %H:%M'")
    if o.tz:
        try:
            from zoneinfo import ZoneInfo

            ZoneInfo(o.tz)
        except Exception:
            raise OptionError("tz", o.tz, "is not a known time zone (use a name like Europe/Vienna or UTC)") from None
    if o.grid_crs:
        try:
            import pyproj

            crs = pyproj.CRS.from_user_input(o.grid_crs)
        except Exception:
            raise OptionError("grid_crs", o.grid_crs, "is not a CRS PROJ knows (try EPSG:27700)") from None
        if not crs.is_projected:
            raise OptionError("grid_crs", o.grid_crs, "is not a projected CRS: it has no grid north")


def check_wild_share(share) -> float:
    """A prior share of wild bearings (:data:`dfkit.policy.WILD_SHARE`), refused unless a number from 0 to
    :data:`~dfkit.policy.MAX_WILD_SHARE` (the weighing counts at most one wild bearing a fix)."""
    if isinstance(share, str) or not isinstance(share, (int, float, np.integer, np.floating)):
        raise OptionError("wild_share", share, "is not a number (e.g. 0.05)")
    v = _number("wild_share", share)
    if not 0.0 <= v <= MAX_WILD_SHARE:
        raise OptionError("wild_share", share, f"must be a share from 0 to {MAX_WILD_SHARE:g} (e.g. 0.05): the "
                                               "weighing counts at most one wild bearing a fix")
    return v


def check_level(level) -> float:
    """A confidence level, refused unless strictly between 0 and 1 (``95`` gets a hint)."""
    v = _number("level", level)
    if not 0 < v < 1:
        hint = f" (give {v / 100:g} for {v:g} %)" if 1 < v < 100 else ""
        raise OptionError("level", level, f"must be a probability between 0 and 1, like 0.95{hint}")
    return v
