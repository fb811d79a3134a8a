"""Figures and error polygons pick a fix by (tag, label), never by label alone."""

import numpy as np
import pyproj
import pytest
from shapely.geometry import Point, Polygon

from dfkit.figures import fix_plot, residual_plot
from dfkit.geometry import error_polygon_rings
from dfkit.locate import locate_sheet

# Two tags that both number their first fix "1": tag A has two bearings near 47 N, tag B three near 48 N.
SHEET = """fix,tag,lat,lon,bearing,sd
1,A,47,15,45,3
1,A,47,15.02,315,3
1,B,48,16,40,3
1,B,48,16.02,320,3
1,B,48.01,16.01,180,3
"""


@pytest.fixture
def fixes(write_sheet):
    return locate_sheet(write_sheet(SHEET))


def test_a_label_shared_by_two_tags_needs_the_tag(fixes):
    with pytest.raises(ValueError, match="exists for tags 'A', 'B': give tag="):
        fix_plot(fixes, "1")


def test_residual_plot_shows_only_the_bearings_of_that_tag(fixes):
    fig = residual_plot(fixes, "1", tag="B")
    # one bar per bearing of tag B's fix (3), none of tag A's (2)
    assert len(fig.axes[0].patches) == 3


def test_error_polygons_are_built_from_each_fix_own_bearings(fixes):
    rings = error_polygon_rings(fixes)
    assert len(rings) == 2
    t = fixes.table
    for (label, (lat, lon)), (_, row) in zip(rings, t.iterrows()):
        poly = Polygon(np.column_stack([lon, lat]))
        # each polygon lies around its own fix (47 N for A, 48 N for B), not the other tag's
        assert poly.contains(Point(row["lon"], row["lat"]))


# --------------------------------------------------------------------------- the region, not the ellipse

# A shallow fix: three bearings from stations 1-4 km apart crossing at 7°; its 95 % likelihood region is open
# along the bearings (from the field trial).
SHALLOW = """fix,lat,lon,bearing,sd
F8,47.9072332,15.0077644,43.8247,3.281
F8,47.8805849,14.9838755,34.9727,3.281
F8,47.8954247,14.9925681,28.8342,5.96
"""


def _line(fig, words):
    lines = [ln for ln in fig.axes[0].get_lines() if all(w in ln.get_label() for w in words)]
    assert len(lines) == 1, [ln.get_label() for ln in fig.axes[0].get_lines()]
    return lines[0]


def _aeqd_to_lonlat(lat0, lon0, x_m, y_m):
    """PROJ's ellipsoidal azimuthal equidistant projection (geodesics, Karney 2013), independent of dfkit."""
    back = pyproj.Transformer.from_crs(
        pyproj.CRS.from_proj4(f"+proj=aeqd +lat_0={lat0} +lon_0={lon0} +ellps=WGS84 +units=m"), "EPSG:4326",
        always_xy=True)
    return back.transform(x_m, y_m)


def _drawn_matches_ring(fixes, i, line, km):
    row = fixes.table.iloc[i]
    x, y = (np.asarray(v, float) * (1000.0 if km else 1.0) for v in line.get_data())
    lon, lat = _aeqd_to_lonlat(row["lat"], row["lon"], x, y)
    rlat, rlon = fixes.region_ring(i)
    # drawn at the true distance and azimuth from the fix: within 1 m of the region's ring
    _, _, d = pyproj.Geod(ellps="WGS84").inv(lon, lat, rlon, rlat)
    assert np.max(d) < 1.0


def test_an_open_region_is_drawn_to_its_reach_marked_open_and_the_ellipse_is_only_a_comparison(write_sheet):
    fixes = locate_sheet(write_sheet(SHALLOW))
    row = fixes.table.iloc[0]
    assert row["status"] == "shallow" and not row["region_bounded"]
    drawn_to = float(fixes.regions["drawn_to_m"].iloc[0])
    fig = fix_plot(fixes, "F8")
    region = _line(fig, ["likelihood region", "open"])
    assert region.get_linestyle() == "--"
    assert f"drawn to {drawn_to / 1000:.0f} km" in region.get_label()
    _drawn_matches_ring(fixes, 0, region, km=True)
    x, y = region.get_data()
    assert np.max(np.hypot(x, y)) == pytest.approx(drawn_to / 1000, rel=0.01)
    ell = _line(fig, ["ellipse", "for comparison"])
    assert ell.get_linewidth() < region.get_linewidth()
    xe, ye = ell.get_data()
    # the ellipse is ~10 km long, the region ~100 km: the view shows the region
    assert np.max(np.hypot(xe, ye)) < 0.1 * np.max(np.hypot(x, y))
    assert fig.axes[0].get_xlim()[1] >= drawn_to / 1000
    assert "ellipse" not in fig.axes[0].get_title() and "open" in fig.axes[0].get_title()


def test_a_bounded_region_is_drawn_solid_where_dfkit_says_it_is(fixes):
    fig = fix_plot(fixes, "1", tag="B")
    region = _line(fig, ["likelihood region"])
    assert "open" not in region.get_label() and region.get_linestyle() == "-"
    _drawn_matches_ring(fixes, 1, region, km=False)


def test_without_regions_the_ellipse_is_drawn_and_says_so(write_sheet):
    from dfkit.locate import locate
    from dfkit.observations import read_bearings

    fixes = locate(read_bearings(write_sheet(SHEET)), with_regions=False)
    fig = fix_plot(fixes, "1", tag="B")
    assert _line(fig, ["ellipse", "no likelihood region computed"]).get_linestyle() == "-"


@pytest.mark.parametrize("sheet", [SHALLOW, SHEET])
def test_title_legend_and_labels_fit_inside_the_figure(write_sheet, sheet):
    fixes = locate_sheet(write_sheet(sheet))
    fig = fix_plot(fixes, 0)
    fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    page = fig.bbox
    title = fig.axes[0].title.get_window_extent(renderer)
    assert title.x0 >= page.x0 and title.x1 <= page.x1 and title.y1 <= page.y1
    everything = fig.get_tightbbox(renderer)                               # inches
    assert everything.x0 >= -0.01 and everything.y0 >= -0.01
    assert everything.x1 <= fig.get_figwidth() + 0.01 and everything.y1 <= fig.get_figheight() + 0.01


def test_figures_of_the_command_show_the_region(write_sheet, tmp_path):
    import matplotlib.pyplot as plt

    from dfkit.cli import main
    from dfkit.figures import fix_figures

    fixes = locate_sheet(write_sheet(SHALLOW))
    (i, fig, problem), = list(fix_figures(fixes))
    assert (i, problem) == (0, "") and "open" in _line(fig, ["likelihood region"]).get_label()
    plt.close(fig)
    out = tmp_path / "figs"
    assert main(["fix", str(write_sheet(SHALLOW, "s.csv")), "-o", str(tmp_path / "o.csv"), "--figures",
                 str(out)]) == 1
    assert [p.name for p in out.iterdir()] == ["00001_F8.png"]
