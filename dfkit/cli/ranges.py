"""``dfkit ranges FIXES.csv|STORE.gpkg -o OUT``: home ranges (MCP or kernel) per tag."""

from __future__ import annotations

import os
import sys

from dfkit.cautions import CAUTION_LINE
from dfkit.cli.common import (ensure_dir, kinds_text, refuse_unsafe_outputs, refuse_wrong_kinds,
                              report_problems)
from dfkit.cli.filters import add_filter_options, filter_from_args


def add_parser(sub):
    r = sub.add_parser("ranges", help="home ranges per tag (minimum convex polygon or kernel) from fixes or a "
                                      "season file")
    from dfkit.export import RANGE_KINDS       # not from dfkit.season: every command's start-up builds this parser

    r.add_argument("source", help="fixes (.csv, as dfkit fix writes them) or a season file (.gpkg)")
    r.add_argument("-o", "--output", action="append", default=[],
                   help=f"output, its kind by extension: {kinds_text(RANGE_KINDS)} (.csv: areas only); "
                        "may be repeated")
    r.add_argument("--method", choices=["mcp", "kde"], default="kde",
                   help="mcp: minimum convex polygon; kde: fixed kernel (default)")
    r.add_argument("--levels", default="50,95", metavar="LIST",
                   help="percent levels, e.g. 50,95 (default); 100 only for mcp")
    r.add_argument("--bandwidth", default="href", metavar="RULE",
                   help="kernel bandwidth: href (default), lscv, or metres")
    r.add_argument("--widen", action="store_true",
                   help="widen each fix's kernel by its own error covariance (kde only)")
    add_filter_options(r, default_status="ok")
    return r


def _levels(text):
    try:
        vals = [float(v) / 100.0 for v in str(text).split(",") if v.strip()]
    except ValueError:
        raise ValueError(f"--levels '{text}' must be percentages separated by commas (50,95)") from None
    if not vals:
        raise ValueError("--levels is empty: give percentages such as 50,95")
    return vals


def run(a) -> int:
    from dfkit.homerange import home_ranges
    from dfkit.season.range_files import RANGE_KINDS, write_ranges

    refuse_unsafe_outputs(a, [("-o", p) for p in a.output])
    refuse_wrong_kinds([("-o", p, RANGE_KINDS) for p in a.output])
    levels = _levels(a.levels)
    for lv in levels:
        if not (0 < lv < 1 or (lv == 1 and a.method == "mcp")):
            raise ValueError(f"--levels {lv * 100:g} must be between 0 and 100"
                             + (" (100 only with --method mcp)" if lv == 1 else ""))
    bandwidth = a.bandwidth
    if bandwidth not in ("href", "lscv"):
        try:
            bandwidth = float(bandwidth)
        except ValueError:
            raise ValueError(f"--bandwidth '{a.bandwidth}' must be href, lscv or a number of metres") from None
        if not bandwidth > 0:
            raise ValueError(f"--bandwidth {a.bandwidth} must be a positive number of metres")
    if a.widen and a.method != "kde":
        raise ValueError("--widen needs --method kde")
    flt = filter_from_args(a)
    rejected = 0
    if os.path.splitext(a.source)[1].lower() == ".gpkg":
        from dfkit.season import SeasonStore

        with SeasonStore.open(a.source) as store:
            table = store.fixes(flt)
            tags = [r[0] for r in store.conn.execute("SELECT DISTINCT tag FROM fixes")]
    else:
        from dfkit.io.fixes import read_fix_table

        ft = read_fix_table(a.source)
        report_problems(ft.problems, sys.stderr)
        rejected = ft.n_rejected
        table = ft.table[flt.mask(ft.table)]
        tags = ft.tags
    if flt.tags is not None:
        tags = [t for t in tags if t in flt.tags]
    ranges = home_ranges(table, method=a.method, levels=levels, bandwidth=bandwidth, widen=a.widen, statuses=None,
                         tags=tags)
    for w in ranges.warnings:
        print(f"warning   {w}", file=sys.stderr)
    for path in a.output:
        ensure_dir(path)
        write_ranges(ranges, path)
        print(f"wrote {path}", file=sys.stderr)
    t = ranges.table
    show = t[["tag", "method", "level", "area_m2", "n_fixes", "bandwidth_m", "status"]].copy()
    show.insert(2, "level_pct", show.pop("level") * 100)     # as --levels takes them (the files keep 0-1)
    show.insert(4, "area_ha", show["area_m2"] / 1e4)
    print(show.to_string(index=False, float_format=lambda v: f"{v:.4g}") if len(show) else "no tags")
    for _, r in t[t["status"] != "ok"].drop_duplicates("tag").iterrows():
        print(f"{r['status']:<10} tag {r['tag']}: {r['note']}", file=sys.stderr)
    print(f"{a.source}: {t['tag'].nunique()} tags ({flt.describe()}); {len(t)} ranges: "
          f"{int((t['status'] == 'ok').sum())} ok, {int((t['status'] != 'ok').sum())} flagged", file=sys.stderr)
    print(CAUTION_LINE, file=sys.stderr)
    return 1 if (rejected or (t["status"] != "ok").any() or ranges.warnings) else 0
