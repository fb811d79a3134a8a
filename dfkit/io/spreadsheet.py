"""Reading a bearing sheet from a spreadsheet file (.xlsx, .xlsm, .xls, .ods) into text cells.

Read with python-calamine (one reader for all three formats, no spreadsheet program
needed). The first worksheet is read unless one is named (``--sheet NAME``). Line
numbers are the row numbers the spreadsheet shows (the header is usually row 1).
Date and time cells arrive as dates (ISO 8601 text without an offset: give
``--tz``), numbers as numbers. The header is the first row with a value; rows above
it holding a single cell (a title) are skipped with a warning. Empty rows are
skipped and counted. Formulas are read as their last computed value; a formula a
program never computed reads as empty. Numbers in label columns (a tag 151.040 in a
cell formatted ``0.000``) are read as the spreadsheet shows them (:mod:`dfkit.io.formats`).
Cells merged over several rows (.xlsx, .xls:
python-calamine reports the merges) are read as their value on every row of the merge,
with a warning; python-calamine does not report merges in .ods files, where the fill-down
of fix labels (:func:`dfkit.observations.grouping.fill_down`) reads such a sheet.
"""

from __future__ import annotations

import io
import os

import numpy as np
import pandas as pd

from dfkit.io.formats import LABEL_COLUMNS, differs, shown_texts
from dfkit.io.formats import _col_letters as _col_letter
from dfkit.io.sheet import RawSheet, _resolve_header
from dfkit.io.typed import cell_text
from dfkit.problems import Problem, SheetError

#: File name endings read as spreadsheets.
SPREADSHEET_SUFFIXES = (".xlsx", ".xlsm", ".xlsb", ".xls", ".ods")


def read_spreadsheet(source, *, worksheet: str | None = None, name: str | None = None) -> RawSheet:
    """Read one worksheet of a spreadsheet file into text cells with row numbers.

    Parameters
    ----------
    source : str, os.PathLike, bytes or binary file-like
        The spreadsheet file.
    worksheet : str, optional
        Name of the sheet to read (default: the first visible worksheet).
    name : str, optional
        Name used in messages (defaults to the file name).

    Raises
    ------
    SheetError
        The file cannot be opened as a spreadsheet, the named sheet does not exist,
        or the sheet is empty.
    """
    from python_calamine import CalamineError, CalamineWorkbook

    if isinstance(source, (str, os.PathLike)):
        name = name or os.fspath(source)
    label = name or "the spreadsheet"
    try:
        if isinstance(source, (str, os.PathLike)):
            wb = CalamineWorkbook.from_path(os.fspath(source))
        else:
            data = source if isinstance(source, bytes) else source.read()
            wb = CalamineWorkbook.from_filelike(io.BytesIO(data))
    except OSError as err:
        raise SheetError(f"{label}: cannot read the file ({err.strerror or err})") from None
    except (CalamineError, ValueError) as err:
        raise SheetError(f"{label}: not a readable spreadsheet ({_short(err)}); is it damaged or "
                         "password-protected? Save it again, or as CSV") from None
    sheet_name = _choose(wb, worksheet, label)
    try:
        sheet = wb.get_sheet_by_name(sheet_name)
        rows = sheet.to_python(skip_empty_area=False)
    except (CalamineError, ValueError) as err:
        raise SheetError(f"{label}: sheet '{sheet_name}' cannot be read ({_short(err)})") from None
    shown = f"{label} [{sheet_name}]" if worksheet or len(wb.sheet_names) > 1 else label
    origin: dict = {}
    merged = _fill_merged(rows, getattr(sheet, "merged_cell_ranges", None), origin)
    file = source if isinstance(source, (str, os.PathLike)) else data

    def as_shown(cells):     # a cell filled from a merge is shown as the merge's top cell
        top = {origin.get(k, k): v for k, v in cells.items()}
        got = shown_texts(file, sheet_name, top)
        return {k: got.get(origin.get(k, k), (None, "")) for k in cells} if got else {}

    raw = _to_raw(rows, shown, sheet_name, wb.sheet_names, as_shown)
    if merged:
        raw.problems.append(Problem(merged[0][0], "", f"cells merged over several rows ({_merge_list(merged)}) were "
                                    "read as their value on every row of the merge", "warning", shown))
    if worksheet is None and len(wb.sheet_names) > 1:
        raw.problems.insert(0, Problem(0, "", f"the workbook has sheets {', '.join(wb.sheet_names)}; '{sheet_name}' was "
                                       "read (--sheet NAME reads another)", "warning", shown))
    return raw


def _fill_merged(rows, ranges, origin):
    """Cells merged over several rows hold their value in the top cell only: copy it down the merge's first column
    (a merge across columns only, such as a title, is left alone). Returns the merges filled as (first row, last
    row, column), row numbers as the spreadsheet shows them; ``origin`` gets the top cell of each filled cell."""
    done = []
    for (r0, c0), (r1, _c1) in ranges or []:
        if r1 <= r0 or r0 >= len(rows) or c0 >= len(rows[r0]):
            continue
        value = rows[r0][c0]
        if value is None or value == "":
            continue
        for r in range(r0 + 1, min(r1, len(rows) - 1) + 1):
            if c0 < len(rows[r]) and rows[r][c0] in ("", None):
                rows[r][c0] = value
                origin[(r, c0)] = (r0, c0)
        done.append((r0 + 1, r1 + 1, c0))
    return sorted(done)


def _merge_list(merged) -> str:
    shown = [f"{_col_letter(c)}{a}:{_col_letter(c)}{b}" for a, b, c in merged[:3]]
    return ", ".join(shown) + (f" and {len(merged) - 3} more" if len(merged) > 3 else "")


def _short(err) -> str:
    return str(err).strip().splitlines()[0][:200] if str(err).strip() else type(err).__name__


def _choose(wb, worksheet, label):
    names = list(wb.sheet_names)
    if not names:
        raise SheetError(f"{label}: the workbook has no sheets")
    if worksheet is None:
        try:
            visible = [m.name for m in wb.sheets_metadata
                       if str(getattr(m, "visible", "")).lower().endswith("visible")
                       and "work" in str(getattr(m, "typ", "worksheet")).lower()]
        except Exception:   # older python-calamine without metadata
            visible = []
        return visible[0] if visible else names[0]
    if worksheet in names:
        return worksheet
    folded = [n for n in names if n.casefold() == str(worksheet).casefold()]
    if len(folded) == 1:
        return folded[0]
    raise SheetError(f"{label}: no sheet named '{worksheet}'; the sheets are: {', '.join(names)}")


def _to_raw(rows, label, sheet_name, all_names, shown=None) -> RawSheet:
    problems: list[Problem] = []
    text = [[cell_text(v) for v in r] for r in rows]
    filled = [sum(1 for c in r if c) for r in text]
    first = next((i for i, k in enumerate(filled) if k), None)
    if first is None:
        raise SheetError(f"{label}: the sheet '{sheet_name}' is empty (other sheets: "
                         f"{', '.join(n for n in all_names if n != sheet_name) or 'none'}; choose one with --sheet)")
    header_i = first
    # title rows: single cells above a wider row within the next few rows
    while filled[header_i] == 1:
        nxt = next((j for j in range(header_i + 1, min(header_i + 6, len(text))) if filled[j] > 1), None)
        if nxt is None:
            break
        problems.append(Problem(header_i + 1, "", f"row {header_i + 1} ('{next(c for c in text[header_i] if c)}') "
                                "read as a title, not the header", "warning", label))
        header_i = nxt
    header = text[header_i]
    last = max((j for j, c in enumerate(header) if c), default=-1)
    header = header[: last + 1]
    columns = _resolve_header(header, header_i + 1, label, problems)
    width = len(columns)
    if shown is not None:
        _labels_as_shown(rows, text, columns, header_i, shown, label, problems)
    body = text[header_i + 1:]
    line_no = np.arange(header_i + 2, header_i + 2 + len(body))
    keep = np.array([any(r[:width]) for r in body], bool) if body else np.zeros(0, bool)
    skipped = int((~keep).sum())
    beyond = [(line_no[k], j) for k, r in enumerate(body) for j in range(width, len(r)) if r[j]]
    if beyond:
        ln, j = beyond[0]
        problems.append(Problem(int(ln), "", f"{len(beyond)} cell(s) right of the header's last column (first at row "
                                f"{ln}, column {_col_letter(j)}) have no column name and were not read", "warning", label))
    table = pd.DataFrame({"line": pd.array(line_no[keep], dtype="int64")})
    for j, col in enumerate(columns):
        table[col] = pd.Series([(r[j] if j < len(r) else "") for r, k in zip(body, keep) if k], dtype=object)
    if not len(table):
        problems.append(Problem(header_i + 1, "", "the sheet has a header but no data rows", "warning", label))
    return RawSheet(table=table, columns=columns, delimiter="", decimal_comma=False, problems=problems,
                    skipped_lines=skipped, source=label)


def _labels_as_shown(rows, text, columns, header_i, shown, label, problems):
    """Numbers in label columns (tag, fix, station, observer, antenna) read as the spreadsheet shows them
    (:mod:`dfkit.io.formats`); one warning per column where that differs from the value or is unknown."""
    for j, col in enumerate(columns):
        if col not in LABEL_COLUMNS:
            continue
        cells = {(i, j): float(r[j]) for i, r in enumerate(rows[header_i + 1:], start=header_i + 1)
                 if j < len(r) and isinstance(r[j], (int, float)) and not isinstance(r[j], bool)}
        if not cells:
            continue
        got = shown(cells)
        changed, unknown = [], []
        for (i, jj), value in sorted(cells.items()):
            txt, how = got.get((i, jj), (None, ""))
            if txt is not None:
                if differs(value, txt):
                    changed.append((i, value, txt, how))
                text[i][jj] = txt
            elif got or not float(value).is_integer():
                unknown.append((i, value, how))
        if changed:
            i, value, txt, how = changed[0]
            more = f" and {len(changed) - 1} more" if len(changed) > 1 else ""
            problems.append(Problem(i + 1, col, f"{col} cells are numbers shown with a number format ({how}): read "
                                    f"as shown, '{txt}' (the value {cell_text(value)}){more}; a text cell "
                                    f"'{cell_text(value)}' would be another {col}", "warning", label))
        if unknown:
            i, value, how = unknown[0]
            more = f" and {len(unknown) - 1} more" if len(unknown) > 1 else ""
            why = (f"{how}" if got else "this kind of file keeps how numbers are shown in a form dfkit does not read")
            problems.append(Problem(i + 1, col, f"{col} cells are numbers and how they are shown is unknown ({why}): "
                                    f"read as the value {cell_text(value)}{more}; if the sheet shows them otherwise "
                                    f"(trailing zeros), format the column as text or save as .xlsx or .ods",
                                    "warning", label))

