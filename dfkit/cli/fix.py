"""``dfkit fix SHEET -o OUT``: positions and confidence regions for every fix of a sheet."""

from __future__ import annotations

import sys

from dfkit.cli.common import (add_fix_options, add_output_options, add_read_options, ensure_dir, exit_status,
                              print_summary, refuse_unsafe_outputs, solve)


def add_parser(sub):
    f = sub.add_parser("fix", help="positions and confidence regions for every fix of a sheet")
    f.add_argument("sheet")
    f.add_argument("-o", "--output", action="append", default=[],
                   help="output file: .csv, .geojson or .gpx (may be repeated)")
    f.add_argument("--bearings-out", default=None, metavar="CSV",
                   help="also write every bearing with its residual and weight")
    f.add_argument("--progress", action="store_true", help="print progress (automatic on large sheets)")
    add_read_options(f)
    add_fix_options(f)
    add_output_options(f)
    return f


def run(a) -> int:
    from dfkit.export import WRITERS, output_kind, write_fixes, write_table

    for path in a.output:
        if output_kind(path) is None:
            print(f"dfkit: cannot write '{path}': use one of {', '.join(sorted(WRITERS))}", file=sys.stderr)
            return 2
    refuse_unsafe_outputs(a, [("-o", p) for p in a.output] + [("--bearings-out", a.bearings_out)])
    b, fixes, progress = solve(a)
    for path in a.output:
        progress(f"writing {path}")
        ensure_dir(path)
        write_fixes(fixes, path, guard_formulas=not a.verbatim_csv)
    if a.bearings_out:
        ensure_dir(a.bearings_out)
        write_table(fixes.bearings, a.bearings_out, guard_formulas=not a.verbatim_csv)
    if not a.output:
        cols = ["fix", "lat", "lon", "n_bearings", "semi_major_m", "semi_minor_m", "status"]
        print(fixes.table[cols].to_string(index=False, float_format=lambda v: f"{v:.6g}"))
    print_summary(b, fixes)
    return exit_status(b, fixes)
