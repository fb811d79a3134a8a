"""A plain ASCII sheet (no quotes, comments, blank lines or carriage returns) read straight from its bytes gives
the cells and line numbers Python's csv module reads from the same text (Python documentation, csv.reader)."""

import csv
import io

import numpy as np
import pytest

from dfkit.io.sheet import read_sheet


def _sheet(rows, end="\n"):
    return ("fix,lat,lon,bearing,observer\n" + "\n".join(",".join(r) for r in rows) + end).encode("ascii")


@pytest.mark.parametrize("end", ["\n", ""])
def test_cells_and_lines_as_the_csv_module_reads_them(end):
    rows = [["F1", "47.5", "11.9", "10", "Ann"], ["F1", "47.6", "11.8", "200.5", " Bob "],
            ["F2", "-3", "1e1", "359.99", ""], ["F2", "47.4", "12", "7", "Ann"]]
    data = _sheet(rows, end)
    raw = read_sheet(data, numeric={"lat": 90.0, "lon": 360.0, "bearing": None})
    want = list(csv.reader(io.StringIO(data.decode())))[1:]
    assert raw.table["line"].tolist() == list(range(2, 2 + len(want)))
    assert raw.table["fix"].tolist() == [r[0] for r in want]
    assert raw.table["observer"].tolist() == [r[4].strip() for r in want]
    assert np.array_equal(raw.table["lat"].to_numpy(float), [float(r[1]) for r in want])
    assert np.array_equal(raw.table["bearing"].to_numpy(float), [float(r[3]) for r in want])
    assert set(raw.numeric) == {"lat", "lon", "bearing"}


def test_a_text_cell_in_a_number_column_keeps_the_column_as_text():
    raw = read_sheet(_sheet([["F1", "47.5", "11.9", "10", "A"], ["F1", "4751.6N", "11.9", "20", "A"]]),
                     numeric={"lat": 90.0, "lon": 360.0, "bearing": None})
    assert raw.table["lat"].tolist() == ["47.5", "4751.6N"]
    assert "lat" not in raw.numeric


def test_a_long_line_goes_the_careful_way():
    long_note = "x" * 140_000        # longer than a cell may be (Python's csv field limit, 131072)
    data = ("fix,lat,lon,bearing,note\nF1,47.5,11.9,10," + long_note + "\nF1,47.6,11.8,20,ok\n").encode("ascii")
    raw = read_sheet(data, numeric={"lat": 90.0})
    assert [p.line for p in raw.problems if p.severity == "error"] == [2]
    assert raw.table["line"].tolist() == [2, 3]


@pytest.mark.parametrize("how", ["bytes", "bytearray", "path", "file"])
def test_lines_above_the_header_and_every_kind_of_source(how, tmp_path):
    # The body is parsed from where the header's line ends, in the file's own bytes: comment and blank lines
    # above the header must not shift the line numbers, and a space or quote in the header alone changes no cell.
    text = ("# field sheet\n\nfix, lat ,lon,bearing,observer\n"
            "F1,47.5,11.9,10, Ann\nF1,47.6,11.8,200.5,'=B\nF2,47.4,12,7,Bob\n")
    data = text.encode("ascii")
    if how == "path":
        src = tmp_path / "s.csv"
        src.write_bytes(data)
    else:
        src = {"bytes": data, "bytearray": bytearray(data), "file": io.BytesIO(data)}[how]
    raw = read_sheet(src, numeric={"lat": 90.0, "lon": 360.0, "bearing": None})
    want = list(csv.reader(io.StringIO(text)))[3:]
    assert raw.table["line"].tolist() == [4, 5, 6]
    assert raw.table["fix"].tolist() == [r[0] for r in want]
    # a cell written with a formula guard ('=B) is read back without it (README, "The bearing sheet")
    assert raw.table["observer"].tolist() == ["Ann", "=B", "Bob"]
    assert np.array_equal(raw.table["lat"].to_numpy(float), [float(r[1]) for r in want])
    assert raw.comment_lines == [1] and raw.blank_lines == [2]
