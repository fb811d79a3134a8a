"""Static figures for reports (matplotlib): a fix and its region in local metres, its residuals, and
beacon-trial errors.

Figures are drawn in the fix's local azimuthal equidistant plane (east, north in
metres from the fix), so distances read true; save them as PNG, PDF or SVG with
``fig.savefig``.
"""

from __future__ import annotations

import numpy as np

from dfkit import geodesy, regions
from dfkit.locate import WITH_POSITION, Fixes


def _mpl():
    # The backend is the user's choice: dfkit never calls matplotlib.use (without a display matplotlib picks Agg).
    import matplotlib.pyplot as plt

    return plt


def _fix_index(fixes: Fixes, label, tag) -> int:
    """Row of the fix ``label`` (of ``tag`` when labels repeat across tags); an int is the row itself."""
    t = fixes.table
    if isinstance(label, (int, np.integer)) and not isinstance(label, bool):
        if not 0 <= label < len(t):     # labels in a fix table are text: an int can only be a row number
            raise ValueError(f"fix row {label} is not in the table (it has {len(t)} rows)")
        return int(label)
    hit = (t["fix"] == label).to_numpy().copy()
    if tag is not None:
        hit &= (t["tag"] == tag).to_numpy()
    idx = np.flatnonzero(hit)
    if len(idx) != 1:
        tags = ", ".join(repr(x) for x in t.loc[hit, "tag"]) if len(idx) else ""
        raise ValueError(f"fix {label!r} is not in the table" if not len(idx) else
                         f"fix {label!r} exists for tags {tags}: give tag=")
    return int(idx[0])   # row i of the fix table is fix_id i


def _fix_rows(fixes: Fixes, label, tag):
    """The fix-table row and the bearings of the fix ``label`` (of ``tag`` when labels repeat across tags)."""
    i = _fix_index(fixes, label, tag)
    return fixes.table.iloc[i], fixes.bearings[fixes.bearings["fix_id"].to_numpy(np.int64) == i]


def _region(fixes: Fixes, i: int, row):
    """The likelihood region of row ``i`` as a (lat, lon) ring, or None (no position or region)."""
    if fixes.likelihood is None or row["status"] not in WITH_POSITION:
        return None
    return fixes.likelihood.ring(i)


#: Colours (Okabe & Ito's colour-blind-safe set): bearings blue, the fix and its region vermilion.
_BLUE, _ORANGE, _GREY = "#0072B2", "#D55E00", "#666666"


def _wrap(text: str, ax, fontsize: float) -> str:
    """``text`` wrapped to the width of ``ax`` (an average glyph is about 0.6 em wide)."""
    import textwrap

    width_in = ax.get_position().width * ax.figure.get_figwidth()
    chars = max(20, int(width_in * 72 / (0.6 * fontsize)))
    return "\n".join(textwrap.fill(part, chars) for part in text.split("\n"))


def _nice_bar(span: float) -> float:
    """A round length (1, 2 or 5 times a power of ten) about a quarter of ``span``."""
    p = 10 ** np.floor(np.log10(span / 4))
    return float(max((m * p for m in (1, 2, 5) if m * p <= span / 4), default=p))


def _length_text(m: float) -> str:
    if m >= 10_000:
        return f"{m / 1000:.0f} km"
    return f"{m / 1000:.3g} km" if m >= 1000 else f"{m:.3g} m"


def fix_plot(fixes: Fixes, label, *, tag=None, ax=None, error_polygon: bool = False, ellipse: bool = True):
    """Bearings, stations, the fix and its likelihood region in local metres, with scale bar and north arrow.

    The confidence region drawn is the likelihood-ratio region (:attr:`dfkit.locate.Fixes.regions`); an open
    region (one that goes on along the bearings) is drawn dashed to the range dfkit computed it to and marked
    open. The covariance ellipse, a linear approximation, is drawn thin and dotted for comparison only.

    Parameters
    ----------
    fixes : Fixes
        From :func:`dfkit.locate.locate`.
    label : str or int
        The fix label; an int is a row number of ``fixes.table`` (fix labels are always text).
    tag : str, optional
        Picks the fix when two tags use the same label.
    ax : matplotlib Axes, optional
        Draw into this axes (default: a new figure).
    error_polygon : bool
        Also fill the error polygon (the area between the bearings' ±1 SD lines; no probability meaning).
    ellipse : bool
        Also draw the covariance ellipse, thin and dotted, for comparison.

    Returns
    -------
    matplotlib.figure.Figure
    """
    plt = _mpl()
    i = _fix_index(fixes, label, tag)
    row = fixes.table.iloc[i]
    b = fixes.bearings[fixes.bearings["fix_id"].to_numpy(np.int64) == i]
    own = ax is None
    if own:
        fig, ax = plt.subplots(figsize=(6.5, 6.5))
    else:
        fig = ax.figure
    _draw_fix(ax, row, b, _region(fixes, i, row), error_polygon=error_polygon, ellipse=ellipse)
    if own:
        fig.tight_layout()
    return fig


def fix_figures(fixes: Fixes, *, progress=None, **kwargs):
    """One :func:`fix_plot` figure per fix, in table order, without searching the table for each.

    Yields
    ------
    row : int
        Row of ``fixes.table``.
    figure : matplotlib Figure or None
        None when the fix has no usable bearing or cannot be drawn.
    problem : str
        Why there is no figure ('' when there is one).

    Close each figure (``plt.close(fig)``) once saved: matplotlib keeps open figures.
    """
    say = progress or (lambda text: None)
    t, b = fixes.table, fixes.bearings
    by_fix = b.groupby("fix_id").indices if len(b) else {}
    plt = _mpl()
    for i in range(len(t)):
        if i % 500 == 0:
            say(f"figures {i}/{len(t)}")
        rows = by_fix.get(i, [])
        label = str(t["fix"].iat[i])
        if len(rows) == 0:
            yield i, None, f"no figure for fix {label}: it has no usable bearing"
            continue
        row = t.iloc[i]
        fig, ax = plt.subplots(figsize=(6.5, 6.5))
        try:
            _draw_fix(ax, row, b.iloc[rows], _region(fixes, i, row), **kwargs)
            fig.tight_layout()
        except (ValueError, KeyError, IndexError) as err:
            plt.close(fig)
            yield i, None, f"no figure for fix {label}: {err}"
            continue
        yield i, fig, ""


def _draw_fix(ax, row, b, ring, *, error_polygon=False, ellipse=True) -> None:
    has_pos = row["status"] in WITH_POSITION and np.isfinite(row["lat"])
    if has_pos:
        clat, clon = float(row["lat"]), float(row["lon"])
    else:
        clat, clon = geodesy.group_centroid(b["lat"].to_numpy(), b["lon"].to_numpy(), np.zeros(len(b), int),
                                            1)
        clat, clon = float(np.atleast_1d(clat)[0]), float(np.atleast_1d(clon)[0])
    sx, sy = geodesy.to_local(clat, clon, b["lat"].to_numpy(), b["lon"].to_numpy())
    near = max(float(np.max(np.hypot(sx, sy))) if len(b) else 1.0, 50.0)
    level = f"{row['level'] * 100:g}%" if np.isfinite(row.get("level", np.nan)) else ""
    rx = ry = None
    bounded = True
    if ring is not None:
        rx, ry = geodesy.to_local(clat, clon, ring[0], ring[1])
        bounded = bool(row.get("region_bounded", True))
    far = max(near, float(np.max(np.hypot(rx, ry))) if rx is not None else 0.0)
    reach = 1.3 * far
    unit, scale = ("km", 1000.0) if reach > 5000 else ("m", 1.0)

    def xy(x, y):
        return np.asarray(x, float) / scale, np.asarray(y, float) / scale

    lines = []
    for (_, r), x0, y0 in zip(b.iterrows(), sx, sy):
        la, lo = geodesy.geodesic_path(r["lat"], r["lon"], r["true_bearing"], 2.2 * reach, 60)
        x, y = geodesy.to_local(clat, clon, la, lo)
        lines.append((x, y))
        w = r.get("weight", 1.0)
        ax.plot(*xy(x, y), "-", color=_BLUE, lw=1.0, alpha=0.35 if (np.isfinite(w) and w < 0.5) else 0.8,
                label="bearings" if not ax.get_legend_handles_labels()[1].count("bearings") else None)
        ax.plot(*xy([x0], [y0]), "s", color=_BLUE, ms=5, mfc="white")
    if far < 4 * near:      # one label per station: "lines 4, 5" where bearings share a place
        at: dict = {}
        for ln, x0, y0 in zip(b["line"], sx, sy):
            at.setdefault((round(float(x0), 1), round(float(y0), 1)), []).append(str(ln))
        for (x0, y0), names in at.items():
            ax.annotate(("line " if len(names) == 1 else "lines ") + ", ".join(names), xy(x0, y0),
                        textcoords="offset points", xytext=(5, -10), fontsize=8)
    if rx is not None:
        ax.fill(*xy(rx, ry), color=_ORANGE, alpha=0.15, lw=0)
        if bounded:
            what = f"{level} likelihood region"
        else:
            what = (f"{level} likelihood region, open: it goes on past "
                    f"{_length_text(float(row['region_reach_m']))}, drawn to {_length_text(float(far))}")
        ax.plot(*xy(rx, ry), color=_ORANGE, lw=1.6, ls="-" if bounded else "--", label=what)
        if not bounded:
            k = int(np.argmax(np.hypot(rx, ry)))
            ax.annotate("open: goes on", xy(rx[k], ry[k]), textcoords="offset points", xytext=(-10, 8),
                        fontsize=8, color=_ORANGE, ha="right")
    if has_pos:
        ax.plot([0], [0], "o", color=_ORANGE, ms=7, mfc=_ORANGE if row["status"] == "ok" else "white",
                label="fix" + ("" if row["status"] == "ok" else f" ({row['status']})"))
        if ellipse and np.isfinite(row["semi_major_m"]):
            t = np.linspace(0, 2 * np.pi, 200)
            a, c, th = row["semi_major_m"], row["semi_minor_m"], np.radians(row["orientation_deg"])
            u, v = a * np.cos(t), c * np.sin(t)
            text = f"{level} ellipse (linear approximation, for comparison)"
            if ring is None:
                text = f"{level} ellipse (no likelihood region computed)"
            ax.plot(*xy(u * np.sin(th) + v * np.cos(th), u * np.cos(th) - v * np.sin(th)), color=_GREY,
                    lw=0.8 if ring is not None else 1.5, ls=":" if ring is not None else "-", label=text)
    if error_polygon and has_pos and np.isfinite(row["sd_deg"]):
        sd = np.where(np.isfinite(b["sd"]), b["sd"], row["sd_deg"])
        poly = regions.error_polygon(b["lat"], b["lon"], b["true_bearing"], sd, clat, clon)
        if poly is not None:
            x, y = geodesy.to_local(clat, clon, *poly)
            ax.fill(*xy(x, y), color="#999999", alpha=0.3, label="error polygon (no probability meaning)")
    lim = reach / scale
    ax.set_xlim(-lim, lim)
    ax.set_ylim(-lim, lim)
    ax.set_aspect("equal")
    ax.set_xlabel(f"east of the {'fix' if has_pos else 'stations centre'} [{unit}]")
    ax.set_ylabel(f"north of the {'fix' if has_pos else 'stations centre'} [{unit}]")
    who = f"tag {row['tag']}, fix {row['fix']}" if str(row.get("tag", "")) else f"fix {row['fix']}"
    ax.set_title(_wrap(f"{who}: {row['status']}" + (f"\n{row['reason']}" if row["reason"] else ""), ax, 9),
                 fontsize=9)
    ax.grid(alpha=0.3)
    bar = _nice_bar(2 * reach)
    ax.plot([-0.9 * lim, -0.9 * lim + bar / scale], [-0.9 * lim] * 2, "k-", lw=3)
    ax.text(-0.9 * lim + bar / scale / 2, -0.86 * lim, _length_text(bar), ha="center", fontsize=8)
    ax.annotate("N", xy=(0.93, 0.95), xytext=(0.93, 0.83), xycoords="axes fraction", ha="center",
                arrowprops=dict(arrowstyle="-|>", color="k"), fontsize=10)
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.1), fontsize=7, frameon=False)
    if far >= 4 * near:
        _station_inset(ax, sx, sy, lines, rx, ry, near, row, has_pos)


def _station_inset(ax, sx, sy, lines, rx, ry, near, row, has_pos) -> None:
    """A close view of the stations and the fix when the region is far bigger than their spread, in the
    corner of the axes the drawing leaves most empty."""
    pts_x = np.concatenate([np.ravel(x) for x, _ in lines] + ([rx] if rx is not None else []))
    pts_y = np.concatenate([np.ravel(y) for _, y in lines] + ([ry] if ry is not None else []))
    x0, x1 = ax.get_xlim()
    scale = 1000.0 if abs(x1) > 5 and abs(x1) * 1000.0 / 1.3 > 5000 else 1.0
    px, py = pts_x / scale, pts_y / scale
    corners = {"upper left": (px < 0) & (py > 0), "upper right": (px > 0) & (py > 0),
               "lower left": (px < 0) & (py < 0)}
    place = min(corners, key=lambda k: int(corners[k].sum()))
    box = {"upper left": [0.03, 0.52, 0.42, 0.42], "upper right": [0.55, 0.52, 0.42, 0.42],
           "lower left": [0.03, 0.14, 0.42, 0.42]}[place]
    ins = ax.inset_axes(box)
    r = 1.3 * near
    for x, y in lines:
        ins.plot(x, y, "-", color=_BLUE, lw=0.9, alpha=0.8)
    ins.plot(sx, sy, "s", color=_BLUE, ms=4, mfc="white")
    if rx is not None:
        ins.fill(rx, ry, color=_ORANGE, alpha=0.15, lw=0)
        ins.plot(rx, ry, color=_ORANGE, lw=1.2, ls="-" if bool(row.get("region_bounded", True)) else "--")
    if has_pos:
        ins.plot([0], [0], "o", color=_ORANGE, ms=5, mfc=_ORANGE if row["status"] == "ok" else "white")
    ins.set_xlim(-r, r)
    ins.set_ylim(-r, r)
    ins.set_aspect("equal")
    ins.set_xticks([])
    ins.set_yticks([])
    ins.set_title(f"stations, {_length_text(2 * r)} across", fontsize=7)
    ins.set_facecolor("white")


def residual_plot(fixes: Fixes, label: str, *, tag=None, ax=None):
    """Each bearing's residual (observed minus geodesic azimuth to the fix) with its weight."""
    plt = _mpl()
    row, b = _fix_rows(fixes, label, tag)
    if ax is None:
        fig, ax = plt.subplots(figsize=(6, 3))
    else:
        fig = ax.figure
    x = np.arange(len(b))
    ax.bar(x, b["residual_deg"].fillna(0), color=["#0072B2" if w >= 0.5 else "#D55E00"
                                                   for w in b["weight"].fillna(1)])
    if np.isfinite(row["sd_deg"]):
        for k in (-2, 2):
            ax.axhline(k * row["sd_deg"], color="#777", ls=":", lw=1)
    ax.axhline(0, color="k", lw=0.8)
    ax.set_xticks(x, [f"line {v}" for v in b["line"]], fontsize=8)
    ax.set_ylabel("residual [°]")
    ax.set_title(f"{label}: residuals (dotted: ±2 SD; orange: down-weighted)", fontsize=9)
    return fig


# --------------------------------------------------------------------------- beacon calibration

def _cal_group(cal, group):
    """The trials and the calibration row of one group (the first when ``group`` is None)."""
    if cal.trials is None:
        raise ValueError("cal= was read from a file and has no trials to draw; draw the result of "
                         "calibrate()")
    groups = cal.table["group"].tolist()
    if not groups:
        raise ValueError("cal= has no groups to draw (no usable trials)")
    group = groups[0] if group is None else group
    if group not in groups:
        raise ValueError(f"group={group!r} is not one of {', '.join(repr(g) for g in groups)}")
    return cal.trials[cal.trials["group"] == group], cal.table.set_index("group").loc[group], group


def _fig_ax(ax, figsize, **subplot_kw):
    """The given axes and its figure, or a new figure with one axes."""
    if ax is not None:
        return ax.figure, ax
    return _mpl().subplots(figsize=figsize, subplot_kw=subplot_kw or None)


def error_histogram(cal, group=None, *, ax=None):
    """Histogram of one group's trial errors [°]: used trials, wild ones apart, the bias and a normal curve
    with the group's bias and SD (a guide to the eye, not a test). Returns the Figure."""
    tr, row, group = _cal_group(cal, group)
    fig, ax = _fig_ax(ax, (5, 3.2))
    used = tr.loc[tr["used"], "error_deg"].to_numpy(float)
    wild = tr.loc[tr["wild"], "error_deg"].to_numpy(float)
    sd = row["sd_deg"] if np.isfinite(row["sd_deg"]) else 1.0
    lo = min(used.min() if len(used) else -1.0, row["bias_deg"] - 4 * sd)
    hi = max(used.max() if len(used) else 1.0, row["bias_deg"] + 4 * sd)
    width = max(0.5, float(np.round(sd / 2, 1)))
    bins = np.arange(np.floor(lo / width) * width, hi + width, width)
    ax.hist(used, bins=bins, color="#0072B2", alpha=0.8, label=f"used ({len(used)})")
    if len(wild):   # marked at their place, or at the edge with their value when off the scale
        shown = np.clip(wild, bins[0], bins[-1])
        ax.plot(shown, np.zeros(len(wild)), "v", color="#D55E00", ms=8, clip_on=False,
                label="wild, left out: " + ", ".join(f"{w:+.0f}°" for w in wild[:5])
                + (" ..." if len(wild) > 5 else ""))
    if np.isfinite(row["sd_deg"]) and len(used):
        x = np.linspace(bins[0], bins[-1], 200)
        dens = np.exp(-0.5 * ((x - row["bias_deg"]) / sd) ** 2) / (sd * np.sqrt(2 * np.pi))
        ax.plot(x, dens * len(used) * width, color="#555", lw=1, label=f"normal, sd {sd:.1f}°")
    ax.axvline(0, color="#777", lw=0.8, ls=":")
    ax.axvline(row["bias_deg"], color="k", lw=1.5, ls="--", label=f"bias {row['bias_deg']:+.1f}°")
    ax.set_xlabel("error: observed minus true bearing [°]")
    ax.set_ylabel("trials")
    ax.set_title(f"{group}: error distribution", fontsize=9)
    ax.legend(fontsize=7)
    return fig


def error_rose(cal, group=None, *, ax=None, bin_deg=5.0):
    """Rose (circular histogram) of one group's errors, clockwise from 0 at the top like a bearing: a
    spread of a few degrees stays near the top, reflections and 180-degree mistakes stand apart. Returns the
    Figure."""
    tr, row, group = _cal_group(cal, group)
    fig, ax = _fig_ax(ax, (3.6, 3.6), projection="polar")
    if getattr(ax, "name", "") != "polar":
        raise ValueError("ax= must be a polar axes (subplot_kw={'projection': 'polar'})")
    edges = np.radians(np.arange(-180.0, 180.0 + bin_deg, bin_deg))
    centres = (edges[:-1] + edges[1:]) / 2
    counts, _ = np.histogram(np.radians(tr.loc[tr["used"], "error_deg"].to_numpy(float)), bins=edges)
    ax.bar(centres, counts, width=np.radians(bin_deg), color="#0072B2", alpha=0.85, label="used")
    wild = np.radians(tr.loc[tr["wild"], "error_deg"].to_numpy(float))
    if len(wild):   # one wild trial would be an invisible bar: mark each on the rim
        rim = 1.08 * max(int(counts.max()), 1)
        ax.plot(wild, np.full(len(wild), rim), "o", color="#D55E00", ms=7, clip_on=False,
                label="wild, left out")
        ax.set_ylim(0, rim * 1.02)
        ax.legend(loc="lower left", bbox_to_anchor=(-0.15, -0.15), fontsize=7)
    ax.set_theta_zero_location("N")
    ax.set_theta_direction(-1)
    ax.set_title(f"{group}: rose of errors ({bin_deg:g}° bins)", fontsize=9)
    return fig


def error_vs_distance(cal, group=None, *, ax=None):
    """One group's errors against the station-beacon distance, with the bias and the bias +/- 2 SD band, and
    the rank correlation of the absolute error with distance. Returns the Figure."""
    tr, row, group = _cal_group(cal, group)
    fig, ax = _fig_ax(ax, (5, 3.2))
    d = tr["distance_m"].to_numpy(float) / 1000.0
    e = tr["error_deg"].to_numpy(float)
    used = tr["used"].to_numpy(bool)
    ax.plot(d[used], e[used], "o", color="#0072B2", ms=3.5, alpha=0.8, label="used")
    sd = row["sd_deg"] if np.isfinite(row["sd_deg"]) else 1.0
    lo = min(e[used].min() if used.any() else -1.0, row["bias_deg"] - 3 * sd) - sd
    hi = max(e[used].max() if used.any() else 1.0, row["bias_deg"] + 3 * sd) + sd
    if (~used).any():   # off-scale wild trials sit on the edge, with their value
        ew = np.clip(e[~used], lo, hi)
        ax.plot(d[~used], ew, "x", color="#D55E00", ms=6, clip_on=False, label="wild, left out")
        for x, y, v in zip(d[~used], ew, e[~used]):
            if y != v:
                ax.annotate(f"{v:+.0f}°", (x, y), textcoords="offset points", xytext=(4, -10 if y > 0 else 4),
                            fontsize=7, color="#D55E00")
    ax.set_ylim(lo, hi)
    if np.isfinite(row["sd_deg"]):
        ax.axhline(row["bias_deg"], color="#D55E00", lw=1.2)
        ax.axhspan(row["bias_deg"] - 2 * row["sd_deg"], row["bias_deg"] + 2 * row["sd_deg"], color="#D55E00",
                   alpha=0.12, label="bias ± 2 SD")
    ax.axhline(0, color="#777", lw=0.8, ls=":")
    ax.set_xlabel("distance from the station to the beacon [km]")
    ax.set_ylabel("error [°]")
    rho = row.get("distance_rho", np.nan)
    test = (f"Spearman rho {rho:+.2f}, p = {row['distance_p']:.2g}" if np.isfinite(rho)
            else "too few trials to test")
    ax.set_title(f"{group}: error vs distance ({test})", fontsize=9)
    ax.legend(fontsize=7)
    return fig


def calibration_figure(cal, groups=None):
    """One row per group: error histogram, rose, error versus distance. Returns the Figure."""
    plt = _mpl()
    groups = cal.table["group"].tolist() if groups is None else list(groups)
    if not groups:
        raise ValueError("cal= has no groups to draw (no usable trials)")
    fig = plt.figure(figsize=(14, 3.6 * len(groups)))
    for i, g in enumerate(groups):
        error_histogram(cal, g, ax=fig.add_subplot(len(groups), 3, 3 * i + 1))
        error_rose(cal, g, ax=fig.add_subplot(len(groups), 3, 3 * i + 2, projection="polar"))
        error_vs_distance(cal, g, ax=fig.add_subplot(len(groups), 3, 3 * i + 3))
    fig.tight_layout()
    return fig
