"""``dfkit map SHEET -o MAP.html``: an offline HTML map of bearings, fixes and regions.

Also home of ``--figures DIR`` (a static figure per fix, for reports), which ``dfkit fix`` offers too.
"""

from __future__ import annotations

import os
import re
import sys

from dfkit.cli.common import (HTML_KINDS, add_fix_options, add_jobs_option, add_read_options, ensure_dir,
                              exit_status, kinds_text, print_summary, refuse_unsafe_outputs, refuse_wrong_kinds,
                              sheet_help, solve)
from dfkit.export.atomic import save_figure


def add_figures_option(p) -> None:
    p.add_argument("--figures", default=None, metavar="DIR",
                   help="also write a figure per fix into DIR (PNG: bearings, fix and its likelihood "
                        "region in local metres)")


def add_parser(sub):
    m = sub.add_parser("map", help="an offline HTML map of bearings, fixes and regions")
    m.add_argument("sheet", help=sheet_help())
    m.add_argument("-o", "--output", required=True, metavar="HTML",
                   help=f"the map page to write ({kinds_text(HTML_KINDS)}; one file, works offline)")
    m.add_argument("--title", default=None, help="title of the page (default: the sheet's file name)")
    g = m.add_argument_group("map")
    g.add_argument("--error-polygons", action="store_true", help="also draw error polygons (no probability meaning)")
    g.add_argument("--colour-by", choices=["tag", "time", "observer"], default="tag",
                   help="first colouring of the map (tag, time = rounds/days, observer); the page can switch")
    g.add_argument("--bearings", choices=["auto", "on", "off"], default="auto",
                   help="show bearing lines when the page opens (auto: only up to 5000 bearings)")
    g.add_argument("--tiles", default=None, metavar="DIR|MBTILES",
                   help="your own map tiles (folder of z/x/y images or an .mbtiles file), embedded for offline use")
    g.add_argument("--tiles-budget", type=float, default=15.0, metavar="MB",
                   help="most megabytes of tiles to embed (default 15)")
    g.add_argument("--no-online-tiles", action="store_true", help="do not offer online tiles at all")
    add_figures_option(g)
    m.add_argument("--progress", action="store_true", help="print progress (automatic on large sheets)")
    add_read_options(m)
    add_fix_options(m)
    add_jobs_option(m)
    return m


def _safe_name(i: int, label: str) -> str:
    stem = re.sub(r"[^A-Za-z0-9._-]+", "_", label).strip("._")[:60] or "fix"
    return f"{i + 1:05d}_{stem}.png"


def write_figures(fixes, folder, progress=None) -> list[str]:
    """A PNG per fix in ``folder`` (named ``00001_<label>.png``); returns the problems met (none crash the run)."""
    import matplotlib.pyplot as plt

    from dfkit.figures import fix_figures

    os.makedirs(folder, exist_ok=True)
    problems = []
    for i, fig, problem in fix_figures(fixes, progress=progress):
        if fig is None:
            problems.append(problem)
            continue
        try:
            save_figure(fig, os.path.join(folder, _safe_name(i, str(fixes.table["fix"].iat[i]))), dpi=110)
        finally:
            plt.close(fig)
    return problems


def run(a) -> int:
    from dfkit.maps import fix_map

    if a.tiles is not None and not os.path.exists(a.tiles):
        print(f"dfkit: --tiles {a.tiles}: no such folder or file", file=sys.stderr)
        return 2
    if not a.tiles_budget > 0:
        print(f"dfkit: --tiles-budget {a.tiles_budget}: must be a positive number of megabytes", file=sys.stderr)
        return 2
    refuse_unsafe_outputs(a, [("-o", a.output)])
    refuse_wrong_kinds([("-o", a.output, HTML_KINDS)])
    b, fixes, progress = solve(a)
    progress("building the map")
    m = fix_map(fixes, error_polygons=a.error_polygons, title=a.title or os.path.basename(a.sheet), tiles=a.tiles,
                tiles_budget_bytes=int(a.tiles_budget * 1e6), online_tiles=not a.no_online_tiles,
                colour_by=a.colour_by, bearings={"auto": None, "on": True, "off": False}[a.bearings])
    progress(f"writing {a.output}")
    ensure_dir(a.output)
    m.save(a.output)
    for note in m.notes:
        print(f"note            {note}", file=sys.stderr)
    if a.figures:
        for p in write_figures(fixes, a.figures, progress):
            print(f"warning   {p}", file=sys.stderr)
    print_summary(b, fixes)
    size = os.path.getsize(a.output) / 1e6
    print(f"wrote {a.output} ({size:.1f} MB; works offline)", file=sys.stderr)
    return exit_status(b, fixes)
