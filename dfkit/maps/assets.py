"""Vendored web assets, inlined so that a saved map is one file that works with no internet.

Every script and style a map needs is package data under ``dfkit/_vendor`` (each with its licence; checksums
in ``dfkit/_vendor/SHA256SUMS``) or ``dfkit/maps/static``. Elements refer to them by ``dfkit:`` pseudo-links;
when the map is rendered, :func:`inline_links` replaces every link folium placed in the page header by the
file's contents. Links that folium's own plugins use for the same files (their CDN addresses) are
recognised too, so a notebook user who adds ``folium.plugins.MeasureControl()`` to a dfkit map still gets an
offline page. Any other outside link is left in place and reported with a warning: that element will need
the internet.

Images referenced by a style sheet (``url(images/x.png)``) are inlined as ``data:`` URIs.
"""

from __future__ import annotations

import base64
import re
import warnings
from functools import lru_cache
from importlib import resources

#: Pseudo-link -> (package, file), for scripts and styles the maps use.
ASSETS = {
    "dfkit:leaflet.js": ("dfkit._vendor.leaflet", "leaflet.js"),
    "dfkit:leaflet.css": ("dfkit._vendor.leaflet", "leaflet.css"),
    "dfkit:jquery.js": ("dfkit._vendor.jquery", "jquery.min.js"),
    "dfkit:leaflet-measure.js": ("dfkit._vendor.leaflet_measure", "leaflet-measure.min.js"),
    "dfkit:leaflet-measure.css": ("dfkit._vendor.leaflet_measure", "leaflet-measure.css"),
    "dfkit:mouse-position.js": ("dfkit._vendor.mouse_position", "L.Control.MousePosition.js"),
    "dfkit:mouse-position.css": ("dfkit._vendor.mouse_position", "L.Control.MousePosition.css"),
    "dfkit:dfkit-map.js": ("dfkit.maps.static", "dfkit-map.js"),
    "dfkit:dfkit-map.css": ("dfkit.maps.static", "dfkit-map.css"),
}

#: Outside addresses that folium and its plugins use for files we ship (same library; Leaflet 1.9.3 -> 1.9.4).
ALIASES = {
    "https://cdn.jsdelivr.net/npm/leaflet@1.9.3/dist/leaflet.js": "dfkit:leaflet.js",
    "https://cdn.jsdelivr.net/npm/leaflet@1.9.3/dist/leaflet.css": "dfkit:leaflet.css",
    "https://code.jquery.com/jquery-3.7.1.min.js": "dfkit:jquery.js",
    "https://cdnjs.cloudflare.com/ajax/libs/jquery/3.7.1/jquery.min.js": "dfkit:jquery.js",
    "https://cdn.jsdelivr.net/gh/ljagis/leaflet-measure@2.1.7/dist/leaflet-measure.min.js": "dfkit:leaflet-measure.js",
    "https://cdn.jsdelivr.net/gh/ljagis/leaflet-measure@2.1.7/dist/leaflet-measure.min.css":
        "dfkit:leaflet-measure.css",
    "https://cdn.jsdelivr.net/gh/ardhi/Leaflet.MousePosition/src/L.Control.MousePosition.min.js":
        "dfkit:mouse-position.js",
    "https://cdn.jsdelivr.net/gh/ardhi/Leaflet.MousePosition/src/L.Control.MousePosition.min.css":
        "dfkit:mouse-position.css",
}

_URL = re.compile(r"""url\((['"]?)(images/[A-Za-z0-9_@.\-]+\.png)\1\)""")
_SCRIPT_END = re.compile(r"</script|<!--", re.IGNORECASE)
_STYLE_END = re.compile(r"</style", re.IGNORECASE)


def _package_file(package: str, name: str):
    return resources.files(package).joinpath(name)


@lru_cache(maxsize=None)
def text(link: str) -> str:
    """The contents of a script or style named by its ``dfkit:`` link (style images inlined)."""
    package, name = ASSETS[link]
    body = _package_file(package, name).read_text(encoding="utf-8")
    if name.endswith(".css"):
        def data_uri(m):
            raw = _package_file(package, m.group(2)).read_bytes()
            return f"url(data:image/png;base64,{base64.b64encode(raw).decode('ascii')})"
        body = _URL.sub(data_uri, body)
    return body


def inline_script(link: str) -> str:
    body = text(link)
    if _SCRIPT_END.search(body):   # would end the element early or change how the browser parses it
        raise ValueError(f"{link} contains '</script' or '<!--' and cannot be inlined")
    return f"<script>/* {ASSETS[link][1]} */\n{body}\n</script>"


def inline_style(link: str) -> str:
    body = text(link)
    if _STYLE_END.search(body):
        raise ValueError(f"{link} contains '</style' and cannot be inlined")
    return f"<style>/* {ASSETS[link][1]} */\n{body}\n</style>"


class Raw:
    """A page element that renders to fixed text, never through a template engine (folium's MacroElement
    compiles its rendered output as a new template, so text in it that looks like template syntax would run)."""

    def __init__(self, html: str):
        self.html = html

    def render(self, **kwargs) -> str:
        return self.html


def inline_links(figure) -> list[str]:
    """Replace the script and style links in a rendered folium figure's header by inline copies.

    Returns the outside addresses that remain (the page needs the internet for them); each is also warned
    about.
    """
    from branca.element import CssLink, JavascriptLink

    remaining = []
    header = figure.header
    for name, child in list(header._children.items()):
        if isinstance(child, (JavascriptLink, CssLink)):
            link = ALIASES.get(child.url, child.url)
            if link in ASSETS:
                inline = inline_script(link) if isinstance(child, JavascriptLink) else inline_style(link)
                header._children[name] = Raw(inline)
            else:
                remaining.append(child.url)
    for url in remaining:
        warnings.warn(f"this map loads {url} from the internet: it will not work offline", stacklevel=3)
    return remaining
