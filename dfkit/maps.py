"""Offline interactive maps: one self-contained HTML file.

Leaflet 1.9.4 (BSD-2-Clause, vendored in ``dfkit/_vendor/leaflet`` with its
licence) is inlined into the page, so the map works with no internet at all: no
remote script, style, font or image. Without tiles the background is plain, so
the page draws its own graticule and a scale bar; an online tile layer can be
switched on when there is a connection.

Visual language (our own): one colour per tag from the Okabe & Ito (2008)
colour-blind-safe palette; a fix is a dot (filled when ``ok``, hollow when
flagged); its confidence ellipse a thin outline with a light fill (dashed when
flagged); bearing lines thin and semi-transparent; stations small rings.
Failed fixes have no position and are listed, with their reasons, in the panel.
All user text (labels, notes) is inserted as text, never as HTML.
"""

from __future__ import annotations

import html
import json
from importlib import resources

from dfkit.locate import Fixes
from dfkit.cautions import CAUTION
from dfkit.export.atomic import atomic_write
from dfkit.export.geojson import to_geojson
from dfkit.geometry import error_polygon_rings, split_ring

#: Okabe, M. & Ito, K. (2008), "Color Universal Design" palette, minus yellow (poor on white).
PALETTE = ["#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#000000"]


def _vendor(name: str) -> str:
    return resources.files("dfkit._vendor.leaflet").joinpath(name).read_text(encoding="utf-8")


def _script_json(obj) -> str:
    """JSON safe to place inside a <script> element."""
    text = json.dumps(obj, ensure_ascii=False, allow_nan=False)
    return text.replace("</", "<\\/").replace("\u2028", "\\u2028").replace("\u2029", "\\u2029")


class FixMap:
    """A map of fixes: ``save(path)`` writes the HTML file; in a notebook it shows itself.

    Attributes
    ----------
    geojson : dict
        The features drawn (RFC 7946 FeatureCollection).
    n_vectors : int
        How many interactive vector shapes the page draws (for tests).
    """

    def __init__(self, geojson: dict, title: str, panel: list[dict]):
        self.geojson = geojson
        self.title = title
        self.panel = panel
        self.n_vectors = sum(1 if f["geometry"]["type"] in ("Point", "Polygon", "LineString")
                             else len(f["geometry"]["coordinates"]) for f in geojson["features"])

    def html(self) -> str:
        """The complete, self-contained HTML page."""
        tags = sorted({str(f["properties"].get("tag") or "") for f in self.geojson["features"]})
        colours = {t: PALETTE[i % len(PALETTE)] for i, t in enumerate(tags)}
        return _TEMPLATE.format(
            title=html.escape(self.title),
            leaflet_css=_vendor("leaflet.css"),
            leaflet_js=_vendor("leaflet.js"),
            data=_script_json(self.geojson),
            colours=_script_json(colours),
            panel=_script_json(self.panel),
            caution=html.escape(CAUTION),
        )

    def save(self, path) -> None:
        with atomic_write(path) as fh:
            fh.write(self.html())

    def _repr_html_(self) -> str:
        # An isolated frame, so the page's scripts and styles do not touch the notebook.
        return (f'<iframe srcdoc="{html.escape(self.html(), quote=True)}" style="width:100%;height:520px;'
                'border:1px solid #ccc" sandbox="allow-scripts"></iframe>')


def fix_map(fixes: Fixes, *, error_polygons: bool = False, title: str = "dfkit fixes") -> FixMap:
    """A map of the fixes, their ellipses, bearing lines and stations.

    Parameters
    ----------
    fixes : Fixes
        From :func:`dfkit.locate.locate` or :func:`dfkit.locate.locate_sheet`.
    error_polygons : bool
        Also draw the +/-1 SD error polygons (for comparison; no probability meaning).
    title : str
        Shown in the page title and panel.
    """
    gj = to_geojson(fixes)
    if error_polygons:
        for label, ring in error_polygon_rings(fixes):
            tag = fixes.table.loc[fixes.table["fix"] == label, "tag"].iloc[0]
            for part in split_ring(*ring):
                gj["features"].append({"type": "Feature",
                                       "properties": {"kind": "error_polygon", "fix": label, "tag": tag},
                                       "geometry": {"type": "Polygon", "coordinates": [part]}})
    panel = []
    for _, r in fixes.table.iterrows():
        panel.append({"fix": str(r["fix"]), "tag": str(r["tag"]), "status": str(r["status"]),
                      "reason": str(r["reason"])})
    return FixMap(gj, title, panel)


_TEMPLATE = """<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{title}</title>
<style>
{leaflet_css}
html, body {{ height: 100%; margin: 0; font: 14px/1.35 system-ui, sans-serif; }}
#map {{ position: absolute; top: 0; bottom: 0; left: 0; right: 300px; background: #f4f2ec; }}
#panel {{ position: absolute; top: 0; bottom: 0; right: 0; width: 300px; overflow-y: auto; padding: 8px 10px;
         box-sizing: border-box; border-left: 1px solid #bbb; background: #fff; }}
#panel h1 {{ font-size: 15px; margin: 4px 0 6px; }}
#panel .fix {{ border-bottom: 1px solid #eee; padding: 4px 0; cursor: pointer; }}
#panel .status {{ font-weight: 600; }}
#panel .reason {{ color: #444; font-size: 12px; }}
#panel .caution {{ color: #7a4a00; font-size: 12px; margin-top: 10px; }}
.dfk-grid-label {{ color: #777; font-size: 10px; white-space: nowrap; }}
.dfk-popup td {{ padding: 0 6px 0 0; vertical-align: top; }}
@media (max-width: 700px) {{ #map {{ right: 0; bottom: 35%; }} #panel {{ top: 65%; width: 100%; }} }}
</style>
<script>
{leaflet_js}
</script>
</head>
<body>
<div id="map"></div>
<div id="panel"><h1>{title}</h1><div id="legend"></div><div id="fixes"></div>
<p class="caution">{caution}</p></div>
<script>
(function () {{
  "use strict";
  var DATA = {data};
  var COLOURS = {colours};
  var PANEL = {panel};
  var map = L.map("map", {{ preferCanvas: false, zoomSnap: 0.25 }});
  var plain = L.layerGroup();
  var tiles = L.tileLayer("https://tile.openstreetmap.org/{{z}}/{{x}}/{{y}}.png", {{
    maxZoom: 19, attribution: "&copy; OpenStreetMap contributors" }});
  plain.addTo(map);

  function colour(tag) {{ return COLOURS[tag == null ? "" : String(tag)] || "#000000"; }}
  function flagged(p) {{ return p.status && p.status !== "ok"; }}
  function fmt(v, d) {{ return (typeof v === "number") ? v.toFixed(d) : (v == null ? "" : String(v)); }}

  function popup(p) {{
    var t = document.createElement("table");
    t.className = "dfk-popup";
    var rows;
    if (p.kind === "fix" || p.kind === "ellipse") {{
      rows = [["fix", p.fix], ["tag", p.tag], ["status", p.status], ["why", p.reason],
              ["time (UTC)", p.time], ["lat, lon", fmt(p.lat, 6) + ", " + fmt(p.lon, 6)],
              ["bearings", p.n_bearings + " (" + p.n_used + " used)"], ["method", p.method],
              ["bearing SD", fmt(p.sd_deg, 2) + "\\u00b0 (" + p.sd_source + ")"],
              [fmt(100 * p.level, 0) + "% ellipse", p.semi_major_m == null ? "none" :
                 fmt(p.semi_major_m, 0) + " \\u00d7 " + fmt(p.semi_minor_m, 0) + " m, axis " +
                 fmt(p.orientation_deg, 0) + "\\u00b0"],
              ["largest residual", fmt(p.max_residual_deg, 1) + "\\u00b0"]];
    }} else if (p.kind === "bearing" || p.kind === "station") {{
      rows = [["fix", p.fix], ["line in sheet", p.line], ["time (UTC)", p.time], ["true bearing", fmt(p.true_bearing, 1) + "\\u00b0"],
              ["residual", p.residual_deg == null ? "" : fmt(p.residual_deg, 1) + "\\u00b0"],
              ["weight", fmt(p.weight, 2)], ["observer", p.observer], ["note", p.note]];
    }} else {{
      rows = [["fix", p.fix], ["error polygon", "\\u00b11 SD wedges; no probability meaning"]];
    }}
    rows.forEach(function (r) {{
      if (r[1] === "" || r[1] == null) return;
      var tr = document.createElement("tr");
      var a = document.createElement("td"); a.textContent = r[0];
      var b = document.createElement("td"); b.textContent = String(r[1]);
      tr.appendChild(a); tr.appendChild(b); t.appendChild(tr);
    }});
    return t;
  }}

  function style(f) {{
    var p = f.properties, c = colour(p.tag);
    if (p.kind === "ellipse") return {{ color: c, weight: 2, fillOpacity: 0.12, dashArray: flagged(p) ? "6 4" : null }};
    if (p.kind === "bearing") return {{ color: c, weight: 1.5, opacity: 0.7 }};
    if (p.kind === "error_polygon") return {{ color: "#555", weight: 1, dashArray: "2 3", fillOpacity: 0.05 }};
    return {{ color: c }};
  }}

  var byTag = {{}};
  DATA.features.forEach(function (f) {{
    var tag = f.properties.tag == null ? "" : String(f.properties.tag);
    (byTag[tag] = byTag[tag] || []).push(f);
  }});
  var overlays = {{}}, all = L.featureGroup(), fixLayers = {{}};
  Object.keys(byTag).sort().forEach(function (tag) {{
    var g = L.geoJSON(byTag[tag], {{
      style: style,
      pointToLayer: function (f, ll) {{
        var p = f.properties, c = colour(p.tag);
        if (p.kind === "station")
          return L.circleMarker(ll, {{ radius: 3, color: c, weight: 1.5, fillColor: "#ffffff", fillOpacity: 1 }});
        return L.circleMarker(ll, {{ radius: 7, color: c, weight: 2.5, fillColor: flagged(p) ? "#ffffff" : c,
                                     fillOpacity: 1 }});
      }},
      onEachFeature: function (f, layer) {{
        layer.bindPopup(function () {{ return popup(f.properties); }});
        if (f.properties.kind === "fix") fixLayers[f.properties.fix] = layer;
      }}
    }});
    g.addTo(map); g.addTo(all);
    var sw = '<span style="display:inline-block;width:10px;height:10px;background:' + colour(tag) + '"></span> ';
    overlays[sw + "tag " + (tag === "" ? "(none)" : tag.replace(/[&<>"']/g, function (ch) {{
      return "&#" + ch.charCodeAt(0) + ";"; }}))] = g;
  }});
  L.control.layers({{ "Plain background (offline)": plain, "OpenStreetMap (needs internet)": tiles }}, overlays,
                   {{ collapsed: false }}).addTo(map);
  L.control.scale({{ metric: true, imperial: false }}).addTo(map);
  var b = all.getBounds();
  if (b.isValid()) map.fitBounds(b.pad(0.15)); else map.setView([0, 0], 2);

  // Graticule: lines of latitude and longitude at a spacing that suits the zoom.
  var grid = L.layerGroup().addTo(map);
  var STEPS = [30, 10, 5, 2, 1, 0.5, 0.2, 0.1, 0.05, 0.02, 0.01, 0.005, 0.002, 0.001, 0.0005, 0.0002, 0.0001];
  function drawGrid() {{
    grid.clearLayers();
    var bb = map.getBounds(), span = Math.max(bb.getNorth() - bb.getSouth(), 1e-6), step = STEPS[0];
    for (var i = 0; i < STEPS.length; i++) {{ if (span / STEPS[i] <= 8) step = STEPS[i]; }}
    var d = Math.max(0, -Math.floor(Math.log10(step)) + 1);
    var opts = {{ color: "#999", weight: 0.6, opacity: 0.7, interactive: false }};
    var w = Math.floor(bb.getWest() / step) * step, e = bb.getEast();
    var s = Math.max(-90, Math.floor(bb.getSouth() / step) * step), n = Math.min(90, bb.getNorth());
    for (var x = w; x <= e; x += step) {{
      grid.addLayer(L.polyline([[s, x], [n, x]], opts));
      grid.addLayer(L.marker([bb.getSouth(), x], {{ interactive: false, icon: L.divIcon({{ className: "dfk-grid-label",
        html: (((x + 540) % 360) - 180).toFixed(d) + "\\u00b0", iconSize: null, iconAnchor: [-2, 14] }}) }}));
    }}
    for (var y = s; y <= n; y += step) {{
      grid.addLayer(L.polyline([[y, w], [y, e]], opts));
      grid.addLayer(L.marker([y, bb.getWest()], {{ interactive: false, icon: L.divIcon({{ className: "dfk-grid-label",
        html: y.toFixed(d) + "\\u00b0", iconSize: null, iconAnchor: [-2, 12] }}) }}));
    }}
  }}
  map.on("moveend", drawGrid);
  drawGrid();

  // Panel: every fix with its status and reason; click to go there.
  var list = document.getElementById("fixes");
  var counts = {{}};
  PANEL.forEach(function (p) {{
    counts[p.status] = (counts[p.status] || 0) + 1;
    var div = document.createElement("div"); div.className = "fix";
    var head = document.createElement("div");
    var st = document.createElement("span"); st.className = "status"; st.textContent = p.status;
    head.appendChild(st); head.appendChild(document.createTextNode(" " + p.fix));
    div.appendChild(head);
    if (p.reason) {{ var r = document.createElement("div"); r.className = "reason"; r.textContent = p.reason;
                     div.appendChild(r); }}
    div.addEventListener("click", function () {{
      var l = fixLayers[p.fix]; if (l) {{ map.setView(l.getLatLng(), Math.max(map.getZoom(), 15)); l.openPopup(); }}
    }});
    list.appendChild(div);
  }});
  document.getElementById("legend").textContent = Object.keys(counts).map(function (k) {{
    return counts[k] + " " + k; }}).join(", ") + ". Dot: fix (hollow = flagged); outline: confidence ellipse; " +
    "thin lines: bearings; small rings: stations.";
  window.dfkitMap = map;
}})();
</script>
</body>
</html>
"""
