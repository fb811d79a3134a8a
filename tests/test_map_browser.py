"""The saved map in a real browser with no network: no outside request, no JavaScript error, shapes drawn.

Uses Debian's Chromium (``apt-get install chromium``) driven by Playwright; never a downloaded browser.
"""

import pathlib
import shutil

import pytest

from dfkit.locate import locate_sheet
from dfkit.maps import fix_map

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
        "--disable-component-update", "--disable-sync", "--no-first-run", "--disable-quic"]

pytestmark = pytest.mark.skipif(CHROMIUM is None, reason="Debian's chromium is not installed "
                                "(apt-get install chromium); .ci/run installs it")


def _open(path: pathlib.Path):
    from playwright.sync_api import sync_playwright

    outside, errors = [], []
    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        page = browser.new_page()

        def route(r):
            if r.request.url.startswith(("file:", "data:", "about:")):
                return r.continue_()
            outside.append(r.request.url)
            return r.abort()

        page.route("**/*", route)
        page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
        page.on("pageerror", lambda e: errors.append(str(e)))
        page.goto(path.as_uri())
        page.wait_for_selector("path.leaflet-interactive", state="attached", timeout=15000)
        n_paths = page.locator("path.leaflet-interactive").count()
        panel = page.locator("#fixes .fix").count()
        page.locator("path.leaflet-interactive").first.dispatch_event("click")
        popup = page.locator(".leaflet-popup-content").count()
        injected = page.locator("img[src='x'], #panel b, .leaflet-popup-content script").count()
        assert injected == 0, "user text was interpreted as HTML"
        page.screenshot(path=str(path.with_suffix(".png")))
        browser.close()
    return outside, errors, n_paths, panel, popup


def test_map_works_offline(tmp_path):
    root = pathlib.Path(__file__).resolve().parents[1] / "sample_bearings"
    fixes = locate_sheet(root / "week_tracking.csv", track=str(root / "week_track.gpx"))
    m = fix_map(fixes, title="week <script>alert(1)</script>")
    out = tmp_path / "map.html"
    m.save(out)
    outside, errors, n_paths, panel, popup = _open(out)
    assert outside == []
    assert errors == []
    assert n_paths == m.n_vectors          # every fix, ellipse, bearing line and station is drawn
    assert panel == len(fixes.table)       # every fix is listed with its status
    assert popup == 1


def test_map_escapes_user_text(tmp_path, write_sheet):
    sheet = write_sheet('fix,tag,lat,lon,bearing,sd,note\n"<img src=x onerror=alert(1)>",'
                        '"</script><b>t</b>",47,15,45,3,"<script>bad()</script>"\n'
                        '"<img src=x onerror=alert(1)>","</script><b>t</b>",47,15.02,315,3,\n')
    m = fix_map(locate_sheet(sheet))
    page = m.html()
    assert "</script><b>" not in page     # cannot close the data script early
    out = tmp_path / "x.html"
    m.save(out)
    outside, errors, n_paths, panel, popup = _open(out)
    assert outside == [] and errors == [] and panel == 1
