"""Make ``store_v1.gpkg``: a season store in the layout of store schema 1 (key scheme 1), for the migration test.

It was made once, by dfkit at commit ed454a3 (the last version that wrote schema 1), with::

    .venv/bin/python tests/season_v1/make_store.py

Run by a later dfkit it would write the later layout, so it refuses to overwrite the committed file then.
"""

import pathlib
import sqlite3
import sys

HERE = pathlib.Path(__file__).resolve().parent
SHEETS = ["teamA.csv", "week1.csv", "labels.csv"]


def main() -> int:
    from dfkit.season import SeasonStore, add_sheet
    from dfkit.season.store import SCHEMA_VERSION

    if SCHEMA_VERSION != 1:
        print(f"this dfkit writes store schema {SCHEMA_VERSION}: run this at commit ed454a3", file=sys.stderr)
        return 2
    out = HERE / "store_v1.gpkg"
    out.unlink(missing_ok=True)
    with SeasonStore.open(out, create=True) as store:
        for name in SHEETS:
            add_sheet(store, HERE / name)
    conn = sqlite3.connect(out)
    conn.execute("VACUUM")
    conn.close()
    return 0


if __name__ == "__main__":
    sys.exit(main())
