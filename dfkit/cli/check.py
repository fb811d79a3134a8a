"""``dfkit check SHEET``: every row dfkit cannot use, with line, column and reason."""

from __future__ import annotations

import sys

from dfkit.cli.common import (CSV_KINDS, add_output_options, add_read_options, count_text, ensure_dir,
                              exit_status, read_kwargs,
                              refuse_unsafe_outputs, refuse_wrong_kinds, rejected_summary, report_problems,
                              sheet_help)


def add_parser(sub):
    c = sub.add_parser("check", help="read a sheet and report every row dfkit cannot use")
    c.add_argument("sheet", help=sheet_help())
    c.add_argument("-o", "--output", default=None, metavar="CSV", help="write the normalized table (.csv)")
    add_read_options(c)
    add_output_options(c)
    return c


def run(a) -> int:
    from dfkit.export import write_table
    from dfkit.observations import read_bearings

    refuse_unsafe_outputs(a, [("-o", a.output)])
    refuse_wrong_kinds([("-o", a.output, CSV_KINDS)])
    b = read_bearings(a.sheet, **read_kwargs(a))
    report_problems(b.problems, sys.stdout)
    for note in b.notes:
        print(f"note      {note}")
    # a fix is a (tag, label) pair: the same label on two tags, or split by a long gap, is two fixes
    n_fix, n_label = len(b.labels), len(set(b.labels))
    labels = "" if n_label == n_fix else f" from {count_text(n_label, 'distinct label')}"
    print(f"{b.source}: {count_text(b.n_rows, 'row')}, {len(b.table)} usable, {rejected_summary(b)}; "
          f"{n_fix} {'fix' if n_fix == 1 else 'fixes'}{labels}")
    if a.output:
        ensure_dir(a.output)
        write_table(b.table, a.output, guard_formulas=not a.verbatim_csv)
        print(f"wrote {a.output}")
    return exit_status(b)
