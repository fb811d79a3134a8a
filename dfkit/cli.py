"""The ``dfkit`` command: a thin shell over the public API.

Exit status (all commands): 0 everything read and every fix ``ok``; 1 done, but
some rows were rejected or some fixes are flagged or failed (results are still
written); 2 the input cannot be read at all or the command is misused.
"""

from __future__ import annotations

import argparse
import os
import sys
import time

from dfkit import __version__
from dfkit.conventions import DEFAULT_WINDOW_MIN
from dfkit.problems import SheetError

CAUTION_LINE = ("caution: dfkit gives estimates, not certainties; not for life-safety search. "
                "Mind licences, permits, private land and local rules; never take bearings while driving.")


def _add_read_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("reading the sheet (a value in the sheet wins)")
    g.add_argument("--unit", choices=["deg", "mil", "grad"], default="deg", help="bearing unit (default deg)")
    g.add_argument("--north", choices=["true", "magnetic", "grid"], default="true",
                   help="bearing reference (default true)")
    g.add_argument("--sd", type=float, default=None, metavar="DEG",
                   help="bearing standard deviation in degrees, from beacon trials")
    g.add_argument("--declination", type=float, default=None, metavar="DEG",
                   help="declination (degrees east) instead of the magnetic model")
    g.add_argument("--tz", default=None, metavar="ZONE", help="time zone of times written without an offset")
    g.add_argument("--window", type=float, default=DEFAULT_WINDOW_MIN, metavar="MIN",
                   help=f"minutes that group unlabelled bearings into one fix (default {DEFAULT_WINDOW_MIN:g}, "
                        "common practice)")
    g.add_argument("--stations", default=None, metavar="FILE", help="stations file (station label + position)")
    g.add_argument("--track", default=None, metavar="GPX", help="GPS track for rows with a time but no position")
    g.add_argument("--track-gap", type=float, default=60.0, metavar="S",
                   help="largest time from a bearing to a track point (default 60 s)")
    g.add_argument("--grid-crs", default=None, metavar="CRS", help="projected CRS of 'grid' bearings (EPSG:27700)")


def _add_fix_options(p: argparse.ArgumentParser) -> None:
    from dfkit.estimators import METHODS

    g = p.add_argument_group("solving")
    g.add_argument("--method", choices=METHODS, default="mle",
                   help="estimator: mle (Lenth, default), huber, andrews (robust), lsq, stansfield")
    g.add_argument("--level", type=float, default=0.95, help="probability of the confidence ellipses (0.95)")


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="dfkit", description="Radio direction finding: bearings to positions "
                                "with honest confidence regions on WGS84.")
    p.add_argument("--version", action="version", version=f"dfkit {__version__}")
    sub = p.add_subparsers(dest="command", required=True)

    c = sub.add_parser("check", help="read a sheet and report every row dfkit cannot use")
    c.add_argument("sheet")
    c.add_argument("-o", "--output", default=None, help="write the normalized table (CSV)")
    _add_read_options(c)

    f = sub.add_parser("fix", help="positions and confidence regions for every fix of a sheet")
    f.add_argument("sheet")
    f.add_argument("-o", "--output", action="append", default=[],
                   help="output file: .csv, .geojson or .gpx (may be repeated)")
    f.add_argument("--bearings-out", default=None, metavar="CSV",
                   help="also write every bearing with its residual and weight")
    f.add_argument("--progress", action="store_true", help="print progress (automatic on large sheets)")
    _add_read_options(f)
    _add_fix_options(f)

    m = sub.add_parser("map", help="an offline HTML map of bearings, fixes and regions")
    m.add_argument("sheet")
    m.add_argument("-o", "--output", required=True, help="HTML file to write")
    m.add_argument("--error-polygons", action="store_true", help="also draw error polygons (no probability meaning)")
    m.add_argument("--title", default=None)
    _add_read_options(m)
    _add_fix_options(m)
    return p


def _read_kwargs(a) -> dict:
    return dict(unit=a.unit, north=a.north, sd=a.sd, declination=a.declination, tz=a.tz, window_min=a.window,
                stations=a.stations, track=a.track, track_gap_s=a.track_gap, grid_crs=a.grid_crs)


def _report_problems(problems, out) -> None:
    errs = [p for p in problems if p.severity == "error"]
    warns = [p for p in problems if p.severity != "error"]
    for p in errs:
        print(f"rejected  {p}", file=out)
    for p in warns:
        print(f"warning   {p}", file=out)


def _ensure_dir(path) -> None:
    d = os.path.dirname(os.fspath(path))
    if d:
        os.makedirs(d, exist_ok=True)


def main(argv=None) -> int:
    """Run the command line; returns the exit status."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse: misuse (2) or --help/--version (0)
        return int(exc.code or 0)
    try:
        if args.command == "check":
            return _check(args)
        if args.command == "fix":
            return _fix(args)
        if args.command == "map":
            return _map(args)
    except SheetError as err:
        print(f"dfkit: {err}", file=sys.stderr)
        return 2
    except (ValueError, OSError) as err:
        print(f"dfkit: {err}", file=sys.stderr)
        return 2
    return 2


def _check(a) -> int:
    from dfkit.observations import read_bearings
    from dfkit.outputs import write_table

    b = read_bearings(a.sheet, **_read_kwargs(a))
    _report_problems(b.problems, sys.stdout)
    for note in b.notes:
        print(f"note      {note}")
    n_fix = b.table["fix"].nunique() if len(b.table) else 0
    print(f"{b.source}: {b.n_rows} rows, {len(b.table)} usable, {b.n_rejected} rejected; "
          f"{n_fix} {'fix' if n_fix == 1 else 'fixes'} ({len(b.labels)} labels in the sheet)")
    if a.output:
        _ensure_dir(a.output)
        write_table(b.table, a.output)
        print(f"wrote {a.output}")
    return 1 if b.n_rejected else 0


def _solve(a):
    from dfkit.locate import locate
    from dfkit.observations import read_bearings

    t0 = time.perf_counter()
    verbose = getattr(a, "progress", False)

    def progress(text):
        if verbose:
            print(f"dfkit: {text} [{time.perf_counter() - t0:.1f} s]", file=sys.stderr, flush=True)

    progress("reading")
    b = read_bearings(a.sheet, **_read_kwargs(a))
    if len(b.table) > 50_000 and hasattr(a, "progress"):
        verbose = True
        progress(f"read {len(b.table)} bearings")
    fixes = locate(b, method=a.method, level=a.level, window_min=a.window, progress=progress)
    return b, fixes, progress


def _print_summary(b, fixes) -> None:
    _report_problems(b.problems, sys.stderr)
    for note in b.notes:
        print(f"note            {note}", file=sys.stderr)
    s = fixes.summary()
    flagged = fixes.table[fixes.table["status"] != "ok"]
    for _, r in flagged.head(50).iterrows():
        print(f"{r['status']:<15} {r['fix']}: {r['reason']}", file=sys.stderr)
    if len(flagged) > 50:
        print(f"... {len(flagged) - 50} more flagged or failed fixes (see the status column)", file=sys.stderr)
    nf = len(fixes.table)
    print(f"{b.source}: {nf} {'fix' if nf == 1 else 'fixes'}: {s['ok']} ok, {s['flagged']} flagged, {s['failed']} failed; "
          f"{len(b.table)} of {b.n_rows} rows used, {b.n_rejected} rejected", file=sys.stderr)
    print(CAUTION_LINE, file=sys.stderr)


def _fix(a) -> int:
    from dfkit.outputs import write_fixes, write_table

    for path in a.output:
        if os.path.splitext(path)[1].lower() not in (".csv", ".geojson", ".json", ".gpx"):
            print(f"dfkit: cannot write '{path}': use a .csv, .geojson or .gpx file name", file=sys.stderr)
            return 2
    b, fixes, progress = _solve(a)
    for path in a.output:
        progress(f"writing {path}")
        _ensure_dir(path)
        write_fixes(fixes, path)
    if a.bearings_out:
        _ensure_dir(a.bearings_out)
        write_table(fixes.bearings, a.bearings_out)
    if not a.output:
        cols = ["fix", "lat", "lon", "n_bearings", "semi_major_m", "semi_minor_m", "status"]
        print(fixes.table[cols].to_string(index=False, float_format=lambda v: f"{v:.6g}"))
    _print_summary(b, fixes)
    s = fixes.summary()
    return 1 if (b.n_rejected or s["flagged"] or s["failed"]) else 0


def _map(a) -> int:
    from dfkit.maps import fix_map

    b, fixes, _ = _solve(a)
    m = fix_map(fixes, error_polygons=a.error_polygons, title=a.title or os.path.basename(a.sheet))
    _ensure_dir(a.output)
    m.save(a.output)
    _print_summary(b, fixes)
    print(f"wrote {a.output} (works offline)", file=sys.stderr)
    s = fixes.summary()
    return 1 if (b.n_rejected or s["flagged"] or s["failed"]) else 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
