"""Region polygons built for many fixes at once are those the one-ring-at-a-time path builds (split at the
antimeridian, RFC 7946 section 3.1.9), coordinate for coordinate, also when some fixes straddle 180 degrees."""

from __future__ import annotations

import numpy as np
import pyproj
import shapely
from shapely.geometry import MultiPolygon, Polygon

from dfkit import read_bearings
from dfkit.locate import locate
from dfkit.regions import split_ring

GEOD = pyproj.Geod(ellps="WGS84")


def test_regions_table_matches_ring_by_ring(tmp_path):
    rng = np.random.default_rng(8)
    lines = ["fix,lat,lon,bearing,sd"]
    for i in range(60):
        lat0 = rng.uniform(-60, 60)
        lon0 = 179.995 if i % 3 == 0 else rng.uniform(-179, 179)      # a third sit on the antimeridian
        az = rng.uniform(0, 360) + np.arange(4) * 90 + rng.normal(0, 10, 4)
        lon_s, lat_s, back = GEOD.fwd(np.full(4, lon0), np.full(4, lat0), az, rng.uniform(2000, 8000, 4))
        for la, lo, b in zip(lat_s, lon_s, (np.asarray(back) + rng.normal(0, 4, 4)) % 360):
            lines.append(f"F{i},{la:.6f},{lo:.6f},{b:.2f},4")
    (tmp_path / "s.csv").write_text("\n".join(lines) + "\n")
    fixes = locate(read_bearings(tmp_path / "s.csv"))
    table = fixes.regions
    rows, lat, lon = fixes.likelihood.rings(fixes._region_rows())
    crossing = (lon.max(axis=1) > 180) | (lon.min(axis=1) < -180)
    assert crossing.sum() >= 10 and (~crossing).sum() >= 10
    assert table["fix_id"].tolist() == rows.tolist()
    for la, lo, got in zip(lat, lon, table["geometry"]):
        parts = [Polygon(p) for p in split_ring(la, lo)]
        want = parts[0] if len(parts) == 1 else MultiPolygon(parts)
        assert got.geom_type == want.geom_type
        assert np.array_equal(shapely.get_coordinates(got), shapely.get_coordinates(want))
        assert shapely.is_ccw(shapely.get_exterior_ring(got if got.geom_type == "Polygon" else got.geoms[0]))


def test_season_parts_all_at_once_match_one_by_one():
    from dfkit.season.rings import lonlat_parts, lonlat_parts_many

    ring = np.array([[10.0, 47.0], [10.1, 47.0], [10.1, 47.1], [10.0, 47.1], [10.0, 47.0]])
    geoms = [Polygon(ring), Polygon(ring[::-1]), None, Polygon(ring + [169.95, 0]),          # inside, clockwise,
             Polygon(ring + [-189.95, 0]), MultiPolygon([Polygon(ring)]), Polygon()]          # none, at 180, ...
    geoms.append(Polygon(ring + [0.0, 42.95]))           # reaching past the pole: cut at latitude 90
    got = lonlat_parts_many(geoms)
    assert shapely.bounds(got[-1])[3] == 90.0
    for g, have in zip(geoms, got):
        want = lonlat_parts(g)
        if want is None:
            assert have is None
        else:
            assert have.geom_type == want.geom_type == "MultiPolygon"
            assert np.array_equal(shapely.get_coordinates(have), shapely.get_coordinates(want))
