"""From usable bearings to a table of fixes, each with a status, a plain reason and its region.

This is where dfkit decides what is honest to report. Every fix of the input
gets a row. A position is given only when it means something, and a region
only when its probability statement holds (statuses: :mod:`dfkit.locate.fixes`).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pandas as pd

from dfkit import estimators, geodesy, regions
from dfkit.locate.fixes import FIX_COLUMNS, WITH_POSITION, Fixes, has_position, per_bearing
from dfkit.locate.hints import one_bearing_hints
from dfkit.locate.offsets import fix_offsets
from dfkit.locate.resolution import fix_steps, sd_floors
from dfkit.locate import rounding, wildlines
from dfkit.locate.rivals import find_rivals
from dfkit.locate.status import FixFacts, append_reason, classify, p_values
from dfkit.observations.cells import filled
from dfkit.policy import WILD_SHARE
from dfkit.observations import Bearings, ReadOptions, check_wild_share, read_bearings

#: Inconsistent fixes with a chi-square p-value at least this are not searched for one bad line.
HINT_P = 1e-3


def locate(bearings: Bearings, *, method: str = "mle", level: float = 0.95, window_min: float | None = None,
           robust_c: float | None = None, with_regions: bool = True, progress=None, jobs: int = 1,
           sheet_checks: bool = True, wild_share: float = WILD_SHARE, wild_rate: str = "sheet") -> Fixes:
    """Solve every fix of a set of bearings.

    Parameters
    ----------
    bearings : Bearings
        From :func:`dfkit.read_bearings`.
    method : str
        Estimator, one of :data:`dfkit.estimators.METHODS` (see :mod:`dfkit.estimators`).
    level : float
        Probability of the confidence regions and ellipses, in (0, 1).
    window_min : float, optional
        Fixes whose bearings span more than this are flagged ``long_span``; by
        default the window the bearings were grouped with. [min]
    robust_c : float, optional
        Tuning constant of the Huber and Andrews weights (default: the method's).
    with_regions : bool
        Compute each fix's likelihood-ratio region (default). Without them a fix can still be
        ``ok`` on its covariance ellipse, and :meth:`Fixes.contains` answers only for ellipses.
    progress : callable, optional
        Called with a short text at each stage (the CLI prints it).
    jobs : int
        Solve the fixes in chunks on this many threads (0: one per processor); the results are
        those of one job (:mod:`dfkit.locate.parallel`).
    sheet_checks : bool
        Also run the sheet-wide checks (:mod:`dfkit.locate.sheetwide`: a group reading off, an SD too
        small), which set ``Fixes.warnings`` and may mark ``ok`` fixes (default).
    wild_share : float
        Prior share of bearings that are wild (:data:`dfkit.policy.WILD_SHARE`), from 0 to
        :data:`~dfkit.policy.MAX_WILD_SHARE`: a fix of three or
        more bearings with a known SD whose region could miss the transmitter because one of its bearings is
        wild, with a chance of 1 - ``level`` or more, is ``ambiguous``; each fix's chance is its ``wild_risk``.
        0 weighs nothing (``wild_risk`` is then NaN).
    wild_rate : {'sheet', 'prior'}
        'sheet' (default): where the sheet's fixes of four or more lines show wild bearings more often than
        ``wild_share`` spread evenly, at some misses, every fix's wild risk is weighed again at the sheet's own
        rate (:mod:`dfkit.locate.wildlines`; a note says what was learnt). 'prior': ``wild_share`` alone.
    """
    if method not in estimators.METHODS:
        raise ValueError(f"method={method!r} is not one of {', '.join(repr(m) for m in estimators.METHODS)}")
    if not (isinstance(level, (int, float, np.floating)) and 0.0 < float(level) < 1.0):
        raise ValueError(f"level={level!r} must be a probability between 0 and 1 (e.g. 0.95)")
    wild_share = check_wild_share(wild_share)
    if wild_rate not in wildlines.RATES:
        raise ValueError(f"wild_rate={wild_rate!r} is not one of {', '.join(map(repr, wildlines.RATES))}")
    options = dict(method=method, level=level, window_min=window_min, robust_c=robust_c, with_regions=with_regions,
                   wild_share=float(wild_share))
    fixes = _located(bearings, jobs, progress=progress, **options)
    if wild_rate == "sheet" and wild_share > 0:
        fixes = _at_sheet_rate(bearings, fixes, jobs, progress, options)
    if sheet_checks:     # what only the whole sheet shows: after the chunks are put back together
        from dfkit.locate.sheetwide import review

        fixes = review(fixes)
    if rounding.has_steps(fixes.bearings):      # after the chunks: one note for the whole sheet
        text = rounding.note(fixes)
        if text:
            fixes.notes.append(text)
    return fixes


def _located(bearings, jobs, **options) -> Fixes:
    """:func:`locate_chunk` on all the fixes of ``bearings``, in chunks on ``jobs`` workers unless one."""
    if jobs != 1:
        from dfkit.locate.parallel import locate_in_chunks

        return locate_in_chunks(bearings, locate_chunk, jobs=jobs, **options)
    return locate_chunk(bearings, **options)


def locate_chunk(bearings: Bearings, *, method: str, level: float, window_min: float | None, robust_c: float | None,
                 with_regions: bool, progress=None, wild_share: float = WILD_SHARE, wild_lines=None) -> Fixes:
    """:func:`locate` of a set of fixes (the whole sheet, or a chunk of it) without the sheet-wide checks:
    each fix is solved and judged on its own bearings only; ``wild_lines``: the sheet's own wild lines
    (:class:`dfkit.locate.wildlines.WildLines`), when they are known."""
    say = progress or (lambda text: None)
    if window_min is None:
        window_min = bearings.window_min
    b = bearings.table
    fix_index = bearings.fix_index
    m = len(fix_index)
    g = b["fix_id"].to_numpy(dtype=np.int64) if len(b) else np.zeros(0, np.int64)
    counts = np.bincount(g, minlength=m)
    lat = b["lat"].to_numpy(float)
    lon = b["lon"].to_numpy(float)
    theta = b["true_bearing"].to_numpy(float)
    sd = b["sd"].to_numpy(float)
    lines = b["line"].to_numpy() if len(b) else np.zeros(0, int)

    # the smallest SD an estimate from a fix's residuals may take: its bearings' rounding, a plausibility limit
    step = fix_steps(b, g, m)
    floor = sd_floors(step)[g] if len(b) else np.zeros(0)

    say(f"solving {m} fixes from {len(b)} bearings ({method})")
    sol = estimators.solve(lat, lon, theta, g, m, sd, method=method, robust_c=robust_c, sd_floor_deg=floor)
    # observer positions written to a coarse step: with a known SD, each bearing's SD takes in its observer's
    # rounding across the line of sight at the fix, and those fixes are solved again (dfkit.locate.rounding)
    added = None
    if len(b) and rounding.has_steps(b):
        sd_used, added, changed = rounding.widened_sd(sd, b, g, m, sol)
        if changed.any():
            say("solving again with the observers' rounding")
            sol = estimators.solve(lat, lon, theta, g, m, sd_used, method=method, robust_c=robust_c,
                                   sd_floor_deg=floor)
            sd_given, sd = sd, sd_used
    # an SD measured on a finite number of beacon trials (per-bearing sd_dof, dfkit.calibration) widens the
    # regions: F(2, sd_dof) instead of chi-square
    cal_dof = np.full(m, np.inf)
    if "sd_dof" in b and len(b):
        np.minimum.at(cal_dof, g, b["sd_dof"].astype(float).fillna(np.inf).to_numpy(float))
    # the ellipses' degrees of freedom: a calibrated SD's trials, 0 for an exact known SD, the fix's own otherwise
    k_dof = np.where(sol.sd_known, np.where(np.isfinite(cal_dof), cal_dof, 0), sol.dof)
    ell = regions.ellipse_axes(sol.cov_en, regions.scale_factor(level, k_dof))
    lik = None
    if with_regions:
        say("likelihood regions")
        lik = regions.likelihood_regions(sol.lat, sol.lon, g, lat, lon, theta, sol.range_m, sol.azimuth_from_fix_deg,
                                         sol.residual_deg, sol.region_weight, sol.sd_known, sol.dof, level,
                                         known_dof=cal_dof, sd_floor_deg=sol.sd_floor_deg, valid=sol.converged)

    say("statuses")
    # the stations' spread as the solver worked it out with their centroid (the same lat, lon and fixes)
    spread = sol.station_spread_m if sol.station_spread_m is not None else geodesy.group_spread_m(lat, lon, g, m)
    span_min, tmid = _time_span(b, g, m)
    # A fix goes on while each bearing follows the last within the window (dfkit.observations.grouping):
    # a gap longer than the window, or a chain lasting more than FIX_SPAN_WINDOWS windows, is flagged.
    gap_min = bearings.fix_timing()["max_gap_min"].to_numpy(float) if m else np.zeros(0)
    facts = FixFacts(sol=sol, g=g, counts=counts, spread_m=spread, span_min=span_min, gap_min=gap_min,
                     window_min=window_min,
                     lines=lines, rejected=fix_index["rejected_lines"].tolist(), ellipse_area=ell.area_m2,
                     ellipse_minor=ell.semi_minor_m, regions=lik, level=float(level), hints={}, step_deg=step)
    status, reasons = classify(facts)
    # a fix only mildly inconsistent (1 clean fix in 100 is) is not worth a search for the one bad line; its
    # p-value is the one classify worked out on these same facts, not computed a second time
    p = p_values(facts)
    with np.errstate(invalid="ignore"):
        mild = (status == "inconsistent") & (p >= HINT_P)
    written = ((b["bearing"].to_numpy(float), b["unit"].to_numpy(object), b["north"].to_numpy(object))
               if len(b) else None)
    hints = one_bearing_hints(lat, lon, theta, sd, g, counts, lines, np.where(mild, "", status), method, robust_c,
                              floor, written, fit=sol)
    if hints:      # only the fixes with hints are judged again
        facts.hints = hints
        status, reasons = classify(facts, (status, reasons), redo=hints)
    rivals, wild_risk = find_rivals(lat, lon, theta, sd, g, counts, sol, lik, level, status == "ok", cal_dof, floor,
                                    wild_share=wild_share, wild_lines=wild_lines)
    if rivals:
        facts.rivals = rivals
        status, reasons = classify(facts, (status, reasons), redo=rivals)
    del facts       # what classify worked out over every bearing is not needed again: freed before the table is made
    # an ok fix that could rest on a wild line: its region drawn wider, so that it holds the transmitter with the
    # level's probability counting that chance (_widened)
    lik, level_used = _widened(lik, status, reasons, wild_risk, level, sol, g, lat, lon, theta, cal_dof)
    if (level_used > level).any():
        ell = regions.ellipse_axes(sol.cov_en, regions.scale_factor(level_used, k_dof))

    # an observer, team, antenna or receiver whose bearings in this fix read off the others (dfkit.locate.offsets)
    for i, text in fix_offsets(b if added is None else b.assign(sd=sd), g, m, sol).items():
        if status[i] in WITH_POSITION and i not in hints:     # a named wild line explains the misfit better
            status[i] = "inconsistent" if status[i] == "ok" else status[i]
            append_reason(reasons, i, text)

    _position_doubts(bearings.doubts, lines, g, status, reasons)
    has_pos = has_position(status)
    if added is not None and changed.any():
        factor = rounding.widening(g, m, sol.azimuth_from_fix_deg, sol.range_m, sol.weight, sd_given, sd)
        for i, text in rounding.reasons(b, g, m, changed, factor, has_pos).items():
            append_reason(reasons, i, text)
    table = _table(bearings, sol, ell, lik, status, reasons, counts, span_min, tmid, method, level, has_pos,
                   wild_risk, level_used)
    if added is not None and changed.any():
        # the fix's SD as given (the SD used per bearing, with the rounding, is in the bearings table)
        given = np.sqrt(np.bincount(g, np.nan_to_num(sd_given) ** 2, m) / np.maximum(counts, 1))
        table["sd_deg"] = np.where(changed & has_pos, given, table["sd_deg"].to_numpy(float))
    bt = _with_fit(b, g, has_pos, sol, status)
    if added is not None:       # the SD used is sqrt(sd^2 + rounding_sd_deg^2); sd stays the SD given
        bt["rounding_sd_deg"] = added
    notes = list(bearings.notes)
    return Fixes(table=table, bearings=bt, problems=list(bearings.problems), notes=notes, source=bearings.source,
                 likelihood=lik, azimuth_deg=sol.azimuth_from_fix_deg)


#: The columns of the fix table that the wild risk can change (its status, and a region drawn wider, _widened):
#: those a second weighing replaces (_at_sheet_rate).
WEIGHED_COLUMNS = ("status", "reason", "wild_risk", "region_level", "semi_major_m", "semi_minor_m", "area_m2",
                   "region_area_m2", "region_bounded", "region_reach_m")

#: An ok fix is drawn wider for its wild risk from this risk on: below it the widening is under 2 % in radius
#: (chi-square(2) at 0.955 against 0.95), and such fixes, about a third of a clean sheet's, are not drawn twice
#: (our choice; they hold the transmitter at least 99 % as often as the level says).
WIDEN_FROM = 0.005


def _widened(lik, status, reasons, wild_risk, level, sol, g, lat, lon, theta, cal_dof):
    """The regions (or None) with each ``ok`` fix whose wild risk r is at least WIDEN_FROM drawn again at level + r,
    and the level each fix's region and ellipse are drawn at.

    The region misses the transmitter with probability 1 - level when every line is good; the wild risk r bounds
    the chance that one is wild and the region misses because of it (measured on the region as first drawn: a
    wider one misses less). Drawn at level + r (below 1, as r < 1 - level for an ok fix), the region misses with
    probability at most (1 - level - r) + r = 1 - level in all. A widened region that no longer closes makes the
    fix ``unbounded``."""
    m = len(status)
    level = float(level)
    used = np.full(m, level)
    with np.errstate(invalid="ignore"):
        grow = (status == "ok") & (wild_risk >= WIDEN_FROM) & (wild_risk < 1.0 - level)
    if lik is not None:
        grow &= lik.has_region
    used[grow] = level + wild_risk[grow]
    if lik is None or not grow.any():
        return lik, used
    ids = np.flatnonzero(grow)
    new = np.full(m, -1, np.int64)
    new[ids] = np.arange(len(ids))
    b = np.flatnonzero(grow[g])         # their bearings only: the arrays are the widened fixes' size
    wide = regions.likelihood_regions(
        sol.lat[ids], sol.lon[ids], new[g[b]], lat[b], lon[b], theta[b], sol.range_m[b], sol.azimuth_from_fix_deg[b],
        sol.residual_deg[b], sol.region_weight[b], sol.sd_known[ids], sol.dof[ids], used[ids],
        known_dof=cal_dof[ids], sd_floor_deg=None if sol.sd_floor_deg is None else sol.sd_floor_deg[ids])
    regions.put_rows(lik, wide, ids, np.arange(len(ids)))
    for i in np.flatnonzero(grow & ~(lik.bounded & lik.has_region)).tolist():
        status[i] = "unbounded"
        append_reason(reasons, i, f"drawn at {100 * used[i]:.1f} % to allow for its wild risk of "
                                  f"{100 * wild_risk[i]:.1f} %, the region is open: it reaches past where the "
                                  f"bearings still cross; take another bearing from another direction")
    return lik, used


def _at_sheet_rate(bearings, fixes, jobs, progress, options):
    """``fixes`` with every weighed fix's wild risk weighed again at the sheet's own rate of wild lines, where its
    fixes of four or more lines show them more often than the prior (:mod:`dfkit.locate.wildlines`), and a note
    saying so; as they are otherwise. Only the wild risk, the statuses and the reasons can change: those fixes are
    located again with the sheet's wild lines (each fix on its own bearings, as in chunks), and put back."""
    lines = wildlines.learn(fixes, options["wild_share"])
    if lines is None or not lines.raises:
        return fixes
    redo = np.flatnonzero(np.isfinite(fixes.table["wild_risk"].to_numpy(float)))
    notes = [*fixes.notes, lines.note()]
    if not len(redo):
        return replace(fixes, notes=notes)
    (progress or (lambda text: None))(f"weighing {len(redo)} fixes' wild risk again at the sheet's own rate")
    from dfkit.locate.parallel import subset

    part_b, rows = subset(bearings, redo)
    part = _located(part_b, jobs, wild_lines=lines, **options)
    t = fixes.table.copy(deep=False)        # the weighed columns replaced, the others shared
    for c in WEIGHED_COLUMNS:
        col = t[c].to_numpy(copy=True)
        col[redo] = part.table[c].to_numpy()
        t[c] = col
    bt = fixes.bearings.copy(deep=False)
    fs = bt["fix_status"].to_numpy(dtype=object, copy=True)
    fs[rows] = part.bearings["fix_status"].to_numpy(dtype=object)
    bt["fix_status"] = fs
    if fixes.likelihood is not None and part.likelihood is not None:
        regions.put_rows(fixes.likelihood, part.likelihood, redo, np.arange(len(redo)))
    return replace(fixes, table=t, bearings=bt, notes=notes, _regions=None)


def _position_doubts(doubts, lines, g, status, reasons):
    """Fixes whose stations' positions rest on a reading the sheet does not settle
    (:attr:`dfkit.observations.Bearings.doubts`): an ok fix becomes ``ambiguous``, and each says why."""
    if not doubts or not len(lines):
        return
    said: dict[int, list[str]] = {}
    for j in np.flatnonzero(pd.Series(lines).isin(list(doubts)).to_numpy()):
        said.setdefault(int(g[j]), []).append(doubts[int(lines[j])])
    for i, texts in said.items():
        if status[i] == "ok":
            status[i] = "ambiguous"
        more = f" (and {len(texts) - 1} more line{'s' if len(texts) > 2 else ''} of this fix the same way)" \
            if len(texts) > 1 else ""
        reasons[i] = texts[0] + more + (f"; {reasons[i]}" if reasons[i] else "")   # first: it is the weightiest


def _with_fit(b, g, has_pos, sol, status):
    """The bearings table with each bearing's fit against its fix (``residual_deg``, ``weight``, ``range_m``: NaN
    where the fix has no position) and ``fix_status``. Made in one constructor from the table's own columns
    (shared, copy-on-write: the bearings table is not copied) and the new arrays as they are: setting the
    columns one by one would copy each new array once more while it is alive (pandas copies an array it is
    given by ``df[c] = ...``), the largest transient of the statuses stage on a long sheet."""
    if not len(b):
        bt = b.copy(deep=False)
        for c in ("residual_deg", "weight", "range_m", "fix_status"):
            bt[c] = []
        return bt
    pos_b = has_pos[g]
    new = {"residual_deg": np.where(pos_b, sol.residual_deg, np.nan), "weight": np.where(pos_b, sol.weight, np.nan),
           "range_m": np.where(pos_b, sol.range_m, np.nan), "fix_status": per_bearing(status, g)}
    columns = {c: b[c] for c in b.columns}
    columns.update(new)       # a column of the sheet by one of these names is replaced where it stands, as before
    return pd.DataFrame(columns, index=b.index, copy=False)


def _time_span(b, g, m):
    epoch = pd.Timestamp("1970-01-01", tz="UTC")
    t_s = (b["time"] - epoch).dt.total_seconds().to_numpy(float) if len(b) else np.zeros(0)
    has_t = np.isfinite(t_s)
    tmin = np.full(m, np.inf)
    tmax = np.full(m, -np.inf)
    np.minimum.at(tmin, g[has_t], t_s[has_t])
    np.maximum.at(tmax, g[has_t], t_s[has_t])
    span_min = np.where(np.isfinite(tmin), (tmax - tmin) / 60.0, np.nan)
    with np.errstate(invalid="ignore"):
        tmid = np.where(np.isfinite(tmin), (tmin + tmax) / 2.0, np.nan)
    return span_min, tmid


def _sd_source(b, g, m, sol, has_pos):
    """'given', 'calibration' or 'given+calibration' when every bearing has an SD; 'estimated' otherwise."""
    if not len(b):
        return filled(m, "")
    is_cal = (b["sd_source"].to_numpy(dtype=object) == "calibration") if "sd_source" in b else np.zeros(len(b), bool)
    cal = np.bincount(g, is_cal.astype(float), m)
    n = np.bincount(g, minlength=m)
    given = np.where(cal == n, 3, np.where(cal == 0, 2, 4))
    code = np.where(has_pos, np.where(sol.sd_known, given, np.where(sol.dof > 0, 1, 0)), 0)
    return np.array(["", "estimated", "given", "calibration", "given+calibration"], dtype=object)[code]


def _table(bearings, sol, ell, lik, status, reasons, counts, span_min, tmid, method, level, has_pos, wild_risk,
           level_used):
    b = bearings.table
    fix_index = bearings.fix_index
    m = len(fix_index)
    g = b["fix_id"].to_numpy(dtype=np.int64) if len(b) else np.zeros(0, np.int64)
    has_region = has_pos & np.isfinite(ell.area_m2) & (ell.semi_minor_m > 0)
    if lik is not None:
        has_lik = has_pos & lik.has_region
    else:
        has_lik = np.zeros(m, bool)
    cov = sol.cov_en
    pos = lambda v: np.where(has_pos, v, np.nan)  # noqa: E731
    reg = lambda v: np.where(has_region, v, np.nan)  # noqa: E731
    max_res = np.full(m, np.nan)
    if len(b):
        tmp = np.zeros(m)
        np.maximum.at(tmp, g, np.abs(sol.residual_deg))
        max_res = np.where(counts > 0, tmp, np.nan)
    table = pd.DataFrame({
        "fix": _text_column(fix_index["fix"]),
        "tag": _text_column(fix_index["tag"]),
        "time": pd.to_datetime(tmid, unit="s", utc=True),
        "lat": pos(sol.lat),
        "lon": pos(sol.lon),
        "n_bearings": counts,
        "n_used": sol.n_used,
        "method": method,
        "sd_deg": pos(sol.sd_deg),
        "sd_source": _sd_source(b, g, m, sol, has_pos),
        "level": float(level),
        "semi_major_m": reg(ell.semi_major_m),
        "semi_minor_m": reg(ell.semi_minor_m),
        "orientation_deg": reg(ell.orientation_deg),
        "area_m2": reg(ell.area_m2),
        "region_area_m2": np.where(has_lik, lik.area_m2, np.nan) if lik is not None else np.full(m, np.nan),
        "region_bounded": has_lik & (lik.bounded if lik is not None else False),
        "region_reach_m": np.where(has_lik, lik.reach_m, np.nan) if lik is not None else np.full(m, np.nan),
        "wild_risk": pos(wild_risk),
        "region_level": pos(level_used),
        "cov_ee_m2": reg(cov[:, 0, 0]),
        "cov_en_m2": reg(cov[:, 0, 1]),
        "cov_nn_m2": reg(cov[:, 1, 1]),
        "status": status,
        "reason": reasons,
        "crossing_deg": np.where(counts >= 2, sol.crossing_deg, np.nan),
        "span_min": span_min,
        "max_residual_deg": pos(max_res),
        "kappa": pos(sol.kappa),
        "iterations": sol.iterations,
        "converged": sol.converged,
        "rejected_lines": _lines_column(fix_index["rejected_lines"].tolist()),
    }, copy=False)     # arrays of this call only (none is changed after): no second, consolidated copy of them
    return table[FIX_COLUMNS]


def _text_column(column):
    """A text column of the fix index for the table: its array as it is (copied) when it is already text, so that
    pandas does not infer the type of each of its values again; otherwise its values, as before."""
    if isinstance(column.dtype, pd.StringDtype):
        return column.array.copy()
    return column.tolist()


def _lines_column(rejected):
    """Each fix's rejected input lines as one text ("12 14"; '' for the many fixes without)."""
    out = filled(len(rejected), "")
    for i in np.flatnonzero(np.fromiter(map(len, rejected), np.int64, len(rejected))).tolist():
        out[i] = " ".join(str(x) for x in rejected[i])
    return out


def locate_sheet(sheet, *, method="mle", level=0.95, options: ReadOptions | None = None, progress=None,
                 wild_share: float = WILD_SHARE, **read_kwargs) -> Fixes:
    """Read a sheet and solve its fixes: the Python form of ``dfkit fix``.

    ``read_kwargs`` are :class:`~dfkit.observations.ReadOptions` fields
    (``north='magnetic'``, ``sd=5``, ``window_min=30``, ``track='t.gpx'`` ...).
    """
    bearings = read_bearings(sheet, options, **read_kwargs)
    return locate(bearings, method=method, level=level, progress=progress, wild_share=wild_share)
