"""File formats in: bearing sheets (CSV) and GPS tracks (GPX)."""

from dfkit.io.gpx import read_track
from dfkit.io.sheet import KNOWN_COLUMNS, RawSheet, read_sheet

__all__ = ["KNOWN_COLUMNS", "RawSheet", "read_sheet", "read_track"]
