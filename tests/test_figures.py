"""Figures and error polygons pick a fix by (tag, label), never by label alone."""

import numpy as np
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
