"""A season in one file: the season store (GeoPackage), filters and the review page.

>>> from dfkit.season import SeasonStore, SeasonFilter        # doctest: +SKIP
>>> with SeasonStore.open("season.gpkg", create=True) as store:  # doctest: +SKIP
...     report = add_sheet(store, "week1.csv", north="magnetic")
...     ok = store.fixes(SeasonFilter(statuses=("ok",)))
"""

from dfkit.season.importing import add_sheet
from dfkit.season.query import SeasonFilter, parse_statuses, parse_time
from dfkit.season.store import ImportReport, SeasonStore, StoreError

__all__ = ["ImportReport", "SeasonFilter", "SeasonStore", "StoreError", "add_sheet", "parse_statuses",
           "parse_time"]
