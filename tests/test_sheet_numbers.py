"""Plain numeric columns read straight into floats, and the text path for every column that is not plain.

The reference for each value is Python's own ``float()`` of the cell's text (correctly rounded, IEEE 754
double; Python Language Reference, "Floating point literals", and ``float()`` in the library reference).
"""

from __future__ import annotations

import numpy as np
import pytest

from dfkit import read_bearings
from dfkit.io import read_sheet

FORMS = ["47.530025", "-0", "+3.25", ".5", "5.", "0001.5", "1e-3", "2E2", "12", "-12.000000000000001",
         "0.1", "359.99999999999994", "9007199254740991", "1.7976931348623157e308", "5e-324",
         "12345678901234567890"]


def _sheet(cells):
    rows = "".join(f"F,{c},15.2,10\n" for c in cells)
    return ("fix,lat,lon,bearing\n" + rows).encode()


def test_plain_numbers_are_python_floats_bit_for_bit():
    rng = np.random.default_rng(3)
    more = [f"{v:.6f}" for v in rng.uniform(-90, 90, 2000)] + [repr(v) for v in rng.normal(0, 1e-3, 2000).tolist()]
    cells = FORMS + more
    raw = read_sheet(_sheet(cells), numeric=("lat", "lon", "bearing"))
    assert raw.numeric == ("lat", "lon", "bearing")
    got = raw.table["lat"].to_numpy()
    want = np.array([float(c) for c in cells])
    assert got.dtype == np.float64
    assert (got.view(np.int64) == want.view(np.int64)).all()          # same bits, including the sign of -0
    assert raw.table["line"].tolist() == list(range(2, 2 + len(cells)))


def test_without_numeric_every_column_stays_text():
    raw = read_sheet(_sheet(["47.1", "47.2"]))
    assert raw.numeric == ()
    assert raw.table["lat"].tolist() == ["47.1", "47.2"]


@pytest.mark.parametrize("cell", ["inf", "nan", "NaN", "-Infinity", "", "45°", "True", "0x10", "1_000",
                                  "1e400", "N47 10.5"])
def test_a_column_with_one_cell_that_is_not_a_plain_finite_number_stays_text(cell):
    raw = read_sheet(_sheet(["47.1", cell, "47.3"]), numeric=("lat", "lon", "bearing"))
    assert "lat" not in raw.numeric
    assert raw.table["lat"].tolist() == ["47.1", cell.strip(), "47.3"]
    assert raw.numeric == ("lon", "bearing")                          # the other columns still go the fast way


def test_integers_beyond_what_a_float_holds_exactly_stay_text():
    # 2**53 + 1 = 9007199254740993 has no float of its own; an all-integer column holding it is left to the
    # validator's text path, which rounds it as Python's float() does.
    raw = read_sheet(_sheet(["47", "9007199254740993", "48"]), numeric=("lat",))
    assert raw.numeric == ()
    assert raw.table["lat"].tolist() == ["47", "9007199254740993", "48"]


@pytest.mark.parametrize("cell, message", [
    ("inf", "'inf' is not a finite number"),
    ("nan", "'nan' is not a finite number"),
    ("1e400", "'1e400' is not a position angle; write decimal degrees (48.9687) or degrees, minutes, seconds "
              "(48°58'07.4\"N, 48°58.123'N, N48 58.123)"),
    ("", "lat is missing (lon is given)"),
    ("91", "91 is not a latitude, but 15.2 could be: lat and lon look swapped"),
])
def test_messages_and_lines_are_those_of_the_text(cell, message):
    b = read_bearings(_sheet(["47.1", "47.2", cell, "47.4"]))
    errors = [(p.line, p.column, p.message) for p in b.problems if p.severity == "error"]
    assert errors == [(4, "lat", message)]
    assert b.table["line"].tolist() == [2, 3, 5]


def test_fast_and_careful_paths_give_the_same_bearings():
    # A quoted note sends the whole sheet down the careful (text) path; the values must not change.
    rng = np.random.default_rng(5)
    lat = rng.uniform(46, 49, 400)
    lon = rng.uniform(9, 17, 400)
    brg = rng.uniform(0, 360, 400)
    body = "".join(f"F{i // 4},{a:.6f},{o:.6f},{x:.2f},4,n{i}\n" for i, (a, o, x) in enumerate(zip(lat, lon, brg)))
    plain = ("fix,lat,lon,bearing,sd,note\n" + body).encode()
    quoted = ("fix,lat,lon,bearing,sd,note\n" + body.replace(",n0\n", ',"n0"\n')).encode()
    assert read_sheet(plain, numeric=("lat",)).numeric == ("lat",)
    assert read_sheet(quoted, numeric=("lat",)).numeric == ()
    a, b = read_bearings(plain), read_bearings(quoted)
    for col in ("lat", "lon", "true_bearing", "sd"):
        assert (a.table[col].to_numpy().view(np.int64) == b.table[col].to_numpy().view(np.int64)).all(), col
    assert a.table["line"].tolist() == b.table["line"].tolist()
    # and against Python's float of the text written
    assert (a.table["lat"].to_numpy() == np.array([float(f"{v:.6f}") for v in lat])).all()
