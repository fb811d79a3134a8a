"""The map of a plan for the next bearing: one self-contained HTML file that works offline.

It draws what :func:`dfkit.export.plan.plan_geojson` holds: the current
estimate and its region, the bearings and stations, the ranked spots (the best
ones numbered) and, for a grid, a shaded surface of the expected area after the
next bearing (darker is better). Leaflet 1.9.4 (BSD-2-Clause, vendored in
``dfkit/_vendor/leaflet``) is inlined; the page template is package data
(``dfkit/_templates/plan_map.html``). All user text is inserted as text, never
as HTML. :func:`plan_map` is the one entry point, so the drawing can move to
another map library without changing its callers.
"""

from __future__ import annotations

import html
import json
from importlib import resources
from string import Template

import numpy as np

from dfkit.cautions import CAUTION, PLAN_CAUTION
from dfkit.export.atomic import atomic_write
from dfkit.export.plan import plan_geojson, plan_meta
from dfkit.planning import Plan

#: Shades of the expected-area surface, best (smallest area) first: a sequential ramp of our own,
#: dark teal to pale sand, distinguishable in greyscale.
RAMP = ["#0b3d3a", "#1d6461", "#3d8a7f", "#74ad96", "#add0b3", "#dbe9cf", "#f6f3e3"]
#: Spots numbered on the map and listed in the panel.
TOP = 10


def _asset(package: str, name: str) -> str:
    return resources.files(package).joinpath(name).read_text(encoding="utf-8")


def _script_json(obj) -> str:
    """JSON safe to place inside a <script> element."""
    text = json.dumps(obj, ensure_ascii=False, allow_nan=False)
    return text.replace("</", "<\\/").replace("\u2028", "\\u2028").replace("\u2029", "\\u2029")


def _shade(values):
    """Class 0 (best) .. len(RAMP)-1 of each value by quantiles (-1 where there is none), and the legend labels."""
    v = np.asarray(values, float)
    ok = np.isfinite(v)
    if not ok.any():
        return np.full(len(v), -1), []
    edges = np.unique(np.quantile(v[ok], np.linspace(0, 1, len(RAMP) + 1)))
    cls = np.clip(np.searchsorted(edges, v, side="right") - 1, 0, max(len(edges) - 2, 0))
    cls = np.where(ok, cls, -1)          # no value: the cell is left unshaded
    return cls.astype(int), [(float(edges[i]), float(edges[i + 1])) for i in range(len(edges) - 1)]


class PlanMap:
    """A plan's map: ``save(path)`` writes the HTML file; in a notebook it shows itself.

    Attributes
    ----------
    geojson : dict
        The features drawn (RFC 7946 FeatureCollection).
    n_vectors : int
        How many interactive vector shapes the page draws (for tests).
    n_listed : int
        Spots listed in the panel.
    """

    def __init__(self, geojson: dict, title: str, panel: dict, ramp: dict):
        self.geojson = geojson
        self.title = title
        self.panel = panel
        self.ramp = ramp
        drawn = [f for f in geojson["features"] if f["geometry"] is not None and
                 (f["properties"]["kind"] != "spot" or not panel["grid"] or
                  (f["properties"].get("rank") is not None and f["properties"]["rank"] <= panel["top"]))]
        self.n_vectors = len(drawn)
        self.n_listed = len(panel["rows"])

    def html(self) -> str:
        """The complete, self-contained HTML page."""
        page = Template(_asset("dfkit._templates", "plan_map.html"))
        return page.substitute(
            title=html.escape(self.title),
            leaflet_css=_asset("dfkit._vendor.leaflet", "leaflet.css"),
            leaflet_js=_asset("dfkit._vendor.leaflet", "leaflet.js"),
            data=_script_json(self.geojson),
            panel=_script_json(self.panel),
            ramp=_script_json(self.ramp),
        )

    def save(self, path) -> None:
        with atomic_write(path) as fh:
            fh.write(self.html())

    def _repr_html_(self) -> str:
        # An isolated frame, so the page's scripts and styles do not touch the notebook.
        return (f'<iframe srcdoc="{html.escape(self.html(), quote=True)}" style="width:100%;height:540px;'
                'border:1px solid #ccc" sandbox="allow-scripts"></iframe>')


def plan_map(plan: Plan, *, title: str | None = None, top: int = TOP) -> PlanMap:
    """A map of a plan: the current region, the ranked spots and, for a grid, the expected-area surface.

    Parameters
    ----------
    plan : Plan
        From :func:`dfkit.planning.plan_next_bearing`.
    title : str, optional
        Shown in the page title and panel (default: "Next bearing for fix LABEL").
    top : int
        How many of the best spots are numbered and listed.
    """
    gj = plan_geojson(plan)
    t = plan.table
    has_ratio = bool(t["area_ratio"].notna().any())
    has_area = bool(t["expected_area_m2"].notna().any())
    if has_ratio:
        value, what, digits = t["area_ratio"].to_numpy(float), "expected area after the bearing, share of now", 2
    elif has_area:
        value, what, digits = t["expected_area_m2"].to_numpy(float), "expected area after the bearing [m²]", 0
    else:
        value, what, digits = t["rank"].to_numpy(dtype=float, na_value=np.nan), "rank (no SD known: no areas)", 0
    cls, edges = _shade(value)
    classes = dict(zip(range(len(t)), cls.tolist()))
    k = 0
    for f in gj["features"]:
        if f["properties"]["kind"] == "cell":
            f["properties"]["_class"] = classes[k]
            k += 1
    meta = plan_meta(plan)
    rows = []
    for _, r in t[t["rank"].notna()].head(top).iterrows():
        rows.append({c: (None if (isinstance(r[c], float) and not np.isfinite(r[c])) else
                         (int(r[c]) if c == "rank" else (float(r[c]) if c != "spot" else str(r[c]))))
                     for c in ("rank", "spot", "expected_area_m2", "area_ratio", "distance_m", "azimuth_deg",
                               "expected_bearing_deg")})
    unranked = [{"spot": str(r["spot"]), "note": str(r["note"])}
                for _, r in t[t["rank"].isna()].head(50).iterrows()]
    row = plan.fix_row
    panel = {"unranked": unranked, "title": title or f"Next bearing for fix {row['fix']}", "fix": str(row["fix"]), "tag": str(row["tag"]),
             "status": str(row["status"]), "reason": str(row["reason"]), "notes": meta["notes"],
             "current_area_m2": meta["current_area_m2"], "level": plan.level, "rows": rows, "top": int(top),
             "grid": plan.grid_step_m is not None, "band": bool(plan.bands), "has_ratio": has_ratio,
             "caution": PLAN_CAUTION + " " + CAUTION}
    labels = [f"{lo:.{digits}f} to {hi:.{digits}f}" for lo, hi in edges] if plan.grid_step_m else []
    ramp = {"colours": RAMP, "labels": labels, "title": f"Shading: {what} (best first)"}
    return PlanMap(gj, panel["title"], panel, ramp)
