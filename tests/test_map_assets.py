"""What a map page inlines: vendored files as released (checksums), licensed, safe to inline; our palette."""

import hashlib
import pathlib
import re

import numpy as np
import pytest

import dfkit
from dfkit.locate import locate_sheet
from dfkit.maps import assets, fix_map

VENDOR = pathlib.Path(dfkit.__file__).parent / "_vendor"
ROOT = pathlib.Path(__file__).resolve().parents[1]


def test_vendored_files_match_their_checksums():
    # SHA256SUMS was written when the files were taken from their npm packages (leaflet@1.9.4,
    # leaflet-measure@2.1.7, leaflet-mouse-position@1.2.0, jquery@3.7.1) and the geopandas 0.14.4 wheel.
    listed = {}
    for line in (VENDOR / "SHA256SUMS").read_text().splitlines():
        digest, name = line.split(maxsplit=1)
        listed[name.removeprefix("./")] = digest
    present = {str(p.relative_to(VENDOR)) for p in VENDOR.rglob("*") if p.is_file() and p.name != "SHA256SUMS"
               and "__pycache__" not in p.parts}
    assert present == set(listed)
    for name, digest in listed.items():
        assert hashlib.sha256((VENDOR / name).read_bytes()).hexdigest() == digest, name
    # Leaflet 1.9.4 as published (also pinned in test_layering).
    assert listed["leaflet/leaflet.js"] == "db49d009c841f5ca34a888c96511ae936fd9f5533e90d8b2c4d57596f4e5641a"


@pytest.mark.parametrize("folder, words", [("leaflet", "BSD 2-Clause"), ("leaflet_measure", "MIT License"),
                                           ("mouse_position", "Permission is hereby granted"),
                                           ("jquery", "Permission is hereby granted"),
                                           ("naturalearth", "public domain")])
def test_every_vendored_library_has_its_licence(folder, words):
    lic = [p for p in (VENDOR / folder).iterdir() if "LICEN" in p.name.upper()]
    assert lic and words in lic[0].read_text()


@pytest.mark.parametrize("link", sorted(assets.ASSETS))
def test_assets_can_be_inlined(link):
    html = assets.inline_script(link) if link.endswith(".js") else assets.inline_style(link)
    body = html.split("\n", 1)[1].rsplit("\n", 1)[0]
    assert not re.search(r"</script|<!--|</style", body, re.I)
    assert "url(images/" not in body                      # style images became data: URIs


def test_saved_map_loads_nothing_from_outside(tmp_path):
    fixes = locate_sheet(ROOT / "sample_bearings" / "animal_fix.csv")
    m = fix_map(fixes)
    page = m.html()
    assert not re.search(r"<script[^>]+src=|<link[^>]+href=", page)
    assert "Made with Natural Earth" in page


def test_folium_plugins_added_by_a_user_are_inlined_too():
    import warnings

    import folium.plugins

    m = fix_map(locate_sheet(ROOT / "sample_bearings" / "animal_fix.csv"))
    folium.plugins.MeasureControl().add_to(m)              # declares its CDN address
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        page = m.html()
    assert "cdn.jsdelivr" not in page.split("<body>")[0]
    folium.plugins.Fullscreen().add_to(m)                   # not vendored: stays a link, with a warning
    with pytest.warns(UserWarning, match="will not work offline"):
        m.html()


# Palette: checked with colorspacious (Machado, Oliveira & Fernandes 2009 CVD simulation; CAM02-UCS distance,
# Luo, Cui & Li 2006), independently of the search in tools/design_palette.py.
PALETTE = ["#1e64ce", "#e97b1b", "#762025", "#4ab3fb", "#a95421", "#5e2883", "#9f1757", "#3f16cb"]
RAMP = ["#232562", "#4b3464", "#733c6d", "#a23b72", "#b66269", "#ce825a", "#e8a33c"]


def _rgb(hexes):
    return np.array([[int(h[i:i + 2], 16) / 255 for i in (1, 3, 5)] for h in hexes])


def _seen(rgb, cvd):
    from colorspacious import cspace_convert

    if cvd:
        rgb = np.clip(cspace_convert(rgb, {"name": "sRGB1+CVD", "cvd_type": cvd, "severity": 100}, "sRGB1"), 0, 1)
    return cspace_convert(rgb, "sRGB1", "CAM02-UCS")


def test_page_uses_the_checked_palette():
    js = (pathlib.Path(dfkit.__file__).parent / "maps" / "static" / "dfkit-map.js").read_text()
    assert re.search(r"var PALETTE = \[([^\]]*)\]", js).group(1).replace('"', "").replace(" ", "").split(",") == PALETTE
    assert re.search(r"var RAMP = \[([^\]]*)\]", js).group(1).replace('"', "").replace(" ", "").split(",") == RAMP


@pytest.mark.parametrize("cvd", [None, "protanomaly", "deuteranomaly", "tritanomaly"])
def test_palette_colours_stay_apart_for_colour_blind_viewers(cvd):
    pytest.importorskip("colorspacious")
    j = _seen(_rgb(PALETTE), cvd)
    d = np.linalg.norm(j[:, None] - j[None], axis=2)[np.triu_indices(len(PALETTE), 1)]
    assert d.min() > 10.0          # about ten just-noticeable differences
    bg = _seen(_rgb(["#f4f2ec", "#ffffff"]), cvd)
    assert np.linalg.norm(j[:, None] - bg[None], axis=2).min() > 25.0


@pytest.mark.parametrize("cvd", [None, "protanomaly", "deuteranomaly", "tritanomaly"])
def test_time_ramp_lightness_rises_for_every_viewer(cvd):
    pytest.importorskip("colorspacious")
    lightness = _seen(_rgb(RAMP), cvd)[:, 0]
    assert np.all(np.diff(lightness) > 2.0)                # order in time reads as order in lightness
