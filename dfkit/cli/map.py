"""``dfkit map SHEET -o MAP.html``: an offline HTML map of bearings, fixes and regions.

Also home of ``--figures DIR`` (a static figure per fix, for reports), which ``dfkit fix`` offers too.
"""

from __future__ import annotations

import os
import re
import sys

from dfkit.cli.common import (add_fix_options, add_jobs_option, add_read_options, ensure_dir, exit_status, print_summary,
                              refuse_unsafe_outputs, solve)
from dfkit.export.atomic import save_figure


def add_figures_option(p) -> None:
    p.add_argument("--figures", default=None, metavar="DIR",
                   help="also write a figure per fix (PNG: bearings, fix and region in local metres) into DIR")


def add_parser(sub):
    m = sub.add_parser("map", help="an offline HTML map of bearings, fixes and regions")
    m.add_argument("sheet")
    m.add_argument("-o", "--output", required=True, help="HTML file to write")
    m.add_argument("--title", default=None)
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
    from dfkit.figures import fix_plot
    from dfkit.locate import Fixes

    os.makedirs(folder, exist_ok=True)
    say = progress or (lambda text: None)
    t, b = fixes.table, fixes.bearings
    problems = []
    by_fix = b.groupby("fix_id").indices if len(b) else {}
    for i in range(len(t)):
        if i % 500 == 0:
            say(f"figures {i}/{len(t)}")
        rows = by_fix.get(i, [])
        label = str(t["fix"].iat[i])
        if len(rows) == 0:
            problems.append(f"no figure for fix {label}: it has no usable bearing")
            continue
        one = Fixes(table=t.iloc[[i]].reset_index(drop=True), bearings=b.iloc[rows].assign(fix_id=0),
                    source=fixes.source)
        try:
            fig = fix_plot(one, t["fix"].iat[i])
            save_figure(fig, os.path.join(folder, _safe_name(i, label)), dpi=110)
            import matplotlib.pyplot as plt

            plt.close(fig)
        except (ValueError, KeyError, IndexError) as err:
            problems.append(f"no figure for fix {label}: {err}")
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
