"""What the commands share: reading options, solving options, reporting, exit codes."""

from __future__ import annotations

import argparse
import os
import re
import sys
import time

from dfkit.cautions import CAUTION_LINE
from dfkit.conventions import NORTH_ALIASES, UNIT_ALIASES
from dfkit.policy import (DEFAULT_TRACK_GAP_S, DEFAULT_WINDOW_MIN, MAX_TRACK_GAP_S, MAX_WINDOW_MIN, MIN_SD_DEG,
                          MAX_WILD_SHARE, WILD_SHARE)


#: The command-line flag of each reading option (the library names the parameter, the shell the flag).
FLAGS = {"unit": "--unit", "north": "--north", "sd": "--sd", "declination": "--declination", "tz": "--tz",
         "date_format": "--date-format", "repeated_hour": "--repeated-hour", "window_min": "--window",
         "stations": "--stations", "track": "--track", "track_gap_s": "--track-gap", "grid_crs": "--grid-crs",
         "utm_letters": "--utm-letters", "worksheet": "--sheet", "level": "--level", "fill_labels": "--no-fill-labels",
         "position_rounding": "--position-rounding"}


def count_text(n: int, one: str, many: str | None = None) -> str:
    """``1 row``, ``2 rows`` (``many`` for irregular plurals: ``count_text(n, 'fix', 'fixes')``)."""
    return f"{n} {one if n == 1 else (many or one + 's')}"


def kinds_text(exts, last: str = "or") -> str:
    """Extensions for a help text or message: ``.csv, .geojson or .gpx``."""
    exts = list(dict.fromkeys(exts))
    return exts[0] if len(exts) == 1 else f"{', '.join(exts[:-1])} {last} {exts[-1]}"


#: Extensions the table writers give a CSV (``-o`` of check and calibrate, ``--bearings-out`` ...).
CSV_KINDS = (".csv",)
#: Extensions of a map page.
HTML_KINDS = (".html", ".htm")


def sheet_help(what: str = "the bearing sheet") -> str:
    """Help of a sheet argument, from what the reader accepts (it decides by content, not by name)."""
    from dfkit.io.sniff import SPREADSHEET_KINDS

    return (f"{what}: CSV or other delimited text (comma, semicolon, tab), or a spreadsheet "
            f"({kinds_text(['.' + k for k in SPREADSHEET_KINDS])}); the kind is found from the content")


def refuse_wrong_kinds(outputs) -> None:
    """Refuse (``ValueError``, exit 2) before any work an output whose extension its option cannot write
    (after :func:`refuse_unsafe_outputs`: an output that would overwrite an input is named as such first).

    ``outputs`` is a list of (option, path, accepted extensions); a path of None is skipped.
    """
    for option, path, kinds in outputs:
        if path and os.path.splitext(os.fspath(path))[1].lower() not in kinds:
            raise ValueError(f"cannot write '{path}': use one of {kinds_text(kinds)} for {option}")


def option_message(err) -> str:
    """An :class:`~dfkit.observations.OptionError` in the shell's words: ``--sd 1e-150 is not ...``."""
    v = err.value
    shown = f"{v:g}" if isinstance(v, float) else str(v)
    return f"{FLAGS.get(err.param, err.param)} {shown} {err.reason}"


def _spelling(flag: str, aliases: dict):
    """An argparse type that reads the spellings a sheet accepts (``'grid north'`` -> ``'grid'``)."""
    def read(text: str) -> str:
        word = aliases.get(" ".join(str(text).split()).lower())
        if word is None:
            words = ", ".join(sorted(set(aliases.values())))
            raise argparse.ArgumentTypeError(f"{text!r} is not one of {words} (or their usual spellings)")
        return word
    read.__name__ = flag
    return read


def add_read_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("reading the sheet (a value in the sheet wins)")
    g.add_argument("--sheet", default=None, metavar="NAME", dest="worksheet",
                   help="which sheet of a spreadsheet file (.xlsx, .xls, .ods) to read (default: the first)")
    g.add_argument("--unit", choices=["deg", "mil", "grad"], default="deg",
                   type=_spelling("--unit", UNIT_ALIASES),
                   help="bearing unit where the sheet has no unit column (default deg; also 'degrees', "
                        "'mils', 'gon' ...)")
    g.add_argument("--north", choices=["true", "magnetic", "grid"], default="true",
                   type=_spelling("--north", NORTH_ALIASES),
                   help="bearing reference where the sheet has no north column (default true; also "
                        "'true north', 'magnetic north', 'mag', 'grid north', 'GN' ...)")
    g.add_argument("--sd", type=float, default=None, metavar="DEG",
                   help=f"bearing standard deviation in degrees, from beacon trials ({MIN_SD_DEG:g} to below 90)")
    g.add_argument("--declination", type=float, default=None, metavar="DEG",
                   help="declination (degrees east, -180..180) instead of the magnetic model")
    g.add_argument("--tz", default=None, metavar="ZONE",
                   help="time zone of times written without an offset (Europe/Vienna, UTC)")
    g.add_argument("--date-format", default=None, metavar="ORDER",
                   help="dmy or mdy for numeric dates the sheet leaves ambiguous (03.10.2026), or a strptime "
                        "pattern like '%%d.%%m.%%Y %%H:%%M'")
    g.add_argument("--repeated-hour", choices=["earlier", "later"], default=None,
                   help="which reading of a local time that occurs twice when clocks go back (default: refuse)")
    g.add_argument("--window", type=float, default=DEFAULT_WINDOW_MIN, metavar="MIN",
                   help=f"a fix goes on while each unlabelled bearing of a tag follows the last within this many "
                        f"minutes (default {DEFAULT_WINDOW_MIN:g}, common practice; at most {MAX_WINDOW_MIN:g})")
    g.add_argument("--stations", default=None, metavar="FILE",
                   help="stations file: a 'station' label and a position (lat/lon, UTM or MGRS), CSV or "
                        "spreadsheet")
    g.add_argument("--track", default=None, metavar="GPX",
                   help="GPS track (GPX file) giving positions to rows with a time but no position")
    g.add_argument("--track-gap", type=float, default=DEFAULT_TRACK_GAP_S, metavar="S",
                   help=f"largest time from a bearing to a track point (default {DEFAULT_TRACK_GAP_S:g} s, at most "
                        f"{MAX_TRACK_GAP_S:g})")
    g.add_argument("--grid-crs", default=None, metavar="CRS", help="projected CRS of 'grid' bearings (EPSG:27700)")
    g.add_argument("--utm-letters", choices=["auto", "band", "hemisphere"], default="auto",
                   help="UTM zone letters: latitude bands as GPS units write them (30S = 32-40N), hemispheres "
                        "(30S = south), or auto: decide from the sheet and refuse rows it cannot (default)")
    g.add_argument("--position-rounding", choices=["auto", "none"], default="auto",
                   help="auto: observer positions are as precise as written (lat/lon to 3 decimals: about 110 m; "
                        "MGRS 6 digits: 100 m) and regions with a known SD allow for that (default); none: "
                        "positions are exact whatever their digits")
    g.add_argument("--no-fill-labels", action="store_false", dest="fill_labels",
                   help="read rows without a fix label as unlabelled even where the sheet writes labels only "
                        "where a fix starts (by default such labels are filled down, with a warning)")


def add_fix_options(p: argparse.ArgumentParser) -> None:
    from dfkit.estimators import METHODS

    g = p.add_argument_group("solving")
    g.add_argument("--method", choices=METHODS, default="mle",
                   help="estimator: mle (Lenth, default), huber, andrews (robust), lsq, stansfield")
    g.add_argument("--level", type=float, default=0.95,
                   help="probability of the confidence regions and ellipses (default 0.95)")
    g.add_argument("--wild-share", type=_share, default=WILD_SHARE, metavar="SHARE",
                   help=f"share of bearings you expect to be wild (reflections, misreads), from 0 to {MAX_WILD_SHARE:g} "
                        f"(default {WILD_SHARE:g}, one in {1 / WILD_SHARE:.0f}): a fix of three or more bearings "
                        f"whose region could miss because one of them is wild is flagged when that chance reaches "
                        f"1 - level; 0 turns this off (each fix's chance is its wild_risk)")
    g.add_argument("--wild-rate", choices=("sheet", "prior"), default="sheet",
                   help="sheet (default): where the sheet's fixes of four or more bearings show wild bearings more "
                        "often than --wild-share spread evenly over every direction, weigh every fix's wild risk at "
                        "the sheet's own rate (a note says what it learnt); prior: --wild-share alone")
    g.add_argument("--calibration", default=None, metavar="CAL.csv",
                   help="bias and SD per antenna/observer from 'dfkit calibrate': removes the bias, uses the SD")


def _share(text: str) -> float:
    """--wild-share: a number or a percentage ("5%"), checked as the library checks ``wild_share``."""
    from dfkit.observations import OptionError, check_wild_share

    t = text.strip()
    try:
        return check_wild_share(float(t[:-1]) / 100.0 if t.endswith("%") else float(t))
    except ValueError as err:
        reason = err.reason if isinstance(err, OptionError) else "is not a number (e.g. 0.05 or 5%)"
        raise argparse.ArgumentTypeError(f"{text!r} {reason}") from None


def add_jobs_option(p: argparse.ArgumentParser) -> None:
    """``--jobs N``: solve the fixes in chunks on N threads (the results are those of one)."""
    p.add_argument("--jobs", type=int, default=1, metavar="N",
                   help="solve large sheets on N processors at once (0: all; default 1); the results are the "
                        "same as with one")


def check_jobs(a) -> None:
    """Refuse a ``--jobs`` below 0 before any work (``ValueError``, exit 2)."""
    jobs = getattr(a, "jobs", 1)
    if jobs < 0:
        raise ValueError(f"--jobs {jobs}: give a number of processors, at least 1 (0: all)")


def read_kwargs(a) -> dict:
    """The :class:`~dfkit.observations.ReadOptions` fields given on the command line."""
    return dict(unit=a.unit, north=a.north, sd=a.sd, declination=a.declination, tz=a.tz, window_min=a.window,
                stations=a.stations, track=a.track, track_gap_s=a.track_gap, grid_crs=a.grid_crs,
                date_format=a.date_format, repeated_hour=a.repeated_hour, utm_letters=a.utm_letters,
                worksheet=a.worksheet, fill_labels=a.fill_labels,
                position_rounding=getattr(a, "position_rounding", "auto"))


#: Warnings or notes of one kind printed one by one; more of a kind are summarised in one line after the first
#: :data:`KIND_SHOWN` (every rejected row is always printed).
KIND_LISTED, KIND_SHOWN = 5, 3
_QUOTED = re.compile(r"'[^']*'")
_NUMBER = re.compile(r"[-+]?\d[\d,]*(?:\.\d+)?")


def message_kind(text: str) -> str:
    """What a message says with its particulars (quoted text, numbers) taken out: messages of one kind share it."""
    return _NUMBER.sub("#", _QUOTED.sub("'…'", text))


def report_problems(problems, out) -> None:
    """Print problems: every rejected row; warnings and notes of one kind (same column, same text but for quoted
    values and numbers) one by one up to :data:`KIND_LISTED`, beyond that the first :data:`KIND_SHOWN` and one line
    counting the rest with their lines."""
    label = {"error": "rejected", "warning": "warning", "note": "note"}
    for sev in ("error", "warning", "note"):
        mine = [p for p in problems if p.severity == sev or (sev == "warning" and p.severity not in label)]
        keys = [(p.source, p.column, message_kind(p.message)) if sev != "error" else None for p in mine]
        kinds: dict[tuple, list] = {}
        for p, key in zip(mine, keys):
            if key is not None:
                kinds.setdefault(key, []).append(p)
        seen: dict[tuple, int] = {}
        for p, key in zip(mine, keys):
            same = kinds[key] if key is not None else ()
            k = seen[key] = seen.get(key, -1) + 1 if key is not None else 0
            if len(same) > KIND_LISTED and k >= KIND_SHOWN:
                if k == KIND_SHOWN:
                    rest = [q.line for q in same[KIND_SHOWN:] if q.line]
                    where = f" (lines {min(rest)} to {max(rest)})" if rest else ""
                    last = same[KIND_SHOWN - 1]
                    like = f"line {last.line}'s" if last.line else "the one above"
                    col = f" on {p.column}" if p.column else ""
                    print(f"{label[sev]:<9} {p.source}: ... {len(same) - KIND_SHOWN} more {label[sev]}s like {like}"
                          f"{col}{where}", file=out)
                continue
            print(f"{label[sev]:<9} {str(p).removesuffix(f' [{p.severity}]')}", file=out)


def add_output_options(p: argparse.ArgumentParser) -> None:
    """Options of commands that write CSV tables."""
    p.add_argument("--verbatim-csv", action="store_true",
                   help="write CSV text cells exactly as they are; by default a cell starting with =, +, -, @, tab "
                        "or CR (other than a plain number) gets a leading ' so spreadsheets do not run it as a "
                        "formula")


#: Command-line arguments that name files read (attribute, how messages call it).
_INPUTS = (("sheet", "the sheet"), ("sheets", "a sheet"), ("trials", "the trials sheet"), ("source", "the input"),
           ("store", "the season file"), ("stations", "the stations file"), ("track", "the GPS track"),
           ("calibration", "the calibration file"), ("spots", "the spots file"))


def refuse_unsafe_outputs(a, outputs) -> None:
    """Refuse (``ValueError``, exit 2) before any work an output that would overwrite an input or another output.

    ``outputs`` is a list of (option, path). An output is the same file as an input (the sheet, trials, fixes or
    season file, ``--stations``, ``--track``, ``--calibration``, ``--spots``) when :func:`os.path.samefile` says
    so: this catches ``./sheet.csv``, symbolic links and hard links. An output that is a folder is refused too.
    """
    inputs = []
    for attr, what in _INPUTS:
        value = getattr(a, attr, None)
        for path in value if isinstance(value, (list, tuple)) else [value]:
            if path and os.path.exists(path):
                inputs.append((what, path))
    seen: list[tuple[str, str]] = []
    for option, path in outputs:
        if not path:
            continue
        if os.path.isdir(path):
            raise ValueError(f"{option} '{path}' is a folder; give a file name")
        if os.path.exists(path):
            for what, src in inputs:
                if _same_file(path, src):
                    raise ValueError(f"{option} '{path}' is {what} '{src}'; dfkit never overwrites its input. "
                                     "Choose another output name.")
        for other_option, other in seen:
            if os.path.realpath(path) == os.path.realpath(other) or _same_file(path, other):
                raise ValueError(f"{option} '{path}' and {other_option} '{other}' are the same file; give each "
                                 "output its own name")
        seen.append((option, path))


def _same_file(a, b) -> bool:
    try:
        return os.path.samefile(a, b)
    except OSError:
        return False


def ensure_dir(path) -> None:
    d = os.path.dirname(os.fspath(path))
    if d:
        os.makedirs(d, exist_ok=True)


def solve(a):
    """Read the sheet named on the command line and solve its fixes: (bearings, fixes, progress)."""
    from dfkit.locate import locate
    from dfkit.observations import check_level, read_bearings

    check_level(a.level)
    check_jobs(a)
    t0 = time.perf_counter()
    verbose = getattr(a, "progress", False)

    def progress(text):
        if verbose:
            print(f"dfkit: {text} [{time.perf_counter() - t0:.1f} s]", file=sys.stderr, flush=True)

    progress("reading")
    b = read_bearings(a.sheet, **read_kwargs(a))
    if len(b.table) > 50_000 and hasattr(a, "progress"):
        verbose = True
        progress(f"read {len(b.table)} bearings")
    if getattr(a, "calibration", None):
        from dfkit.calibration import apply, read_calibration

        progress("applying the calibration")
        b = apply(b, read_calibration(a.calibration))
    fixes = locate(b, method=a.method, level=a.level, progress=progress, jobs=getattr(a, "jobs", 1),
                   wild_share=getattr(a, "wild_share", WILD_SHARE), wild_rate=getattr(a, "wild_rate", "sheet"))
    return b, fixes, progress


def print_summary(b, fixes, used: int | None = None) -> None:
    """Print the problems, notes, warnings, flagged fixes and the counts; ``used``: the bearings used, when
    ``b.table`` no longer holds them (default: its rows)."""
    report_problems(b.problems, sys.stderr)
    for note in fixes.notes:      # the reading notes, then the solving ones
        print(f"note            {note}", file=sys.stderr)
    for warning in getattr(fixes, "warnings", []):    # what the whole sheet shows (dfkit.locate.sheetwide)
        print(f"warning   sheet: {warning}", file=sys.stderr)
    s = fixes.summary()
    flagged = fixes.table[fixes.table["status"] != "ok"]
    for _, r in flagged.head(50).iterrows():
        who = f"tag {r['tag']}, fix {r['fix']}" if r["tag"] else f"fix {r['fix']}"
        print(f"{r['status']:<15} {who}: {r['reason']}", file=sys.stderr)
    if len(flagged) > 50:
        print(f"... {len(flagged) - 50} more flagged or failed fixes (see the status column)", file=sys.stderr)
    t = fixes.table
    one_dof = int(((t["sd_source"] == "estimated") & (t["n_used"] == 3) & t["semi_major_m"].notna()).sum())
    if one_dof:
        whose = ("fix sizes its region from the SD of its" if one_dof == 1
                 else "fixes size their regions from the SD of their")
        print(f"note            {one_dof} {whose} own 3 bearings (1 degree of freedom, an F(2, 1) scale): such "
              "regions are huge or, by luck, tiny. Measure the SD on beacon trials (dfkit calibrate) and pass "
              "--calibration", file=sys.stderr)
    nf = len(fixes.table)
    print(f"{b.source}: {nf} {'fix' if nf == 1 else 'fixes'}: {s['ok']} ok, {s['flagged']} flagged, "
          f"{s['failed']} failed; {len(b.table) if used is None else used} of {count_text(b.n_rows, 'row')} used, "
          f"{rejected_summary(b)}",
          file=sys.stderr)
    print(CAUTION_LINE, file=sys.stderr)


def rejected_summary(b) -> str:
    """'2 rejected' for the sheet, plus what was rejected in the other inputs (stations file, GPS track)."""
    by_source: dict[str, set] = {}
    for p in b.problems:
        if p.severity == "error" and p.line:
            by_source.setdefault(p.source, set()).add(p.line)
    text = f"{len(by_source.pop(b.source, ()))} rejected"
    for source, lines in by_source.items():
        text += f"; {len(lines)} {'entry' if len(lines) == 1 else 'entries'} rejected in {source}"
    return text


def exit_status(b, fixes=None) -> int:
    """0 when every row was used and every fix is ok; 1 otherwise."""
    if b.n_rejected:
        return 1
    if fixes is not None:
        s = fixes.summary()
        if s["flagged"] or s["failed"]:
            return 1
    return 0
