"""The map of the review page, behind one function (:func:`season_map_html`).

It reuses what :mod:`dfkit.maps` ships (Leaflet 1.9.4 inlined, the colour
palette, safe JSON for a script element), so the page works with no internet.
Fixes are dots (filled when ``ok``, hollow when flagged), joined per tag in time
order as a track; confidence ellipses are drawn when at most
:data:`MAX_ELLIPSES` fixes are in view. Two sliders choose the time span, a
layer control the tags. To move the page to another map engine, replace this
one function: it takes the fix table and returns an HTML fragment.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from dfkit.locate import WITH_POSITION
from dfkit.maps import PALETTE, _script_json, _vendor

#: Draw ellipses only while this many fixes or fewer are in the chosen span.
MAX_ELLIPSES = 3000


def tag_colours(tags) -> dict[str, str]:
    """One palette colour per tag, in sorted tag order (the same in every part of the page)."""
    return {t: PALETTE[i % len(PALETTE)] for i, t in enumerate(sorted({str(x) for x in tags}))}


def season_map_html(table: pd.DataFrame, colours: dict[str, str]) -> str:
    """An offline Leaflet map of located fixes with a time filter and per-tag tracks (an HTML fragment)."""
    located = table[table["status"].isin(WITH_POSITION)].copy()
    t = pd.to_datetime(located["time"], utc=True)
    ms = (t.dt.tz_localize(None).to_numpy(dtype="datetime64[ms]").astype(np.int64)).astype(float)
    ms[t.isna().to_numpy()] = np.nan
    located = located.assign(_ms=ms).sort_values(["tag", "_ms"], kind="stable")

    def col(name, digits=None):
        v = pd.to_numeric(located[name], errors="coerce").to_numpy(float) if name in located else \
            np.full(len(located), np.nan)
        v = np.round(v, digits) if digits is not None else v
        return [None if not np.isfinite(x) else float(x) for x in v]

    data = {
        "tag": located["tag"].astype(str).tolist(),
        "fix": located["fix"].astype(str).tolist(),
        "status": located["status"].astype(str).tolist(),
        "t": col("_ms"),
        "lat": col("lat", 7), "lon": col("lon", 7),
        "a": col("semi_major_m", 1), "b": col("semi_minor_m", 1), "o": col("orientation_deg", 1),
    }
    return (f"<style>{_vendor('leaflet.css')}</style>\n<script>{_vendor('leaflet.js')}</script>\n"
            + _MAP_FRAGMENT.replace("__DATA__", _script_json(data))
                           .replace("__COLOURS__", _script_json(colours))
                           .replace("__MAXELL__", str(MAX_ELLIPSES)))


_MAP_FRAGMENT = """
<div class="mapbox">
  <div id="season-map" style="height:480px"></div>
  <div class="timebar">
    <label>from <input type="range" id="t0" min="0" max="1000" value="0"></label>
    <label>to <input type="range" id="t1" min="0" max="1000" value="1000"></label>
    <span id="span-text"></span>
  </div>
</div>
<script>
(function () {
  var D = __DATA__, C = __COLOURS__, MAXELL = __MAXELL__;
  var map = L.map('season-map', {preferCanvas: true, zoomSnap: 0.25});
  var n = D.lat.length, tags = Object.keys(C);
  var tmin = Infinity, tmax = -Infinity;
  for (var i = 0; i < n; i++) { if (D.t[i] !== null) { tmin = Math.min(tmin, D.t[i]); tmax = Math.max(tmax, D.t[i]); } }
  var groups = {}, control = L.control.layers(null, null, {collapsed: false}).addTo(map);
  tags.forEach(function (t) { groups[t] = L.layerGroup().addTo(map); control.addOverlay(groups[t], 'tag ' + t); });
  L.control.scale({imperial: false}).addTo(map);
  function ellipse(i) {
    var pts = [], lat = D.lat[i] * Math.PI / 180, a = D.a[i], b = D.b[i], az = D.o[i] * Math.PI / 180;
    var e2 = 0.00669437999014, w = Math.sqrt(1 - e2 * Math.sin(lat) * Math.sin(lat));
    var N = 6378137 / w, M = 6378137 * (1 - e2) / (w * w * w);
    for (var k = 0; k <= 36; k++) {
      var th = 2 * Math.PI * k / 36, u = a * Math.cos(th), v = b * Math.sin(th);
      var x = u * Math.sin(az) + v * Math.cos(az), y = u * Math.cos(az) - v * Math.sin(az);
      pts.push([D.lat[i] + (y / M) * 180 / Math.PI, D.lon[i] + (x / (N * Math.cos(lat))) * 180 / Math.PI]);
    }
    return pts;
  }
  function fmt(ms) { return new Date(ms).toISOString().slice(0, 16).replace('T', ' ') + ' UTC'; }
  function draw() {
    var f0 = +document.getElementById('t0').value / 1000, f1 = +document.getElementById('t1').value / 1000;
    if (f1 < f0) { var s = f0; f0 = f1; f1 = s; }
    var lo = tmin + f0 * (tmax - tmin), hi = tmin + f1 * (tmax - tmin), shown = [];
    tags.forEach(function (t) { groups[t].clearLayers(); });
    for (var i = 0; i < n; i++) {
      if (D.lat[i] === null || !C[D.tag[i]]) continue;
      if (isFinite(tmin) && D.t[i] !== null && (D.t[i] < lo || D.t[i] > hi)) continue;
      shown.push(i);
    }
    var withEll = shown.length <= MAXELL, track = {};
    shown.forEach(function (i) {
      var c = C[D.tag[i]], ok = D.status[i] === 'ok';
      (track[D.tag[i]] = track[D.tag[i]] || []).push([D.lat[i], D.lon[i]]);
      if (withEll && D.a[i] !== null) {
        L.polygon(ellipse(i), {color: c, weight: 1, fillOpacity: 0.06, dashArray: ok ? null : '4 3'}).addTo(groups[D.tag[i]]);
      }
      var label = document.createElement('span');   // user text as text, never as HTML
      label.textContent = 'tag ' + D.tag[i] + ', fix ' + D.fix[i] + ' (' + D.status[i] + ')';
      L.circleMarker([D.lat[i], D.lon[i]], {radius: 4, color: c, weight: 1.5, fillColor: c, fillOpacity: ok ? 0.9 : 0})
        .bindTooltip(label).addTo(groups[D.tag[i]]);
    });
    Object.keys(track).forEach(function (t) {
      L.polyline(track[t], {color: C[t], weight: 1.5, opacity: 0.6}).addTo(groups[t]);
    });
    document.getElementById('span-text').textContent = isFinite(tmin)
      ? fmt(lo) + ' to ' + fmt(hi) + ': ' + shown.length + ' fixes' + (withEll ? '' : ' (too many to draw ellipses)')
      : shown.length + ' fixes (no times)';
  }
  var b = [Infinity, Infinity, -Infinity, -Infinity];
  for (var j = 0; j < n; j++) {
    if (D.lat[j] === null) continue;
    b = [Math.min(b[0], D.lat[j]), Math.min(b[1], D.lon[j]), Math.max(b[2], D.lat[j]), Math.max(b[3], D.lon[j])];
  }
  if (isFinite(b[0])) { map.fitBounds([[b[0], b[1]], [b[2], b[3]]], {padding: [20, 20]}); } else { map.setView([0, 0], 2); }
  document.getElementById('t0').addEventListener('change', draw);
  document.getElementById('t1').addEventListener('change', draw);
  draw();
})();
</script>
"""
