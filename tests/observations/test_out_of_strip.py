"""UTM positions outside their zone's 6 degree strip (a country-wide grid in one zone) are read, with a warning."""

import numpy as np
import pyproj
import pytest
from geographiclib.geodesic import Geodesic

from dfkit import grids, read_bearings


def to_zone33(lat, lon):
    tr = pyproj.Transformer.from_crs("EPSG:4326", "EPSG:32633", always_xy=True)
    return tr.transform(lon, lat)


def errors(b):
    return [(p.line, p.column, p.message) for p in b.problems if p.severity == "error"]


# Invented stations on the west coast of Norway (about 5 E, zone 32 by the standard) written in zone 33, as
# Norway's national maps put the whole country in one zone; their eastings are negative.
WEST = [(60.39, 5.32), (60.42, 5.40), (60.45, 5.35)]


def test_country_wide_zone_positions_are_read_and_warned(write_sheet):
    rows = []
    for k, (la, lo) in enumerate(WEST):
        e, n = to_zone33(la, lo)
        assert e < 0    # far outside the strip: this is the case that was refused before
        rows.append(f"A,33N,{e:.4f},{n:.4f},{[45, 315, 200][k]}")
    b = read_bearings(write_sheet("fix,utm_zone,easting,northing,bearing\n" + "\n".join(rows) + "\n"))
    assert errors(b) == []
    for k, (la, lo) in enumerate(WEST):
        # the point read back lies within a millimetre of the point written (geodesic, geographiclib)
        d = Geodesic.WGS84.Inverse(la, lo, b.table["lat"][k], b.table["lon"][k])["s12"]
        assert d < 1e-3
    warned = [p for p in b.problems if p.severity == "warning" and p.column == "utm_zone"]
    assert len(warned) == 3 and "outside its 6° strip" in warned[0].message and "zone 32" in warned[0].message


def test_a_missing_digit_among_stations_inside_the_strip_is_refused(write_sheet):
    b = read_bearings(write_sheet("fix,utm_zone,easting,northing,bearing\nC,33N,512300,5301200,45\n"
                                  "C,33N,51230,5301200,315\nC,33N,513300,5302200,200\n"))
    (line, col, msg), = errors(b)
    assert line == 3 and col == "easting" and "digit" in msg


def test_positions_beyond_the_documented_accuracy_are_refused(write_sheet):
    b = read_bearings(write_sheet("fix,utm_zone,easting,northing,bearing\nA,33N,4500000,5301200,45\n"))
    (line, col, msg), = errors(b)
    assert col == "easting" and "3900 km" in msg


@pytest.mark.parametrize("lat", [0.0, 30.0, 47.0, 60.0, 70.0, 80.0])
def test_round_trip_far_from_the_central_meridian(lat):
    # PROJ documents the Poder/Engsager series as exact to double precision within 3900 km of the central meridian
    # (PROJ docs, Transverse Mercator; Karney 2011, J. Geodesy 85: 475-485). Measured here: going out to the
    # longitude where the easting is 3000 km from the meridian and back changes the point by under a micrometre.
    lons = np.linspace(15.0, 15.0 + 60.0, 400)
    e, n = to_zone33(np.full_like(lons, lat), lons)
    inside = np.abs(e - 5e5) < 3.0e6
    trip = grids.utm_round_trip_m(np.full(inside.sum(), 33), np.zeros(inside.sum(), bool), e[inside], n[inside],
                                  *grids.utm_to_latlon(np.full(inside.sum(), 33), np.zeros(inside.sum(), bool),
                                                       e[inside], n[inside]))
    assert trip.max() < 1e-6


def test_same_point_through_two_zones_agrees():
    # A point converted through its own zone (34) and through a neighbour far out (33): both readings are the
    # same place to well under a millimetre (geographiclib distance between them).
    lat, lon = 69.65, 24.5
    for epsg, zone in ((32634, 34), (32633, 33), (32632, 32)):
        tr = pyproj.Transformer.from_crs("EPSG:4326", f"EPSG:{epsg}", always_xy=True)
        e, n = tr.transform(lon, lat)
        la, lo = grids.utm_to_latlon([zone], [False], [e], [n])
        assert Geodesic.WGS84.Inverse(lat, lon, la[0], lo[0])["s12"] < 1e-4
