"""``dfkit season add|show``: a season of sheets in one GeoPackage file, and what to take out of it."""

from __future__ import annotations

import os
import sys
import time

from dfkit.cautions import CAUTION_LINE
from dfkit.cli.common import (add_fix_options, add_jobs_option, add_read_options, check_jobs, count_text,
                              kinds_text, read_kwargs, refuse_unsafe_outputs, refuse_wrong_kinds, report_problems,
                              sheet_help)
from dfkit.cli.filters import add_filter_options, filter_from_args
from dfkit.export import WRITERS

#: What ``season show -o`` can write, by extension: every fix writer (.gpkg is a season file of the selection
#: there) and the review page.
SHOW_KINDS = tuple(WRITERS) + (".html",)


def add_parser(sub):
    s = sub.add_parser("season", help="a season of sheets in one GeoPackage file: add sheets, show selections")
    ss = s.add_subparsers(dest="season_command", required=True)

    a = ss.add_parser("add", help="solve sheets and store them (importing the same rows again adds nothing)")
    a.add_argument("store", help="season file (.gpkg); made when it does not exist")
    a.add_argument("sheets", nargs="+", metavar="SHEET",
                   help=sheet_help("bearing sheets") + "; each is one import")
    a.add_argument("--replace", action="store_true",
                   help="replace stored fixes that a sheet changes (default: report them and keep the stored ones)")
    a.add_argument("--progress", action="store_true", help="print progress (automatic on large sheets)")
    add_read_options(a)
    add_fix_options(a)
    add_jobs_option(a)
    a.set_defaults(_season=_run_add)

    w = ss.add_parser("show", help="choose fixes of a season and write them (CSV, GeoJSON, GeoPackage, GPX, review "
                                   "page), or print a summary")
    w.add_argument("store", help="season file (.gpkg)")
    w.add_argument("-o", "--output", action="append", default=[],
                   help=f"output file, its kind by extension: {kinds_text(SHOW_KINDS)} (.gpkg is a season "
                        "file of the selection, .html the review page; may be repeated)")
    w.add_argument("--title", default=None, help="title of the review page")
    add_filter_options(w)
    w.set_defaults(_season=_run_show)
    return s


def run(a) -> int:
    import sqlite3        # here, not at the top: every command's start-up imports this module

    from dfkit.season.store import StoreError

    try:
        return a._season(a)
    except StoreError as err:
        print(f"dfkit: {err}", file=sys.stderr)
        return 2
    except sqlite3.Error as err:
        print(f"dfkit: the season file '{a.store}' could not be used: {err}", file=sys.stderr)
        return 2


def _run_add(a) -> int:
    from dfkit.season import SeasonStore, add_sheet

    t0 = time.perf_counter()

    def progress(text):
        if a.progress:
            print(f"dfkit: {text} [{time.perf_counter() - t0:.1f} s]", file=sys.stderr, flush=True)

    if os.path.splitext(a.store)[1].lower() != ".gpkg":
        print(f"dfkit: the season file must end in .gpkg (got '{a.store}')", file=sys.stderr)
        return 2
    check_jobs(a)
    status = 0
    with SeasonStore.open(a.store, create=True) as store:
        _say_migrated(store)
        for sheet in a.sheets:
            r = add_sheet(store, sheet, method=a.method, level=a.level, replace=a.replace, progress=progress,
                          jobs=a.jobs, wild_share=a.wild_share,
                          wild_rate=getattr(a, "wild_rate", "sheet"), **read_kwargs(a))
            report_problems(r.problems, sys.stderr)
            for note in r.notes:
                print(f"note      {note}", file=sys.stderr)
            for tag, fix, detail in r.changed[:50]:
                what = "replaced" if r.replaced else "changed "
                print(f"{what}  tag {tag}, fix {fix}: {detail}", file=sys.stderr)
            if len(r.changed) > 50:
                print(f"... {len(r.changed) - 50} more changed fixes (see the 'changes' table)", file=sys.stderr)
            for tag, fix, detail in r.beside[:50]:
                print(f"beside    tag {tag}, fix {fix}: {detail}", file=sys.stderr)
            if len(r.beside) > 50:
                print(f"... {len(r.beside) - 50} more fixes added beside stored ones (see the 'changes' "
                      "table)", file=sys.stderr)
            s = r.added_status
            kept = "" if r.replaced or not r.changed else " (kept as stored; --replace to replace them)"
            print(f"{r.file_name}: import {r.import_id}: {count_text(r.fixes_in, 'fix', 'fixes')} in the "
                  f"sheet: {r.fixes_added} added "
                  f"({s.get('ok', 0)} ok, {s.get('flagged', 0)} flagged, {s.get('failed', 0)} failed), "
                  f"{r.fixes_known} already stored, {r.fixes_changed} changed{kept}; "
                  f"{count_text(r.n_rows, 'row', 'rows')}, {r.n_rejected} rejected", file=sys.stderr)
            if r.n_rejected or s.get("flagged") or s.get("failed") or (r.changed and not r.replaced):
                status = 1
    print(f"stored in {a.store}", file=sys.stderr)
    print(CAUTION_LINE, file=sys.stderr)
    return status


def _run_show(a) -> int:
    from dfkit.season import SeasonStore
    from dfkit.season.summary import tag_summary

    refuse_unsafe_outputs(a, [("-o", p) for p in a.output])
    refuse_wrong_kinds([("-o", p, SHOW_KINDS) for p in a.output])
    flt = filter_from_args(a)
    with SeasonStore.open(a.store) as store:
        _say_migrated(store)
        table = store.fixes(flt)
        for path in a.output:
            _write(store, flt, table, path, a.title)
            print(f"wrote {path}", file=sys.stderr)
        if not a.output:
            print(f"imports of {a.store}:")
            imp = store.imports()
            cols = ["import_id", "file_name", "imported_utc", "n_rows", "n_rejected", "n_fixes_added",
                    "n_fixes_known", "n_fixes_changed"]
            print(imp[cols].to_string(index=False) if len(imp) else "  none")
            print(f"\nfixes chosen ({flt.describe()}):")
            s = tag_summary(table)
            print(s.to_string(index=False, float_format=lambda v: f"{v:.3g}") if len(s) else "  none")
    st = table["status"].astype(str)
    print(f"{a.store}: {len(table)} {'fix' if len(table) == 1 else 'fixes'} chosen ({flt.describe()}): "
          f"{int((st == 'ok').sum())} ok, "
          f"{int((st != 'ok').sum())} flagged or failed", file=sys.stderr)
    print(CAUTION_LINE, file=sys.stderr)
    return 0 if (st == "ok").all() else 1


def _say_migrated(store) -> None:
    for line in store.migrated:
        print(f"note      the season file was migrated: {line}", file=sys.stderr)


def _write(store, flt, table, path, title) -> None:
    from dfkit.cli.common import ensure_dir

    ensure_dir(path)
    ext = os.path.splitext(path)[1].lower()
    if ext == ".gpkg":
        if os.path.abspath(path) == os.path.abspath(store.path):
            raise ValueError(f"-o {path} is the season file itself; write the selection to another file")
        store.write_selection(path, flt)
    elif ext == ".html":
        from dfkit.season.review import review_page

        review_page(store, flt, title=title or f"Season review: {os.path.basename(store.path)}").save(path)
    elif ext == ".csv":
        from dfkit.export import write_table

        write_table(table, path)
    else:
        from dfkit.export import write_fixes

        fixes = store.select(flt, with_bearings=False)
        write_fixes(fixes, path)
