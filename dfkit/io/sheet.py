"""Reading a bearing sheet (CSV) into a table of text cells, keeping every line number.

This module knows about files, encodings, delimiters and column names, nothing
about what the values mean; :mod:`dfkit.observations` validates and converts.

The format (documented in the README, "The bearing sheet"):

* UTF-8 (a byte-order mark is fine), one header row, one row per bearing;
* comma-, semicolon- or tab-separated (detected from the header line); in a
  semicolon- or tab-separated sheet numbers may use a decimal comma;
* blank lines and lines starting with ``#`` are skipped (and counted);
* column names are case-insensitive; a few common spellings are accepted and
  reported (``latitude`` is read as ``lat``);
* columns dfkit does not know are kept and carried to the outputs.
"""

from __future__ import annotations

import csv
import io
import os
import re
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from dfkit.problems import Problem, SheetError

#: Columns with a meaning in dfkit (see the README for each).
KNOWN_COLUMNS = (
    "fix", "tag", "time", "lat", "lon", "utm_zone", "easting", "northing", "mgrs", "station",
    "bearing", "unit", "north", "sd", "declination", "observer", "antenna", "note",
)

#: Other spellings read as a known column. Each use is reported as a warning on line 1.
COLUMN_ALIASES = {
    "latitude": "lat", "longitude": "lon", "long": "lon", "lng": "lon",
    "zone": "utm_zone", "utm": "utm_zone",
    "azimuth": "bearing", "az": "bearing", "brg": "bearing", "bearing_deg": "bearing", "azimuth_deg": "bearing",
    "datetime": "time", "timestamp": "time", "date_time": "time",
    "sd_deg": "sd", "sigma": "sd", "declination_deg": "declination",
    "label": "fix", "fix_label": "fix", "notes": "note", "comment": "note",
    "frequency": "tag", "freq": "tag", "tag_id": "tag",
}

_DELIMITERS = (",", ";", "\t")


@dataclass
class RawSheet:
    """A sheet as text cells.

    ``table`` has one row per data row, a ``line`` column (physical line number in
    the file, header = 1) and one column per header name (canonical names for known
    columns), every cell a stripped string ('' when empty).
    """

    table: pd.DataFrame
    columns: list[str]
    delimiter: str
    decimal_comma: bool
    problems: list[Problem] = field(default_factory=list)
    skipped_lines: int = 0
    source: str = ""


def _decode(data: bytes, source: str, problems: list[Problem]) -> str:
    if b"\x00" in data[:4096] and (data.startswith(b"\xff\xfe") or data.startswith(b"\xfe\xff")):
        try:
            return data.decode("utf-16")
        except UnicodeDecodeError:
            pass
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as err:
        line = data[: err.start].count(b"\n") + 1
        problems.append(Problem(line, "", "the file is not UTF-8; it was read as Windows-1252 "
                                "(save it as 'CSV UTF-8' to be sure of accented text)", "warning", source))
        return data.decode("cp1252", errors="replace")


def _sniff_delimiter(header_line: str) -> str:
    counts = {}
    for d in _DELIMITERS:
        try:
            counts[d] = len(next(csv.reader([header_line], delimiter=d)))
        except (csv.Error, StopIteration):
            counts[d] = 0
    best = max(_DELIMITERS, key=lambda d: (counts[d], d == ","))
    return best if counts[best] > 1 else ","


def _canonical(name: str) -> str:
    return " ".join(name.replace("\ufeff", "").strip().lower().split()).replace(" ", "_")


def read_sheet(source, *, name: str | None = None) -> RawSheet:
    """Read a bearing sheet into text cells.

    Parameters
    ----------
    source : str, os.PathLike, bytes or file-like
        A path, the file's bytes, or an open binary/text file.
    name : str, optional
        Name used in messages (defaults to the file name).

    Raises
    ------
    SheetError
        The file cannot be read as a sheet at all: it is missing or empty, has no
        header row, or names a known column twice.
    """
    problems: list[Problem] = []
    if isinstance(source, (str, os.PathLike)):
        name = name or os.fspath(source)
        try:
            with open(source, "rb") as fh:
                data = fh.read()
        except OSError as err:
            raise SheetError(f"{name}: cannot read the file ({err.strerror or err})") from None
        text = _decode(data, name, problems)
    elif isinstance(source, bytes):
        text = _decode(source, name or "", problems)
    else:
        got = source.read()
        text = _decode(got, name or "", problems) if isinstance(got, bytes) else got.lstrip("\ufeff")
    name = name or ""

    if "\x00" in text:
        problems.append(Problem(0, "", "the file contains NUL bytes; they were removed", "warning", name))
        text = text.replace("\x00", "")
    if not text.strip():
        raise SheetError(f"{name or 'the sheet'} is empty: expected a header row such as "
                         "'fix,lat,lon,bearing' and one row per bearing")

    lines = text.splitlines()
    header_idx = next((i for i, ln in enumerate(lines) if ln.strip() and not ln.lstrip().startswith("#")), None)
    if header_idx is None:
        raise SheetError(f"{name or 'the sheet'} has only comments or blank lines: no header row")
    delimiter = _sniff_delimiter(lines[header_idx])

    fast = _fast_read(text, lines, header_idx, delimiter)
    if fast is not None:
        header = next(csv.reader([lines[header_idx]], delimiter=delimiter))
        columns = _resolve_header(header, header_idx + 1, name, problems)
        table, skipped = fast
        table.columns = ["line"] + columns
        if not len(table):
            problems.append(Problem(header_idx + 1, "", "the sheet has a header but no data rows", "warning", name))
        return RawSheet(table=table, columns=columns, delimiter=delimiter, decimal_comma=delimiter != ",",
                        problems=problems, skipped_lines=skipped, source=name)

    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter, skipinitialspace=False)
    header: list[str] | None = None
    header_line = 0
    rows: list[list[str]] = []
    line_numbers: list[int] = []
    skipped = 0
    try:
        while True:
            start = reader.line_num + 1
            try:
                row = next(reader)
            except StopIteration:
                break
            if not row or all(not c.strip() for c in row) or row[0].lstrip().startswith("#"):
                skipped += 1 if header is not None else 0
                continue
            if header is None:
                header, header_line = row, start
                continue
            rows.append(row)
            line_numbers.append(start)
    except csv.Error as err:
        raise SheetError(f"{name or 'the sheet'}: line {reader.line_num}: the CSV structure is broken ({err})") from None

    columns = _resolve_header(header, header_line, name, problems)
    width = len(columns)
    cells: list[list[str]] = [[] for _ in range(width)]
    kept_lines = []
    for row, line in zip(rows, line_numbers):
        if len(row) > width:
            extra = [c for c in row[width:] if c.strip()]
            if extra:
                hint = (" (decimal commas in a comma-separated sheet? use a semicolon-separated sheet "
                        "or decimal points)" if delimiter == "," else " (a stray delimiter?)")
                problems.append(Problem(line, "", f"the row has {len(row)} fields but the header has "
                                        f"{width}{hint}", "error", name))
                # Kept as a row so its fix label still reaches the output; validation skips it.
            row = row[:width]
        elif len(row) < width:
            row = row + [""] * (width - len(row))
        for j in range(width):
            cells[j].append(row[j].strip())
        kept_lines.append(line)

    table = pd.DataFrame({"line": pd.array(kept_lines, dtype="int64")})
    for j, col in enumerate(columns):
        table[col] = pd.Series(cells[j], dtype=object)
    if not len(table):
        problems.append(Problem(header_line, "", "the sheet has a header but no data rows", "warning", name))
    return RawSheet(table=table, columns=columns, delimiter=delimiter,
                    decimal_comma=delimiter != ",", problems=problems, skipped_lines=skipped, source=name)


_NOT_SIMPLE = re.compile('["\r\x0b\x0c\x1c\x1d\x1e\x85\u2028\u2029]')


def _fast_read(text, lines, header_idx, delimiter):
    """The common case read by pandas' C parser: no quotes and plain line ends, so one physical line is
    one row and line numbers follow directly. Returns (table, skipped lines) or None for the general path."""
    if _NOT_SIMPLE.search(text.replace("\r\n", "\n")):
        return None
    width = len(next(csv.reader([lines[header_idx]], delimiter=delimiter)))
    body = "\n".join(lines[header_idx + 1:])
    if not body.strip():
        return None
    try:
        df = pd.read_csv(io.StringIO(body), sep=delimiter, header=None, dtype=str, na_filter=False,
                         skip_blank_lines=False, quoting=csv.QUOTE_NONE, engine="c")
    except (pd.errors.ParserError, ValueError):
        return None
    if df.shape[1] != width or len(df) != len(lines) - header_idx - 1:
        return None
    cells = [df[c].to_numpy(dtype=object) for c in df.columns]
    if _has_padding(body, delimiter):
        cells = [pd.Series(c, dtype=object).str.strip().to_numpy(dtype=object) for c in cells]
    first = cells[0]
    blank = np.ones(len(df), bool)
    for c in cells:
        blank &= c == ""
    comment = (pd.Series(first, dtype=object).str.lstrip().str.startswith("#").to_numpy(dtype=bool)
               if "#" in body else np.zeros(len(first), bool))
    keep = ~(blank | comment)
    lines_no = np.arange(header_idx + 2, header_idx + 2 + len(df))
    table = pd.DataFrame({"line": pd.array(lines_no[keep], dtype="int64")})
    for j, c in enumerate(cells):
        table[j] = pd.Series(c[keep], dtype=object)
    return table, int((~keep).sum())


def _has_padding(body, delimiter):
    """Whether any cell may carry surrounding white space."""
    if delimiter == "\t":
        return " " in body
    return " " in body or "\t" in body


def _resolve_header(header, header_line, name, problems) -> list[str]:
    if header is None:
        raise SheetError(f"{name or 'the sheet'} has no header row")
    columns: list[str] = []
    first_seen: dict[str, int] = {}
    for j, raw in enumerate(header, start=1):
        col = _canonical(raw)
        if not col:
            col = f"column_{j}"
        if col in COLUMN_ALIASES and COLUMN_ALIASES[col] not in [_canonical(h) for h in header]:
            canon = COLUMN_ALIASES[col]
            problems.append(Problem(header_line, raw.strip(), f"read as '{canon}'", "warning", name))
            col = canon
        if col in first_seen:
            if col in KNOWN_COLUMNS:
                raise SheetError(f"{name or 'the sheet'}: line {header_line}: columns {first_seen[col]} and {j} "
                                 f"are both '{col}'; dfkit cannot tell which one to trust. Rename or remove one.")
            k = 2
            while f"{col}_{k}" in first_seen:
                k += 1
            problems.append(Problem(header_line, raw.strip(), f"column name repeated; the copy in column {j} "
                                    f"is kept as '{col}_{k}'", "warning", name))
            col = f"{col}_{k}"
        first_seen[col] = j
        columns.append(col)
    if "line" in first_seen:
        # 'line' is dfkit's own column in outputs; keep the user's under another name.
        idx = columns.index("line")
        columns[idx] = "line_in_sheet"
        problems.append(Problem(header_line, "line", "kept as 'line_in_sheet' ('line' is dfkit's line number)",
                                "warning", name))
    return columns
