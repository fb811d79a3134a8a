"""The Bearings table owns its columns: a change to one cell changes that cell only, not another column and not
the sheet it was read from (a table handed to a user is theirs to edit)."""

import numpy as np
import pandas as pd
import pytest

from dfkit import read_bearings
from dfkit.io import read_table

SHEET = ("fix,lat,lon,bearing,sd,site\n"
         "A,47.84,15.15,20,3,x\nA,47.85,15.17,280,3,x\nB,47.84,15.15,25,3,x\nB,47.85,15.17,285,3,x\n")
BAD_ROW = "C,47.84,15.15,999,3,x\n"       # a bearing out of range: the table leaves a row out


@pytest.mark.parametrize("extra", ["", BAD_ROW])
def test_one_cell_changed_changes_nothing_else(write_sheet, extra):
    b = read_bearings(write_sheet(SHEET + extra))
    text = [c for c in b.table.columns if b.table[c].dtype == object or isinstance(b.table[c].dtype, pd.StringDtype)]
    before = {c: b.table[c].tolist() for c in text}
    b.table.loc[0, "tag"] = "changed"
    for c in text:
        if c != "tag":
            assert b.table[c].tolist() == before[c], c
    assert b.table["tag"].tolist()[:2] == ["changed", before["tag"][1]]


def test_the_sheet_read_stays_as_it_was(write_sheet):
    raw = read_table(write_sheet(SHEET))
    fix, site = raw.table["fix"].tolist(), raw.table["site"].tolist()
    b = read_bearings(raw)
    b.table.loc[0, "fix"] = "Z"
    b.table.loc[0, "site"] = "Z"
    assert raw.table["fix"].tolist() == fix and raw.table["site"].tolist() == site


@pytest.mark.parametrize("extra", ["", BAD_ROW])
@pytest.mark.parametrize("name, value", [("tag", "t1"), ("observer", "ann"), ("antenna", "yagi"), ("note", "n"),
                                         ("declination", 3.5), ("convergence", 0.5), ("declination_sd", 0.2)])
def test_a_change_to_a_column_no_row_fills_stays_in_that_column(write_sheet, extra, name, value):
    # the sheet has no tag, observer, antenna or note column and no magnetic or grid bearing: these columns are
    # empty (NaN for the numbers) on every row, and a cell set in one of them is set there only
    b = read_bearings(write_sheet(SHEET + extra))
    empty = {"tag": "", "observer": "", "antenna": "", "note": "", "declination": None, "convergence": None,
             "declination_sd": None}
    for c, v in empty.items():
        assert (b.table[c] == v).all() if v is not None else b.table[c].isna().all(), c
    b.table.loc[1, name] = value
    for c, v in empty.items():
        cells = b.table[c].tolist()
        if c == name:
            assert cells[1] == value and cells[0] != value
        else:
            assert all(x == v for x in cells) if v is not None else b.table[c].isna().all(), c


@pytest.mark.parametrize("cells", [["F1", "F2", "F2", "é"], ["deg"] * 5, ["a", None, ""], ["a", float("nan")], []])
def test_a_text_column_is_the_column_pandas_infers_from_its_cells(cells):
    # the reader hands its own text columns (labels, units, sources) to pandas ready-typed; the table must hold the
    # column pandas itself would make of the cells
    from dfkit.observations.cells import text_column

    values = np.array(cells, dtype=object)
    made = pd.DataFrame({"c": text_column(values.copy())}, copy=False)["c"]
    inferred = pd.DataFrame({"c": values.copy()}, copy=False)["c"]
    assert made.dtype == inferred.dtype
    pd.testing.assert_series_equal(made, inferred, check_exact=True)


def test_labels_a_caller_read_as_numbers_stay_numbers(tmp_path):
    # A caller's sheet whose fix and tag columns were read as numbers keeps them as numbers (the sheet's own
    # values: labels 150 and 151, tag 7); only the reader's text cells are typed as text.
    from dfkit.observations.reading import NUMERIC_COLUMNS

    p = tmp_path / "numeric_labels.csv"
    p.write_text("fix,tag,lat,lon,bearing\n150,7,47.0,11.0,10\n150,7,47.01,11.01,200\n"
                 "151,7,47.0,11.0,20\n151,7,47.01,11.01,210\n")
    raw = read_table(p, numeric=dict(NUMERIC_COLUMNS, fix=None, tag=None))
    t = read_bearings(raw).table
    assert t["fix"].tolist() == [150.0, 150.0, 151.0, 151.0]
    assert t["tag"].tolist() == [7.0] * 4
