"""``dfkit fix SHEET -o OUT``: positions and confidence regions for every fix of a sheet."""

from __future__ import annotations

import sys
from dataclasses import replace

from dfkit.cli.common import (CSV_KINDS, add_fix_options, add_jobs_option, add_output_options, add_read_options,
                              ensure_dir, exit_status, kinds_text, print_summary, refuse_unsafe_outputs,
                              refuse_wrong_kinds, sheet_help, solve)
from dfkit.cli.map import add_figures_option, write_figures


def add_parser(sub):
    f = sub.add_parser("fix", help="positions and confidence regions for every fix of a sheet")
    from dfkit.export import WRITERS

    f.add_argument("sheet", help=sheet_help())
    f.add_argument("-o", "--output", action="append", default=[],
                   help=f"output file, its kind by extension: {kinds_text(WRITERS)} (may be repeated)")
    f.add_argument("--bearings-out", default=None, metavar="CSV",
                   help="also write every bearing with its residual and weight (.csv)")
    f.add_argument("--progress", action="store_true", help="print progress (automatic on large sheets)")
    o = f.add_argument_group("output files")
    o.add_argument("--utm", action="store_true",
                   help="CSV: add utm_zone (number), utm_hemisphere (north/south), utm_band (letter), "
                        "easting, northing columns")
    o.add_argument("--gpx-name-length", type=int, default=None, metavar="N",
                   help="GPX: cut waypoint names to N characters (hand-held receivers show few), kept unique")
    o.add_argument("--gpx-tz", default=None, metavar="ZONE", help="GPX: waypoint times in this time zone, not UTC")
    o.add_argument("--error-polygons", action="store_true",
                   help="GeoJSON/GIS files: also write error polygons (no probability meaning)")
    add_figures_option(o)
    add_read_options(f)
    add_fix_options(f)
    add_jobs_option(f)
    add_output_options(f)
    return f


def run(a) -> int:
    from dfkit.export import WRITERS, WriteOptions, output_kind, write_fixes, write_table

    refuse_unsafe_outputs(a, [("-o", p) for p in a.output] + [("--bearings-out", a.bearings_out)])
    refuse_wrong_kinds([("-o", p, tuple(WRITERS)) for p in a.output]
                       + [("--bearings-out", a.bearings_out, CSV_KINDS)])
    if a.gpx_name_length is not None and a.gpx_name_length < 3:
        print(f"dfkit: --gpx-name-length {a.gpx_name_length}: must be at least 3", file=sys.stderr)
        return 2
    if a.gpx_tz is not None:
        import zoneinfo

        try:
            zoneinfo.ZoneInfo(a.gpx_tz)
        except (zoneinfo.ZoneInfoNotFoundError, ValueError):
            print(f"dfkit: --gpx-tz {a.gpx_tz!r} is not a time zone name (e.g. Europe/Vienna)", file=sys.stderr)
            return 2
    opts = WriteOptions(utm=a.utm, gpx_name_length=a.gpx_name_length, gpx_tz=a.gpx_tz,
                        error_polygons=a.error_polygons, guard_formulas=not a.verbatim_csv)
    b, fixes, progress = solve(a)
    used = len(b.table)
    if not (a.figures or a.bearings_out) and all(output_kind(p) in CSV_KINDS for p in a.output):
        b, fixes = fix_table_only(b, fixes)
    for path in a.output:
        progress(f"writing {path}")
        ensure_dir(path)
        write_fixes(fixes, path, opts)
        print(f"wrote {path}", file=sys.stderr)
    if a.figures:
        for p in write_figures(fixes, a.figures, progress):
            print(f"warning   {p}", file=sys.stderr)
    if a.bearings_out:
        ensure_dir(a.bearings_out)
        write_table(fixes.bearings, a.bearings_out, guard_formulas=not a.verbatim_csv)
    if not a.output:
        cols = ["fix", "lat", "lon", "n_bearings", "semi_major_m", "semi_minor_m", "status"]
        print(fixes.table[cols].to_string(index=False, float_format=lambda v: f"{v:.6g}"))
    print_summary(b, fixes, used=used)
    return exit_status(b, fixes)


def fix_table_only(b, fixes):
    """The bearings and fixes as far as the fix table, the summary and the exit status need them: without the
    bearings' table, their fits and the regions, which take most of the memory of a long sheet. A CSV written
    after dropping them formats its text in memory they leave free, instead of on top (37 MiB of the peak at
    1,000,000 bearings). Empty tables of the same columns stand in for the dropped ones."""
    return (replace(b, table=b.table.iloc[:0].copy()),
            replace(fixes, bearings=fixes.bearings.iloc[:0].copy(), likelihood=None, azimuth_deg=None, _regions=None))
