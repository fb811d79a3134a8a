"""What a map draws, as one compact, script-safe JSON payload built with vectorised numpy.

A season map carries tens of thousands of fixes and bearings, so the payload is columnar (one array per
property, not one object per feature) and positions are integers:

* positions in micro-degrees (1e-6 degree, about 0.1 m); ring and line vertices as offsets from their fix or
  station in micro-degrees;
* times in seconds from the earliest time of the map (``t0``, seconds since 1970 UTC);
* labels, tags, observers, notes and statuses as lists of text, referred to by index.

Confidence ellipses are sent as their axes and drawn by the page (``ellipseRing`` in ``dfkit-map.js``: a
great circle on the sphere of the prime-vertical radius, latitude change scaled to the meridian radius); the
browser test holds the drawn vertices within 0.05 m of Karney's geodesics for a 5 km axis and 5 m for 50 km.
Ellipses larger than :data:`EXACT_RING_M`, likelihood regions and error polygons are sent as exact rings
computed here (:mod:`dfkit.export.shapes`).

The JSON is safe inside an HTML ``<script>`` element: every ``<``, ``>`` and ``&`` is written as a ``\\u``
escape, so no user text can end the script or open a comment, and U+2028/U+2029 are escaped too. User text
is only ever placed in the page with ``textContent``, and never used as an object key.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd

from dfkit.cautions import CAUTION
from dfkit.export import shapes
from dfkit.locate import STATUS_MEANING, Fixes

#: Ellipses with a semi-major axis above this are sent as exact rings [m].
EXACT_RING_M = 20_000.0
#: Bearing lines start switched off on maps with more bearings than this (they can be switched on).
BEARINGS_SHOWN_MAX = 5_000
#: Maps with more drawn shapes than this use one canvas instead of SVG elements (faster in the browser).
CANVAS_ABOVE = 3_000
MICRO = 1e6


def script_json(obj) -> str:
    """JSON that can sit inside an HTML ``<script>`` element whatever text it carries."""
    text = json.dumps(obj, ensure_ascii=False, allow_nan=False, separators=(",", ":"))
    return (text.replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026")
            .replace("\u2028", "\\u2028").replace("\u2029", "\\u2029"))


def _text(values) -> list[str]:
    s = pd.Series(values, dtype=object) if not isinstance(values, pd.Series) else values.astype(object)
    return s.where(s.notna(), "").astype(str).tolist()


def _codes(values) -> tuple[list[int], list[str]]:
    """Index of each value in the sorted list of distinct values."""
    text = pd.Series(_text(values), dtype=object)
    cats, uniq = pd.factorize(text, sort=True)
    return cats.tolist(), [str(u) for u in uniq]


def _ints(values, scale=1.0) -> list:
    """Numbers scaled and rounded to integers; None where missing."""
    v = np.asarray(values, float) * scale
    ok = np.isfinite(v)
    out = np.where(ok, np.round(np.where(ok, v, 0.0)), 0).astype(np.int64).tolist()
    if ok.all():
        return out
    return [x if k else None for x, k in zip(out, ok.tolist())]


def _seconds(times: pd.Series, t0: float) -> list:
    epoch = pd.Timestamp("1970-01-01", tz="UTC")
    s = (times - epoch).dt.total_seconds().to_numpy(float) if len(times) else np.zeros(0)
    return _ints(s - t0)


def _ring_offsets(lat, lon, lat0, lon0) -> list[int]:
    """A ring or line as flat [dlat, dlon, dlat, dlon, ...] micro-degree offsets from (lat0, lon0)."""
    d = np.column_stack([np.asarray(lat) - lat0, np.asarray(lon) - lon0]).ravel()
    return np.round(d * MICRO).astype(np.int64).tolist()


def build(fixes: Fixes, *, error_polygons: bool = False, title: str = "dfkit fixes",
          bearings: bool | None = None, colour_by: str = "tag", notes: list[str] | None = None) -> dict:
    """The map payload (a dict of lists; see the module docstring)."""
    t = fixes.table
    b = fixes.bearings
    epoch = pd.Timestamp("1970-01-01", tz="UTC")
    all_t = pd.concat([t["time"], b["time"]]) if len(b) else t["time"]
    all_t = all_t.dropna()
    t0 = float((all_t.min() - epoch).total_seconds()) if len(all_t) else 0.0

    pos = shapes.has_position(t)
    lat = np.where(pos, t["lat"].to_numpy(float), np.nan)
    lon = np.where(pos, t["lon"].to_numpy(float), np.nan)
    a = t["semi_major_m"].to_numpy(float)
    has_ell = np.zeros(len(t), bool)
    has_ell[shapes.ellipse_rows(t)] = True
    tag_code, tags = _codes(t["tag"])
    st_code, statuses = _codes(t["status"])
    sds_code, sd_sources = _codes(t["sd_source"])
    fix = {
        "label": _text(t["fix"]), "tag": tag_code, "status": st_code, "reason": _text(t["reason"]),
        "t": _seconds(t["time"], t0), "lat": _ints(lat, MICRO), "lon": _ints(lon, MICRO),
        "nb": _ints(t["n_bearings"]), "nu": _ints(t["n_used"]), "sd": _ints(t["sd_deg"], 100),
        "sds": sds_code, "a": _ints(np.where(has_ell, a, np.nan), 10),
        "b": _ints(np.where(has_ell, t["semi_minor_m"], np.nan), 10),
        "or": _ints(np.where(has_ell, t["orientation_deg"], np.nan), 10),
        "res": _ints(t["max_residual_deg"], 10), "cross": _ints(t["crossing_deg"], 10),
        "wild": _ints(t["wild_risk"] if "wild_risk" in t else np.full(len(t), np.nan), 1000),
        # the level the region is drawn at, in 1/10000 (above the level where widened for the wild risk)
        "rl": _ints(t["region_level"] if "region_level" in t else np.full(len(t), np.nan), 10000),
        "method": _text(t["method"]),
    }

    # exact rings: likelihood regions when the fixes carry them, else ellipses too big for the page's plane
    rings = {"fix": [], "ring": [], "kind": "ellipse", "bounded": []}
    reg = shapes.likelihood_regions(fixes)
    if reg is not None:
        rings["kind"] = "region"
        for fid, geom, bounded in zip(reg["fix_id"].to_numpy(int), reg["geometry"], reg["bounded"]):
            for poly in getattr(geom, "geoms", [geom]):
                x, y = np.asarray(poly.exterior.coords).T
                la0, lo0 = (lat[fid], lon[fid]) if pos[fid] else (float(y[0]), float(x[0]))
                rings["fix"].append(int(fid))
                rings["ring"].append(_ring_offsets(y, x, la0, lo0))
                rings["bounded"].append(bool(bounded))
        fix["a"] = [None] * len(t)          # the page draws the regions, not the ellipses
    else:
        big = np.flatnonzero(has_ell & (a > EXACT_RING_M))
        if len(big):
            r = shapes.ellipse_rings(t, big)
            for i, la, lo in zip(r.rows, r.lat, r.lon):
                rings["fix"].append(int(i))
                rings["ring"].append(_ring_offsets(la, lo, lat[i], lon[i]))
                rings["bounded"].append(True)
                fix["a"][i] = None

    epoly = {"fix": [], "ring": []}
    if error_polygons:
        for i, la, lo in shapes.error_polygons(fixes):
            epoly["fix"].append(int(i))
            epoly["ring"].append(_ring_offsets(la, lo, lat[i], lon[i]))

    brg = {"fix": [], "lat": [], "lon": [], "path": [], "line": [], "t": [], "az": [], "res": [], "w": [],
           "obs": [], "note": []}
    observers, note_texts = [], []
    if len(b):
        blat = b["lat"].to_numpy(float)
        blon = b["lon"].to_numpy(float)
        paths = [None] * len(b)
        for rows, la, lo in shapes.bearing_paths(b):
            d = np.round((la[:, 1:] - blat[rows, None]) * MICRO).astype(np.int64)
            e = np.round((lo[:, 1:] - blon[rows, None]) * MICRO).astype(np.int64)
            flat = np.stack([d, e], axis=2).reshape(len(rows), -1).tolist()
            for k, r in enumerate(rows.tolist()):
                paths[r] = flat[k]
        obs_col = b["observer"] if "observer" in b.columns else pd.Series([""] * len(b))
        note_col = b["note"] if "note" in b.columns else pd.Series([""] * len(b))
        obs_code, observers = _codes(obs_col)
        note_code, note_texts = _codes(note_col)
        brg = {"fix": b["fix_id"].to_numpy(np.int64).tolist(), "lat": _ints(blat, MICRO),
               "lon": _ints(blon, MICRO), "path": paths, "line": _ints(b["line"]),
               "t": _seconds(b["time"], t0), "az": _ints(b["true_bearing"], 10),
               "res": _ints(b["residual_deg"], 10), "w": _ints(b["weight"], 100),
               "obs": obs_code, "note": note_code}

    n_shapes = int(pos.sum() + has_ell.sum() + 2 * len(b))
    show_bearings = (len(b) <= BEARINGS_SHOWN_MAX) if bearings is None else bool(bearings)
    level = float(t["level"].iloc[0]) if len(t) else 0.95
    return {
        "title": title, "caution": CAUTION, "source": fixes.source, "t0": t0, "level": level,
        "tags": tags, "statuses": statuses, "meaning": [STATUS_MEANING.get(s, "") for s in statuses],
        "sd_sources": sd_sources, "observers": observers, "notes": note_texts,
        "fix": fix, "rings": rings, "epoly": epoly, "brg": brg,
        "options": {"bearings": show_bearings, "colour_by": colour_by, "canvas": n_shapes > CANVAS_ABOVE,
                    "error_polygons": bool(error_polygons), "n_bearings": int(len(b)),
                    "bearings_shown_max": BEARINGS_SHOWN_MAX},
        "messages": list(notes or []),
    }
