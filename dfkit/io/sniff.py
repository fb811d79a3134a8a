"""What a file really is, from its first bytes, before a reader tries it.

A bearing sheet is text (CSV) or a spreadsheet (.xlsx, .xls, .ods). Anything else
given as a sheet (a PDF, a web page, a picture, an archive, random bytes) gets one
message naming what it looks like, instead of one error per line.
"""

from __future__ import annotations

import io
import zipfile

#: Kinds of file :func:`sniff` can tell apart.
SPREADSHEET_KINDS = ("xlsx", "ods", "xls")


def sniff(head: bytes, whole: bytes | None = None) -> str:
    """The kind of a file from its first bytes (and, for ZIP files, its contents).

    Returns one of 'text', 'xlsx', 'ods', 'xls', 'pdf', 'html', 'gpx', 'image', 'zip',
    'gzip', 'binary', 'empty'.
    """
    if not head:
        return "empty"
    if head.startswith(b"PK\x03\x04"):
        return _zip_kind(whole if whole is not None else head)
    if head.startswith(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"):
        return "xls"
    if head.startswith(b"%PDF-"):
        return "pdf"
    if head.startswith((b"\x89PNG", b"\xff\xd8\xff", b"GIF87a", b"GIF89a", b"BM", b"II*\x00", b"MM\x00*")):
        return "image"
    if head.startswith((b"\x1f\x8b", b"BZh", b"\xfd7zXZ", b"7z\xbc\xaf")):
        return "gzip"
    if head.startswith((b"\xff\xfe", b"\xfe\xff")):
        return "text"   # UTF-16 with a byte-order mark
    text = head.lstrip(b"\xef\xbb\xbf").lstrip().lower()
    if text.startswith((b"<!doctype html", b"<html", b"<head", b"<body", b"<table")) or \
            (text.startswith(b"<?xml") and b"<html" in text[:2000]):
        return "html"
    if text.startswith(b"<?xml") and b"<gpx" in text[:2000] or text.startswith(b"<gpx"):
        return "gpx"
    # NUL bytes are left to the sheet reader, which reports them line by line (a damaged file, or UTF-16 written
    # without a byte-order mark); the other control bytes mark a binary file.
    sample = head[:8192].replace(b"\x00", b"")
    control = sum(1 for b in sample if b < 9 or 13 < b < 32 and b != 27)
    if control > 0.1 * len(sample):
        return "binary"
    return "text"


def _zip_kind(data: bytes) -> str:
    try:
        with zipfile.ZipFile(io.BytesIO(data)) as z:
            names = set(z.namelist())
            if "xl/workbook.xml" in names or "xl/workbook.bin" in names:
                return "xlsx"
            if "mimetype" in names and z.read("mimetype").startswith(b"application/vnd.oasis.opendocument.spreadsheet"):
                return "ods"
    except (zipfile.BadZipFile, OSError, KeyError, ValueError):
        pass
    return "zip"


#: What to tell the user for each kind that is not a sheet.
NOT_A_SHEET = {
    "pdf": "is a PDF document, not a sheet: export the table as CSV or a spreadsheet (.xlsx, .ods)",
    "html": "is a web page (HTML), not a sheet: save the table itself as CSV or a spreadsheet",
    "gpx": "is a GPX track, not a bearing sheet: give it with --track",
    "image": "is a picture, not a sheet: type the bearings into a CSV or spreadsheet",
    "zip": "is a ZIP archive (or a document) that is not a spreadsheet dfkit reads: unpack it or save as CSV",
    "gzip": "is a compressed archive: unpack it first",
    "binary": "is not a text file or a spreadsheet (it holds binary data): is it the right file?",
    "empty": "is empty: expected a header row such as 'fix,lat,lon,bearing' and one row per bearing",
}
