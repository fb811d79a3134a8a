"""Labels typed as numbers in a spreadsheet are read as the spreadsheet shows them (issue 7, field trial: a tag
151.040 in a cell formatted 0.000 was read as 151.04, another tag than the text cell '151.040').

Expected texts follow the number-format rules of SpreadsheetML (ECMA-376 Part 1, 18.8.31 numFmts: '0' shows a
digit even when it is an insignificant zero, '#' only significant digits, ',' between digit placeholders groups
thousands, quoted text is shown as written; from memory), worked out here by hand."""

import datetime as dt

import pytest

from dfkit import read_bearings
from dfkit.io.formats import format_number

STATIONS = [(47.8473227, 15.1531455, 19.99), (47.8581248, 15.1757928, 280.01), (47.8740193, 15.1479690, 149.99)]


@pytest.mark.parametrize("value, code, shown", [
    (151.04, "0.000", "151.040"), (150.4125, "0.00", "150.41"), (150.415, "0.00", "150.42"),   # half away from 0
    (7, "000", "007"), (7, "0", "7"), (7.5, "0", "8"), (151.04, "0.0##", "151.04"), (151.0, "0.0##", "151.0"),
    (1234.5, "#,##0.0", "1,234.5"), (150.41, '0.000" MHz"', "150.410 MHz"), (12, '"F"00', "F12"),
    (12, "\\F0", "F12"), (2.0, "General", "2"), (151.04, "General", "151.04"), (151.04, "@", "151.04"),
    (-3.5, "0.00", "-3.50"), (0.5, "#.0", ".5"), (12.0, "[Blue]0.00", "12.00"),
])
def test_number_formats_as_a_spreadsheet_shows_them(value, code, shown):
    assert format_number(value, code) == shown


@pytest.mark.parametrize("code", ["0%", "0.00E+00", "yyyy-mm-dd", "# ?/?", "h:mm"])
def test_formats_that_do_not_show_a_label_are_not_applied(code):
    assert format_number(151.04, code) is None


def _xlsx(path, rows, formats):
    import openpyxl

    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "bearings"
    ws.append(["fix", "tag", "lat", "lon", "bearing", "sd"])
    for r in rows:
        ws.append(r)
    for cell, code in formats.items():
        ws[cell].number_format = code
    wb.save(path)


def test_a_tag_formatted_with_trailing_zeros_is_the_tag_written_as_text(tmp_path):
    path = tmp_path / "tags.xlsx"
    rows = [["F1", 151.04, *s[:2], s[2], 3] for s in STATIONS[:2]] + [["F1", "151.040", *STATIONS[2][:2],
                                                                       STATIONS[2][2], 3]]
    _xlsx(path, rows, {"B2": "0.000", "B3": "0.000"})
    b = read_bearings(path)
    assert [p for p in b.problems if p.severity == "error"] == []
    assert b.table["tag"].tolist() == ["151.040"] * 3 and len(b.fix_index) == 1
    (w,) = [p for p in b.problems if p.severity == "warning" and p.column == "tag"]
    assert w.line == 2 and "'151.040' (the value 151.04)" in w.message and "format '0.000'" in w.message


def test_fix_numbers_keep_their_leading_zeros(tmp_path):
    path = tmp_path / "fixes.xlsx"
    _xlsx(path, [[7, "150.1", *s[:2], s[2], 3] for s in STATIONS], {"A2": "000", "A3": "000", "A4": "000"})
    b = read_bearings(path)
    assert b.table["fix"].tolist() == ["007"] * 3


def test_a_plain_number_needs_no_warning(tmp_path):
    path = tmp_path / "plain.xlsx"
    _xlsx(path, [["F1", 150.412, *s[:2], s[2], 3] for s in STATIONS], {})
    b = read_bearings(path)
    assert b.table["tag"].tolist() == ["150.412"] * 3
    assert [p for p in b.problems if p.column == "tag"] == []


def test_a_format_that_cannot_be_applied_is_said(tmp_path):
    path = tmp_path / "sci.xlsx"
    _xlsx(path, [["F1", 150.41, *s[:2], s[2], 3] for s in STATIONS], {"B2": "0.00E+00"})
    b = read_bearings(path)
    (w,) = [p for p in b.problems if p.column == "tag"]
    assert w.line == 2 and "how they are shown is unknown" in w.message and "0.00E+00" in w.message
    assert b.table["tag"].tolist() == ["150.41"] * 3


def test_an_ods_file_gives_the_text_it_shows(tmp_path):
    from odf.opendocument import OpenDocumentSpreadsheet
    from odf.table import Table, TableCell, TableRow
    from odf.text import P

    doc = OpenDocumentSpreadsheet()
    t = Table(name="bearings")

    def row(cells):
        tr = TableRow()
        for v, shown in cells:
            c = TableCell(valuetype="float", value=v) if isinstance(v, (int, float)) else TableCell(valuetype="string")
            c.addElement(P(text=shown))
            tr.addElement(c)
        t.addElement(tr)

    row([(h, h) for h in ("fix", "tag", "lat", "lon", "bearing", "sd")])
    for s in STATIONS:   # a program showing the tag with three decimals writes '151.040' as the cell's text
        row([("F1", "F1"), (151.04, "151.040"), (s[0], str(s[0])), (s[1], str(s[1])), (s[2], str(s[2])), (3, "3")])
    doc.spreadsheet.addElement(t)
    path = tmp_path / "tags.ods"
    doc.save(str(path))
    b = read_bearings(path)
    assert b.table["tag"].tolist() == ["151.040"] * 3
    assert any(p.column == "tag" and "read as shown" in p.message for p in b.problems)


def test_an_xls_file_warns_that_trailing_zeros_may_be_lost(tmp_path):
    import xlwt

    wb = xlwt.Workbook()
    ws = wb.add_sheet("bearings")
    for j, h in enumerate(("fix", "tag", "lat", "lon", "bearing", "sd")):
        ws.write(0, j, h)
    fmt = xlwt.easyxf(num_format_str="0.000")
    for i, s in enumerate(STATIONS, start=1):
        ws.write(i, 0, "F1")
        ws.write(i, 1, 151.04, fmt)
        for j, v in enumerate((*s, 3), start=2):
            ws.write(i, j, v)
    path = tmp_path / "tags.xls"
    wb.save(str(path))
    b = read_bearings(path)
    (w,) = [p for p in b.problems if p.column == "tag"]
    assert "how they are shown is unknown" in w.message and "save as .xlsx or .ods" in w.message


def test_dates_in_label_columns_are_left_alone(tmp_path):
    # a date cell is not a number: only numbers are formatted
    path = tmp_path / "date_tag.xlsx"
    _xlsx(path, [["F1", dt.date(2026, 5, 3), *s[:2], s[2], 3] for s in STATIONS], {})
    b = read_bearings(path)
    assert b.table["tag"].tolist() == ["2026-05-03"] * 3
