"""``dfkit map SHEET -o MAP.html``: an offline HTML map of bearings, fixes and regions."""

from __future__ import annotations

import os
import sys

from dfkit.cli.common import (add_fix_options, add_read_options, ensure_dir, exit_status, print_summary,
                              refuse_unsafe_outputs, solve)


def add_parser(sub):
    m = sub.add_parser("map", help="an offline HTML map of bearings, fixes and regions")
    m.add_argument("sheet")
    m.add_argument("-o", "--output", required=True, help="HTML file to write")
    m.add_argument("--error-polygons", action="store_true", help="also draw error polygons (no probability meaning)")
    m.add_argument("--title", default=None)
    add_read_options(m)
    add_fix_options(m)
    return m


def run(a) -> int:
    from dfkit.maps import fix_map

    refuse_unsafe_outputs(a, [("-o", a.output)])
    b, fixes, _ = solve(a)
    m = fix_map(fixes, error_polygons=a.error_polygons, title=a.title or os.path.basename(a.sheet))
    ensure_dir(a.output)
    m.save(a.output)
    print_summary(b, fixes)
    print(f"wrote {a.output} (works offline)", file=sys.stderr)
    return exit_status(b, fixes)
