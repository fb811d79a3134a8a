"""Interactive maps of fixes, built with folium, saved as one HTML file that works offline.

:func:`fix_map` returns a :class:`FixMap`: a ``folium.Map`` that shows itself in a notebook, can be extended
with folium elements and plugins, and saves to a single self-contained file (``m.save("map.html")``).

What the map shows (our own visual language):

* each fix as a dot, filled when ``ok``, hollow when it carries a caveat; its confidence ellipse (or
  likelihood region, when the fixes carry one) as an outline with a light fill, dashed for a fix with a
  caveat; bearing lines as thin geodesics (dashed when the fit down-weighted them); stations as small rings;
  error polygons only on request, dotted grey;
* colours by tag, by time (rounds of a hunt, days of a season) or by observer, from a palette of our own
  checked for colour-blind viewers (``tools/design_palette.py``);
* a panel with a legend for every symbol, filters (kinds, tags, a time range, only fixes that are not ok),
  every fix with its status and reason (fixes without a position included), and the cautions;
* an offline background (Natural Earth 1:110m land and borders, public domain), a latitude/longitude grid,
  a scale bar, a coordinate readout (the pointer's position, or the map centre while no pointer is over the
  map) and a distance/area measuring tool; optionally the user's own tiles (embedded; the map opens on them)
  and online tiles, which say so when they cannot load.

Everything the page runs is inlined from package data (:mod:`dfkit.maps.assets`): no request leaves the page.
"""

from __future__ import annotations

import html
import json
import os
from importlib import resources

from dfkit.export.atomic import atomic_write
from dfkit.locate import Fixes
from dfkit.maps import assets, payload
from dfkit.maps.tiles import DEFAULT_BUDGET_BYTES, load_tiles

#: Online tile layer offered (switched off by default): OpenStreetMap's standard tiles.
ONLINE_TILES = "OpenStreetMap"
ONLINE_NAME = "OpenStreetMap (needs internet)"
COLOUR_BY = ("tag", "time", "observer")


def _folium():
    try:
        import folium
        import folium.plugins
    except ImportError as err:  # pragma: no cover - folium is a dependency
        raise ImportError("dfkit.maps needs folium: pip install folium") from err
    return folium


def world_geojson() -> dict:
    """The bundled Natural Earth 1:110m countries (simplified; see ``dfkit/_vendor/naturalearth``)."""
    path = resources.files("dfkit._vendor.naturalearth").joinpath("countries_110m.geojson")
    return json.loads(path.read_text(encoding="utf-8"))


def _map_classes():
    folium = _folium()
    from folium.elements import JSCSSMixin
    from folium.plugins import MeasureControl, MousePosition
    from folium.template import Template

    class OfflineMeasure(MeasureControl):
        default_js = [("leaflet_measure_js", "dfkit:leaflet-measure.js")]
        default_css = [("leaflet_measure_css", "dfkit:leaflet-measure.css")]

    class OfflineMousePosition(MousePosition):
        default_js = [("Control_MousePosition_js", "dfkit:mouse-position.js")]
        default_css = [("Control_MousePosition_css", "dfkit:mouse-position.css")]

    class FixLayer(JSCSSMixin):
        """The fixes, regions, bearings and stations, the panel and the background, drawn by dfkit-map.js."""

        _template = Template(resources.files("dfkit.maps.templates").joinpath("fix_layer.html")
                             .read_text(encoding="utf-8"))
        default_js = [("dfkit_map_js", "dfkit:dfkit-map.js")]
        default_css = [("dfkit_map_css", "dfkit:dfkit-map.css")]

        def __init__(self, data: dict, world: dict | None, tiles: dict | None, online_layer=None):
            super().__init__()
            self._name = "DfkitFixLayer"
            self.payload_json = payload.script_json(data)
            self.world_json = payload.script_json(world) if world else "null"
            self.tiles_json = payload.script_json(tiles) if tiles else "null"
            self.online_layer = online_layer
            self.online_name_json = payload.script_json(ONLINE_NAME)

        def render(self, **kwargs):
            # Not MacroElement.render: it would compile the rendered page text, user data included, as a
            # template. Here the macros are rendered once and their output is added as fixed text.
            from branca.element import CssLink, JavascriptLink

            figure = self.get_root()
            for name, url in self.default_js:
                figure.header.add_child(JavascriptLink(url), name=name)
            for name, url in self.default_css:
                figure.header.add_child(CssLink(url), name=name)
            module = self._template.module
            figure.html.add_child(assets.Raw(str(module.html(self, kwargs))), name=self.get_name())
            figure.script.add_child(assets.Raw(str(module.script(self, kwargs))), name=self.get_name())

    class FixMap(folium.Map):
        """A folium map of fixes that saves as one offline HTML file (see :func:`fix_map`).

        Attributes
        ----------
        data : dict
            What the page draws (see :mod:`dfkit.maps.payload`).
        n_vectors : int
            Shapes drawn when the page opens (fixes with a position, their regions, and bearing lines and
            stations when they start switched on).
        notes : list of str
            What was left out or changed (e.g. tiles over the size budget).
        """

        default_js = [("leaflet", "dfkit:leaflet.js"), ("jquery", "dfkit:jquery.js")]
        default_css = [("leaflet_css", "dfkit:leaflet.css")]

        def render(self, **kwargs):
            super().render(**kwargs)
            assets.inline_links(self.get_root())

        def html(self) -> str:
            """The complete, self-contained HTML page."""
            return self.get_root().render()

        def save(self, outfile, close_file=True, **kwargs):
            """Write the page to ``outfile`` (a path: written atomically; or an open binary file)."""
            page = self.html()
            if isinstance(outfile, (str, bytes, os.PathLike)):
                with atomic_write(os.fsdecode(outfile)) as fh:
                    fh.write(page)
            else:
                outfile.write(page.encode("utf-8"))
                if close_file:
                    outfile.close()

    return folium, OfflineMeasure, OfflineMousePosition, FixLayer, FixMap


def fix_map(fixes: Fixes, *, error_polygons: bool = False, title: str = "dfkit fixes", tiles=None,
            tiles_budget_bytes: int = DEFAULT_BUDGET_BYTES, online_tiles: bool = True,
            colour_by: str = "tag", bearings: bool | None = None, world: bool = True):
    """A map of fixes, their regions, bearing lines and stations.

    Parameters
    ----------
    fixes : Fixes
        From :func:`dfkit.locate.locate` or :func:`dfkit.locate.locate_sheet`.
    error_polygons : bool
        Also draw the +/-1 SD error polygons (for comparison; no probability meaning).
    title : str
        Shown in the page title and panel.
    tiles : str or path-like, optional
        A folder of XYZ tiles or an ``.mbtiles`` file: the tiles covering the data are embedded as a
        background layer that works offline (see :mod:`dfkit.maps.tiles`).
    tiles_budget_bytes : int
        Most bytes of embedded tiles.
    online_tiles : bool
        Offer OpenStreetMap tiles as a background that needs the internet (off until chosen).
    colour_by : {'tag', 'time', 'observer'}
        Initial colouring (the page can switch).
    bearings : bool, optional
        Show bearing lines and stations when the page opens; by default only when there are at most
        :data:`dfkit.maps.payload.BEARINGS_SHOWN_MAX` bearings.
    world : bool
        Draw the bundled Natural Earth land and borders.

    Returns
    -------
    FixMap
        A ``folium.Map``; ``save(path)`` writes the page, and in a notebook it shows itself.
    """
    if colour_by not in COLOUR_BY:
        raise ValueError(f"colour_by={colour_by!r} is not one of {', '.join(repr(c) for c in COLOUR_BY)}")
    folium, OfflineMeasure, OfflineMousePosition, FixLayer, FixMap = _map_classes()
    notes = []
    spec = None
    if tiles is not None:
        t = fixes.table
        lat = list(t["lat"].dropna()) + list(fixes.bearings["lat"])
        lon = list(t["lon"].dropna()) + list(fixes.bearings["lon"])
        if lat:
            emb = load_tiles(tiles, (min(lat), min(lon), max(lat), max(lon)), budget_bytes=tiles_budget_bytes)
            notes.extend(emb.notes)
            spec = emb.spec() if emb.tiles else None
        else:
            notes.append("no positions to choose tiles for: none embedded")
    data = payload.build(fixes, error_polygons=error_polygons, title=title, bearings=bearings,
                         colour_by=colour_by, notes=notes)
    m = FixMap(location=None, tiles=None, control_scale=False, zoom_control=True, prefer_canvas=False,
               zoom_snap=0.25, world_copy_jump=False)
    m.get_root().title = html.escape(title)
    online = None
    if online_tiles:
        online = folium.TileLayer(ONLINE_TILES, name=ONLINE_NAME, overlay=False, control=False, show=False)
        online.add_to(m)
    FixLayer(data, world_geojson() if world else None, spec, online).add_to(m)
    OfflineMeasure(position="topleft", primary_length_unit="meters", secondary_length_unit="kilometers",
                   primary_area_unit="hectares").add_to(m)
    # empty until a pointer moves: the page shows the map centre there
    OfflineMousePosition(position="bottomleft", separator=", ", num_digits=6, prefix="lat, lon",
                         empty_string="").add_to(m)
    m.data = data
    m.notes = notes
    o = data["options"]
    n_pos = sum(v is not None for v in data["fix"]["lat"])
    n_reg = sum(v is not None for v in data["fix"]["a"]) + len(data["rings"]["ring"])
    m.n_vectors = n_pos + n_reg + (2 * o["n_bearings"] if o["bearings"] else 0) + (
        len(data["epoly"]["ring"]) if error_polygons else 0)
    return m
