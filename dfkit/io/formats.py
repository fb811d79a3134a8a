"""How a spreadsheet shows a number: labels typed as numbers are read as they are shown.

A tag typed as ``151.040`` in a cell formatted ``0.000`` is stored as the number 151.04; read as its value it would
be another tag than a text cell ``151.040``. python-calamine gives values only, so for the label columns
(:data:`LABEL_COLUMNS`) dfkit looks up how each numeric cell is shown:

* **.xlsx / .xlsm**: the cell's style (``s``) in the sheet's XML, its number format in ``xl/styles.xml`` (a custom
  ``numFmt`` or one of the built-in formats: ECMA-376 Part 1, 18.8.30, from memory), applied by
  :func:`format_number` (digit placeholders ``0``, ``#``, ``?``, the decimal point, thousands commas, quoted or
  escaped literal text, ``@`` and ``General``). Other formats (dates, fractions, exponents, percentages) are
  not applied: the value is read and a warning says so.
* **.ods**: the text the saving program wrote for the cell (its ``text:p``), which is what it showed
  (OpenDocument 1.2, part 1, 9.1.4 ``table:table-cell``: the value in ``office:value`` and the display text in
  paragraphs; from memory).
* **.xls / .xlsb**: the formats are not read (a warning names the cells whose trailing zeros may be lost).

The decimal separator is always a point: the label is the same whatever the locale of the program that showed it.
"""

from __future__ import annotations

import io
import math
import os
import re
import zipfile
from decimal import ROUND_HALF_UP, Decimal
from xml.etree import ElementTree as ET

#: Columns read as labels: a number in them is read as it is shown (canonical names).
LABEL_COLUMNS = ("fix", "tag", "station", "observer", "antenna")

#: Built-in number formats of SpreadsheetML, by id (ECMA-376 Part 1, 18.8.30, from memory); a file names them by
#: id only. Those that show a number as digits are applied; dates, times, fractions, percentages and exponents
#: are not (a label is not written that way).
BUILTIN_FORMATS = {0: "General", 1: "0", 2: "0.00", 3: "#,##0", 4: "#,##0.00", 9: "0%", 10: "0.00%", 11: "0.00E+00",
                   12: "# ?/?", 13: "# ??/??", 14: "mm-dd-yy", 15: "d-mmm-yy", 16: "d-mmm", 17: "mmm-yy",
                   18: "h:mm AM/PM", 19: "h:mm:ss AM/PM", 20: "h:mm", 21: "h:mm:ss", 22: "m/d/yy h:mm",
                   37: "#,##0 ;(#,##0)", 38: "#,##0 ;[Red](#,##0)", 39: "#,##0.00;(#,##0.00)",
                   40: "#,##0.00;[Red](#,##0.00)", 45: "mm:ss", 46: "[h]:mm:ss", 47: "mmss.0", 48: "##0.0E+0", 49: "@"}

_MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
_REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
_PKG_REL = "http://schemas.openxmlformats.org/package/2006/relationships"
_TABLE = "urn:oasis:names:tc:opendocument:xmlns:table:1.0"
_OFFICE = "urn:oasis:names:tc:opendocument:xmlns:office:1.0"
_TEXT = "urn:oasis:names:tc:opendocument:xmlns:text:1.0"


def format_number(value: float, code: str) -> str | None:
    """A number as a SpreadsheetML number format shows it, or None for a format this does not apply.

    >>> format_number(151.04, "0.000"), format_number(7, "000"), format_number(150.4125, "0.00")
    ('151.040', '007', '150.41')
    >>> format_number(1234.5, '#,##0.0" MHz"'), format_number(2.0, "General"), format_number(3, "0%") is None
    ('1,234.5 MHz', '2', True)
    """
    code = code.split(";")[0] if value >= 0 or ";" not in code else code.split(";")[1]
    if code.strip().lower() in ("general", "@", ""):
        return _general(value)
    parts = _tokens(code)
    if parts is None:
        return None
    prefix, digits, suffix = parts
    if not digits:
        return prefix + suffix
    integer, _, decimals = digits.partition(".")
    places = len(decimals)
    forced = decimals.rstrip("#?")          # '0' places shown even when zero
    q = Decimal(repr(abs(float(value)))).quantize(Decimal(1).scaleb(-places), rounding=ROUND_HALF_UP)
    whole, _, frac = f"{q:f}".partition(".")
    frac = frac[:places]
    keep = len(forced)
    while len(frac) > keep and frac.endswith("0"):
        frac = frac[:-1]
    min_int = integer.replace(",", "").count("0")
    whole = whole.lstrip("0") or ("0" if min_int else "")
    whole = whole.rjust(min_int, "0")
    if "," in integer and whole:
        whole = f"{int(whole):,}".rjust(min_int, "0")
    text = whole + ("." + frac if frac or "." in digits and keep else "")
    sign = "-" if value < 0 and ";" not in code else ""
    return prefix + sign + text + suffix


def _general(value) -> str:
    f = float(value)
    if f.is_integer() and abs(f) < 1e15:
        return str(int(f))
    return repr(f)


_DATE_LETTERS = re.compile(r"[yYmMdDhHsS]|AM/PM|A/P", re.I)


def _tokens(code: str):
    """(literal prefix, digit placeholders, literal suffix) of a simple number format, or None."""
    code = re.sub(r"\[[^\]]*\]", "", code)          # colours, conditions, locales
    prefix, digits, suffix = [], [], []
    i, seen_digits = 0, False
    while i < len(code):
        ch = code[i]
        if ch == '"':
            j = code.find('"', i + 1)
            if j < 0:
                return None
            (suffix if seen_digits else prefix).append(code[i + 1:j])
            i = j + 1
            continue
        if ch == "\\" and i + 1 < len(code):
            (suffix if seen_digits else prefix).append(code[i + 1])
            i += 2
            continue
        if ch in "_*" and i + 1 < len(code):     # a space the width of the next character; a fill
            (suffix if seen_digits else prefix).append(" " if ch == "_" else "")
            i += 2
            continue
        if ch in "0#?.,":
            if suffix:                       # digits after literal text that followed digits
                return None
            digits.append(ch)
            seen_digits = True
            i += 1
            continue
        if ch in "%/eE" or _DATE_LETTERS.match(code, i):
            return None
        if ch in " -+()$:":
            (suffix if seen_digits else prefix).append(ch)
            i += 1
            continue
        return None
    d = "".join(digits).rstrip(",")          # trailing commas scale by thousands: not for labels
    if d.count(".") > 1 or "," in "".join(digits)[len(d):]:
        return None
    return "".join(prefix), d, "".join(suffix)


# --------------------------------------------------------------------------- reading the files

def shown_texts(source, sheet_name: str, cells) -> dict:
    """How the spreadsheet shows each of ``cells`` (``{(row, col): value}``, 0-based, numbers).

    Returns ``{(row, col): (text or None, how)}``: ``text`` is None when the way the cell is shown could not be
    found or applied, and ``how`` says why or which format was used. An empty dict when the file kind keeps
    no readable formats (.xls, .xlsb).
    """
    data = _bytes(source)
    try:
        z = zipfile.ZipFile(io.BytesIO(data))
        names = set(z.namelist())
        if "xl/workbook.xml" in names:
            return _xlsx(z, sheet_name, cells)
        if "content.xml" in names:
            return _ods(z, sheet_name, cells)
    except (zipfile.BadZipFile, KeyError, ET.ParseError, ValueError, OSError):
        return {}
    return {}


def _bytes(source) -> bytes:
    if isinstance(source, (bytes, bytearray)):
        return bytes(source)
    if isinstance(source, (str, os.PathLike)):
        with open(source, "rb") as fh:
            return fh.read()
    return source


def _col_index(letters: str) -> int:
    k = 0
    for ch in letters:
        k = k * 26 + (ord(ch) - 64)
    return k - 1


def _col_letters(j: int) -> str:
    s = ""
    j += 1
    while j:
        j, r = divmod(j - 1, 26)
        s = chr(65 + r) + s
    return s


def _xlsx(z: zipfile.ZipFile, sheet_name: str, cells) -> dict:
    wb = ET.fromstring(z.read("xl/workbook.xml"))
    rid = None
    for sh in wb.iter(f"{{{_MAIN}}}sheet"):
        if sh.get("name") == sheet_name:
            rid = sh.get(f"{{{_REL}}}id")
    rels = ET.fromstring(z.read("xl/_rels/workbook.xml.rels"))
    target = next((r.get("Target") for r in rels.iter(f"{{{_PKG_REL}}}Relationship") if r.get("Id") == rid), None)
    if target is None:
        return {}
    path = target.lstrip("/") if target.startswith("/") else "xl/" + target
    styles = ET.fromstring(z.read("xl/styles.xml")) if "xl/styles.xml" in z.namelist() else None
    custom, xf_fmt = {}, []
    if styles is not None:
        for nf in styles.iter(f"{{{_MAIN}}}numFmt"):
            custom[int(nf.get("numFmtId"))] = nf.get("formatCode", "")
        xfs = styles.find(f"{{{_MAIN}}}cellXfs")
        if xfs is not None:
            xf_fmt = [int(xf.get("numFmtId", "0")) for xf in xfs.iter(f"{{{_MAIN}}}xf")]
    cols = sorted({c for _, c in cells})
    pattern = re.compile(rb"<(?:\w+:)?c\b[^>]*?\br=\"(" + b"|".join(_col_letters(c).encode() for c in cols)
                         + rb")(\d+)\"[^>]*>")
    style_of = {}
    for m in pattern.finditer(z.read(path)):
        key = (int(m.group(2)) - 1, _col_index(m.group(1).decode()))
        if key in cells:
            s = re.search(rb"\bs=\"(\d+)\"", m.group(0))
            style_of[key] = int(s.group(1)) if s else 0
    out = {}
    for key, value in cells.items():
        if key not in style_of:
            out[key] = (None, "its number format was not found")
            continue
        k = style_of[key]
        fmt_id = xf_fmt[k] if k < len(xf_fmt) else 0
        code = custom.get(fmt_id, BUILTIN_FORMATS.get(fmt_id))
        text = format_number(value, code) if code is not None else None
        out[key] = (text, f"format '{code}'" if code is not None else f"built-in format {fmt_id}")
    return out


def _ods(z: zipfile.ZipFile, sheet_name: str, cells) -> dict:
    rows_wanted = {r for r, _ in cells}
    last_row = max(rows_wanted) if rows_wanted else -1
    out = {}
    in_table = False
    row = -1
    for event, el in ET.iterparse(io.BytesIO(z.read("content.xml")), events=("start", "end")):
        tag = el.tag
        if event == "start" and tag == f"{{{_TABLE}}}table":
            in_table = el.get(f"{{{_TABLE}}}name") == sheet_name
            row = -1
        elif in_table and event == "end" and tag == f"{{{_TABLE}}}table-row":
            reps = int(el.get(f"{{{_TABLE}}}number-rows-repeated", "1"))
            first = row + 1
            row += reps
            if first <= last_row and any(first <= r <= row for r in rows_wanted):
                col = 0
                for c in el:
                    if c.tag not in (f"{{{_TABLE}}}table-cell", f"{{{_TABLE}}}covered-table-cell"):
                        continue
                    span = int(c.get(f"{{{_TABLE}}}number-columns-repeated", "1"))
                    text = "\n".join("".join(p.itertext()) for p in c.iter(f"{{{_TEXT}}}p"))
                    for cc in range(col, col + span):
                        for r in range(first, row + 1):
                            if (r, cc) in cells:
                                out[(r, cc)] = (text.strip() or None, "the text the file shows")
                    col += span
            el.clear()
            if row >= last_row:
                break
        elif event == "end" and tag == f"{{{_TABLE}}}table" and in_table:
            break
    for key in cells:
        out.setdefault(key, (None, "its shown text was not found"))
    return out


def differs(value, text) -> bool:
    """Whether a shown text says something else than the number's plain form (``151.040`` vs ``151.04``)."""
    return text is not None and text != _general(value) and not (isinstance(value, float) and math.isnan(value))
