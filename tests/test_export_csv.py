"""CSV outputs: no spreadsheet formula gets through, numbers stay numbers, and dfkit reads its own tables back."""

import csv
import io
import re

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from dfkit import read_bearings
from dfkit.cli import main
from dfkit.export.csv import write_table
from dfkit.io.sheet import read_sheet

# OWASP "CSV Injection" (owasp.org/www-community/attacks/CSV_Injection, from memory of the page): cells starting
# with these characters are run as formulas by spreadsheets; the advice is to prefix them with a single quote.
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")
PLAIN_NUMBER = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$")


def cells_of(path):
    """The cells as Python's csv module reads them (an outside reader)."""
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.reader(fh))


def test_formula_cells_are_guarded_and_numbers_are_not(tmp_path):
    df = pd.DataFrame({"fix": ["=1+2", "+SUM(A1)", "-x", "@cmd", "\tx", "\rx", "-12.5", "+3", "ok"],
                       "x": [-1.5, 2.0, -3.0, np.nan, 4.0, 5.0, 6.0, 7.0, 8.0]})
    out = tmp_path / "t.csv"
    write_table(df, out)
    rows = cells_of(out)
    assert rows[0] == ["fix", "x"]
    # A carriage return inside a cell is written as \n (a bare CR ends the row for many readers).
    assert [r[0] for r in rows[1:]] == ["'=1+2", "'+SUM(A1)", "'-x", "'@cmd", "'\tx", "'\nx", "-12.5", "+3", "ok"]
    assert [r[1] for r in rows[1:]] == ["-1.5", "2.0", "-3.0", "", "4.0", "5.0", "6.0", "7.0", "8.0"]


def test_verbatim_writes_cells_as_they_are(tmp_path):
    df = pd.DataFrame({"fix": ["=1+2", "@cmd"]})
    out = tmp_path / "t.csv"
    write_table(df, out, guard_formulas=False)
    assert [r[0] for r in cells_of(out)[1:]] == ["=1+2", "@cmd"]


def test_column_names_are_guarded_too(tmp_path):
    out = tmp_path / "t.csv"
    write_table(pd.DataFrame({"=cmd": ["a"], "fix": ["b"]}), out)
    assert cells_of(out)[0] == ["'=cmd", "fix"]
    assert read_sheet(out).columns == ["=cmd", "fix"]


def test_first_column_starting_with_hash_is_quoted_so_it_is_not_a_comment(tmp_path):
    out = tmp_path / "t.csv"
    write_table(pd.DataFrame({"fix": ["#B", "C"], "x": [1.0, 2.0]}), out)
    raw = read_sheet(out)
    assert raw.comment_lines == [] and raw.table["fix"].tolist() == ["#B", "C"]


TEXT = st.one_of(st.text(alphabet=st.characters(blacklist_categories=("Cs",), blacklist_characters="\x00"),
                         max_size=10),
                 st.sampled_from(["=1+2", "-3", "+x", "@a", "'=x", "''-1", "\tz", "#B", "-", "'", " =y "]))


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(rows=st.lists(st.tuples(TEXT, TEXT, st.floats(allow_nan=True, allow_infinity=False, width=32)),
                     min_size=1, max_size=8))
def test_any_text_is_written_safely_and_read_back_exactly(tmp_path, rows):
    df = pd.DataFrame({"fix": [r[0] for r in rows], "note": [r[1] for r in rows],
                       "x": np.array([r[2] for r in rows], dtype=float)})
    out = tmp_path / "t.csv"
    write_table(df, out)
    # 1. An outside reader (Python's csv module) sees no cell a spreadsheet would run, except plain numbers.
    got = cells_of(out)
    assert len(got) == len(rows) + 1
    for r in got[1:]:
        for cell in r[:2]:
            assert not cell.startswith(FORMULA_STARTS) or PLAIN_NUMBER.match(cell), cell
        x = float(r[2]) if r[2] else np.nan
        want = float(np.float32(df["x"].iloc[got.index(r) - 1]))
        assert (np.isnan(x) and np.isnan(want)) or x == want        # numbers stay numbers, unchanged
    # 2. dfkit's reader gives back every row and every cell as it was (cells are read stripped of spaces,
    #    and line ends inside a cell come back as \n).
    raw = read_sheet(out)
    norm = [re.sub(r"\r\n|\r", "\n", v).strip() for v in df["fix"]]
    notes = [re.sub(r"\r\n|\r", "\n", v).strip() for v in df["note"]]
    refused = {p.line for p in raw.problems if p.severity == "error"}
    if not refused:
        assert len(raw.table) + len(raw.blank_lines) == len(rows)
        kept = [i for i in range(len(rows)) if norm[i] or notes[i] or np.isfinite(df["x"].iloc[i])]
        assert raw.table["fix"].tolist() == [norm[i] for i in kept]
        assert raw.table["note"].tolist() == [notes[i] for i in kept]


def test_hostile_labels_in_fix_and_bearing_tables_are_guarded(write_sheet, tmp_path):
    sheet = write_sheet('fix,lat,lon,bearing,sd,note\n=HYPERLINK("http://x"),47,15,45,3,@SUM(1)\n'
                        '=HYPERLINK("http://x"),47,15.02,315,3,-2+3\n=HYPERLINK("http://x"),47.02,15.01,180,3,-12\n')
    fixes, bearings = tmp_path / "f.csv", tmp_path / "b.csv"
    assert main(["fix", str(sheet), "-o", str(fixes), "--bearings-out", str(bearings)]) == 0
    assert cells_of(fixes)[1][0] == "'=HYPERLINK(\"http://x\")"
    b_rows = cells_of(bearings)
    note = b_rows[0].index("note")
    assert [r[note] for r in b_rows[1:]] == ["'@SUM(1)", "'-2+3", "-12"]
    assert main(["fix", str(sheet), "-o", str(fixes), "--verbatim-csv"]) == 0
    assert cells_of(fixes)[1][0] == "=HYPERLINK(\"http://x\")"


def test_check_output_reads_back_with_check_and_fix(write_sheet, tmp_path, capsys):
    sheet = write_sheet('fix,tag,time,lat,lon,bearing,unit,north,sd,note\n'
                        '"#1",=t,2026-05-03T06:00:00Z,47,15,800,mil,magnetic,3,"-x, quoted"\n'
                        '"#1",=t,2026-05-03T06:01:00Z,47,15.02,315,deg,true,3,\n'
                        '"#1",=t,2026-05-03T06:02:00Z,47.02,15.01,180,deg,true,3,@y\n'
                        "B,,2026-05-03T07:00:00Z,47,15,999,deg,true,3,\n")
    first = read_bearings(sheet)
    norm = tmp_path / "normalized.csv"
    assert main(["check", str(sheet), "-o", str(norm)]) == 1           # line 5 is rejected
    assert main(["check", str(norm)]) == 0
    again = read_bearings(norm)
    for col in ("fix", "tag", "note", "unit", "north"):
        assert again.table[col].tolist() == first.table[col].tolist(), col
    # The bearing as read and its conversion to true north survive the trip (to the 3 decimals written).
    np.testing.assert_allclose(again.table["true_bearing"], first.table["true_bearing"], atol=2e-3)
    assert again.table["line_in_sheet"].tolist() == ["2", "3", "4"]     # the field sheet's own lines
    out = tmp_path / "f.csv"
    assert main(["fix", str(norm), "-o", str(out)]) == 0
    assert cells_of(out)[1][0] == "#1"
    twice = tmp_path / "twice.csv"
    assert main(["check", str(norm), "-o", str(twice)]) == 0
    assert main(["check", str(twice)]) == 0
    capsys.readouterr()


def test_bearings_out_reads_back(write_sheet, tmp_path):
    sheet = write_sheet("fix,lat,lon,bearing,sd\nA,47,15,45,3\nA,47,15.02,315,3\nA,47.02,15.01,180,3\n")
    b_out = tmp_path / "b.csv"
    assert main(["fix", str(sheet), "-o", str(tmp_path / "f.csv"), "--bearings-out", str(b_out)]) == 0
    assert main(["check", str(b_out)]) == 0


def test_verbatim_option_is_documented():
    from dfkit.cli import build_parser

    text = io.StringIO()
    p = build_parser()
    sub = next(a for a in p._actions if a.dest == "command")
    sub.choices["fix"].print_help(text)
    assert "--verbatim-csv" in text.getvalue() and "formula" in text.getvalue()


def test_fix_table_reads_back_for_home_ranges(write_sheet, tmp_path):
    # A label starting with '#' and a tag a spreadsheet would run: both survive fix -o and the fix-table reader.
    from dfkit.io.fixes import read_fix_table

    sheet = write_sheet('fix,tag,lat,lon,bearing,sd\n"#B",=T,47,15,45,3\n"#B",=T,47,15.02,315,3\n'
                        '"#B",=T,47.02,15.01,180,3\nC,=T,47,15,45,3\nC,=T,47,15.02,315,3\nC,=T,47.02,15.01,180,3\n')
    out = tmp_path / "f.csv"
    assert main(["fix", str(sheet), "-o", str(out)]) == 0
    ft = read_fix_table(out)
    assert ft.table["fix"].tolist() == ["#B", "C"] and ft.tags == ["=T"]
    assert ft.n_rejected == 0 and ft.table["lat"].notna().all()


def test_dfkits_own_tables_read_back_as_dataframes(write_sheet):
    # A normalized table handed back from Python: dfkit's result columns are recomputed, not read (and not
    # carried twice), and the labels, bearings and positions are those of the first reading.
    first = read_bearings(write_sheet("fix,lat,lon,bearing,sd\n=A,47,15,45,3\n=A,47,15.02,315,3\n"))
    again = read_bearings(first.table.drop(columns="time"))      # (missing times: see the next test)
    assert list(again.table.columns).count("fix_id") == 1
    assert again.table["fix"].tolist() == ["=A", "=A"]
    np.testing.assert_allclose(again.table["true_bearing"], first.table["true_bearing"])
    assert any("dfkit's own result" in p.message for p in again.problems)


def test_a_dataframe_with_missing_times_reads_back(write_sheet):
    first = read_bearings(write_sheet("fix,lat,lon,bearing,sd\nA,47,15,45,3\nA,47,15.02,315,3\n"))
    again = read_bearings(first.table)
    assert [p for p in again.problems if p.severity == "error"] == []
