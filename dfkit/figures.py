"""Static figures for reports (matplotlib): a fix in local metres, its residuals, and beacon-trial errors.

Figures are drawn in the fix's local azimuthal equidistant plane (east, north in
metres from the fix), so distances read true; save them as PNG, PDF or SVG with
``fig.savefig``.
"""

from __future__ import annotations

import numpy as np

from dfkit import geodesy, regions
from dfkit.locate import Fixes


def _mpl():
    # The backend is the user's choice: dfkit never calls matplotlib.use (without a display matplotlib picks Agg).
    import matplotlib.pyplot as plt

    return plt


def _fix_rows(fixes: Fixes, label, tag):
    """The fix-table row and the bearings of the fix ``label`` (of ``tag`` when labels repeat across tags)."""
    t = fixes.table
    hit = (t["fix"] == label).to_numpy().copy()
    if tag is not None:
        hit &= (t["tag"] == tag).to_numpy()
    idx = np.flatnonzero(hit)
    if len(idx) != 1:
        tags = ", ".join(repr(x) for x in t.loc[hit, "tag"]) if len(idx) else ""
        raise ValueError(f"fix {label!r} is not in the table" if not len(idx) else
                         f"fix {label!r} exists for tags {tags}: give tag=")
    i = int(idx[0])   # row i of the fix table is fix_id i
    return t.iloc[i], fixes.bearings[fixes.bearings["fix_id"].to_numpy(np.int64) == i]


def fix_plot(fixes: Fixes, label: str, *, tag=None, ax=None, error_polygon: bool = False):
    """Bearings, stations, the fix and its ellipse in local metres, with a scale bar and north arrow.

    ``tag`` picks the fix when two tags use the same label. Returns the matplotlib Figure.
    """
    plt = _mpl()
    row, b = _fix_rows(fixes, label, tag)
    if ax is None:
        fig, ax = plt.subplots(figsize=(6.5, 6.5))
    else:
        fig = ax.figure
    has_pos = np.isfinite(row["lat"])
    clat, clon = (row["lat"], row["lon"]) if has_pos else geodesy.group_centroid(
        b["lat"].to_numpy(), b["lon"].to_numpy(), np.zeros(len(b), int), 1)
    clat, clon = float(np.atleast_1d(clat)[0]), float(np.atleast_1d(clon)[0])
    sx, sy = geodesy.to_local(clat, clon, b["lat"].to_numpy(), b["lon"].to_numpy())
    reach = 1.3 * max(float(np.max(np.hypot(sx, sy))) if len(b) else 1.0, 50.0)
    for (_, r), x0, y0 in zip(b.iterrows(), sx, sy):
        la, lo = geodesy.geodesic_path(r["lat"], r["lon"], r["true_bearing"], 2.2 * reach, 40)
        x, y = geodesy.to_local(clat, clon, la, lo)
        w = r.get("weight", 1.0)
        ax.plot(x, y, "-", color="#0072B2", lw=1.2, alpha=0.35 if (np.isfinite(w) and w < 0.5) else 0.85)
        ax.plot([x0], [y0], "s", color="#0072B2", ms=6, mfc="white")
        ax.annotate(f"line {r['line']}", (x0, y0), textcoords="offset points", xytext=(5, -10), fontsize=8)
    if has_pos:
        ax.plot([0], [0], "o", color="#D55E00", ms=8, mfc="#D55E00" if row["status"] == "ok" else "white")
        if np.isfinite(row["semi_major_m"]):
            t = np.linspace(0, 2 * np.pi, 200)
            a, c, th = row["semi_major_m"], row["semi_minor_m"], np.radians(row["orientation_deg"])
            u, v = a * np.cos(t), c * np.sin(t)
            ax.plot(u * np.sin(th) + v * np.cos(th), u * np.cos(th) - v * np.sin(th), color="#D55E00",
                    lw=1.5, ls="-" if row["status"] == "ok" else "--",
                    label=f"{row['level'] * 100:g}% ellipse")
    if error_polygon and has_pos and np.isfinite(row["sd_deg"]):
        sd = np.where(np.isfinite(b["sd"]), b["sd"], row["sd_deg"])
        ring = regions.error_polygon(b["lat"], b["lon"], b["true_bearing"], sd, clat, clon)
        if ring is not None:
            x, y = geodesy.to_local(clat, clon, *ring)
            ax.fill(x, y, color="#999999", alpha=0.3, label="error polygon (no probability meaning)")
    ax.set_xlim(-reach, reach)
    ax.set_ylim(-reach, reach)
    ax.set_aspect("equal")
    ax.set_xlabel("east of the fix [m]")
    ax.set_ylabel("north of the fix [m]")
    ax.set_title(f"{label}: {row['status']}" + (f"\n{row['reason']}" if row["reason"] else ""), fontsize=9)
    ax.grid(alpha=0.3)
    bar = 10 ** np.floor(np.log10(reach / 2))
    ax.plot([-0.9 * reach, -0.9 * reach + bar], [-0.9 * reach] * 2, "k-", lw=3)
    ax.text(-0.9 * reach + bar / 2, -0.86 * reach, f"{bar:g} m", ha="center", fontsize=8)
    ax.annotate("N", xy=(0.93, 0.95), xytext=(0.93, 0.83), xycoords="axes fraction", ha="center",
                arrowprops=dict(arrowstyle="-|>", color="k"), fontsize=10)
    if ax.get_legend_handles_labels()[0]:
        ax.legend(loc="lower right", fontsize=8)
    return fig


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
