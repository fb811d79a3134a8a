"""An offline page in Debian's Chromium, for the tests that open dfkit's maps and review pages.

Every request that leaves the file (anything but ``file:``, ``data:`` and ``about:``) is refused and kept in
``outside``; console errors and uncaught script errors are kept in ``errors``. Uses Debian's Chromium
(``apt-get install chromium``) driven by Playwright; never a downloaded browser.
"""

import shutil

import pytest

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
        "--disable-component-update", "--disable-sync", "--no-first-run", "--disable-quic"]
NO_CHROMIUM = "Debian's chromium is not installed (apt-get install chromium); .ci/run installs it"
needs_chromium = pytest.mark.skipif(CHROMIUM is None, reason=NO_CHROMIUM)


class OfflinePage:
    """``path`` opened in a new headless Chromium with the network cut off (``pw``: a sync Playwright)."""

    def __init__(self, pw, path, viewport=(1300, 800)):
        self.outside, self.errors = [], []
        self.browser = pw.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        self.page = self.browser.new_page(viewport={"width": viewport[0], "height": viewport[1]})

        def route(r):
            if r.request.url.startswith(("file:", "data:", "about:")):
                return r.continue_()
            self.outside.append(r.request.url)
            return r.abort()

        self.page.route("**/*", route)
        self.page.on("console", lambda m: self.errors.append(m.text) if m.type == "error" else None)
        self.page.on("pageerror", lambda e: self.errors.append(str(e)))
        self.page.goto(path.as_uri())

    def close(self):
        self.browser.close()
