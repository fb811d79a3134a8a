"""The map of a plan for the next bearing: dfkit's folium fix map plus a plan layer, one offline HTML file.

:func:`plan_map` starts from :func:`dfkit.maps.fix_map` of the plan's fix (its estimate and region, bearings,
stations, the offline background, grid, scale, measuring tool and panel) and adds what
:func:`dfkit.export.plan.plan_geojson` holds for the plan: the candidate spots (the best ones numbered), for a
grid a surface of the expected area after the next bearing (darker is better), and without an estimate the
range band along the bearing; the panel gets a section with the ranked spots, what the plan rests on and its
caution. The layer's script is package data (``dfkit/maps/templates/plan_layer.html``); the plan goes in as
script-safe JSON and user text reaches the page through ``textContent`` only.
"""

from __future__ import annotations

from importlib import resources

import numpy as np

from dfkit.cautions import PLAN_CAUTION
from dfkit.export.plan import plan_geojson, plan_meta
from dfkit.maps import assets, fix_map, payload
from dfkit.planning import Plan

#: Shades of the expected-area surface, best (smallest area) first: a sequential ramp of our own,
#: dark teal to pale sand, distinguishable in greyscale.
RAMP = ["#0b3d3a", "#1d6461", "#3d8a7f", "#74ad96", "#add0b3", "#dbe9cf", "#f6f3e3"]
#: Spots numbered on the map and listed in the panel.
TOP = 10


def _shade(values):
    """Class 0 (best) .. len(RAMP)-1 of each value by quantiles (-1 where there is none), and the bins."""
    v = np.asarray(values, float)
    ok = np.isfinite(v)
    if not ok.any():
        return np.full(len(v), -1), []
    edges = np.unique(np.quantile(v[ok], np.linspace(0, 1, len(RAMP) + 1)))
    cls = np.clip(np.searchsorted(edges, v, side="right") - 1, 0, max(len(edges) - 2, 0))
    cls = np.where(ok, cls, -1)  # no value: the cell is left unshaded
    return cls.astype(int), [(float(edges[i]), float(edges[i + 1])) for i in range(len(edges) - 1)]


def _plan_layer_class():
    from branca.element import MacroElement
    from folium.template import Template

    class PlanLayer(MacroElement):
        """Spots, surface, bands and the panel section of a plan, drawn after dfkit's fix layer."""

        _template = Template(
            resources.files("dfkit.maps").joinpath("templates", "plan_layer.html").read_text(encoding="utf-8")
        )

        def __init__(self, data: dict):
            super().__init__()
            self._name = "DfkitPlanLayer"
            self.payload_json = payload.script_json(data)

        def render(self, **kwargs):
            # As dfkit's fix layer does: the macros are rendered once and added as fixed text, never compiled
            # again as a template (text in a label that looks like template syntax stays text).
            figure = self.get_root()
            module = self._template.module
            figure.html.add_child(assets.Raw(str(module.html(self, kwargs))), name=self.get_name())
            figure.script.add_child(assets.Raw(str(module.script(self, kwargs))), name=self.get_name())

    return PlanLayer


def _rows(t, top, norths=()):
    out = []
    for _, r in t[t["rank"].notna()].head(top).iterrows():
        row = {"rank": int(r["rank"]), "spot": str(r["spot"])}
        for c in ("expected_area_m2", "area_ratio", "distance_m", "azimuth_true_deg", "expected_bearing_true_deg",
                  *(f"expected_bearing_{n}_deg" for n in norths)):
            row[c] = float(r[c]) if np.isfinite(r[c]) else None
        out.append(row)
    return out


def plan_map(plan: Plan, *, title: str | None = None, top: int = TOP, **map_options):
    """A map of a plan: the current region, the ranked spots and, for a grid, the expected-area surface.

    Parameters
    ----------
    plan : Plan
        From :func:`dfkit.planning.plan_next_bearing`.
    title : str, optional
        Shown in the page title and panel (default: "Next bearing for fix LABEL").
    top : int
        How many of the best spots are numbered and listed.
    **map_options
        Passed to :func:`dfkit.maps.fix_map` (``tiles=``, ``online_tiles=``, ``world=`` ...).

    Returns
    -------
    dfkit.maps.FixMap
        A ``folium.Map`` (it shows itself in a notebook; ``save(path)`` writes one offline file), with
        ``plan_data`` (what the plan layer draws), ``n_vectors`` (interactive shapes drawn when the page
        opens, the fix's and the plan's) and ``n_listed`` (spots listed in the panel).
    """
    row = plan.fix_row
    title = title or f"Next bearing for fix {row['fix']}"
    m = fix_map(plan.fixes, title=title, **map_options)
    gj = plan_geojson(plan)
    t = plan.table
    has_ratio = bool(t["area_ratio"].notna().any())
    if has_ratio:
        value, what, digits = (
            t["area_ratio"].to_numpy(float),
            "expected area after the bearing, share of now",
            2,
        )
    elif t["expected_area_m2"].notna().any():
        value, what, digits = t["expected_area_m2"].to_numpy(float), "expected area after the bearing [m²]", 0
    else:
        value, what, digits = (
            t["rank"].to_numpy(dtype=float, na_value=np.nan),
            "rank (no SD known: no areas)",
            0,
        )
    cls, edges = _shade(value)
    plan_kinds = ("cell", "spot", "range_band")
    feats = [f for f in gj["features"] if f["properties"]["kind"] in plan_kinds]
    k = 0
    for f in feats:
        if f["properties"]["kind"] == "cell":
            f["properties"]["_class"] = int(cls[k])
            k += 1
    meta = plan_meta(plan)
    grid = plan.grid_step_m is not None
    data = {
        "data": {"type": "FeatureCollection", "features": feats},
        "heading": "Where to take the next bearing",
        "fix": str(row["fix"]),
        "tag": str(row["tag"]),
        "status": str(row["status"]),
        "reason": str(row["reason"]),
        "notes": meta["notes"],
        "current_area_m2": meta["current_area_m2"],
        "level": plan.level,
        "rows": _rows(t, top, list(plan.norths)),
        "norths": list(plan.norths),
        "top": int(top),
        "grid": grid,
        "band": bool(plan.bands),
        "has_ratio": has_ratio,
        "unranked": [
            {"spot": str(r["spot"]), "note": str(r["note"])}
            for _, r in t[t["rank"].isna()].head(50).iterrows()
        ],
        "ramp": {
            "colours": RAMP,
            "title": f"Shading: {what} (best first)",
            "labels": [f"{lo:.{digits}f} to {hi:.{digits}f}" for lo, hi in edges] if grid else [],
        },
        "caution": PLAN_CAUTION,
    }
    _plan_layer_class()(data).add_to(m)
    drawn = [
        f
        for f in feats
        if f["geometry"] is not None
        and (
            f["properties"]["kind"] != "spot"
            or not grid
            or (f["properties"].get("rank") is not None and f["properties"]["rank"] <= top)
        )
    ]
    m.plan_data = data
    m.n_vectors += len(drawn)
    m.n_listed = len(data["rows"])
    return m
