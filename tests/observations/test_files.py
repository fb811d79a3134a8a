"""Every kind of file a user may hand over as a sheet: spreadsheets (row numbers as the spreadsheet shows them, date
cells as dates), DataFrames, and files that are not sheets at all (one message, exit 2)."""

import datetime as dt
from zoneinfo import ZoneInfo

import pandas as pd
import pytest

from dfkit import SheetError, read_bearings
from dfkit.cli import main

VIENNA = ZoneInfo("Europe/Vienna")
ROWS = [  # header on row 3 under a title; an empty row 5 between two bearings
    ["Field sheet, May 2026"], [],
    ["Fix", "Tag", "Time", "Latitude", "Longitude", "Azimuth", "Note"],
    [1, 150.412, dt.datetime(2026, 5, 3, 6, 12), 47.0, 15.0, 45, "steady"],
    [],
    [1, 150.412, dt.datetime(2026, 5, 3, 6, 20), "47°00.600'N", 15.02, 315.5, None],
    [1, 150.412, dt.datetime(2026, 5, 3, 6, 31), 47.02, 15.01, "x", None],
]


def write_xlsx(path, rows, title="bearings", first_sheet=None):
    import openpyxl

    wb = openpyxl.Workbook()
    ws = wb.active
    if first_sheet:
        ws.title = first_sheet
        ws.append(["nothing here"])
        ws = wb.create_sheet(title)
    else:
        ws.title = title
    for r in rows:
        ws.append(r)
    wb.save(path)


def write_xls(path, rows):
    import xlwt

    wb = xlwt.Workbook()
    ws = wb.add_sheet("bearings")
    when = xlwt.easyxf(num_format_str="DD.MM.YYYY HH:MM")
    for i, r in enumerate(rows):
        for j, v in enumerate(r):
            if v is not None:
                ws.write(i, j, v, when) if isinstance(v, dt.datetime) else ws.write(i, j, v)
    wb.save(path)


def write_ods(path, rows):
    from odf.opendocument import OpenDocumentSpreadsheet
    from odf.table import Table, TableCell, TableRow
    from odf.text import P

    doc = OpenDocumentSpreadsheet()
    t = Table(name="bearings")
    for r in rows:
        tr = TableRow()
        for v in r:
            if v is None:
                tr.addElement(TableCell())
            elif isinstance(v, dt.datetime):
                c = TableCell(valuetype="date", datevalue=v.isoformat())
                c.addElement(P(text=v.isoformat()))
                tr.addElement(c)
            elif isinstance(v, (int, float)):
                c = TableCell(valuetype="float", value=v)
                c.addElement(P(text=str(v)))
                tr.addElement(c)
            else:
                c = TableCell(valuetype="string")
                c.addElement(P(text=v))
                tr.addElement(c)
        t.addElement(tr)
    doc.spreadsheet.addElement(t)
    doc.save(str(path))


@pytest.mark.parametrize("suffix, writer", [(".xlsx", write_xlsx), (".xls", write_xls), (".ods", write_ods)])
def test_spreadsheets_keep_row_numbers_and_dates(tmp_path, suffix, writer):
    path = tmp_path / f"field{suffix}"
    writer(path, ROWS)
    b = read_bearings(path, tz="Europe/Vienna")
    errs = [(p.line, p.column, p.message) for p in b.problems if p.severity == "error"]
    assert [(line, col) for line, col, _ in errs] == [(7, "bearing")]      # 'x' on spreadsheet row 7
    assert b.table["line"].tolist() == [4, 6]                              # rows 4 and 6 as the spreadsheet shows
    assert b.table["fix"].tolist() == ["1", "1"] and b.table["tag"].tolist() == ["150.412", "150.412"]
    assert b.table["time"][0].to_pydatetime() == dt.datetime(2026, 5, 3, 6, 12, tzinfo=VIENNA)
    assert b.table["lat"][1] == pytest.approx(47 + 0.6 / 60)
    assert b.table["note"][0] == "steady"


def test_a_named_sheet_and_a_missing_one(tmp_path, capsys):
    path = tmp_path / "two.xlsx"
    write_xlsx(path, ROWS, first_sheet="notes")
    with pytest.raises(SheetError, match="no bearing column.*sheets notes, bearings"):
        read_bearings(path)
    b = read_bearings(path, worksheet="bearings", tz="UTC")
    assert b.table["line"].tolist() == [4, 6]
    assert main(["check", str(path), "--sheet", "nope"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "no sheet named 'nope'" in err


def test_a_spreadsheet_named_csv_is_still_read(tmp_path):
    path = tmp_path / "field.csv"
    write_xlsx(path, ROWS)
    b = read_bearings(path, tz="UTC")
    assert b.table["line"].tolist() == [4, 6]
    assert any("is a spreadsheet" in p.message for p in b.problems)


@pytest.mark.parametrize("content, words", [
    (b"<!DOCTYPE html><html><body><table><tr><td>fix</td></tr></table></body></html>\n", "web page"),
    (b"%PDF-1.7\n%\xe2\xe3\xcf\xd3\n1 0 obj\n<<>>\nendobj\n", "PDF"),
    (bytes(range(256)) * 20, "binary"),
    (b"\x89PNG\r\n\x1a\n" + b"\x00" * 100, "picture"),
    (b'<?xml version="1.0"?><gpx version="1.1"><trk></trk></gpx>', "GPX track"),
])
def test_files_that_are_not_sheets_get_one_message(tmp_path, capsys, content, words):
    path = tmp_path / "sheet.csv"
    path.write_bytes(content)
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and words in err


@pytest.mark.parametrize("name", ["broken.xlsx", "broken.ods", "broken.xls"])
def test_a_corrupt_workbook_gets_one_message(tmp_path, capsys, name):
    path = tmp_path / name
    path.write_bytes(b"PK\x03\x04" + b"\x00" * 200 if not name.endswith(".xls")
                     else b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\x00" * 600)
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "spreadsheet" in err


def test_a_dataframe_is_a_sheet_with_rows_numbered_from_2():
    df = pd.DataFrame({"fix": [1, 1, 1], "lat": [47.0, 47.0, 47.02], "lon": [15.0, 15.02, 15.01],
                       "bearing": [45, 315, 999],
                       "time": pd.to_datetime(["2026-05-03 06:00", "2026-05-03 06:05", "2026-05-03 06:10"])
                       .tz_localize("Europe/Vienna")}, index=[10, 20, 30])
    b = read_bearings(df, sd=3)
    assert b.table["line"].tolist() == [2, 3]
    (p,) = [p for p in b.problems if p.severity == "error"]
    assert p.line == 4 and p.column == "bearing"
    assert b.table["time"][0].to_pydatetime() == dt.datetime(2026, 5, 3, 6, 0, tzinfo=VIENNA)
    assert b.table["fix"].tolist() == ["1", "1"]
