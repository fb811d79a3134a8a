/* dfkit map: draws fixes, regions, bearings and stations from a columnar payload onto a Leaflet map,
   with a side panel (legend, filters, every fix with its status and reason), a graticule, an offline
   world background and embedded or online tiles.

   Safety: user text (labels, tags, notes, reasons) only ever reaches the page through textContent, and is
   never used as an object key: lookups are arrays indexed by integers or Map objects. */
(function () {
  "use strict";

  // Our own colour-blind-checked palette (tools/design_palette.py) and time ramp.
  var PALETTE = ["#1e64ce", "#e97b1b", "#762025", "#4ab3fb", "#a95421", "#5e2883", "#9f1757", "#3f16cb"];
  var RAMP = ["#232562", "#4b3464", "#733c6d", "#a23b72", "#b66269", "#ce825a", "#e8a33c"];
  var NEUTRAL = "#3a3a3a";
  var WGS84_A = 6378137.0, WGS84_F = 1 / 298.257223563, E2 = WGS84_F * (2 - WGS84_F);

  function el(tag, cls, text) {
    var e = document.createElement(tag);
    if (cls) e.className = cls;
    if (text != null) e.textContent = String(text);
    return e;
  }

  function hexToRgb(h) { return [parseInt(h.slice(1, 3), 16), parseInt(h.slice(3, 5), 16), parseInt(h.slice(5, 7), 16)]; }
  function rampColour(f) {
    if (!(f >= 0)) f = 0;
    if (f > 1) f = 1;
    var x = f * (RAMP.length - 1), k = Math.min(Math.floor(x), RAMP.length - 2), u = x - k;
    var a = hexToRgb(RAMP[k]), b = hexToRgb(RAMP[k + 1]);
    return "rgb(" + [0, 1, 2].map(function (i) { return Math.round(a[i] + (b[i] - a[i]) * u); }).join(",") + ")";
  }

  /* Ellipse ring drawn by the page: each vertex (x east, y north [m] in the fix's azimuthal equidistant plane)
     is the geodesic of length hypot(x, y) at azimuth atan2(x, y), computed as a great circle on the sphere of
     the prime-vertical radius N at the fix, with the change of latitude scaled by N/M (M: meridian radius).
     Checked against Karney's geodesics (tests): within 0.02 m for a 5 km axis and 2 m for 50 km; larger
     ellipses are sent as exact rings. */
  function ellipseRing(lat0, lon0, a, b, orientDeg, n) {
    var phi = lat0 * Math.PI / 180, sp = Math.sin(phi), cp = Math.cos(phi), w = Math.sqrt(1 - E2 * sp * sp);
    var M = WGS84_A * (1 - E2) / (w * w * w), N = WGS84_A / w;
    var az = orientDeg * Math.PI / 180, out = [];
    for (var k = 0; k <= n; k++) {
      var t = 2 * Math.PI * k / n, u = a * Math.cos(t), v = b * Math.sin(t);
      var x = u * Math.sin(az) + v * Math.cos(az), y = u * Math.cos(az) - v * Math.sin(az);
      var d = Math.sqrt(x * x + y * y) / N, al = Math.atan2(x, y);
      var p2 = Math.asin(sp * Math.cos(d) + cp * Math.sin(d) * Math.cos(al));
      var dl = Math.atan2(Math.sin(al) * Math.sin(d) * cp, Math.cos(d) - sp * Math.sin(p2));
      out.push([lat0 + (p2 - phi) * (N / M) * 180 / Math.PI, lon0 + dl * 180 / Math.PI]);
    }
    return out;
  }

  function offsets(lat0, lon0, flat) {
    var out = [];
    for (var k = 0; k + 1 < flat.length; k += 2) out.push([lat0 + flat[k] / 1e6, lon0 + flat[k + 1] / 1e6]);
    return out;
  }

  function fmtTime(t0, s) {
    if (s == null) return "";
    return new Date((t0 + s) * 1000).toISOString().replace("T", " ").slice(0, 19) + " UTC";
  }
  function fmtNum(v, scale, d) { return v == null ? "" : (v / scale).toFixed(d); }

  function table(rows) {
    var t = el("table", "dfk-popup");
    rows.forEach(function (r) {
      if (r[1] === "" || r[1] == null) return;
      var tr = el("tr");
      tr.appendChild(el("td", null, r[0]));
      tr.appendChild(el("td", null, r[1]));
      t.appendChild(tr);
    });
    return t;
  }

  function legendIcon(kind, colour, dashed) {
    // Static SVG of our own symbols; colours come from our palette only.
    var ns = "http://www.w3.org/2000/svg", svg = document.createElementNS(ns, "svg");
    svg.setAttribute("width", "26"); svg.setAttribute("height", "14"); svg.setAttribute("class", "dfk-sym");
    var s;
    if (kind === "fix" || kind === "fix-flagged") {
      s = document.createElementNS(ns, "circle");
      s.setAttribute("cx", "13"); s.setAttribute("cy", "7"); s.setAttribute("r", "5");
      s.setAttribute("fill", kind === "fix" ? colour : "#ffffff");
      s.setAttribute("stroke", colour); s.setAttribute("stroke-width", "2.5");
    } else if (kind === "station") {
      s = document.createElementNS(ns, "circle");
      s.setAttribute("cx", "13"); s.setAttribute("cy", "7"); s.setAttribute("r", "3");
      s.setAttribute("fill", "#ffffff"); s.setAttribute("stroke", colour); s.setAttribute("stroke-width", "1.5");
    } else if (kind === "line") {
      s = document.createElementNS(ns, "line");
      s.setAttribute("x1", "1"); s.setAttribute("y1", "7"); s.setAttribute("x2", "25"); s.setAttribute("y2", "7");
      s.setAttribute("stroke", colour); s.setAttribute("stroke-width", dashed ? "1" : "1.5");
      if (dashed) s.setAttribute("stroke-dasharray", "4 3");
    } else {   // region-like: ellipse, region, error polygon
      s = document.createElementNS(ns, "ellipse");
      s.setAttribute("cx", "13"); s.setAttribute("cy", "7"); s.setAttribute("rx", "11"); s.setAttribute("ry", "5");
      s.setAttribute("fill", colour); s.setAttribute("fill-opacity", kind === "epoly" ? "0.08" : "0.15");
      s.setAttribute("stroke", colour); s.setAttribute("stroke-width", kind === "epoly" ? "1" : "2");
      if (dashed) s.setAttribute("stroke-dasharray", kind === "epoly" ? "2 3" : "5 3");
    }
    svg.appendChild(s);
    return svg;
  }

  /* ---------------------------------------------------------------- background */

  function addWorld(map, world, pane) {
    var layer = L.geoJSON(world, {
      pane: pane, interactive: false, attribution: "Made with Natural Earth",
      style: function () { return { color: "#9a9a9a", weight: 0.8, fillColor: "#f4f2ec", fillOpacity: 1 }; }
    });
    return layer;
  }

  function addGrid(map, pane) {
    var grid = L.layerGroup();
    var STEPS = [30, 10, 5, 2, 1, 0.5, 0.2, 0.1, 0.05, 0.02, 0.01, 0.005, 0.002, 0.001, 0.0005, 0.0002, 0.0001];
    var opts = { color: "#9a9a9a", weight: 0.6, opacity: 0.7, interactive: false, pane: pane };
    function label(latlng, text, anchor) {
      return L.marker(latlng, { interactive: false, keyboard: false, pane: pane,
        icon: L.divIcon({ className: "dfk-grid-label", html: "", iconSize: null, iconAnchor: anchor }) })
        .on("add", function (e) { var n = e.target.getElement(); if (n) n.textContent = text; });
    }
    function draw() {
      grid.clearLayers();
      if (!map.hasLayer(grid)) return;
      var bb = map.getBounds(), size = map.getSize();
      var span = Math.max(bb.getNorth() - bb.getSouth(), 1e-6), step = STEPS[0];
      for (var i = 0; i < STEPS.length; i++) { if (span / STEPS[i] <= 8) step = STEPS[i]; }
      var d = Math.max(0, -Math.floor(Math.log10(step)) + 1);
      var w = Math.floor(bb.getWest() / step) * step, e = bb.getEast();
      var s = Math.max(-90, Math.floor(bb.getSouth() / step) * step), n = Math.min(90, bb.getNorth());
      // Longitude labels along the top edge, latitude labels along the left edge; none in the corners
      // where the zoom buttons (top left) and the scale bar and readout (bottom left) sit.
      var topLeft = map.containerPointToLatLng([0, 0]);
      for (var x = w; x <= e; x += step) {
        grid.addLayer(L.polyline([[s, x], [n, x]], opts));
        var px = map.latLngToContainerPoint([bb.getNorth(), x]).x;
        if (px > 60 && px < size.x - 70)
          grid.addLayer(label([topLeft.lat, x], (((x + 540) % 360) - 180).toFixed(d) + "\u00b0", [-3, -3]));
      }
      for (var y = s; y <= n; y += step) {
        grid.addLayer(L.polyline([[y, w], [y, e]], opts));
        var py = map.latLngToContainerPoint([y, bb.getWest()]).y;
        if (py > 140 && py < size.y - 90)
          grid.addLayer(label([y, topLeft.lng], y.toFixed(d) + "\u00b0", [-3, 12]));
      }
    }
    map.on("moveend zoomend resize", draw);
    grid.on("add", function () { setTimeout(draw, 0); });
    grid.redraw = draw;
    return grid;
  }

  function embeddedTiles(spec) {
    var tiles = new Map();
    spec.tiles.forEach(function (t) { tiles.set(t[0], t[1]); });
    var BLANK = "data:image/gif;base64,R0lGODlhAQABAIAAAAAAAP///yH5BAEAAAAALAAAAAABAAEAAAIBRAA7";
    var Layer = L.TileLayer.extend({
      getTileUrl: function (c) { return tiles.get(c.z + "/" + c.x + "/" + c.y) || BLANK; }
    });
    return new Layer("", { minNativeZoom: spec.min_zoom, maxNativeZoom: spec.max_zoom, minZoom: 0, maxZoom: 22,
                           attribution: "" });
  }

  /* ---------------------------------------------------------------- the data layer */

  function FixLayer(map, D, env) {
    var F = D.fix, B = D.brg, R = D.rings, EP = D.epoly, O = D.options;
    var nF = F.label.length, nB = B.fix.length;
    var renderer = O.canvas ? L.canvas({ padding: 0.3 }) : L.svg();
    var state = { colourBy: O.colour_by || "tag", kinds: { fix: true, region: true, bearing: !!O.bearings,
                  station: !!O.bearings, epoly: !!O.error_polygons }, tagOn: F.label.length ? [] : [],
                  tmin: null, tmax: null, onlyFlagged: false };
    D.tags.forEach(function () { state.tagOn.push(true); });
    var okCode = D.statuses.indexOf("ok");
    var withPos = [];
    for (var i = 0; i < nF; i++) withPos.push(F.lat[i] != null);

    // time range of everything with a time
    var tLo = Infinity, tHi = -Infinity;
    F.t.concat(B.t).forEach(function (s) { if (s != null) { if (s < tLo) tLo = s; if (s > tHi) tHi = s; } });
    var hasTime = tLo <= tHi;
    state.tmin = tLo; state.tmax = tHi;

    function colourOf(tagIdx, t, obs) {
      if (state.colourBy === "time") return t == null ? NEUTRAL : rampColour(tHi > tLo ? (t - tLo) / (tHi - tLo) : 0);
      if (state.colourBy === "observer") return obs == null ? NEUTRAL : PALETTE[obs % PALETTE.length];
      return PALETTE[tagIdx % PALETTE.length];
    }
    function fixColour(i) { return colourOf(F.tag[i], F.t[i], null); }
    function flagged(i) { return F.status[i] !== okCode; }

    function fixPopup(i) {
      var st = D.statuses[F.status[i]];
      var ell = F.a[i] == null ? (regionOf[i] != null ? D.rings.kind + " drawn (see map)" : "none") :
        fmtNum(F.a[i], 10, 0) + " \u00d7 " + fmtNum(F.b[i], 10, 0) + " m, major axis " + fmtNum(F.or[i], 10, 0) + "\u00b0";
      return table([["fix", F.label[i]], ["tag", D.tags[F.tag[i]]], ["status", st], ["meaning", D.meaning[F.status[i]]],
        ["why", F.reason[i]], ["time", fmtTime(D.t0, F.t[i])],
        ["lat, lon", F.lat[i] == null ? "no position" : (F.lat[i] / 1e6).toFixed(6) + ", " + (F.lon[i] / 1e6).toFixed(6)],
        ["bearings", F.nb[i] + " (" + F.nu[i] + " used)"], ["method", F.method[i]],
        ["bearing SD", F.sd[i] == null ? "" : fmtNum(F.sd[i], 100, 2) + "\u00b0 (" + D.sd_sources[F.sds[i]] + ")"],
        [Math.round(100 * D.level) + "% region", ell],
        ["crossing angle", F.cross[i] == null ? "" : fmtNum(F.cross[i], 10, 0) + "\u00b0"],
        ["largest residual", F.res[i] == null ? "" : fmtNum(F.res[i], 10, 1) + "\u00b0"],
        ["wild risk", F.wild == null || F.wild[i] == null ? "" : fmtNum(F.wild[i], 10, 1) + " %" +
          (F.rl && F.rl[i] != null && F.rl[i] > Math.round(10000 * D.level) ?
            " (region drawn at " + fmtNum(F.rl[i], 100, 1) + " % to allow for it)" : "")]]);
    }
    function bearingPopup(j) {
      var i = B.fix[j];
      return table([["fix", F.label[i]], ["tag", D.tags[F.tag[i]]], ["line in sheet", B.line[j]],
        ["time", fmtTime(D.t0, B.t[j])], ["true bearing", fmtNum(B.az[j], 10, 1) + "\u00b0"],
        ["residual", B.res[j] == null ? "" : fmtNum(B.res[j], 10, 1) + "\u00b0"],
        ["weight", B.w[j] == null ? "" : fmtNum(B.w[j], 100, 2)], ["observer", D.observers[B.obs[j]]],
        ["note", D.notes[B.note[j]]]]);
    }

    // layers, created lazily; one group per kind
    var groups = { fix: L.featureGroup(), region: L.featureGroup(), bearing: L.featureGroup(),
                   station: L.featureGroup(), epoly: L.featureGroup() };
    var fixL = new Array(nF), regL = new Array(nF), brgL = new Array(nB), staL = new Array(nB);
    var epL = new Array(EP.fix.length);
    var regionOf = new Array(nF);          // index into R.ring, when the fix has an exact ring
    R.fix.forEach(function (i, k) { (regionOf[i] = regionOf[i] || []).push(k); });
    var ellN = nF > 5000 ? 32 : 64;       // simpler rings on big maps

    function makeFix(i) {
      var c = fixColour(i), lay = L.circleMarker([F.lat[i] / 1e6, F.lon[i] / 1e6], {
        renderer: renderer, radius: 6, color: c, weight: 2.5, fillColor: flagged(i) ? "#ffffff" : c, fillOpacity: 1 });
      lay.bindPopup(function () { return fixPopup(i); });
      return lay;
    }
    function regionStyle(i) {
      var c = fixColour(i);
      return { renderer: renderer, color: c, weight: 2, fillColor: c, fillOpacity: 0.12, smoothFactor: 0.3,
               dashArray: flagged(i) ? "6 4" : null };
    }
    function makeRegion(i) {
      var rings = [];
      var la = F.lat[i] / 1e6, lo = F.lon[i] / 1e6;
      if (regionOf[i]) regionOf[i].forEach(function (k) { rings.push(offsets(la, lo, R.ring[k])); });
      else if (F.a[i] != null) rings.push(ellipseRing(la, lo, F.a[i] / 10, F.b[i] / 10, F.or[i] / 10, ellN));
      if (!rings.length) return null;
      var lay = L.polygon(rings, regionStyle(i));
      lay.bindPopup(function () { return fixPopup(i); });
      return lay;
    }
    function bearingColour(j) { return colourOf(F.tag[B.fix[j]], B.t[j], B.obs[j]); }
    function makeBearing(j) {
      var la = B.lat[j] / 1e6, lo = B.lon[j] / 1e6;
      var pts = [[la, lo]].concat(offsets(la, lo, B.path[j]));
      var low = B.w[j] != null && B.w[j] < 50;
      var lay = L.polyline(pts, { renderer: renderer, color: bearingColour(j), weight: low ? 1 : 1.5,
                                  opacity: 0.75, dashArray: low ? "4 3" : null });
      lay.bindPopup(function () { return bearingPopup(j); });
      return lay;
    }
    function makeStation(j) {
      var lay = L.circleMarker([B.lat[j] / 1e6, B.lon[j] / 1e6], { renderer: renderer, radius: 3,
        color: bearingColour(j), weight: 1.5, fillColor: "#ffffff", fillOpacity: 1 });
      lay.bindPopup(function () { return bearingPopup(j); });
      return lay;
    }
    function makeEpoly(k) {
      var i = EP.fix[k];
      return L.polygon(offsets(F.lat[i] / 1e6, F.lon[i] / 1e6, EP.ring[k]), { renderer: renderer, color: "#555555",
        weight: 1, dashArray: "2 3", fillOpacity: 0.05, interactive: false });
    }

    function inTime(s) { return s == null || (s >= state.tmin && s <= state.tmax); }
    function fixVisible(i) {
      return withPos[i] && state.tagOn[F.tag[i]] && inTime(F.t[i]) && (!state.onlyFlagged || flagged(i));
    }
    function sync(kind, arr, n, visible, make) {
      var g = groups[kind], on = state.kinds[kind], drawn = 0;
      for (var k = 0; k < n; k++) {
        var want = on && visible(k);
        if (want && !arr[k]) arr[k] = make(k) || false;
        var lay = arr[k];
        if (!lay) continue;
        var has = g.hasLayer(lay);
        if (want && !has) g.addLayer(lay);
        else if (!want && has) g.removeLayer(lay);
        if (want) drawn++;
      }
      return drawn;
    }
    var counts = {};
    function refresh() {
      counts.fix = sync("fix", fixL, nF, fixVisible, makeFix);
      counts.region = sync("region", regL, nF, fixVisible, makeRegion);
      counts.bearing = sync("bearing", brgL, nB, function (j) {
        var i = B.fix[j]; return state.tagOn[F.tag[i]] && inTime(B.t[j]) && (!state.onlyFlagged || flagged(i)); }, makeBearing);
      counts.station = sync("station", staL, nB, function (j) {
        var i = B.fix[j]; return state.tagOn[F.tag[i]] && inTime(B.t[j]) && (!state.onlyFlagged || flagged(i)); }, makeStation);
      counts.epoly = sync("epoly", epL, EP.fix.length, function (k) { return fixVisible(EP.fix[k]); }, makeEpoly);
      groups.fix.bringToFront();
      if (env.onRefresh) env.onRefresh(counts);
    }
    function recolour() {
      fixL.forEach(function (l, i) { if (l) l.setStyle({ color: fixColour(i), fillColor: flagged(i) ? "#ffffff" : fixColour(i) }); });
      regL.forEach(function (l, i) { if (l) l.setStyle(regionStyle(i)); });
      brgL.forEach(function (l, j) { if (l) l.setStyle({ color: bearingColour(j) }); });
      staL.forEach(function (l, j) { if (l) l.setStyle({ color: bearingColour(j) }); });
    }

    ["epoly", "region", "bearing", "station", "fix"].forEach(function (k) { groups[k].addTo(map); });
    refresh();

    function bounds() {
      var b = L.latLngBounds([]);
      for (var i = 0; i < nF; i++) if (withPos[i]) b.extend([F.lat[i] / 1e6, F.lon[i] / 1e6]);
      for (var j = 0; j < nB; j++) b.extend([B.lat[j] / 1e6, B.lon[j] / 1e6]);
      return b;
    }
    function focus(i) {
      if (!withPos[i]) return;
      if (!fixVisible(i)) { state.tagOn[F.tag[i]] = true; state.tmin = tLo; state.tmax = tHi; refresh(); }
      var ll = [F.lat[i] / 1e6, F.lon[i] / 1e6];
      map.setView(ll, Math.max(map.getZoom(), 15));
      if (fixL[i]) fixL[i].openPopup();
    }
    return { state: state, refresh: refresh, recolour: recolour, bounds: bounds, focus: focus, counts: counts,
             tRange: [tLo, tHi], hasTime: hasTime, colourOf: colourOf, flagged: flagged, withPos: withPos };
  }

  /* ---------------------------------------------------------------- panel */

  function buildPanel(root, D, layer, map) {
    var F = D.fix, O = D.options;
    root.appendChild(el("h1", null, D.title));
    // counts by status
    var counts = new Map();
    F.status.forEach(function (s) { counts.set(s, (counts.get(s) || 0) + 1); });
    var parts = [];
    counts.forEach(function (n, s) { parts.push(n + " " + D.statuses[s]); });
    root.appendChild(el("p", "dfk-counts", count(F.label.length, "fix", "fixes") + ": " + parts.join(", ") +
      (O.n_bearings ? "; " + count(O.n_bearings, "bearing", "bearings") : "")));
    D.messages.forEach(function (m) { root.appendChild(el("p", "dfk-message", m)); });

    // controls
    var ctl = el("div", "dfk-controls");
    var sel = el("select"); sel.id = "dfk-colour-by";
    [["tag", "colour by tag"], ["time", "colour by time (round / day)"], ["observer", "colour by observer (bearings)"]]
      .forEach(function (o) { var op = el("option", null, o[1]); op.value = o[0]; sel.appendChild(op); });
    sel.value = layer.state.colourBy;
    sel.addEventListener("change", function () { layer.state.colourBy = sel.value; layer.recolour(); legend(); });
    ctl.appendChild(sel);
    var kinds = [["fix", "fixes"], ["region", D.rings.kind === "region" ? "likelihood regions" : "confidence ellipses"],
                 ["bearing", "bearing lines"], ["station", "stations"]];
    if (O.error_polygons) kinds.push(["epoly", "error polygons"]);
    var kbox = el("div", "dfk-kinds");
    kinds.forEach(function (k) {
      var lab = el("label"), cb = el("input"); cb.type = "checkbox"; cb.checked = !!layer.state.kinds[k[0]];
      cb.setAttribute("data-kind", k[0]);
      cb.addEventListener("change", function () { layer.state.kinds[k[0]] = cb.checked; layer.refresh(); });
      lab.appendChild(cb); lab.appendChild(document.createTextNode(" " + k[1])); kbox.appendChild(lab);
    });
    if (!O.bearings && O.n_bearings > O.bearings_shown_max)
      kbox.appendChild(el("div", "dfk-hint", O.n_bearings + " bearings: switched off to keep the map quick; tick to show."));
    ctl.appendChild(kbox);
    var only = el("label"), ocb = el("input"); ocb.type = "checkbox"; ocb.id = "dfk-only-flagged";
    ocb.addEventListener("change", function () { layer.state.onlyFlagged = ocb.checked; layer.refresh(); filterList(); });
    only.appendChild(ocb); only.appendChild(document.createTextNode(" only fixes that are not ok"));
    ctl.appendChild(only);

    // time filter
    if (layer.hasTime && layer.tRange[1] > layer.tRange[0]) {
      var tf = el("div", "dfk-time"), lo = el("input"), hi = el("input"), txt = el("div", "dfk-time-text");
      [lo, hi].forEach(function (r) { r.type = "range"; r.min = "0"; r.max = "1000"; r.step = "1"; });
      lo.value = "0"; hi.value = "1000"; lo.id = "dfk-time-from"; hi.id = "dfk-time-to";
      var a = layer.tRange[0], span = layer.tRange[1] - layer.tRange[0];
      var update = function () {
        var x = Math.min(+lo.value, +hi.value), y = Math.max(+lo.value, +hi.value);
        layer.state.tmin = a + span * x / 1000 - 0.5; layer.state.tmax = a + span * y / 1000 + 0.5;
        txt.textContent = "from " + fmtTime(D.t0, layer.state.tmin + 0.5) + " to " + fmtTime(D.t0, layer.state.tmax - 0.5);
      };
      var apply = function () { update(); layer.refresh(); filterList(); };
      lo.addEventListener("input", update); hi.addEventListener("input", update);
      lo.addEventListener("change", apply); hi.addEventListener("change", apply);
      tf.appendChild(el("div", "dfk-sub", "Time filter")); tf.appendChild(lo); tf.appendChild(hi); tf.appendChild(txt);
      update();
      ctl.appendChild(tf);
    }
    root.appendChild(ctl);

    // legend
    var leg = el("div", "dfk-legend"); leg.id = "dfk-legend";
    root.appendChild(leg);
    function row(icon, text) { var r = el("div", "dfk-leg-row"); r.appendChild(icon); r.appendChild(el("span", null, text)); leg.appendChild(r); }
    function legend() {
      leg.textContent = "";
      leg.appendChild(el("div", "dfk-sub", "Legend"));
      row(legendIcon("fix", NEUTRAL), "fix, status ok");
      row(legendIcon("fix-flagged", NEUTRAL), "fix with a caveat (status other than ok)");
      var regName = D.rings.kind === "region" ? "likelihood region" : "confidence ellipse";
      row(legendIcon("region", NEUTRAL), Math.round(100 * D.level) + "% " + regName);
      row(legendIcon("region", NEUTRAL, true), regName + " of a fix with a caveat");
      row(legendIcon("line", NEUTRAL), "bearing line (geodesic)");
      row(legendIcon("line", NEUTRAL, true), "bearing down-weighted by the fit (weight < 0.5)");
      row(legendIcon("station", NEUTRAL), "station (small ring): where a bearing was taken");
      if (O.error_polygons) row(legendIcon("epoly", "#555555", true), "error polygon (\u00b11 SD wedges; no probability meaning)");
      var failed = 0;
      for (var i = 0; i < F.label.length; i++) if (!layer.withPos[i]) failed++;
      if (failed) leg.appendChild(el("div", "dfk-hint", failed + " failed fixes have no position and are not drawn; they are listed below with the reason."));
      var cb = layer.state.colourBy;
      leg.appendChild(el("div", "dfk-sub", cb === "tag" ? "Colours: tags" : cb === "time" ? "Colours: time" : "Colours: observers"));
      if (cb === "time") {
        var bar = el("div", "dfk-ramp");
        bar.style.background = "linear-gradient(to right," + RAMP.join(",") + ")";
        leg.appendChild(bar);
        leg.appendChild(el("div", "dfk-hint", "earliest " + fmtTime(D.t0, layer.tRange[0]) + " \u2192 latest " + fmtTime(D.t0, layer.tRange[1])));
      } else {
        var names = cb === "tag" ? D.tags : D.observers;
        if (cb === "observer") leg.appendChild(el("div", "dfk-hint", "fixes in dark grey (a fix has bearings from several observers)"));
        if (names.length > PALETTE.length) leg.appendChild(el("div", "dfk-hint", names.length + " values share " + PALETTE.length + " colours: colours repeat."));
        names.forEach(function (name, k) {
          var r = el("label", "dfk-leg-row"), sw = el("span", "dfk-swatch");
          sw.style.background = PALETTE[k % PALETTE.length];
          if (cb === "tag") {
            var cbx = el("input"); cbx.type = "checkbox"; cbx.checked = layer.state.tagOn[k]; cbx.className = "dfk-tag-toggle";
            cbx.addEventListener("change", function () { layer.state.tagOn[k] = cbx.checked; layer.refresh(); filterList(); });
            r.appendChild(cbx);
          }
          r.appendChild(sw); r.appendChild(el("span", null, (cb === "tag" ? "tag " : "") + (name === "" ? "(none)" : name)));
          leg.appendChild(r);
        });
      }
    }
    legend();

    // every fix with its status and reason
    root.appendChild(el("div", "dfk-sub", "Fixes"));
    var list = el("div"); list.id = "fixes";
    var frag = document.createDocumentFragment(), items = [];
    for (var i = 0; i < F.label.length; i++) {
      var div = el("div", "fix" + (layer.flagged(i) ? " dfk-not-ok" : ""));
      var head = el("div");
      head.appendChild(el("span", "status", D.statuses[F.status[i]]));
      head.appendChild(document.createTextNode(" " + F.label[i]));
      if (D.tags.length > 1 || D.tags[0] !== "") head.appendChild(el("span", "dfk-tag", " tag " + D.tags[F.tag[i]]));
      div.appendChild(head);
      if (F.reason[i]) div.appendChild(el("div", "reason", F.reason[i]));
      if (!layer.withPos[i]) div.appendChild(el("div", "reason", "no position: not drawn"));
      (function (k) { div.addEventListener("click", function () { layer.focus(k); }); })(i);
      frag.appendChild(div); items.push(div);
    }
    list.appendChild(frag);
    root.appendChild(list);
    function filterList() {
      var st = layer.state;
      for (var i = 0; i < items.length; i++) {
        var show = st.tagOn[F.tag[i]] && (!st.onlyFlagged || layer.flagged(i)) &&
                   (F.t[i] == null || (F.t[i] >= st.tmin && F.t[i] <= st.tmax));
        items[i].style.display = show ? "" : "none";
      }
    }
    root.appendChild(el("p", "caution", D.caution));
  }

  function count(n, one, many) { return n + " " + (n === 1 ? one : many); }

  /* ---------------------------------------------------------------- coordinate readout */

  // The pointer readout (Leaflet.MousePosition) has nothing to show until a pointer moves over the map, and
  // phones never move one: while no pointer is over the map it shows the map centre, kept up to date.
  function centreReadout(map) {
    var over = false;
    function show() {
      var box = map.getContainer().querySelector(".leaflet-control-mouseposition");
      if (!box || over) return;
      var c = map.getCenter().wrap();
      box.textContent = "map centre: lat, lon " + L.Util.formatNum(c.lat, 6) + ", " + L.Util.formatNum(c.lng, 6);
    }
    map.on("mousemove", function () { over = true; });
    map.on("mouseout", function () { over = false; show(); });
    map.on("moveend", show);
    setTimeout(show, 0);     // the readout control is added after this script
    return show;
  }

  /* ---------------------------------------------------------------- entry point */

  window.dfkitDraw = function (map, D, env) {
    env = env || {};
    map.createPane("dfkBackground").style.zIndex = 250;
    map.createPane("dfkGrid").style.zIndex = 350;
    map.getPane("dfkGrid").style.pointerEvents = "none";
    var plain = L.layerGroup();
    var bases = new Map(), overlays = new Map();
    bases.set("Plain background (offline)", plain);
    // the map opens on the user's own tiles when they were given, else on the plain background
    var first = plain;
    if (env.userTiles) {
      first = embeddedTiles(env.userTiles);
      bases.set(env.userTiles.name + " (embedded tiles, offline)", first);
    }
    if (env.online) bases.set(env.onlineName, env.online);
    var world = env.world ? addWorld(map, env.world, "dfkBackground") : null;
    if (world) {
      world.addTo(map);
      world.setStyle({ fillOpacity: first === plain ? 1 : 0 });   // land drawn over tiles would hide them
      overlays.set("World outline (Natural Earth 1:110m)", world);
    }
    var grid = addGrid(map, "dfkGrid");
    grid.addTo(map);
    overlays.set("Latitude / longitude grid", grid);

    // notices over the map (online tiles that cannot load, ...)
    var note = L.control({ position: "topright" });
    note.onAdd = function () { var d = L.DomUtil.create("div", "dfk-notice"); d.style.display = "none"; return d; };
    note.addTo(map);
    function notice(text) { var d = note.getContainer(); d.textContent = text; d.style.display = text ? "" : "none"; }
    if (env.online) {
      var failed = false;
      env.online.on("tileerror", function () {
        if (!failed) notice("Online tiles cannot load here (no internet?). The offline background and your data are still shown.");
        failed = true;
      });
      env.online.on("tileload", function () { if (failed) { failed = false; notice(""); } });
      map.on("baselayerchange", function (e) {
        var onl = e.layer === env.online;
        if (onl && navigator.onLine === false) notice("Online tiles need internet; this device is offline.");
        if (!onl) notice("");
        if (world) world.setStyle({ fillOpacity: e.layer === plain ? 1 : 0 });
      });
    }
    map.on("baselayerchange", function (e) { if (world) world.setStyle({ fillOpacity: e.layer === plain ? 1 : 0 }); });
    map.getContainer().style.background = "#dfe7ec";

    var ctlBases = {}, ctlOver = {};
    // Leaflet's layer control takes plain objects; keys are our own fixed names plus the tiles' file name.
    bases.forEach(function (v, k) { Object.defineProperty(ctlBases, k, { value: v, enumerable: true }); });
    overlays.forEach(function (v, k) { Object.defineProperty(ctlOver, k, { value: v, enumerable: true }); });
    L.control.layers(ctlBases, ctlOver, { collapsed: true, position: "topright" }).addTo(map);
    L.control.scale({ metric: true, imperial: false, position: "bottomleft" }).addTo(map);

    var layer = FixLayer(map, D, env);
    var b = layer.bounds();
    if (b.isValid()) map.fitBounds(b.pad(0.15), { maxZoom: 17 }); else map.setView([20, 0], 2);
    first.addTo(map);          // once the map has a view: tiles are chosen for it
    var root = document.getElementById(env.panelId || "dfk-panel");
    if (root) buildPanel(root, D, layer, map);
    grid.redraw();
    var readout = centreReadout(map);
    window.dfkit = { map: map, layer: layer, counts: layer.counts, notice: notice, bases: bases, overlays: overlays,
                     ellipseRing: ellipseRing, base: function () { var on = null;
                       bases.forEach(function (v, k) { if (map.hasLayer(v)) on = k; }); return on; },
                     readout: readout };
    return layer;
  };
})();
