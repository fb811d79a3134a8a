"""Validate a sheet and convert every bearing to one convention.

Input: a sheet (CSV, spreadsheet, DataFrame) of text cells with line numbers.
Output: :class:`Bearings`, a table with one row per *usable* bearing giving the
station's WGS84 ``lat``/``lon`` [°], the ``true_bearing`` [° clockwise from true
north], the bearing SD ``sd`` [°] when known, the UTC ``time`` and the fix, plus the
corrections applied (``declination``, ``convergence`` [°]); and the list of
problems, each with line number, column and reason. No row disappears silently: a
row is either in the table or has at least one error.

One module per concept: :mod:`.cells` (text to numbers and angles), :mod:`.times`,
:mod:`.positions` (lat/lon, UTM, MGRS, stations, track; :func:`parse_positions` and
:func:`read_places` for any column set), :mod:`.north` (magnetic and grid),
:mod:`.grouping` (which bearings form a fix), :mod:`.options`, :mod:`.columns`
(sheet-level checks), :mod:`.bearings` (the result), :mod:`.reading` (the steps).
"""

from dfkit.observations.bearings import NORMALIZED_COLUMNS, Bearings
from dfkit.observations.options import OptionError, ReadOptions, check_level, check_options, check_wild_share
from dfkit.observations.positions import Positions, parse_positions, read_places, read_stations
from dfkit.observations.reading import check_sheet, read_bearings

__all__ = ["NORMALIZED_COLUMNS", "Bearings", "OptionError", "Positions", "ReadOptions", "check_level", "check_wild_share",
           "check_options", "check_sheet", "parse_positions", "read_bearings", "read_places", "read_stations"]
