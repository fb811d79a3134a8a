"""read_bearings: a sheet in, every bearing in one convention out (or refused with a reason).

The steps, in order: read the file (:func:`dfkit.io.read_table`), check the columns
(:mod:`~dfkit.observations.columns`), read times (:mod:`~dfkit.observations.times`),
bearings, units, north, SDs and declinations (:mod:`~dfkit.observations.cells`),
group rows into fixes (:mod:`~dfkit.observations.grouping`), read positions judged
against each row's own fix (:mod:`~dfkit.observations.positions`), turn magnetic and
grid bearings to true (:mod:`~dfkit.observations.north`), and use a repeated row once
(:mod:`~dfkit.observations.repeats`).
"""

from __future__ import annotations

from dataclasses import fields, replace

import numpy as np
import pandas as pd

from dfkit.conventions import DEGREES_PER_UNIT, FULL_CIRCLE, NORTH_ALIASES, UNIT_ALIASES, wrap360
from dfkit.io import read_table
from dfkit.io.gpx import Track, read_track
from dfkit.io.sheet import KNOWN_COLUMNS
from dfkit.observations import north as north_mod
from dfkit.observations.bearings import Bearings
from dfkit.observations.cells import (canonical, column, declinations, numbers, pick, same_value_columns,
                                      text_column)
from dfkit.observations.cells import filled as all_of
from dfkit.observations.columns import check_columns, label_like_columns
from dfkit.observations.grouping import fill_down, fix_identities, group_fixes, pair_codes
from dfkit.observations.options import ReadOptions, check_options
from dfkit.observations.lookalike import look_alike
from dfkit.observations.positions import parse_positions, position_columns, read_places
from dfkit.observations.repeats import repeated_rows
from dfkit.observations.rowlog import RowLog
from dfkit.observations.times import no_times, parse_times
from dfkit.policy import MIN_SD_DEG, PLAUSIBLE_SD_DEG, SPLIT_LABEL_GAP_H
from dfkit.problems import Problem, SheetError

#: Columns of plain numbers that the CSV reader may hand over as floats (every cell a finite plain number, no
#: larger than the bound): the common case is then parsed once, in C, with no text kept; anything else is read
#: as text, as before. A latitude or longitude beyond degrees may be a packed angle (``4751.6``): its text is kept.
NUMERIC_COLUMNS = {"lat": 90.0, "lon": 360.0, "easting": None, "northing": None, "bearing": None, "sd": None}


def read_bearings(sheet, options: ReadOptions | None = None, **kwargs) -> Bearings:
    """Read, validate and convert a bearing sheet.

    Parameters
    ----------
    sheet : path, bytes, file-like, pandas.DataFrame or RawSheet
        The bearing sheet: a CSV file, a spreadsheet (.xlsx, .xlsm, .xls, .ods), or a
        DataFrame with the same columns (its rows are numbered as lines 2, 3, ...,
        as in the CSV ``to_csv(index=False)`` would write). See the README for the columns.
    options : ReadOptions, optional
        Sheet-wide defaults; keyword arguments override its fields
        (``read_bearings("s.csv", north="magnetic", sd=5)``).

    Returns
    -------
    Bearings

    Raises
    ------
    SheetError
        The sheet (or the stations file or the track) cannot be read at all, or has no
        bearing or position column.
    OptionError
        An option (a ``ValueError``) dfkit cannot use, naming the parameter (``sd=``).
    """
    opts = options or ReadOptions()
    if kwargs:
        known = {f.name for f in fields(ReadOptions)}
        unknown = sorted(set(kwargs) - known)
        if unknown:
            raise TypeError(f"read_bearings() got unknown option(s) {', '.join(map(repr, unknown))}; the options are "
                            f"{', '.join(sorted(known))}")
        opts = replace(opts, **kwargs)
    check_options(opts)
    raw = read_table(sheet, worksheet=opts.worksheet, numeric=NUMERIC_COLUMNS)
    try:
        check_columns(raw.columns, raw.source, stations=opts.stations is not None, track=opts.track is not None)
    except SheetError as err:
        hint = next((p.message for p in raw.problems if "--sheet" in p.message), "")
        comments = getattr(raw, "comment_lines", None) or []
        if not hint and comments and comments[0] == 1:
            hint = ("line 1 starts with '#' and was read as a comment, so the header is the next line: if line 1 is "
                    "the header, name its first column (e.g. 'fix' for '#')")
        raise SheetError(f"{err} ({hint})" if hint else str(err)) from None
    t = raw.table
    n = len(t)
    lines = t["line"].to_numpy()
    log = RowLog(lines, raw.source)
    log.problems.extend(raw.problems)
    pre = {p.line for p in raw.problems if p.severity == "error" and p.line}   # e.g. too many fields
    refused_by_reader = np.isin(lines, list(pre))
    log.bad |= refused_by_reader
    notes: list[str] = []

    stations = None
    if opts.stations is not None:
        stations, st_problems = read_places(opts.stations, "station")
        log.problems.extend(st_problems)
    track = opts.track
    if track is not None and not isinstance(track, Track):
        track = read_track(track)
    if track is not None:
        log.problems.extend(track.problems)

    # times (each working array is dropped once used: a large sheet holds many at a time)
    if "time" in t.columns or "date" in t.columns:
        tm = parse_times(column(t, "time"), tz=opts.tz, date_format=opts.date_format,
                         repeated_hour=opts.repeated_hour, dates=column(t, "date") if "date" in t.columns else None)
    else:       # no time cell at all: what parse_times makes of empty cells, without a pass over them
        tm = no_times(len(t), tz=opts.tz)
    log.reject(tm.bad, "time" if "time" in t.columns or "date" not in t.columns else "date", tm.error)
    notes.extend(tm.notes)
    times = tm.seconds
    days = tm.date_only & ~log.bad
    del tm
    if days.any():
        notes.append(f"{int(days.sum())} {'bearing has' if days.sum() == 1 else 'bearings have'} a date and no time "
                     "of day: taken as 12:00 UTC of that date, which is enough to tell days apart and for the "
                     "magnetic model, not to group unlabelled bearings or to look positions up on a GPS track")

    # bearing and unit
    bearing_deg, b, unit = _bearings(t, opts, raw.decimal_comma, log)

    # north, sd, declination
    north, north_unknown = _words(t, "north", NORTH_ALIASES, opts.north)
    ncells = column(t, "north")
    if opts.north == "true" and n and ("north" not in t.columns
                                       or not any(str(c).strip() for c in set(ncells[:n].tolist()))):
        # the commonest slip of all: compass bearings entered without saying they are magnetic
        notes.append("bearings are read as true north (no north column; --north true is the default): if they were "
                     "read off a magnetic compass, give --north magnetic")
    log.reject(north_unknown, "north", lambda idx: [f"unknown north '{ncells[i]}'; use true, magnetic or grid"
                                                     for i in idx])
    del ncells, north_unknown
    mil, grad = _is(t, "unit", unit, "mil"), _is(t, "unit", unit, "grad")
    sd, sd_from = _sds(t, opts, raw.decimal_comma, log, mil, grad, notes)
    magnetic_rows, grid_rows = _is(t, "north", north, "magnetic"), _is(t, "north", north, "grid")
    dec, dec_empty = _declinations(t, opts, raw.decimal_comma, log, magnetic_rows, n, notes)

    # fixes: labels written only where a fix starts filled down; by tag and label, labels split by time,
    # unlabelled rows by the window
    fix_c, tag_c = column(t, "fix"), column(t, "tag")
    fix_c, tag_c, filled, hints = fill_down(fix_c, tag_c, times, enabled=opts.fill_labels, log=log, notes=notes)
    fix, grouped_by = group_fixes(fix_c, tag_c, times, window_s=opts.window_min * 60.0,
                                  split_gap_s=SPLIT_LABEL_GAP_H * 3600.0, log=log, notes=notes, filled=filled,
                                  hints=hints, date_only=days)
    del filled, hints
    ids = pair_codes(tag_c, fix, fix != "")
    if not (fix_c != "").any():
        for text in label_like_columns(t, raw.columns, used=position_columns(raw.columns).values()):
            log.sheet_warning(text)
    del fix_c

    # positions, judged against each row's own fix and the track
    pos = parse_positions(t, lines=lines, source=raw.source, decimal_comma=raw.decimal_comma, stations=stations,
                          track=track, times=np.where(days, np.nan, times), track_gap_s=opts.track_gap_s,
                          utm_letters=opts.utm_letters, groups=ids, log=log, skip=refused_by_reader,
                          number_decimals=getattr(raw, "number_decimals", None))
    if raw is not sheet:
        raw.number_decimals = None       # lets the file's text go (held for the positions' trailing zeros)

    # magnetic -> true, grid -> true
    model_dec, dec_sd = north_mod.magnetic_declination(log, magnetic_rows & dec_empty, times, column(t, "time"),
                                                       pos.lat, pos.lon, notes)
    dec_used = np.where(magnetic_rows, np.where(dec_empty, model_dec, dec), 0.0)
    del model_dec, dec
    conv = north_mod.grid_convergence(log, grid_rows, pos.zone, pos.south, pos.lat, pos.lon, opts.grid_crs)
    pos.zone = pos.south = None
    true_bearing = wrap360(bearing_deg + dec_used + conv)
    if raw is not sheet and raw.numeric:     # the number columns the reader made are read: let them go (not a
        t = raw.table = t.drop(columns=list(raw.numeric))      # sheet handed in, which is the caller's)

    # a row written twice is one bearing
    others = [c for c in raw.columns if c not in _COMPARED_AS_READ and c not in ("note", "line_in_sheet")]
    extra = [north, dec_used, sd] + [column(t, c) for c in others]
    rep, first = repeated_rows(ids, times, pos.lat, pos.lon, bearing_deg, usable=~log.bad, extra=extra)
    log.reject(rep, "", lambda idx: [
        f"repeats line {lines[first[i]]} (same fix, {'time, ' if np.isfinite(times[i]) else ''}position and bearing"
        f"{'' if np.isfinite(times[i]) else '; no time'}): a repeated bearing adds no information, so this copy "
        "is not used" for i in idx])

    del extra, rep, first, bearing_deg
    # every row kept (the common case): no masked copy of each column. The table takes its columns as they are
    # (copy=False: not gathered into one block by dtype, which would copy every number column while the arrays
    # it is made from are still alive). Each array below is made here for the table alone, but for the lines and
    # text columns; a text column that shares memory with another column, or with the caller's own RawSheet (a
    # column handed over as read), is copied, and so are the lines of the caller's sheet: a cell changed in the
    # table changes no other, and not the caller's sheet (a sheet read here is dropped on return). Columns that hold
    # one value on every row because nothing fills them share one array (pandas copies it on a change: the same)
    masked = bool(log.bad.any())
    keep = ~log.bad if masked else slice(None)
    n_kept = int((~log.bad).sum())
    same = same_value_columns(n_kept)    # no magnetic, no grid bearing; no tag, observer ... column

    def unless_none(rows, values):
        """``values[keep]``, or the shared all-NaN column where no row has one."""
        return values()[keep] if rows.any() else same(np.nan, np.float64)

    taken = [t[c].to_numpy(dtype=object) for c in t.columns
             if t[c].dtype.kind not in "fiuMm"] if raw is sheet and not masked else []

    def own(cells):
        if masked:
            return cells[keep]
        if any(np.may_share_memory(cells, other) for other in taken):
            cells = cells.copy()
        taken.append(cells)
        return cells

    table = pd.DataFrame({
        "line": lines[keep] if masked or raw is not sheet else lines.copy(),
        # labels of a column a caller's sheet holds as numbers stay numbers (only text cells are typed as text)
        "fix": own(fix) if "fix" in raw.numeric else text_column(own(fix)),
        # no tag column: no tag on any row (fill_down fills tags only from tags)
        "tag": (own(tag_c) if "tag" in raw.numeric else text_column(own(tag_c))) if "tag" in t.columns or not n_kept else same("", "str"),
        "time": pd.to_datetime(times[keep], unit="s", utc=True),
        "lat": pos.lat[keep],
        "lon": pos.lon[keep],
        "true_bearing": true_bearing[keep],
        "sd": sd[keep],
        "sd_source": text_column(own(sd_from)),
        "declination": unless_none(magnetic_rows, lambda: np.where(magnetic_rows, dec_used, np.nan)),
        "convergence": unless_none(grid_rows, lambda: np.where(grid_rows, conv, np.nan)),
        "bearing": b[keep],
        "unit": text_column(own(unit)),
        "north": text_column(own(north)),
        "position_from": text_column(own(pos.source)),
        "grouped_by": text_column(own(grouped_by)),
        "declination_sd": unless_none(magnetic_rows & dec_empty, lambda: np.where(magnetic_rows & dec_empty, dec_sd,
                                                                                  np.nan)),
    }, copy=False)
    if opts.position_rounding == "auto" and pos.step_east_m is not None and (pos.step_east_m[keep] > 0).any():
        # observer positions written to a coarse step (dfkit.observations.precision): only then these columns,
        # which dfkit.locate.rounding carries into each bearing's SD
        table["position_step_east_m"] = pos.step_east_m[keep]
        table["position_step_north_m"] = pos.step_north_m[keep]
    for c in raw.columns:
        if (c not in KNOWN_COLUMNS or c in ("observer", "antenna", "note")) and c not in table.columns:
            table[c] = own(t[c].to_numpy(dtype=object))
    for c in ("observer", "antenna", "note"):
        if c not in table.columns:
            table[c] = same("", "str")
    table = table.reset_index(drop=True)
    ids, fix_index = fix_identities(fix, tag_c, log.bad, lines, ids)
    look_alike(fix_index, ids, log)     # F1 / f1 / F01, 150.412 / 150.4120: said, kept apart
    table.insert(1, "fix_id", ids[keep])
    problems = sorted(log.problems, key=lambda p: (p.source != raw.source, p.line, p.severity != "error"))
    return Bearings(table=table, problems=problems, fix_index=fix_index, n_rows=n, notes=notes,
                    source=raw.source, window_min=float(opts.window_min),
                    doubts={int(lines[i]): text for i, text in pos.doubts.items() if not log.bad[i]})


#: Columns a repeated row is compared on through their values as read (fix and tag through the fix, times,
#: positions, bearings); every other column but the note is compared as written (see dfkit.observations.repeats).
_COMPARED_AS_READ = ("fix", "tag", "time", "date", "lat", "lon", "utm_zone", "easting", "northing", "mgrs", "station",
                     "position", "bearing", "unit", "north", "sd", "declination")


def _bearings(t, opts, decimal_comma, log: RowLog):
    unit_c = column(t, "unit")
    unit, unit_unknown = _words(t, "unit", UNIT_ALIASES, opts.unit)
    log.reject(unit_unknown, "unit", lambda idx: [f"unknown unit '{unit_c[i]}'; use deg, mil or grad" for i in idx])
    b_c = column(t, "bearing")
    c = numbers(b_c, decimal_comma)
    log.reject(c.empty, "bearing", "bearing is missing")
    log.reject(c.bad, "bearing", c.error)
    b = c.values
    if "unit" in t.columns:
        unit_codes, units = pd.factorize(unit)        # one pass over the rows for both tables of the unit
    else:                                             # one unit for the sheet
        unit_codes, units = np.zeros(len(unit), np.intp), [unit[0]] if len(unit) else []
    full = np.array([FULL_CIRCLE.get(u, 360.0) for u in units], float)[unit_codes]
    with np.errstate(invalid="ignore"):
        log.reject((b < 0) & ~unit_unknown, "bearing", lambda idx: [
            f"{b[i]:g} is negative; bearings run 0 to {full[i]:g} clockwise (write {full[i] + b[i]:g})" for i in idx])
        log.reject((b > full) & ~unit_unknown, "bearing", lambda idx: [_range_hint(b[i], unit[i]) for i in idx])
    return b * np.array([DEGREES_PER_UNIT.get(u, 1.0) for u in units], float)[unit_codes], b, unit


def _sds(t, opts, decimal_comma, log: RowLog, mil, grad, notes):
    """The SD of each row [°]. SDs are always in degrees, whatever the bearing's unit: on a mil row an SD
    above :data:`dfkit.policy.PLAUSIBLE_SD_DEG` (beyond any usable bearing) that would be a usual SD read as
    mils is pointed out; on grad rows the two readings differ by a tenth and cannot be told apart (a note)."""
    c = numbers(column(t, "sd"), decimal_comma)
    log.reject(c.bad, "sd", c.error)
    sd = c.values
    per_mil = DEGREES_PER_UNIT["mil"]
    with np.errstate(invalid="ignore"):
        log.reject(~c.empty & ~c.bad & ((sd < MIN_SD_DEG) | (sd >= 90)), "sd", lambda idx: [
            f"{sd[i]:g} is not a usable bearing SD; give degrees from {MIN_SD_DEG:g} to below 90"
            + (f" (sd is in degrees on mil rows too: {sd[i]:g} mil would be {sd[i] * per_mil:.2g}°)"
               if mil[i] and sd[i] >= 90 else "") for i in idx])
        big = np.flatnonzero(mil & ~c.empty & ~log.bad & (sd > PLAUSIBLE_SD_DEG))
    if len(big):       # one warning for the sheet, on the first such row
        i = big[0]
        more = f" (and {len(big) - 1} more mil rows, to line {log.lines[big[-1]]})" if len(big) > 1 else ""
        log.warn(log.mask([i]), "sd", f"sd {sd[i]:g} on a mil row{more}: sd is in degrees whatever the bearing's "
                                      f"unit, and {sd[i]:g}° is beyond any usable bearing SD (dfkit's limit of "
                                      f"plausible: {PLAUSIBLE_SD_DEG:g}°); if it is in mils, write "
                                      f"{sd[i] * per_mil:.2g} ({sd[i]:g} mil in degrees)")
    sd_from = pick(c.empty, "", "sheet")
    if opts.sd is not None:
        sd = np.where(c.empty, float(opts.sd), sd)
        sd_from[c.empty] = "option"
        if float(opts.sd) > PLAUSIBLE_SD_DEG and (mil & c.empty & ~log.bad).any():
            notes.append(f"--sd {float(opts.sd):g} is in degrees, also for the mil bearings it is given to; if it "
                         f"is in mils, give --sd {float(opts.sd) * per_mil:.2g}")
    if (grad & ~c.empty & ~log.bad).any():
        notes.append("sd is read in degrees on grad rows too (1 grad = 0.9°: an SD written in grads reads a tenth "
                     "too large; the two cannot be told apart by size)")
    return sd, sd_from


def _declinations(t, opts, decimal_comma, log: RowLog, magnetic, n, notes):
    c = declinations(column(t, "declination") if "declination" in t.columns else None, decimal_comma, n=n)
    dec = c.values
    if not c.empty.all():           # no cell: nothing to refuse
        log.reject(c.bad, "declination", c.error)
        with np.errstate(invalid="ignore"):
            log.reject(np.abs(np.nan_to_num(dec)) > 180, "declination",
                       lambda idx: [f"{dec[i]:g} is outside -180..180" for i in idx])
    empty = c.empty
    if opts.declination is not None:
        dec = np.where(empty, float(opts.declination), dec)
        empty = np.zeros(n, bool)
    if not c.empty.all():
        log.warn(~c.empty & ~magnetic, "declination",
                 "declination given for a bearing that is not magnetic; it was not applied")
    if opts.declination is not None and not magnetic.any():
        notes.append(f"--declination {float(opts.declination):g} was given, but no bearing is magnetic (north "
                     "column or --north magnetic): it was not used")
    return dec, empty


def _words(t, name, aliases, default):
    """:func:`~dfkit.observations.cells.canonical` of a column; a column the sheet does not have is the default on
    every row (what ``canonical`` makes of empty cells), without a pass over its cells."""
    if name not in t.columns and "" not in aliases:
        return all_of(len(t), default), np.zeros(len(t), bool)
    return canonical(column(t, name), aliases, default)


def _is(t, name, words, word):
    """``words == word`` for the words of a column (:func:`_words`); one value for all rows without the column."""
    if name not in t.columns:
        return np.full(len(words), bool(len(words)) and words[0] == word)
    return words == word


def _range_hint(value, unit):
    if unit == "deg":
        if value <= 400:
            return f"{value:g} is out of range for degrees (grads? set unit to grad)"
        if value <= 6400:
            return f"{value:g} is out of range for degrees (mils? set unit to mil)"
        return f"{value:g} is out of range for degrees"
    return f"{value:g} is out of range for {unit}s (0 to {FULL_CIRCLE[unit]:g})"


def check_sheet(sheet, options: ReadOptions | None = None, **kwargs) -> tuple[pd.DataFrame, list[Problem]]:
    """The Python form of ``dfkit check``: the normalized table and the problems."""
    b = read_bearings(sheet, options, **kwargs)
    return b.table, b.problems
