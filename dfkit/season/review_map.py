"""The map of the review page, behind one function (:func:`season_map_html`).

It is dfkit's own offline map (:func:`dfkit.maps.fix_map`: fixes, regions, tag and time filters, legend,
background; everything inlined) with one addition for a season: each tag's **track**, a line joining its
located fixes in time order, which follows the map's tag and time filters. The page is placed in the review
page as an isolated frame (``srcdoc``), so its scripts and styles stay its own.
"""

from __future__ import annotations

import html
import re
from importlib import resources

import numpy as np

from dfkit.locate import Fixes
from dfkit.maps import fix_map
from dfkit.maps.payload import script_json

#: Neutral colour for anything without a tag colour.
NEUTRAL = "#777777"


def palette() -> list[str]:
    """The map's tag colours, read from the map's own script (one source for both)."""
    js = resources.files("dfkit.maps").joinpath("static/dfkit-map.js").read_text(encoding="utf-8")
    found = re.search(r"var PALETTE = \[([^\]]*)\]", js)
    return re.findall(r'"(#[0-9a-fA-F]{6})"', found.group(1)) if found else [NEUTRAL]


def tag_colours(tags) -> dict[str, str]:
    """The colour the map gives each tag (tags sorted, palette in order), for the rest of the page."""
    pal = palette()
    return {t: pal[i % len(pal)] for i, t in enumerate(sorted({str(x) for x in tags}))}


def season_map_html(fixes: Fixes, *, title: str = "season", height_px: int = 640) -> str:
    """The season's fixes on dfkit's offline map, with per-tag tracks, as an HTML fragment (an iframe)."""
    m = fix_map(fixes, title=title, bearings=False, online_tiles=False)
    f = m.data["fix"]
    t = np.array([np.nan if v is None else v for v in f["t"]], float)
    has = np.array([la is not None for la in f["lat"]]) & np.isfinite(t)
    tracks = []
    tag = np.asarray(f["tag"])
    for code in range(len(m.data["tags"])):
        idx = np.flatnonzero(has & (tag == code))
        idx = idx[np.argsort(t[idx], kind="stable")]
        tracks.append({"tag": code, "lat": [f["lat"][i] for i in idx], "lon": [f["lon"][i] for i in idx],
                       "t": [f["t"][i] for i in idx]})
    from branca.element import Element

    m.get_root().script.add_child(Element(_TRACKS.replace("__TRACKS__", script_json(tracks))), name="dfk_tracks")
    page = m.html()
    return (f'<iframe class="season-map" title="map of the fixes" srcdoc="{html.escape(page, quote=True)}" '
            f'style="width:100%;height:{int(height_px)}px;border:1px solid #ccc" sandbox="allow-scripts"></iframe>')


_TRACKS = """
window.addEventListener("load", function () {   // after the map's own script has drawn (window.dfkit)
  var T = __TRACKS__, d = window.dfkit;
  if (!d || !d.layer) return;
  var layer = d.layer, group = L.layerGroup().addTo(d.map), lines = [];
  function draw() {
    group.clearLayers();
    var s = layer.state;
    T.forEach(function (tr) {
      if (!s.tagOn[tr.tag]) return;
      var pts = [];
      for (var k = 0; k < tr.t.length; k++) {
        if (tr.t[k] >= s.tmin && tr.t[k] <= s.tmax) pts.push([tr.lat[k] / 1e6, tr.lon[k] / 1e6]);
      }
      if (pts.length < 2) return;
      var c = s.colourBy === "tag" ? layer.colourOf(tr.tag, null, null) : "#777777";
      L.polyline(pts, {color: c, weight: 1.5, opacity: 0.55, interactive: false, className: "dfk-track"}).addTo(group);
    });
    group.eachLayer(function (l) { l.bringToBack(); });
  }
  var refresh = layer.refresh, recolour = layer.recolour;
  layer.refresh = function () { refresh(); draw(); };
  layer.recolour = function () { recolour(); draw(); };
  draw();
  window.dfkitTracks = { group: group, redraw: draw };
});
"""
