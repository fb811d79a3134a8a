"""A notebook shows the folium map inline, self-contained (run with the notebook's own kernel)."""

import html
import pathlib
import re

import nbformat
import pytest

ROOT = pathlib.Path(__file__).resolve().parents[1]


def test_hunt_notebook_shows_the_map_inline(tmp_path):
    from nbclient import NotebookClient

    (tmp_path / "notebooks").mkdir()
    (tmp_path / "sample_bearings").symlink_to(ROOT / "sample_bearings")
    nb = nbformat.read(ROOT / "notebooks" / "02_hunt_live.ipynb", as_version=4)
    NotebookClient(nb, timeout=300, kernel_name="python3",
                   resources={"metadata": {"path": str(tmp_path / "notebooks")}}).execute()
    shown = [o for c in nb.cells if c.cell_type == "code" and "fix_map(" in c.source
             for o in c.get("outputs", []) if "text/html" in o.get("data", {})]
    assert shown, "the map cell displayed nothing"
    frame = shown[-1]["data"]["text/html"]
    assert "<iframe srcdoc=" in frame
    page = html.unescape(re.search(r'srcdoc="([^"]*)"', frame).group(1))
    assert "L.map(" in page and "dfkitDraw" in page            # Leaflet and our layer, inlined
    assert not re.search(r"<script[^>]+src=|<link[^>]+href=", page)
    assert (tmp_path / "notebooks" / "hunt_map.html").stat().st_size > 100_000
