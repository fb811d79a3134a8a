"""Static figures for reports (matplotlib): a fix in local metres, and its residuals.

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


def fix_plot(fixes: Fixes, label: str, *, ax=None, error_polygon: bool = False):
    """Bearings, stations, the fix and its ellipse in local metres, with a scale bar and north arrow.

    Returns the matplotlib Figure.
    """
    plt = _mpl()
    row = fixes.table.set_index("fix").loc[label]
    b = fixes.bearings[fixes.bearings["fix"] == label]
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


def residual_plot(fixes: Fixes, label: str, *, ax=None):
    """Each bearing's residual (observed minus geodesic azimuth to the fix) with its weight."""
    plt = _mpl()
    b = fixes.bearings[fixes.bearings["fix"] == label]
    row = fixes.table.set_index("fix").loc[label]
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
