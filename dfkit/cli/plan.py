"""``dfkit plan SHEET --fix LABEL (--spots SPOTS | --around M) -o OUT``: where to take the next bearing."""

from __future__ import annotations

import os
import sys

from dfkit.cli.common import (add_fix_options, add_read_options, count_text, ensure_dir, kinds_text,
                              read_kwargs, refuse_unsafe_outputs, refuse_wrong_kinds, report_problems,
                              sheet_help)
from dfkit.policy import DEFAULT_MAX_RANGE_M

#: Output kinds of a plan, by extension.
OUTPUTS = (".csv", ".geojson", ".json", ".html")


def add_parser(sub):
    p = sub.add_parser(
        "plan", help="rank spots for the next bearing on a fix by the region it is expected to leave"
    )
    p.add_argument("sheet", help=sheet_help())
    p.add_argument("--fix", required=True, metavar="LABEL", help="the fix to plan for")
    p.add_argument("--tag", default=None, help="the fix's tag, when several tags use the label")
    where = p.add_mutually_exclusive_group(required=True)
    where.add_argument(
        "--spots",
        metavar="FILE",
        help="candidate spots: a 'spot' label and a position (lat/lon, UTM, MGRS or station), CSV or "
        "spreadsheet",
    )
    where.add_argument(
        "--around",
        type=float,
        metavar="METRES",
        help="instead of spots, a grid within this distance of the estimate",
    )
    p.add_argument(
        "--step", type=float, default=None, metavar="METRES", help="grid spacing (default around/10)"
    )
    p.add_argument(
        "--next-sd",
        type=float,
        default=None,
        metavar="DEG",
        help="SD of the next bearing (default: the fix's SD, given or estimated)",
    )
    p.add_argument(
        "--basis",
        choices=["point", "region"],
        default="point",
        help="expected area at the estimate (default) or its geometric mean over the current region",
    )
    p.add_argument(
        "--max-range",
        type=float,
        default=DEFAULT_MAX_RANGE_M,
        metavar="METRES",
        help=f"with one bearing: farthest plausible range along it (default {DEFAULT_MAX_RANGE_M:g} m, "
        "common practice)",
    )
    p.add_argument(
        "--min-distance",
        type=float,
        default=0.0,
        metavar="METRES",
        help="do not rank spots nearer than this to the estimate (e.g. to keep away from an animal)",
    )
    p.add_argument(
        "--top", type=int, default=10, metavar="N", help="spots listed on the terminal (default 10)"
    )
    p.add_argument(
        "-o",
        "--output",
        action="append",
        default=[],
        help=f"output file, its kind by extension: {kinds_text(OUTPUTS)} (.html: a map of the plan; may be "
        "repeated)",
    )
    add_read_options(p)
    add_fix_options(p)
    return p


def run(a) -> int:
    from dfkit.observations import read_bearings
    from dfkit.planning import plan_next_bearing

    refuse_unsafe_outputs(a, [("-o", p) for p in a.output])
    refuse_wrong_kinds([("-o", p, OUTPUTS) for p in a.output])
    if a.step is not None and a.around is None:
        print("dfkit: --step is the spacing of a grid: give --around with it", file=sys.stderr)
        return 2
    b = read_bearings(a.sheet, **read_kwargs(a))
    if a.calibration:  # the same path as fix and map (cli.common.solve)
        from dfkit.calibration import apply, read_calibration

        b = apply(b, read_calibration(a.calibration))
    try:
        plan = plan_next_bearing(
            b,
            a.fix,
            tag=a.tag,
            spots=a.spots,
            around_m=a.around,
            step_m=a.step,
            next_sd_deg=a.next_sd,
            method=a.method,
            level=a.level,
            wild_share=a.wild_share,
            basis=a.basis,
            max_range_m=a.max_range,
            min_distance_m=a.min_distance,
            stations=a.stations,
        )
    except ValueError as err:
        print(f"dfkit: {_flags(str(err))}", file=sys.stderr)
        return 2
    for path in a.output:
        ensure_dir(path)
        _write(plan, path)
    if not a.output:
        _print_table(plan, a.top)
    _print_summary(plan, a.top)
    return _exit_status(plan)


def _flags(text: str) -> str:
    """Library parameter names as the command line spells them (``step_m=5`` -> ``--step 5``)."""
    import re

    names = {
        "around_m": "--around",
        "step_m": "--step",
        "next_sd_deg": "--next-sd",
        "max_range_m": "--max-range",
        "min_distance_m": "--min-distance",
        "fix": "--fix",
        "tag": "--tag",
        "level": "--level",
        "spots": "--spots",
        "basis": "--basis",
    }
    alt = "|".join(names)
    text = re.sub(rf"\b({alt})=(?=\S)", lambda m: names[m.group(1)] + " ", text)  # step_m=5 -> --step 5
    text = re.sub(rf"\b({alt})=", lambda m: names[m.group(1)], text)  # give tag= -> give --tag
    return re.sub(r"\b(\w+_(?:m|deg))\b", lambda m: names.get(m.group(1), m.group(1)), text)


def _write(plan, path):
    from dfkit.export.plan import write_plan_csv, write_plan_geojson

    ext = os.path.splitext(path)[1].lower()
    if ext == ".csv":
        write_plan_csv(plan, path)
    elif ext in (".geojson", ".json"):
        write_plan_geojson(plan, path)
    else:
        from dfkit.maps.plan import plan_map

        plan_map(plan).save(path)
        print(f"wrote {path} (works offline)", file=sys.stderr)


def _print_table(plan, top):
    cols = [
        "rank",
        "spot",
        "expected_area_m2",
        "area_ratio",
        "distance_m",
        "azimuth_true_deg",
        "expected_bearing_true_deg",
        *(f"expected_bearing_{north}_deg" for north in plan.norths),
        "from_last_m",
    ]
    t = plan.table[plan.table["rank"].notna()].head(top)
    print(
        t[cols].to_string(index=False, float_format=lambda v: f"{v:.4g}")
        if len(t)
        else "no spot could be ranked"
    )


def _print_summary(plan, top):
    from dfkit.cautions import CAUTION_LINE, PLAN_CAUTION

    report_problems(plan.problems, sys.stderr)
    r = plan.fix_row
    who = f"tag {r['tag']}, fix {r['fix']}" if r["tag"] else f"fix {r['fix']}"
    print(f"{who}: {r['status']}" + (f" ({r['reason']})" if r["reason"] else ""), file=sys.stderr)
    for note in list(plan.fixes.notes) + list(plan.notes):
        print(f"note            {note}", file=sys.stderr)
    unranked = plan.table[
        plan.table["rank"].isna() & ~plan.table["note"].astype(str).str.startswith("rejected:")
    ]
    for _, s in unranked.head(20).iterrows():
        print(f"not ranked      spot {s['spot']}: {s['note']}", file=sys.stderr)
    best = plan.best
    if best is not None:
        area = (
            f"expected {100 * plan.level:g}% region {best['expected_area_m2']:.0f} m²"
            if best["expected_area_m2"] == best["expected_area_m2"]
            else "no area (no SD known)"
        )
        share = f", {best['area_ratio']:.2f} of now" if best["area_ratio"] == best["area_ratio"] else ""
        ref = (
            "the estimate" if plan.basis in ("point", "region") else "the middle of the positions considered"
        )
        print(
            f"best next spot  {best['spot']}: {area}{share}; {best['distance_m']:.0f} m at "
            f"{_direction(plan, best, 'azimuth')} from {ref}, aim the antenna at "
            f"{_direction(plan, best, 'expected_bearing')}; {best['from_last_m']:.0f} m at "
            f"{_direction(plan, best, 'from_last')} from the last station in a straight line",
            file=sys.stderr,
        )
    n_rank = int(plan.table["rank"].notna().sum())
    n_rej = len({p.line for p in plan.problems if p.severity == "error" and p.source != plan.fixes.source})
    rej = f", {n_rej} spot row{'s' if n_rej != 1 else ''} rejected" if n_rej else ""
    print(
        f"{plan.fixes.source}: {n_rank} of {count_text(len(plan.table), 'spot')} ranked ({plan.basis}){rej}",
        file=sys.stderr,
    )
    print(f"caution: {PLAN_CAUTION}", file=sys.stderr)
    print(CAUTION_LINE, file=sys.stderr)


def _direction(plan, row, name) -> str:
    """A direction of the plan named with its north: '270° true', or '270° true = 258° magnetic' where the
    fix's bearings were magnetic (or grid)."""
    text = f"{row[f'{name}_true_deg']:.0f}° true"
    for north in plan.norths:
        text += f" = {row[f'{name}_{north}_deg']:.0f}° {north}"
    return text


def _exit_status(plan) -> int:
    """0 when every row and spot was used, the fix is ok and a spot was ranked; 1 otherwise."""
    rejected = any(p.severity == "error" for p in plan.problems)
    if rejected or plan.fix_row["status"] != "ok" or plan.best is None:
        return 1
    return 0
