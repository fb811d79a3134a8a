"""How well UTM conversions hold far outside a zone's 6 degree strip (the limit dfkit states in dfkit.grids).

    .venv/bin/python benchmarks/tm_far_zone.py

For points at several latitudes and longitudes up to 50 degrees east of zone 33's central meridian (15 E): the
easting's distance from the meridian, and the geodesic distance (pyproj.Geod) between the point and the point
converted to zone 33 and back. Nothing is asserted.
"""

import pyproj

G = pyproj.Geod(ellps="WGS84")
FWD = pyproj.Transformer.from_crs("EPSG:4326", "EPSG:32633", always_xy=True)
INV = pyproj.Transformer.from_crs("EPSG:32633", "EPSG:4326", always_xy=True)

print("lat  dlon: |E-500km| [km] / round trip [mm]")
for lat in (0, 30, 47, 60, 70, 80):
    row = []
    for dlon in (3, 6, 9, 12, 15, 20, 25, 30, 35, 40, 50):
        lon = 15 + dlon
        x, y = FWD.transform(lon, lat)
        lo2, la2 = INV.transform(x, y)
        _, _, d = G.inv(lon, lat, lo2, la2)
        row.append(f"{dlon}:{(x - 500000) / 1000:.0f}/{d * 1e3:.1g}")
    print(f"{lat:>3}", " ".join(row))
print("PROJ", pyproj.proj_version_str)
