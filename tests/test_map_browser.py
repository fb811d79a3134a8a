"""The saved folium map in a real browser with no network: no outside request, no script error, every fix drawn.

Uses Debian's Chromium (``apt-get install chromium``) driven by Playwright; never a downloaded browser.
"""

import json
import pathlib
import re
import sqlite3
import zlib
import struct

import numpy as np
import pyproj
import pytest

from dfkit.locate import locate_sheet
from dfkit.maps import fix_map

from .browser import OfflinePage, needs_chromium

ROOT = pathlib.Path(__file__).resolve().parents[1] / "sample_bearings"

pytestmark = needs_chromium

#: Labels and tags that once broke the map, or could: comment and script openers, prototype names,
#: template and spreadsheet syntax, control characters, and a very long label.
HOSTILE = ["<!--<script>", "</script><b>x</b>", "__proto__", "constructor", "=1+1", "{{7*7}}",
           "a\x01b\x07c\x1f", "hasOwnProperty", "L" * 5000, "<img src=x onerror=alert(1)>"]


class Page(OfflinePage):
    """A map page opened offline in Chromium, once dfkit's script has counted what it drew."""

    def __init__(self, pw, path, viewport=(1300, 800)):
        super().__init__(pw, path, viewport)
        self.page.wait_for_function("window.dfkit && window.dfkit.counts && window.dfkit.counts.fix >= 0",
                                    timeout=20000)

    def counts(self):
        return json.loads(self.page.evaluate("JSON.stringify(window.dfkit.counts)"))


@pytest.fixture(scope="module")
def pw():
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        yield p


def _save(m, tmp_path, name="map.html"):
    out = tmp_path / name
    m.save(out)
    return out


def test_week_map_offline(pw, tmp_path):
    fixes = locate_sheet(ROOT / "week_tracking.csv", track=str(ROOT / "week_track.gpx"))
    m = fix_map(fixes, title="week <script>alert(1)</script>", error_polygons=True)
    p = Page(pw, _save(m, tmp_path))
    assert p.outside == [] and p.errors == []
    c = p.counts()
    n_pos = int(fixes.table["lat"].notna().sum())
    assert c["fix"] == n_pos and c["region"] == n_pos
    assert c["bearing"] == c["station"] == len(fixes.bearings)
    assert c["epoly"] > 0
    assert p.page.locator(".leaflet-overlay-pane path").count() == m.n_vectors   # small maps draw SVG paths
    assert p.page.locator("#fixes .fix").count() == len(fixes.table)
    assert p.page.title() == "week <script>alert(1)</script>"             # shown as text, not run
    p.page.locator("path.leaflet-interactive").first.dispatch_event("click")
    assert p.page.locator(".leaflet-popup-content table").count() == 1
    # the legend names every symbol drawn, the error polygons included
    legend = p.page.locator("#dfk-legend").inner_text()
    shape = "likelihood region" if fixes.regions is not None else "confidence ellipse"
    for words in ("fix, status ok", "caveat", shape, "bearing line", "down-weighted", "station",
                  "error polygon", "tag 150.118"):
        assert words in legend
    assert "not for life-safety search" in p.page.locator("#dfk-panel").inner_text()
    assert "not for life-safety search" in p.page.locator(".dfk-map-caution").inner_text()
    assert "Natural Earth" in p.page.locator(".leaflet-control-attribution").inner_text()
    p.page.screenshot(path=str(tmp_path / "week.png"))
    p.browser.close()


def test_scale_bar_clear_of_grid_labels(pw, tmp_path):
    fixes = locate_sheet(ROOT / "week_tracking.csv", track=str(ROOT / "week_track.gpx"))
    p = Page(pw, _save(fix_map(fixes), tmp_path))
    boxes = p.page.evaluate("""() => {
        const r = e => { const b = e.getBoundingClientRect(); return [b.left, b.top, b.right, b.bottom]; };
        return { scale: r(document.querySelector('.leaflet-control-scale')),
                 readout: r(document.querySelector('.leaflet-control-mouseposition')),
                 labels: [...document.querySelectorAll('.dfk-grid-label')].map(r) }; }""")
    assert len(boxes["labels"]) >= 4

    def overlap(a, b):
        return a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3]
    for lab in boxes["labels"]:
        assert not overlap(lab, boxes["scale"]) and not overlap(lab, boxes["readout"])
    p.browser.close()


def test_hostile_labels_render_every_fix(pw, tmp_path, write_sheet):
    rows = ["fix,tag,lat,lon,bearing,sd,note"]
    for k, label in enumerate(HOSTILE):
        tag = HOSTILE[(k + 3) % len(HOSTILE)]
        lat = 47.0 + 0.05 * k
        q = '"' + label.replace('"', '""') + '"'
        qt = '"' + tag.replace('"', '""') + '"'
        rows.append(f'{q},{qt},{lat},15.00,45,3,"{label[:20]}"')
        rows.append(f'{q},{qt},{lat},15.02,315,3,')
    sheet = write_sheet("\n".join(rows) + "\n")
    fixes = locate_sheet(sheet)
    assert len(fixes.table) == len(HOSTILE)
    m = fix_map(fixes, title="<!--<script>")
    page_text = m.html()
    for bad in ("</script><b>", "<!--<script>"):      # not even inside the data
        assert page_text.count(bad) == 0
    p = Page(pw, _save(m, tmp_path))
    assert p.errors == [] and p.outside == []
    assert p.counts()["fix"] == len(HOSTILE)
    items = p.page.locator("#fixes .fix")
    assert items.count() == len(HOSTILE)
    shown = p.page.evaluate("[...document.querySelectorAll('#fixes .fix')].map(d => d.textContent)")
    for label in fixes.table["fix"]:                         # as read (the reader trims edge whitespace)
        assert any(label in s for s in shown), label[:30]   # shown literally, as text
    assert any("{{7*7}}" in s for s in shown)
    assert p.page.locator("#dfk-panel b, img[src='x'], #dfk-panel script").count() == 0
    assert p.page.evaluate("({}).polluted === undefined && Object.prototype.constructor === Object")
    # every tag has a checkbox; switching one off hides exactly its fixes
    toggles = p.page.locator("input.dfk-tag-toggle")
    assert toggles.count() == len(set(fixes.table["tag"]))
    toggles.first.uncheck()
    assert p.counts()["fix"] == len(HOSTILE) - 1
    p.browser.close()


def test_time_filter_and_colour_modes(pw, tmp_path):
    fixes = locate_sheet(ROOT / "week_tracking.csv", track=str(ROOT / "week_track.gpx"))
    p = Page(pw, _save(fix_map(fixes, colour_by="time"), tmp_path))
    times = fixes.table["time"]
    t_lo, t_hi = min(times.min(), fixes.bearings["time"].min()), max(times.max(), fixes.bearings["time"].max())
    # keep the first ~half of the time range: the fixes whose time falls in it (computed here with pandas)
    cut = 500
    limit = t_lo + (t_hi - t_lo) * cut / 1000
    expected = int(((times <= limit + np.timedelta64(500, "ms")) & fixes.table["lat"].notna()).sum())
    p.page.locator("#dfk-time-to").fill(str(cut))
    p.page.locator("#dfk-time-to").dispatch_event("change")
    assert p.counts()["fix"] == expected
    assert 0 < expected < len(fixes.table)
    for mode in ("tag", "observer", "time"):
        p.page.select_option("#dfk-colour-by", mode)
    assert "earliest" in p.page.locator("#dfk-legend").inner_text()
    assert p.errors == []
    p.browser.close()


def test_online_tiles_say_when_they_cannot_load(pw, tmp_path):
    fixes = locate_sheet(ROOT / "animal_fix.csv")
    p = Page(pw, _save(fix_map(fixes), tmp_path))
    p.page.evaluate("""() => { const d = window.dfkit; let online;
        d.bases.forEach((v, k) => { if (k.includes('needs internet')) online = v; });
        d.map.eachLayer(l => { if (l instanceof L.LayerGroup && !(l instanceof L.FeatureGroup)) {} });
        online.addTo(d.map); d.map.fire('baselayerchange', { layer: online }); }""")
    p.page.wait_for_selector(".dfk-notice", state="visible", timeout=10000)
    assert "cannot load" in p.page.locator(".dfk-notice").inner_text() or \
        "offline" in p.page.locator(".dfk-notice").inner_text()
    assert all("openstreetmap" in u for u in p.outside)     # the only requests tried are the online tiles
    p.browser.close()


def _png(rgb):
    """A 1x1 PNG of one colour (PNG specification, W3C 2003: signature, IHDR, IDAT, IEND)."""
    def chunk(kind, data):
        return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF)
    raw = zlib.compress(b"\x00" + bytes(rgb))
    return (b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", struct.pack(">IIBBBBB", 1, 1, 8, 2, 0, 0, 0))
            + chunk(b"IDAT", raw) + chunk(b"IEND", b""))


def test_user_mbtiles_are_embedded_and_drawn(pw, tmp_path):
    fixes = locate_sheet(ROOT / "animal_fix.csv")
    db = tmp_path / "area.mbtiles"
    con = sqlite3.connect(db)
    con.execute("CREATE TABLE tiles (zoom_level INTEGER, tile_column INTEGER, tile_row INTEGER, tile_data BLOB)")
    # MBTiles 1.3 counts rows from the south (TMS): row = 2^z - 1 - y. The data is near 47.87 N, 15.17 E.
    lat, lon = 47.87, 15.17
    for z in range(10, 15):
        n = 2 ** z
        x = int((lon + 180) / 360 * n)
        y = int((1 - np.log(np.tan(np.radians(lat)) + 1 / np.cos(np.radians(lat))) / np.pi) / 2 * n)
        for dx in (-1, 0, 1):
            for dy in (-1, 0, 1):
                con.execute("INSERT INTO tiles VALUES (?, ?, ?, ?)", (z, x + dx, n - 1 - (y + dy), _png((0, 140, 0))))
    con.commit()
    con.close()
    m = fix_map(fixes, tiles=db)
    assert m.notes == []
    p = Page(pw, _save(m, tmp_path))
    # the map opens on the user's tiles, with nothing to click
    assert p.page.evaluate("window.dfkit.base()") == "area.mbtiles (embedded tiles, offline)"
    p.page.wait_for_function("[...document.querySelectorAll('img.leaflet-tile-loaded')].length > 0", timeout=10000)
    # the land of the world outline is not painted over the tiles
    assert p.page.evaluate("""() => { let op = []; window.dfkit.overlays.forEach((v, k) => {
        if (k.startsWith('World')) v.eachLayer(l => op.push(l.options.fillOpacity)); }); return [...new Set(op)]; }""") == [0]
    sizes = p.page.evaluate("[...document.querySelectorAll('img.leaflet-tile-loaded')]"
                            ".filter(i => i.src.startsWith('data:image/png')).map(i => i.naturalWidth)")
    assert len(sizes) > 0 and all(s == 1 for s in sizes)
    assert p.outside == [] and p.errors == []
    p.browser.close()


@pytest.mark.parametrize("a_m, tol_m", [(5_000.0, 0.05), (50_000.0, 5.0)])
def test_page_ellipse_matches_the_ellipsoid(pw, tmp_path, a_m, tol_m):
    # Reference: pyproj's Geod (Karney 2013 geodesics): the exact point at east x, north y from the centre of
    # an azimuthal equidistant plane is the geodesic of length hypot(x, y) at azimuth atan2(x, y).
    fixes = locate_sheet(ROOT / "animal_fix.csv")
    p = Page(pw, _save(fix_map(fixes), tmp_path))
    lat0, lon0, b_m, orient = 60.0, 10.0, 0.4 * a_m, 30.0
    ring = p.page.evaluate(f"window.dfkit.ellipseRing({lat0}, {lon0}, {a_m}, {b_m}, {orient}, 24)")
    t = np.linspace(0, 2 * np.pi, 25)
    u, v = a_m * np.cos(t), b_m * np.sin(t)
    az = np.radians(orient)
    x, y = u * np.sin(az) + v * np.cos(az), u * np.cos(az) - v * np.sin(az)
    geod = pyproj.Geod(ellps="WGS84")
    lon_ref, lat_ref, _ = geod.fwd(np.full(25, lon0), np.full(25, lat0), np.degrees(np.arctan2(x, y)), np.hypot(x, y))
    ring = np.asarray(ring)
    _, _, miss = geod.inv(ring[:, 1], ring[:, 0], lon_ref, lat_ref)
    assert np.max(miss) < tol_m
    p.browser.close()


def test_without_own_tiles_the_map_opens_on_the_plain_background(pw, tmp_path):
    p = Page(pw, _save(fix_map(locate_sheet(ROOT / "animal_fix.csv")), tmp_path))
    assert p.page.evaluate("window.dfkit.base()") == "Plain background (offline)"
    p.browser.close()


def test_coordinate_readout_shows_the_map_centre_until_a_pointer_is_on_the_map(pw, tmp_path):
    p = Page(pw, _save(fix_map(locate_sheet(ROOT / "animal_fix.csv")), tmp_path))
    box = p.page.locator(".leaflet-control-mouseposition")
    p.page.wait_for_function("document.querySelector('.leaflet-control-mouseposition').textContent.length > 0")

    def shown():
        text = box.inner_text()
        return text, [float(v) for v in re.findall(r"-?\d+\.\d+", text)]

    def centre():
        return p.page.evaluate("(() => { const c = window.dfkit.map.getCenter(); return [c.lat, c.lng]; })()")

    text, (lat, lon) = shown()
    assert "Unavailable" not in text and text.startswith("map centre")
    assert (lat, lon) == pytest.approx(centre(), abs=1e-6)
    p.page.evaluate("window.dfkit.map.panBy([200, 100], {animate: false})")
    p.page.wait_for_function("!document.querySelector('.leaflet-control-mouseposition').textContent"
                             f".includes('{text.split()[-1]}')")
    assert shown()[1] == pytest.approx(centre(), abs=1e-6)
    # a pointer over the map: its own position (not the centre); off the map: the centre again
    r = p.page.locator("#" + p.page.evaluate("window.dfkit.map.getContainer().id")).bounding_box()
    p.page.mouse.move(r["x"] + 0.3 * r["width"], r["y"] + 0.6 * r["height"])
    text, (lat, lon) = shown()
    assert text.startswith("lat, lon")
    pointer = p.page.evaluate(f"(() => {{ const q = window.dfkit.map.containerPointToLatLng([{0.3 * r['width']}, "
                              f"{0.6 * r['height']}]); return [q.lat, q.lng]; }})()")
    assert (lat, lon) == pytest.approx(pointer, abs=1e-5)
    p.page.mouse.move(r["x"] + r["width"] + 50, r["y"] + 10)
    p.page.wait_for_function("document.querySelector('.leaflet-control-mouseposition').textContent"
                             ".startsWith('map centre')", timeout=5000)
    assert p.errors == []
    p.browser.close()
