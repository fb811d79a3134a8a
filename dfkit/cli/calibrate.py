"""``dfkit calibrate TRIALS -o CAL.csv``: bearing bias and SD per antenna or observer, from beacon trials."""

from __future__ import annotations

import sys

from dfkit.cautions import CAUTION_LINE
from dfkit.cli.common import (CSV_KINDS, add_read_options, count_text, ensure_dir, read_kwargs,
                              refuse_unsafe_outputs, refuse_wrong_kinds, report_problems, sheet_help)
from dfkit.export.atomic import save_figure



def add_parser(sub):
    c = sub.add_parser("calibrate", help="bearing bias and SD per antenna or observer, from beacon trials")
    c.add_argument(
        "trials",
        help=sheet_help("the trials") + ": a bearing sheet plus the beacon position (beacon_lat/beacon_lon, "
        "beacon UTM, beacon_mgrs, or a beacon label with --stations)",
    )
    c.add_argument(
        "--by",
        default=None,
        metavar="COLUMN[,COLUMN]",
        help="group trials by these columns (default: antenna if present, else observer, else "
        "one group; 'all' for one group)",
    )
    c.add_argument(
        "-o",
        "--output",
        default=None,
        metavar="CAL.csv",
        help="write the calibration (.csv; use it with dfkit fix/map/plan --calibration)",
    )
    c.add_argument(
        "--trials-out",
        default=None,
        metavar="CSV",
        help="also write every trial with its error, distance, group and whether it was wild (.csv)",
    )
    c.add_argument(
        "--check-out", default=None, metavar="CSV", help="also write the leave-one-beacon-out fixes (.csv)"
    )
    c.add_argument(
        "--figures",
        default=None,
        metavar="DIR",
        help="also write figures into DIR (PNG): calibration.png with every group, and one per group "
        "(error histogram, rose, error versus distance)",
    )
    g = c.add_argument_group("leave-one-beacon-out check")
    from dfkit.estimators import METHODS

    g.add_argument("--method", choices=METHODS, default="mle", help="estimator of the check's fixes (mle)")
    g.add_argument("--level", type=float, default=0.95, help="probability of the check's regions (0.95)")
    add_read_options(c)
    return c


def _fmt(v, spec):
    return "" if v != v else format(v, spec)  # NaN -> blank


def print_groups(cal, out) -> None:
    rows = []
    for _, r in cal.table.iterrows():
        ci = (
            f"{_fmt(r['bias_lo_deg'], '+.1f')}..{_fmt(r['bias_hi_deg'], '+.1f')}"
            if r["bias_lo_deg"] == r["bias_lo_deg"]
            else "(undefined)"
        )
        rows.append(
            (
                r["group"],
                str(r["n"]),
                str(r["n_wild"]),
                _fmt(r["bias_deg"], "+.2f"),
                ci,
                _fmt(r["sd_deg"], ".2f"),
                _fmt(r["kappa"], ".0f"),
                r["status"],
            )
        )
    head = ("group", "n", "wild", "bias°", "bias 95% CI", "sd°", "kappa", "status")
    widths = [max(len(x[i]) for x in rows + [head]) for i in range(len(head))]
    for row in [head] + rows:
        print(
            "  ".join(v.ljust(w) if i == 0 else v.rjust(w) for i, (v, w) in enumerate(zip(row, widths))),
            file=out,
        )


def write_calibration_figures(cal, folder) -> list[str]:
    """``calibration.png`` (every group) and ``group_<n>_<name>.png`` (one per group) in ``folder``."""
    import os
    import re

    from dfkit.figures import calibration_figure

    os.makedirs(folder, exist_ok=True)
    jobs = [("calibration.png", None)]
    for i, g in enumerate(cal.table["group"].tolist()):
        jobs.append((f"group_{i + 1}_{re.sub(r'[^A-Za-z0-9._-]+', '_', g).strip('._')[:50]}.png", [g]))
    written = []
    for name, groups in jobs:
        fig = calibration_figure(cal, groups)
        path = os.path.join(folder, name)
        save_figure(fig, path, dpi=120, bbox_inches="tight")
        import matplotlib.pyplot as plt   # already imported by the figure; closing frees its memory

        plt.close(fig)
        written.append(path)
    return written


def run(a) -> int:
    import os

    from dfkit.calibration import calibrate, leave_one_beacon_out, read_trials
    from dfkit.export import write_table

    if a.figures and os.path.exists(a.figures) and not os.path.isdir(a.figures):
        print(f"dfkit: --figures {a.figures}: not a folder (figures are written into a folder)",
              file=sys.stderr)
        return 2
    refuse_unsafe_outputs(a, [("-o", a.output), ("--trials-out", a.trials_out), ("--check-out", a.check_out)])
    refuse_wrong_kinds([("-o", a.output, CSV_KINDS), ("--trials-out", a.trials_out, CSV_KINDS),
                        ("--check-out", a.check_out, CSV_KINDS)])
    if not 0 < a.level < 1:
        print(f"dfkit: --level {a.level} must be a probability between 0 and 1 (e.g. 0.95)", file=sys.stderr)
        return 2
    trials = read_trials(a.trials, **read_kwargs(a))
    try:
        cal = calibrate(trials, a.by)
    except ValueError as err:
        print(f"dfkit: --by: {err}", file=sys.stderr)
        return 2
    check = leave_one_beacon_out(trials, cal.by or "all", level=a.level, method=a.method)

    report_problems(trials.problems, sys.stderr)
    for note in cal.notes:
        print(f"note      {note}", file=sys.stderr)
    print_groups(cal, sys.stdout)
    for _, r in cal.table.iterrows():
        for w in filter(None, str(r["warning"]).split("; ")):
            print(f"warning   {r['group']}: {w}", file=sys.stderr)
    for _, w in cal.wild.iterrows():
        print(
            f"wild      {trials.source}: line {w['line']}: {w['group']}, beacon {w['beacon']}: error "
            f"{w['error_deg']:+.1f}°, {w['deviation_deg']:+.1f}° from the group's median: left out "
            "(a reflection or a misread?)",
            file=sys.stderr,
        )
    print(check.summary())
    for note in check.notes:
        print(f"note      leave-one-beacon-out: {note}", file=sys.stderr)
    lo, hi = check.interval
    dishonest = check.n_with_region > 0 and not (lo <= a.level <= hi)
    if dishonest:
        if hi < a.level:
            why = ("the calibration may understate the error away from its own beacons (terrain, cover, "
                   "distance), or the trial fixes' geometry strains the ellipse; see --check-out")
        else:
            why = "the calibration may overstate the error (beacons in worse places than the rest?)"
        more = "less" if hi < a.level else "more"
        print(f"warning   leave-one-beacon-out: the regions held their beacon {more} often than "
              f"{100 * a.level:g} %: {why}", file=sys.stderr)
    if a.output:
        ensure_dir(a.output)
        write_table(cal.table, a.output)
        print(f"wrote {a.output}", file=sys.stderr)
    if a.trials_out:
        ensure_dir(a.trials_out)
        write_table(cal.trials, a.trials_out)
    if a.check_out:
        ensure_dir(a.check_out)
        write_table(check.fixes, a.check_out)
    if a.figures and len(cal.table):
        for path in write_calibration_figures(cal, a.figures):
            print(f"wrote {path}", file=sys.stderr)
    n_groups = len(cal.table)
    print(
        f"{trials.source}: {count_text(trials.n_rows, 'row')}, "
        f"{count_text(len(trials.table), 'usable trial')}, "
        f"{trials.n_rejected} rejected, "
        f"{len(cal.wild)} wild; {n_groups} group{'s' if n_groups != 1 else ''}: "
        + ", ".join(f"{(cal.table['status'] == s).sum()} {s}" for s in ("ok", "few", "unusable")),
        file=sys.stderr,
    )
    print(CAUTION_LINE, file=sys.stderr)
    flagged = (
        trials.n_rejected
        or len(cal.wild)
        or not len(cal.table)
        or (cal.table["status"] != "ok").any()
        or (cal.table["warning"] != "").any()
        or dishonest
    )
    return 1 if flagged else 0
