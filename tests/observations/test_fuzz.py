"""Fuzzing the reader past the column checks: any cell, any option, never a traceback, no row lost."""

import csv
import datetime as dt
import io

import numpy as np
import pandas as pd
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from dfkit import SheetError, read_bearings
from tests.test_sheet import CELL

OPTIONAL = ["fix", "tag", "time", "utm_zone", "easting", "northing", "mgrs", "unit", "north", "sd", "declination",
            "date", "note", "position"]
OPTIONS = st.fixed_dictionaries({}, optional={"tz": st.sampled_from(["UTC", "Europe/Vienna", "America/Santiago"]),
                                              "utm_letters": st.sampled_from(["band", "hemisphere", "auto"]),
                                              "date_format": st.sampled_from(["dmy", "mdy"]),
                                              "repeated_hour": st.sampled_from(["earlier", "later"]),
                                              "window_min": st.sampled_from([1, 20, 360]),
                                              "sd": st.sampled_from([0.01, 5])})


def check_nothing_lost(b, n_rows, first_line=2):
    used = set(b.table["line"].tolist())
    rejected = {p.line for p in b.problems if p.severity == "error"}
    assert used.isdisjoint(rejected)
    assert len(used | rejected) == n_rows or n_rows == 0
    assert np.isfinite(b.table["true_bearing"]).all()
    assert np.isfinite(b.table["lat"]).all() and (b.table["lat"].abs() <= 90).all()
    assert ((b.table["lon"] >= -180) & (b.table["lon"] <= 180)).all()
    # every row in a fix: its fix is listed; every listed fix is someone's
    assert set(b.table["fix_id"]) <= set(b.fix_index.index)


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(extra=st.lists(st.sampled_from(OPTIONAL), max_size=6, unique=True),
       rows=st.lists(st.lists(CELL, min_size=10, max_size=10), min_size=1, max_size=8), options=OPTIONS)
def test_sheets_with_the_needed_columns(tmp_path, extra, rows, options):
    cols = ["bearing", "lat", "lon"] + extra
    rows = [["1" if not r[0].strip() or r[0].lstrip().startswith("#") else r[0]] + r[1:] for r in rows]
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(cols)
    for r in rows:
        w.writerow([c.replace("\n", " ").replace("\r", " ") for c in r[: len(cols)]])
    p = tmp_path / "f.csv"
    p.write_text(buf.getvalue(), encoding="utf-8")
    try:
        b = read_bearings(p, **options)
    except SheetError:
        return
    check_nothing_lost(b, len(rows))


TYPED = st.one_of(st.none(), st.floats(allow_nan=True, allow_infinity=True), st.integers(-10**6, 10**7),
                  st.booleans(), st.datetimes(min_value=dt.datetime(1900, 1, 1), max_value=dt.datetime(2200, 1, 1)),
                  CELL)


@settings(max_examples=150, deadline=None)
@given(extra=st.lists(st.sampled_from(OPTIONAL), max_size=5, unique=True),
       rows=st.lists(st.lists(TYPED, min_size=8, max_size=8), min_size=1, max_size=6), options=OPTIONS)
def test_dataframes_of_any_typed_values(extra, rows, options):
    cols = ["bearing", "lat", "lon"] + extra
    df = pd.DataFrame([r[: len(cols)] for r in rows], columns=cols)
    try:
        b = read_bearings(df, **options)
    except SheetError:
        return
    check_nothing_lost(b, len(rows))
