"""Reading a bearing sheet (CSV) into a table of text cells, keeping every line number.

This module knows about files, encodings, delimiters and column names, nothing
about what the values mean; :mod:`dfkit.observations` validates and converts.

The format (documented in the README, "The bearing sheet"):

* UTF-8 (a byte-order mark is fine); UTF-16 with a byte-order mark; a line that
  is not UTF-8 is read alone as Windows-1252, with a warning naming it;
* one header row, one row per bearing; comma-, semicolon- or tab-separated
  (detected from the header line); in a semicolon- or tab-separated sheet
  numbers may use a decimal comma;
* a comment is a line whose very first character is ``#``; it is skipped, as are
  blank lines, and both are listed by line number in a note. A quoted cell is
  always data (``"#B"`` is a fix label);
* a quote that is never closed, or that swallows lines which look like rows of
  their own, is reported on the line where it opened; that row is not used and
  the following lines are read as rows;
* column names are case-insensitive; a few common spellings are accepted and
  reported (``latitude`` is read as ``lat``); columns dfkit does not know are
  kept and carried to the outputs; dfkit's own result columns (``true_bearing``,
  ``fix_id``...) are recomputed, not read;
* a cell that dfkit's CSV writer guarded against spreadsheet formulas (``'=A1``)
  is read back as it was (``=A1``).

Limits (errors, never tracebacks): a cell longer than :data:`MAX_CELL_CHARS`
rejects its row; a header naming more than :data:`MAX_COLUMNS` columns, a file
that is not text, or a file holding nothing but NUL bytes cannot be read
(:class:`~dfkit.problems.SheetError`). A line holding NUL bytes (a damaged
file) rejects its row. The common case (no quotes, UTF-8) is read by pandas'
C parser; the careful row-by-row path runs only where it is needed.
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

#: Headers read as the fix label (``fix``) when the sheet has no ``fix`` column: the word "fix" and a word or sign
#: that marks an identifier (id, #, no, no., nr, nr., n°, num, number, name), with or without a space, underscore,
#: hyphen or dot between (``Fix ID``, ``Fix #``, ``Fix No.``, ``FixNo``, ``fix_number``, ``Fix-Nr``). The list
#: is ours (the usual ways a field sheet heads its label column; common practice, no source). ``fix_id`` is also
#: the name of dfkit's own result column: it is read as one only in a table dfkit wrote (see
#: :func:`is_dfkit_table`).
FIX_LABEL_HEADER = re.compile(r"fix[_\-.]?(id|#|no\.?|nr\.?|n°|nº|num\.?|number|name)")

#: Columns dfkit computes and writes into its own tables (``check -o``, ``--bearings-out``). When such a table is
#: read back they are recomputed from the sheet's own columns, so the copies in the file are not read (a note
#: says so). ``line`` is kept as ``line_in_sheet`` (the line of the original field sheet) unless that exists.
DERIVED_COLUMNS = (
    "fix_id", "true_bearing", "sd_source", "convergence", "position_from", "grouped_by", "declination_sd",
    "residual_deg", "weight", "range_m", "position_step_east_m", "position_step_north_m",
    "rounding_sd_deg",
)

#: Longest cell read [characters]: Python's csv module's default field limit, kept so that dfkit never changes
#: that module's global setting. A row with a longer cell is rejected (a stray quote usually causes it).
MAX_CELL_CHARS = 131_072

#: Most named columns a sheet may have (a limit of ours, no source: a bearing sheet has a few dozen). Empty
#: column names at the end of a wider header (a spreadsheet's export artefact) are dropped first.
MAX_COLUMNS = 1000

#: Lines listed by number in one note before the rest are only counted.
_LIST_LINES = 40

_DELIMITERS = (",", ";", "\t")
_OWN = "\x00own_result_"     # reserved column name prefix for dfkit's own result columns (never read)
_LINE_END = re.compile(r"\r\n|\r|\n")
_SURROGATE = re.compile("[\udc80-\udcff]")
# Control characters that do not occur in a text sheet (NUL is handled per line, not counted here); with
# invalid UTF-8 they mark a binary file.
#: ASCII characters str.strip removes besides space, tab and line ends: a cell holding one may carry padding.
_OTHER_SPACES = "\x0b\x0c\x1c\x1d\x1e\x1f"
_BINARY = re.compile("[\x01-\x08\x0b\x0c\x0e-\x1f\x7f\ufffd]")
_GUARDED = re.compile("^'+[=+\\-@\t\r\n]")


@dataclass
class RawSheet:
    """A sheet as text cells.

    ``table`` has one row per data row, a ``line`` column (physical line number in
    the file, header = 1, where the row starts) and one column per header name
    (canonical names for known columns), every cell a stripped string ('' when
    empty), except the columns listed in ``numeric``: those hold float64, because the
    reader was asked to read them as numbers (``read_sheet(numeric=...)``) and every
    cell was a finite plain number. ``comment_lines`` and ``blank_lines`` list the
    skipped lines by number.
    """

    table: pd.DataFrame
    columns: list[str]
    delimiter: str
    decimal_comma: bool
    problems: list[Problem] = field(default_factory=list)
    skipped_lines: int = 0
    source: str = ""
    comment_lines: list[int] = field(default_factory=list)
    blank_lines: list[int] = field(default_factory=list)
    numeric: tuple[str, ...] = ()
    #: For a column held as numbers, the decimals each cell shows as the file wrote it (``number_decimals("lat", rows)``:
    #: on those rows of ``table``; ``47.8700``: 4; -1 with an exponent), counted on the file's bytes when asked;
    #: None when the sheet holds no such column. The step a value was written to needs its trailing zeros, which
    #: the number has lost.
    number_decimals: object = field(default=None, repr=False, compare=False)

    def __post_init__(self):
        own = [c for c in self.table.columns if str(c).startswith(_OWN)]
        if own:   # dfkit's own result columns, recomputed from the sheet (a note says so)
            self.table = self.table.drop(columns=own)
            self.columns = [c for c in self.columns if not str(c).startswith(_OWN)]


# --------------------------------------------------------------------------- bytes -> text

def _decode(data: bytes, source: str, problems: list[Problem]) -> str:
    """Bytes to text: BOM-declared UTF-16 or UTF-8; a line that is not UTF-8 is read alone as Windows-1252."""
    label = source or "the sheet"
    if data.startswith(b"PK\x03\x04"):
        raise SheetError(f"{label} is a ZIP archive (an .xlsx or .ods workbook?): save the sheet as 'CSV UTF-8'")
    if data.startswith(b"\xd0\xcf\x11\xe0"):
        raise SheetError(f"{label} is an old-style Office file (an .xls workbook?): save the sheet as 'CSV UTF-8'")
    if data.startswith((b"\xff\xfe", b"\xfe\xff")):
        try:
            return data.decode("utf-16")
        except UnicodeDecodeError as err:
            raise SheetError(f"{label} starts with a UTF-16 byte-order mark but is not valid UTF-16 "
                             f"(byte {err.start}): save the sheet as 'CSV UTF-8'") from None
    if len(data) >= 4 and data[1] == 0 and data[3] == 0 and data[0] and data[2]:
        try:   # UTF-16 little-endian without a byte-order mark ('f\0i\0x\0...')
            text = data.decode("utf-16-le")
            problems.append(Problem(0, "", "read as UTF-16 (little-endian) without a byte-order mark", "warning",
                                    source))
            return text
        except UnicodeDecodeError:
            pass
    if data.startswith(b"\xef\xbb\xbf"):
        data = data[3:]
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        pass
    text = data.decode("utf-8", "surrogateescape")
    # Only the lines holding undecodable bytes are re-read; they are found from the bad bytes, not line by line.
    pieces, bad = [], []
    done = 0                 # text[:done] is settled
    counted, line_no = 0, 1  # line_no is the number of the line starting at `counted`
    for m in _SURROGATE.finditer(text):
        if m.start() < done:
            continue         # on a line already re-read
        start = max(text.rfind("\n", 0, m.start()), text.rfind("\r", 0, m.start())) + 1
        ends = [k for k in (text.find("\n", m.start()), text.find("\r", m.start())) if k >= 0]
        end = min(ends) if ends else len(text)
        line_no += len(_LINE_END.findall(text, counted, start))
        counted = start
        pieces.append(text[done:start])
        pieces.append(text[start:end].encode("utf-8", "surrogateescape").decode("cp1252", errors="replace"))
        bad.append(line_no)
        done = end
    pieces.append(text[done:])
    advice = "save the sheet as 'CSV UTF-8' to be sure of accented text"
    if len(bad) <= 20:
        for line in bad:
            problems.append(Problem(line, "", f"this line is not UTF-8; it alone was read as Windows-1252 ({advice})",
                                    "warning", source))
    else:
        problems.append(Problem(bad[0], "", f"{len(bad)} lines are not UTF-8 ({_list_lines(bad)}); each was read "
                                f"as Windows-1252 ({advice})", "warning", source))
    return _not_binary("".join(pieces), source)


def _not_binary(text: str, name: str) -> str:
    """Text decoded with the Windows-1252 fallback that is full of control characters came from a binary file."""
    sample = text[:65536].replace("\x00", "")
    count = len(_BINARY.findall(sample))
    if count >= 8 and count > 0.05 * len(sample):
        raise SheetError(f"{name or 'the sheet'} does not look like a text sheet ({count / len(sample):.0%} of its "
                         "first characters are control bytes and it is not UTF-8): is it a binary file or a "
                         "workbook? Save the sheet as 'CSV UTF-8'")
    return text


def _check_text(text: str, name: str) -> str:
    if "\x00" in text[:65536] and not text.replace("\x00", "").strip():
        raise SheetError(f"{name or 'the sheet'} holds nothing but NUL bytes (a damaged file?): no header row")
    return text


def _physical_lines(text: str) -> list[str]:
    """Lines as the csv module counts them (ends: \\r\\n, \\r or \\n), without their ends."""
    lines = text.split("\n") if "\r" not in text else _LINE_END.split(text)
    if lines and lines[-1] == "":
        lines.pop()
    return lines


# --------------------------------------------------------------------------- header

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


def _parse_header(line: str, line_no: int, delimiter: str, name: str, problems) -> list[str]:
    label = name or "the sheet"
    if len(line) > MAX_CELL_CHARS and max(len(c) for c in line.split(delimiter)) > MAX_CELL_CHARS:
        raise SheetError(f"{label}: line {line_no}: the header has a field longer than {MAX_CELL_CHARS} "
                         "characters: this is not a bearing sheet's header")
    try:
        header = next(csv.reader([line], delimiter=delimiter))
    except csv.Error as err:
        raise SheetError(f"{label}: line {line_no}: the header cannot be read ({err})") from None
    named = len(header)
    while named and not header[named - 1].strip():
        named -= 1
    if named > MAX_COLUMNS:
        raise SheetError(f"{label}: line {line_no}: the header names {named} columns; dfkit reads at most "
                         f"{MAX_COLUMNS} (is this a bearing sheet?)")
    if len(header) > MAX_COLUMNS:
        problems.append(Problem(line_no, "", f"the header ends in {len(header) - named} empty column names; they "
                                "were ignored", "warning", name))
        header = header[:named]
    return header


def is_dfkit_table(columns) -> bool:
    """Whether canonical column names are those of a table dfkit wrote (``check -o``, ``--bearings-out``): a
    ``fix`` column and at least one of dfkit's result columns besides ``fix_id``. Only there is ``fix_id`` dfkit's
    own fix number; elsewhere it is the user's fix label."""
    cols = set(columns)
    return "fix" in cols and any(c in cols for c in DERIVED_COLUMNS if c != "fix_id")


def _fix_label_header(col, present, claimed, header_line, raw, name, problems) -> str:
    """The name a fix-label spelling (:data:`FIX_LABEL_HEADER`) is read under, with a warning saying which."""
    if "fix" not in present and not claimed:
        problems.append(Problem(header_line, raw.strip(), "read as 'fix' (the fix label)", "warning", name))
        return "fix"
    keep = f"{col}_in_sheet" if col == "fix_id" else col
    other = "a 'fix' column" if "fix" in present else f"'{claimed}' read as the fix label"
    problems.append(Problem(header_line, raw.strip(), f"not read as the fix label, since the sheet has {other}; "
                            f"kept as '{keep}' and carried to the outputs", "warning", name))
    return keep


def _resolve_header(header, header_line, name, problems, keep_own=False) -> list[str]:
    """Column names for the header cells. dfkit's own result columns get a reserved name (:data:`_OWN`) and
    :class:`RawSheet` leaves them out, whichever reader built it (CSV, spreadsheet, DataFrame). A fix-label
    spelling (:data:`FIX_LABEL_HEADER`, ``fix_id`` outside a table dfkit wrote) is read as ``fix``."""
    if header is None:
        raise SheetError(f"{name or 'the sheet'} has no header row")
    canon = [_canonical(raw) for raw in header]
    present = set(canon)
    own_table = keep_own or is_dfkit_table(canon)
    label_from = ""
    columns: list[str] = []
    first_seen: dict[str, int] = {}
    next_copy: dict[str, int] = {}
    derived: list[str] = []
    copies: dict[str, list[tuple[int, str]]] = {}
    for j, (raw, col) in enumerate(zip(header, canon), start=1):
        if not col:
            col = f"column_{j}"
        if not own_table and (FIX_LABEL_HEADER.fullmatch(col) or label_from and COLUMN_ALIASES.get(col) == "fix"):
            col = _fix_label_header(col, present, label_from, header_line, raw, name, problems)
        elif not keep_own and col in COLUMN_ALIASES and COLUMN_ALIASES[col] not in present:
            alias = COLUMN_ALIASES[col]
            problems.append(Problem(header_line, raw.strip(), f"read as '{alias}'", "warning", name))
            col = alias
        if col == "fix" and canon[j - 1] != "fix":
            label_from = label_from or raw.strip()
        if keep_own and col in (*DERIVED_COLUMNS, "line"):
            col = "line_in_sheet" if col == "line" else col
        elif col in DERIVED_COLUMNS or (col == "line" and "line_in_sheet" in present):
            derived.append(col)
            col = f"{_OWN}{j}"     # a name no header can produce
        elif col == "line":
            # 'line' is dfkit's line number in outputs; keep the user's under another name.
            problems.append(Problem(header_line, "line", "kept as 'line_in_sheet' ('line' is dfkit's line number)",
                                    "warning", name))
            col = "line_in_sheet"
        if col in first_seen:
            if col in KNOWN_COLUMNS:
                raise SheetError(f"{name or 'the sheet'}: line {header_line}: columns {first_seen[col]} and {j} "
                                 f"are both '{col}'; dfkit cannot tell which one to trust. Rename or remove one.")
            k = next_copy.get(col, 2)
            while f"{col}_{k}" in first_seen or f"{col}_{k}" in present:
                k += 1
            next_copy[col] = k + 1
            copies.setdefault(col, []).append((j, f"{col}_{k}"))
            col = f"{col}_{k}"
        first_seen[col] = j
        columns.append(col)
    for col, kept in copies.items():
        where = ", ".join(f"column {j} as '{new}'" for j, new in kept[:5])
        more = f" and {len(kept) - 5} more" if len(kept) > 5 else ""
        problems.append(Problem(header_line, col, f"column name repeated; the {'copy is' if len(kept) == 1 else 'copies are'}"
                                f" kept: {where}{more}", "warning", name))
    if derived:
        problems.append(Problem(header_line, "", f"{', '.join(derived)}: dfkit's own result "
                                f"{'column' if len(derived) == 1 else 'columns'}, recomputed from this sheet; "
                                "the values in the file are not read", "note", name))
    return columns


# --------------------------------------------------------------------------- reading

def read_sheet(source, *, name: str | None = None, own_results: str = "recompute", numeric=()) -> RawSheet:
    """Read a bearing sheet into text cells.

    Parameters
    ----------
    source : str, os.PathLike, bytes or file-like
        A path, the file's bytes, or an open binary/text file.
    name : str, optional
        Name used in messages (defaults to the file name).
    own_results : {'recompute', 'keep'}
        What to do with dfkit's own result columns (:data:`DERIVED_COLUMNS`, ``line``):
        'recompute' (a bearing sheet) leaves them out with a note and keeps ``line`` as
        ``line_in_sheet``; 'keep' (a table of results read as such) reads them, and every other
        column, under its own name (no other spellings are read as known columns).
    numeric : collection of str, or mapping of str to float or None
        Columns (canonical names) to read straight into floats when every cell of the column is a
        finite plain number (``48.9687``, ``-3``, ``1e5``; the values Python's ``float`` gives) and, for a
        mapping, no larger in size than the column's bound (``{'lat': 90.0}``: a latitude column holding
        ``4751.6`` stays text, so a packed angle keeps its leading zeros). Such columns are listed in
        ``RawSheet.numeric``; any other column, and every column of a sheet that takes the careful path,
        stays text, so the validator's messages are those of the text cells.

    Returns
    -------
    RawSheet
        Text cells with line numbers, the problems found (rows refused by the reader are
        kept as rows with an error, so their fix label still reaches the output), and the
        skipped comment and blank lines.

    Raises
    ------
    SheetError
        The file cannot be read as a sheet at all: it is missing, empty, not text, has no
        header row, names a known column twice, or has an absurdly wide header.
    """
    problems: list[Problem] = []
    data = None
    if isinstance(source, (str, os.PathLike)):
        name = name or os.fspath(source)
        try:
            with open(source, "rb") as fh:
                data = fh.read()
        except OSError as err:
            raise SheetError(f"{name}: cannot read the file ({err.strerror or err})") from None
        text = _decode(data, name, problems)
    elif isinstance(source, (bytes, bytearray)):
        data = bytes(source)
        text = _decode(data, name or "", problems)
    else:
        got = source.read()
        text = _decode(got, name or "", problems) if isinstance(got, bytes) else got.lstrip("\ufeff")
    # an ASCII file's bytes are its text's (kept for the C parser, which would otherwise encode a copy)
    ascii_bytes = data if data is not None and len(data) == len(text) and text.isascii() else None
    del data
    name = name or ""
    text = _check_text(text, name)
    if _blank(text):
        raise SheetError(f"{name or 'the sheet'} is empty: expected a header row such as "
                         "'fix,lat,lon,bearing' and one row per bearing")

    lines = _LazyLines(text)
    comments: list[int] = []
    blanks: list[int] = []
    header_idx = None
    for i, ln in enumerate(lines.head()):
        if ln.startswith("#"):
            comments.append(i + 1)
        elif not ln.replace("\x00", "").strip():
            blanks.append(i + 1)
        else:
            header_idx = i
            header_line = ln
            break
    if header_idx is None:
        raise SheetError(f"{name or 'the sheet'} has only comments or blank lines: no header row")
    if "\x00" in header_line:
        problems.append(Problem(header_idx + 1, "", "the header holds NUL bytes (a damaged file?); they were "
                                "removed", "warning", name))
        header_line = header_line.replace("\x00", "")
    delimiter = _sniff_delimiter(header_line)
    header = _parse_header(header_line, header_idx + 1, delimiter, name, problems)
    header = [h.strip()[1:] if _GUARDED.match(h.strip()) else h for h in header]
    if own_results not in ("recompute", "keep"):
        raise ValueError(f"own_results='{own_results}' must be 'recompute' or 'keep'")
    columns = _resolve_header(header, header_idx + 1, name, problems, own_results == "keep")
    header_columns = list(columns)
    width = len(columns)

    bounds = dict(numeric) if isinstance(numeric, dict) else dict.fromkeys(numeric)
    want = {j: bounds[c] for j, c in enumerate(columns) if c in bounds}
    got = _direct_read(text, lines, header_idx, delimiter, width, want, ascii_bytes)
    del ascii_bytes
    if got is None:
        got = _fast_read(text, lines.all, header_idx, delimiter, width, want)
    if got is None:
        got = _careful_read(lines.all, header_idx, delimiter, width, name, problems, "'" in text)
    line_no, cells, more_comments, more_blanks, n_unguarded, *reread = got
    comments += more_comments
    blanks += more_blanks

    data = {"line": pd.array(line_no, dtype="int64")}
    for col, c in zip(columns, cells):
        data[col] = c
    table = pd.DataFrame(data, copy=False)      # the columns as read: not gathered into a block by dtype (a copy)
    table = _drop_empty_unnamed(table, columns, header, header_idx + 1, name, problems)
    columns = [c for c in table.columns if c != "line"]
    held = tuple(c for c in columns if table[c].dtype.kind == "f")    # read as numbers (``numeric``)
    number_decimals = None
    if held and reread and reread[0] is not None:
        index = {c: j for j, c in enumerate(header_columns) if c in held}
        number_decimals = _NumberDecimals(reread[0], index)
    if n_unguarded:
        problems.append(Problem(0, "", f"{n_unguarded} {'cell' if n_unguarded == 1 else 'cells'} began with ' "
                                "before =, +, -, @, tab or CR (a guard against spreadsheet formulas, as dfkit "
                                "writes); read without the '", "note", name))
    if comments:
        _rows_taken_for_comments(lines.all, comments, header_idx + 1, delimiter, width, name, problems)
    if not len(table):
        problems.append(Problem(header_idx + 1, "", "the sheet has a header but no data rows", "warning", name))
    _note_skipped(comments, blanks, name, problems)
    return RawSheet(table=table, columns=columns, delimiter=delimiter, decimal_comma=delimiter != ",",
                    problems=problems, skipped_lines=len(comments) + len(blanks), source=name,
                    comment_lines=comments, blank_lines=blanks, numeric=held, number_decimals=number_decimals)


def _decimals_shown(view, marks, lines, j, width):
    """Decimals field ``j`` of each of the body's lines ``lines`` shows (digits after its point; 0 without one),
    -1 where the field holds an exponent (``e``/``E``), vectorised over the lines. ``view``: the body's bytes;
    ``marks``: positions of the line ends (``-1`` first, the length last), delimiters, points and exponent letters."""
    ends, delims, dots, exps = marks
    lines = np.asarray(lines, np.intp)
    start = ends[lines] + 1
    stop = ends[lines + 1]

    def next_of(pos, where):
        if not len(where):
            return np.full(len(pos), len(view))
        k = np.searchsorted(where, pos)
        return np.where(k < len(where), where[np.minimum(k, len(where) - 1)], len(view))

    per_line = width - 1
    if len(delims) == (len(ends) - 1) * per_line:
        # every line holds width - 1 delimiters (a held column has a number on every line, and the parser took no
        # line with more fields): line k's j-th delimiter is the (k (width - 1) + j)-th of the body
        at = lines * per_line + j
        if j:
            start = delims[at - 1] + 1
        if j < per_line:
            stop = delims[at]
    else:
        for _ in range(j):              # past the j delimiters before the field
            nxt = next_of(start, delims)
            start = np.where(nxt < stop, nxt + 1, stop)
        stop = np.minimum(stop, next_of(start, delims))
    if len(dots):
        k = np.searchsorted(dots, stop) - 1
        dot = np.where(k >= 0, dots[np.maximum(k, 0)], -1)
    else:                           # whole numbers only
        dot = np.full(len(lines), -1)
    has_dot = dot >= start
    decimals = np.where(has_dot, stop - dot - 1, 0)
    # a field padded with white space after its digits (rare): counted on its stripped text
    last = view[np.clip(stop - 1, 0, len(view) - 1)]
    for i in np.flatnonzero(has_dot & (stop > start) & ((last < 48) | (last > 57))).tolist():
        decimals[i] = _cell_decimals(bytes(view[start[i]:stop[i]]))
    exponent = next_of(start, exps) < stop
    return np.where(exponent, -1, decimals)


def _cell_decimals(cell: bytes) -> int:
    """Decimals one number's bytes show (digits after its point, white space aside; 0 without one), -1 with an
    exponent."""
    cell = cell.strip()
    if b"e" in cell or b"E" in cell:
        return -1
    return len(cell) - cell.rfind(b".") - 1 if b"." in cell else 0


class _NumberDecimals:
    """:attr:`RawSheet.number_decimals`: decimals each cell of a column read as numbers shows as the file wrote it, by
    column name and table rows."""

    def __init__(self, reread, index):
        self._reread, self._index = reread, index

    def __call__(self, name, rows):
        j = self._index.get(name)
        return None if j is None else self._reread(j, np.asarray(rows, np.intp))


def _blank(text) -> bool:
    """Whether a text holds nothing but white space and NUL bytes (looked at from its start: a text whose first
    characters are not all blank is not blank, and is not copied to find out)."""
    for part in (text[:4096], text):
        if part.replace("\x00", "").strip():
            return False
    return True


def _line_ends(view, start, step=1 << 20):
    """Offsets of the line ends (``\n``) in ``view`` (bytes as uint8) from ``start`` on, looked for a megabyte at a
    time (a mask of the whole file would be a byte per byte of it)."""
    parts = [np.flatnonzero(view[a:a + step] == 10) + a for a in range(start, len(view), step)]
    return np.concatenate(parts) if parts else np.zeros(0, np.intp)


class _LazyLines:
    """The physical lines of a text (:func:`_physical_lines`), split only when a line past the header is asked for:
    a sheet that goes straight to the C parser (:func:`_direct_read`) is never split into a list of lines."""

    def __init__(self, text):
        self.text = text
        self._lines = None
        self.ends = []          # offset just past the line end of each line handed out by head()

    def head(self):
        """The lines from the top, one at a time, as :func:`_physical_lines` gives them."""
        text, pos = self.text, 0
        ends = _LINE_END if "\r" in text else _NEWLINE
        while pos < len(text):
            m = ends.search(text, pos)
            if m is None:
                self.ends.append(len(text))
                yield text[pos:]
                return
            self.ends.append(m.end())
            yield text[pos:m.start()]
            pos = m.end()

    @property
    def all(self):
        if self._lines is None:
            self._lines = _physical_lines(self.text)
        return self._lines


_NEWLINE = re.compile("\n")


def _direct_read(text, lines, header_idx, delimiter, width, want=None, data=None):
    """The commonest case of all handed to the C parser as the file's own bytes: ASCII text with no quote, NUL
    or carriage return, and in the body no comment line, empty line or line longer than a cell may be. Every
    physical line is then one row, exactly as :func:`_fast_read` would join them, without splitting the text
    into lines (the checks run on the positions of the line ends). Returns what :func:`_fast_read` returns, or
    None (then :func:`_fast_read` decides). ``data``: the text's ASCII bytes, when the caller has them."""
    start = lines.ends[header_idx]
    if start >= len(text) or not (data is not None or text.isascii()):
        return None
    if data is None:
        data = text.encode("ascii")
    if b'"' in data or b"\x00" in data or b"\r" in data:
        return None
    view = np.frombuffer(data, np.uint8)
    ends = _line_ends(view, start)
    starts = np.concatenate([[start], ends + 1])
    starts = starts[starts < len(view)]           # a line end closing the file starts no line
    first = view[starts]
    if (first == ord("#")).any() or (first == 10).any():      # a comment line or an empty line
        return None
    n = len(starts)
    if len(view) - start > MAX_CELL_CHARS:
        stops = np.concatenate([ends, [len(view)]])[:n]
        if (stops - starts).max() > MAX_CELL_CHARS:
            return None
        del stops
    del view, ends, starts, first
    numbers = np.arange(header_idx + 2, header_idx + 2 + n)
    body = _parser_source.from_bytes(data, start)
    del data
    return _parse_body(body, n, numbers, np.zeros(n, bool), delimiter, width, want)


def _fast_read(text, lines, header_idx, delimiter, width, want=None):
    """The common case read by pandas' C parser: no quotes, no NUL and plain line ends, so one physical line
    is one row and line numbers follow directly. Columns ``want`` (index -> bound or None) come back as float
    arrays when every cell is a finite plain number (:func:`_as_numbers`) within the bound, as text otherwise. Returns (lines, cells per
    column, comment lines, blank lines, cells unguarded), or None for the careful path."""
    if '"' in text or "\x00" in text or ("\r" in text and "\r" in text.replace("\r\n", "\n")):
        return None
    body_lines = lines[header_idx + 1:]
    n = len(body_lines)
    if not n or len(text) > MAX_CELL_CHARS and max(map(len, body_lines)) > MAX_CELL_CHARS:
        return None
    numbers = np.arange(header_idx + 2, header_idx + 2 + n)
    comment = np.zeros(n, bool)
    if "\n#" in text:
        comment = np.fromiter((ln[:1] == "#" for ln in body_lines), bool, n)
        body_lines = [ln for ln, c in zip(body_lines, comment) if not c]
    if not body_lines:
        return numbers[:0], [np.zeros(0, object)] * width, numbers[comment].tolist(), [], 0
    n_body = len(body_lines)
    body = _parser_source("\n".join(body_lines))
    del body_lines
    return _parse_body(body, n_body, numbers, comment, delimiter, width, want)


def _parse_body(body, n_body, numbers, comment, delimiter, width, want):
    """The rows of a body (``n_body`` physical lines, one row each) through the C parser; ``numbers`` are the
    line numbers of the body's lines, comment lines (``comment``) included."""
    kw = dict(sep=delimiter, header=None, na_filter=False, skip_blank_lines=False, quoting=csv.QUOTE_NONE,
              engine="c")
    want = {j: bound for j, bound in (want or {}).items() if j < width}
    try:
        df = pd.read_csv(body(), dtype={j: str for j in range(width) if j not in want} if want else str,
                         **kw)
    except (pd.errors.ParserError, ValueError):
        return None
    if df.shape[1] != width or len(df) != n_body:
        return None
    raw = [df[c] for c in df.columns]
    del df
    floats = {}
    for j, bound in want.items():
        floats[j] = _as_numbers(raw[j], bound)
        if floats[j] is None:        # some cell is not a plain finite number: the column is read as text
            del floats[j]
            if raw[j].dtype != object:
                raw[j] = pd.read_csv(body(), usecols=[j], dtype=str, **kw)[j]
    texts = [j for j in range(width) if j not in floats]
    padded, guarded = body.padded(delimiter), body.guarded()
    n_rows = len(raw[0])
    tidy, n_unguarded = _tidy([raw[j].to_numpy(dtype=object) for j in texts], padded, guarded)
    del raw
    cells = [floats.get(j) for j in range(width)]
    for j, c in zip(texts, tidy):
        cells[j] = c
    blank = np.ones(n_rows, bool) if not floats else np.zeros(n_rows, bool)
    for c in tidy:
        blank &= c == ""
    numbers_kept = numbers[~comment] if comment.any() else numbers
    keep = ~blank if blank.any() else None

    kept = None if keep is None else np.flatnonzero(keep)
    found = {}

    def reread(j, rows):
        """Decimals each cell of column ``j`` (read as numbers) shows on table rows ``rows`` as the file wrote it
        (``47.8700``: 4), -1 where it has an exponent: counted on the body's bytes (no quotes on this path, so a
        line's fields are its parts between delimiters)."""
        which = rows if kept is None else kept[rows]
        if not found:
            data = body.data if body.data is not None else body.text.encode("utf-8", "surrogatepass")
            view = np.frombuffer(data, np.uint8)[body.start if body.data is not None else 0:]
            found["view"] = view
            kind = np.int32 if len(view) < 2**31 - 1 else np.int64     # positions: half the memory of int64
            found["kind"] = kind
            found["ends"] = np.concatenate([[-1], np.flatnonzero(view == 10).astype(kind), [len(view)]]).astype(kind)
        view, ends = found["view"], found["ends"]
        if len(which) * 64 < len(ends):      # a few lines (a GPS sheet's rare coarse-looking rows): one by one
            out = np.zeros(len(which), np.int64)
            for i, k in enumerate(which.tolist()):
                parts = bytes(view[ends[k] + 1:ends[k + 1]]).split(delimiter.encode())
                out[i] = _cell_decimals(parts[j] if j < len(parts) else b"")
            return out
        if "marks" not in found:
            kind = found["kind"]
            found["marks"] = (ends, np.flatnonzero(view == ord(delimiter)).astype(kind),
                              np.flatnonzero(view == 46).astype(kind),
                              np.flatnonzero((view == 101) | (view == 69)).astype(kind))
        # in chunks of lines, so that the working arrays stay small whatever the sheet's length
        return np.concatenate([_decimals_shown(view, found["marks"], which[s:s + 65_536], j, width)
                               for s in range(0, len(which), 65_536)] or [np.zeros(0, np.int64)])

    reread = reread if floats else None
    if keep is None:       # no blank row (the common case): the columns as they are, not a copy of each
        return numbers_kept, cells, numbers[comment].tolist(), [], n_unguarded, reread
    return (numbers_kept[keep], [c[keep] for c in cells], numbers[comment].tolist(),
            numbers_kept[blank].tolist(), n_unguarded, reread)


class _parser_source:
    """The body of a sheet for pandas' parser: UTF-8 bytes (a fourth of the memory of a ``StringIO``, which
    holds four bytes per character), or the text itself when it cannot be encoded (a lone surrogate)."""

    def __init__(self, text):
        self.text = text
        try:
            self.data = text.encode("utf-8")
        except UnicodeEncodeError:
            self.data = None

    start = 0       # where the body starts in ``data`` (the bytes are shared, not sliced into a copy)

    @classmethod
    def from_bytes(cls, data, start=0):
        """A body of ASCII bytes from ``start`` on (its text is not kept: :meth:`padded` and :meth:`guarded` look
        at the bytes)."""
        body = cls.__new__(cls)
        body.text, body.data, body.start = None, data, start
        return body

    def padded(self, delimiter) -> bool:
        """Whether any cell may carry surrounding white space (:func:`_has_padding`)."""
        if self.text is not None:
            return _has_padding(self.text, delimiter)
        data, start = self.data, self.start       # ASCII: the same searches as _has_padding's, on the bytes
        if data.find(b" ", start) >= 0 or (delimiter != "\t" and data.find(b"\t", start) >= 0):
            return True
        return any(data.find(ch.encode("ascii"), start) >= 0 for ch in _OTHER_SPACES)

    def guarded(self) -> bool:
        """Whether any cell may carry a formula guard ``'``."""
        return "'" in self.text if self.text is not None else self.data.find(b"'", self.start) >= 0

    def __call__(self):
        if self.data is None:
            return io.StringIO(self.text)
        stream = io.BytesIO(self.data)     # shares the bytes; the parser reads from the body's start
        stream.seek(self.start)
        return stream


def _as_numbers(col: pd.Series, bound=None):
    """A column the C parser read as numbers, as float64; None when it holds text or a value that is not a
    finite number (NaN, infinity: the validator words those), an integer too large for a float to hold, or
    a value larger in size than ``bound``."""
    if col.dtype.kind == "f":
        values = col.to_numpy(dtype=float)
    elif col.dtype.kind in "iu":
        values = col.to_numpy(dtype=float)
        if len(values) and np.abs(values).max() >= 2.0 ** 53:
            return None
    else:
        return None
    if not np.isfinite(values).all():
        return None
    if bound is not None and len(values) and np.abs(values).max() > bound:
        return None
    return values


def _tidy(cells, padded: bool, guarded: bool):
    """Cells stripped of surrounding white space; a cell that a CSV formula guard wrote as ``'=...`` is read as
    it was (``=...``: one ``'`` removed before the strip). Returns (cells, how many were unguarded)."""
    if not (padded or guarded):
        return cells, 0
    out = []
    n = 0
    for c in cells:
        s = pd.Series(c, dtype=object)
        if padded:
            s = s.str.lstrip()
        if guarded:
            hit = s.str.match(_GUARDED).fillna(False).to_numpy(dtype=bool)
            if hit.any():
                s = s.copy()
                s[hit] = s[hit].str.slice(1)
                n += int(hit.sum())
        if padded:
            s = s.str.strip()
        out.append(s.to_numpy(dtype=object))
    return out, n


_PADDING = re.compile(r"[^\S\n]")        # white space as str.strip() sees it, other than the line end
_PADDING_TAB = re.compile(r"[^\S\n\t]")


def _has_padding(body, delimiter):
    """Whether any cell may carry surrounding white space (anything str.strip() removes)."""
    if " " in body or (delimiter != "\t" and "\t" in body):
        return True
    if body.isascii():     # the other ASCII white space, found by fast substring searches
        return any(ch in body for ch in _OTHER_SPACES)
    return (_PADDING_TAB if delimiter == "\t" else _PADDING).search(body) is not None


class _Lines:
    """The physical lines handed to the csv module one at a time.

    At the start of a row it skips comment lines (first character ``#``) and notes
    them; inside a quoted cell nothing is a comment. It removes NUL bytes and
    notes the lines that held them, and it can be rewound to re-read lines.
    """

    def __init__(self, lines, start):
        self.lines = lines
        self.pos = start          # index of the next line to hand out
        self.at_start = True
        self.first = 0            # line number where the current row starts
        self.comments: list[int] = []
        self.nul_lines: list[int] = []

    def __iter__(self):
        return self

    def __next__(self):
        while self.pos < len(self.lines):
            ln = self.lines[self.pos]
            self.pos += 1
            if self.at_start:
                if ln.startswith("#"):
                    self.comments.append(self.pos)
                    continue
                self.at_start = False
                self.first = self.pos
            if "\x00" in ln:
                self.nul_lines.append(self.pos)
                ln = ln.replace("\x00", "")
            return ln + "\n"
        raise StopIteration


def _careful_read(lines, header_idx, delimiter, width, name, problems, guarded):
    """Row by row with the csv module: quoted cells, multi-line cells, stray quotes, NUL bytes, huge cells."""
    feed = _Lines(lines, header_idx + 1)
    reader = csv.reader(feed, delimiter=delimiter)
    starts: list[int] = []
    rows: list[list[str]] = []
    blanks: list[int] = []

    def refuse(first, row, message):
        problems.append(Problem(first, "", message, "error", name))
        starts.append(first)
        rows.append(row)

    while True:
        feed.at_start = True
        n_nul = len(feed.nul_lines)
        try:
            row = next(reader)
        except StopIteration:
            break
        except csv.Error:
            first = feed.first
            if feed.pos > first:      # the cell ran over several lines: a stray quote
                refuse(first, _literal(lines[first - 1], delimiter),
                       f"a quote opened in this row is not closed within {MAX_CELL_CHARS} characters; the row is "
                       f"not used and the lines after it are read as rows (check the quotes)")
                feed.pos = first
            else:
                refuse(first, [c if len(c) <= MAX_CELL_CHARS else "" for c in _literal(lines[first - 1], delimiter)],
                       f"a cell is longer than {MAX_CELL_CHARS} characters; the row is not used")
            continue
        first, last = feed.first, feed.pos
        if last > first:
            why = _swallowed(lines, first, last, row, width, delimiter)
            if why:
                refuse(first, _literal(lines[first - 1], delimiter), why)
                feed.pos = first
                continue
        if len(feed.nul_lines) > n_nul:
            refuse(first, row, "this row holds NUL bytes (a damaged file?); it is not used")
            continue
        if not "".join(row).strip():
            blanks.append(first)
            continue
        if len(row) > width and any(c.strip() for c in row[width:]):
            hint = (" (decimal commas in a comma-separated sheet? use a semicolon-separated sheet "
                    "or decimal points)" if delimiter == "," else " (a stray delimiter?)")
            # Kept as a row so its fix label still reaches the output; validation skips it.
            problems.append(Problem(first, "", f"the row has {len(row)} fields but the header has {width}{hint}",
                                    "error", name))
        starts.append(first)
        rows.append(row)

    cells: list[list[str]] = [[] for _ in range(width)]
    n_unguarded = 0
    for row in rows:
        if len(row) > width:
            row = row[:width]
        elif len(row) < width:
            row = row + [""] * (width - len(row))
        for j in range(width):
            c = row[j].strip()
            if guarded and c[:1] == "'":     # as _tidy: one guard ' removed after leading space, then strip
                raw = row[j].lstrip()
                if _GUARDED.match(raw):
                    c = raw[1:].strip()
                    n_unguarded += 1
            cells[j].append(c)
    cells_arr = [np.asarray(c, dtype=object) if c else np.zeros(0, object) for c in cells]
    order = np.argsort(np.asarray(starts, dtype=np.int64), kind="stable")
    cells_arr = [c[order] for c in cells_arr]
    starts_arr = np.asarray(starts, dtype=np.int64)[order]
    if n_unguarded:     # a row of nothing but guarded white space ('\t) is blank once read
        blank = np.ones(len(starts_arr), bool)
        for c in cells_arr:
            blank &= c == ""
        blank &= ~np.isin(starts_arr, [p.line for p in problems if p.severity == "error"])
        if blank.any():
            blanks = sorted(blanks + starts_arr[blank].tolist())
            starts_arr = starts_arr[~blank]
            cells_arr = [c[~blank] for c in cells_arr]
    return starts_arr, cells_arr, feed.comments, blanks, n_unguarded


def _literal(line: str, delimiter: str) -> list[str]:
    """A line split at every delimiter, quotes kept as written (for a row whose quoting is broken)."""
    return line.replace("\x00", "").split(delimiter)


def _swallowed(lines, first, last, row, width, delimiter) -> str:
    """Why a row spanning lines first..last looks like a stray quote swallowing rows ('' if it looks fine)."""
    joined = "\n".join(lines[first - 1:last]) + "\n"
    try:
        list(csv.reader(io.StringIO(joined, newline=""), delimiter=delimiter, strict=True))
        closed = True
    except csv.Error:
        closed = False
    where = f"lines {first + 1}-{last}" if last > first + 1 else f"line {first + 1}"
    if not closed:
        return (f"a quote opened in this row is never closed, so {where} (to the end of the file) would be read "
                "as one cell; the row is not used and the lines after it are read as rows (check the quotes)")
    if len(row) > width:
        return (f"a quote in this row runs over {where} and gives {len(row)} fields where the header has {width}; "
                "the row is not used and the lines after it are read as rows (check the quotes)")
    if width >= 3:
        # A quoted cell may hold line ends (a long note); one holding a line with a row's worth of delimiters
        # has swallowed rows.
        for cell in row:
            for k, part in enumerate(cell.split("\n")[1:], start=1):
                if part.count(delimiter) >= width - 1:
                    return (f"a quote in this row runs over {where}, and line {first + k} looks like a row of its "
                            "own; the row is not used and the lines after it are read as rows (check the quotes)")
    return ""


def _drop_empty_unnamed(table, columns, header, header_line, name, problems):
    """Columns with no name in the header and no value in any row carry nothing: drop them (noted)."""
    empty = [col for col, raw in zip(columns, header) if not raw.strip() and col.startswith("column_")
             and not (table[col] != "").any()]
    if empty and len(empty) < len(columns):
        table = table.drop(columns=empty)
        problems.append(Problem(header_line, "", f"{len(empty)} {'column' if len(empty) == 1 else 'columns'} with "
                                "no name and no values ignored", "note", name))
    return table


def _rows_taken_for_comments(lines, comments, header_line, delimiter, width, name, problems):
    """A comment line after the header with as many fields as the header is probably a row whose label starts
    with '#': say so (it is still skipped: only quoted cells are data)."""
    if width < 3:
        return
    for k in comments:
        if k > header_line and lines[k - 1].count(delimiter) >= width - 1:
            first = lines[k - 1].split(delimiter, 1)[0]
            problems.append(Problem(k, "", f"starts with '#', so it was skipped as a comment, but it has as many "
                                    f"fields as the header: if it is a row, quote its first cell (\"{first}\")",
                                    "warning", name))


def _note_skipped(comments, blanks, name, problems):
    parts = []
    if comments:
        parts.append(f"{len(comments)} comment {'line' if len(comments) == 1 else 'lines'} "
                     f"({_list_lines(comments)})")
    if blanks:
        parts.append(f"{len(blanks)} blank {'line' if len(blanks) == 1 else 'lines'} ({_list_lines(blanks)})")
    if parts:
        problems.append(Problem(0, "", "skipped " + " and ".join(parts), "note", name))


def _list_lines(numbers) -> str:
    """'3, 5-9, 12' (runs joined), at most :data:`_LIST_LINES` items, then how many more."""
    nums = sorted(numbers)
    runs: list[str] = []
    i = 0
    while i < len(nums):
        j = i
        while j + 1 < len(nums) and nums[j + 1] == nums[j] + 1:
            j += 1
        runs.append(str(nums[i]) if i == j else f"{nums[i]}-{nums[j]}")
        i = j + 1
    word = "line" if len(nums) == 1 and len(runs) == 1 and "-" not in runs[0] else "lines"
    if len(runs) > _LIST_LINES:
        rest = len(runs) - _LIST_LINES
        return f"{word} {', '.join(runs[:_LIST_LINES])} and {rest} more runs"
    return f"{word} {', '.join(runs)}"
