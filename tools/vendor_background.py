"""Rebuild dfkit's offline map background from Natural Earth 1:110m countries (public domain).

Natural Earth reaches this machine only inside a package: the ``geopandas==0.14.4`` wheel carries
``geopandas/datasets/naturalearth_lowres`` (Natural Earth 1:110m Cultural Vectors, Admin 0 - Countries).

    pip download --no-deps geopandas==0.14.4 -d /tmp/ne
    unzip -o /tmp/ne/geopandas-0.14.4-py3-none-any.whl 'geopandas/datasets/*' -d /tmp/ne
    python tools/vendor_background.py /tmp/ne/geopandas/datasets/naturalearth_lowres/naturalearth_lowres.shp

Writes ``dfkit/_vendor/naturalearth/countries_110m.geojson``: each country outline simplified (Douglas-Peucker,
0.05 degrees; the source scale is already about 0.1 degree per vertex) and rounded to 0.01 degree
(about 1 km), keeping only the country's name.
"""

from __future__ import annotations

import json
import pathlib
import sys

import pyogrio
import shapely
from shapely.geometry import mapping

OUT = pathlib.Path(__file__).resolve().parents[1] / "dfkit" / "_vendor" / "naturalearth" / "countries_110m.geojson"
TOLERANCE_DEG = 0.05
DECIMALS = 2


def _round(coords):
    if isinstance(coords[0], (int, float)):
        return [round(coords[0], DECIMALS), round(coords[1], DECIMALS)]
    return [_round(c) for c in coords]


def main(shp: str) -> None:
    df = pyogrio.read_dataframe(shp)
    feats = []
    for name, geom in zip(df["name"], df.geometry):
        g = shapely.simplify(geom, TOLERANCE_DEG, preserve_topology=True)
        if g.is_empty:
            continue
        gj = mapping(g)
        feats.append({"type": "Feature", "properties": {"name": str(name)},
                      "geometry": {"type": gj["type"], "coordinates": _round(gj["coordinates"])}})
    doc = {"type": "FeatureCollection",
           "credit": "Made with Natural Earth. Free vector and raster map data @ naturalearthdata.com.",
           "source": "Natural Earth 1:110m Cultural Vectors, Admin 0 - Countries (public domain)",
           "features": feats}
    OUT.parent.mkdir(parents=True, exist_ok=True)
    OUT.write_text(json.dumps(doc, separators=(",", ":"), ensure_ascii=False) + "\n", encoding="utf-8")
    print(f"wrote {OUT} ({OUT.stat().st_size / 1024:.0f} KB, {len(feats)} countries)")


if __name__ == "__main__":
    main(sys.argv[1])
