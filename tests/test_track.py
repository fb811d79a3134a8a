"""GPS tracks (GPX): every point checked like a sheet row, declared encodings honoured, nothing silently used."""

import gpxpy
import numpy as np
import pytest

from dfkit import SheetError, read_bearings
from dfkit.cli import main
from dfkit.io.gpx import read_track

HEAD = '<?xml version="1.0" encoding="{enc}"?>\n<gpx version="1.1" creator="test" ' \
       'xmlns="http://www.topografix.com/GPX/1/1">\n<trk><name>{name}</name><trkseg>\n'
TAIL = "</trkseg></trk>\n</gpx>\n"


def gpx(points, enc="UTF-8", name="walk"):
    """GPX text; each point (lat, lon, time or None) on its own line, the first on line 4."""
    body = ""
    for lat, lon, t in points:
        time = f"<time>{t}</time>" if t is not None else ""
        body += f'<trkpt lat="{lat}" lon="{lon}">{time}</trkpt>\n'
    return HEAD.format(enc=enc, name=name) + body + TAIL


def walk(n=6):
    # A walk north-east at about 1.6 m/s: 0.0001 deg of latitude (about 11 m) every 10 s from 06:00:00Z.
    return [(47 + i * 1e-4, 15 + i * 1e-4, f"2026-05-03T06:{10 * i // 60:02d}:{10 * i % 60:02d}Z") for i in range(n)]


def errors(track):
    return [(p.line, p.column) for p in track.problems if p.severity == "error"]


def test_points_match_an_outside_gpx_parser(tmp_path):
    p = tmp_path / "t.gpx"
    pts = walk() + [(47.01, 15.01, None)]
    p.write_text(gpx(pts[::-1]))   # written newest first: dfkit sorts by time
    tr = read_track(p)
    ref = gpxpy.parse(p.read_text())
    ref_pts = sorted((q.time.timestamp(), q.latitude, q.longitude) for q in ref.tracks[0].segments[0].points
                     if q.time is not None)
    assert len(tr) == len(ref_pts) == 6
    np.testing.assert_allclose(tr.t, [r[0] for r in ref_pts])
    np.testing.assert_allclose(tr.lat, [r[1] for r in ref_pts])
    np.testing.assert_allclose(tr.lon, [r[2] for r in ref_pts])
    assert any(p.severity == "note" and "no time" in p.message for p in tr.problems)


@pytest.mark.parametrize("enc, codec", [("ISO-8859-1", "latin-1"), ("windows-1252", "cp1252"),
                                        ("UTF-16", "utf-16")])
def test_declared_encodings_are_honoured(tmp_path, enc, codec):
    p = tmp_path / "t.gpx"
    p.write_bytes(gpx(walk(), enc=enc, name="Böschung").encode(codec))
    tr = read_track(p)
    assert len(tr) == 6 and not errors(tr)


@pytest.mark.parametrize("lat, lon, column, words", [
    ("999", "15.0003", "lat", "outside -90..90"),
    ("NaN", "15.0003", "lat", "not a finite number"),
    ("47.0003", "inf", "lon", "not a finite number"),
    ("47.0003", "200", "lon", "outside -180..180"),
    ("", "15.0003", "lat", "not a finite number"),
    ("0", "0", "lat", "missing position"),
])
def test_each_bad_point_is_rejected_with_its_line(tmp_path, lat, lon, column, words):
    pts = walk()
    pts[3] = (lat, lon, pts[3][2])
    p = tmp_path / "t.gpx"
    p.write_text(gpx(pts))
    tr = read_track(p)
    (prob,) = [q for q in tr.problems if q.severity == "error"]
    assert (prob.line, prob.column) == (7, column) and words in prob.message and prob.source == str(p)
    assert len(tr) == 5 and 7 not in tr.lines.tolist()
    assert np.isfinite(tr.lat).all() and (np.abs(tr.lat) <= 90).all()


def test_missing_lat_attribute(tmp_path):
    p = tmp_path / "t.gpx"
    p.write_text(gpx(walk()).replace('<trkpt lat="47.0002" ', "<trkpt "))
    assert errors(read_track(p)) == [(6, "lat")]


def test_unreadable_time_is_rejected(tmp_path):
    pts = walk()
    pts[2] = (pts[2][0], pts[2][1], "yesterday noon")
    p = tmp_path / "t.gpx"
    p.write_text(gpx(pts))
    assert errors(read_track(p)) == [(6, "time")]


def test_same_time_same_place_is_a_copy_different_places_are_refused(tmp_path):
    pts = walk()
    pts.insert(2, pts[1])                                   # an exact copy (line 6)
    pts.insert(5, (47.01, 15.01, pts[4][2]))                # same time as line 8, 1.3 km away (line 9)
    p = tmp_path / "t.gpx"
    p.write_text(gpx(pts))
    tr = read_track(p)
    assert errors(tr) == [(8, "time"), (9, "time")]
    assert any(q.line == 6 and q.severity == "warning" and "copy" in q.message for q in tr.problems)
    assert len(tr) == len(pts) - 3
    assert len(np.unique(tr.t)) == len(tr.t)


def test_time_running_backwards_is_reported(tmp_path):
    pts = walk()
    pts[2], pts[3] = pts[3], pts[2]
    p = tmp_path / "t.gpx"
    p.write_text(gpx(pts))
    tr = read_track(p)
    assert any(q.line == 7 and "goes back 10 s" in q.message for q in tr.problems)
    assert np.all(np.diff(tr.t) > 0)


def test_a_glitch_away_and_back_is_not_used_a_single_leap_is_reported(tmp_path):
    pts = walk(8)
    pts[3] = (47.1, 15.0, pts[3][2])     # about 11 km away for 10 s, then back: far faster than 150 m/s
    p = tmp_path / "t.gpx"
    p.write_text(gpx(pts))
    tr = read_track(p)
    assert errors(tr) == [(7, "lat")] and 7 not in tr.lines.tolist()
    step = walk(8)
    step[5:] = [(la + 0.1, lo, t) for la, lo, t in step[5:]]    # moves 11 km in 10 s and stays
    p.write_text(gpx(step))
    tr = read_track(p)
    assert errors(tr) == []
    assert [q.line for q in tr.problems if q.severity == "warning"] == [9]


@pytest.mark.parametrize("content, match", [
    (b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", "not a readable GPX file"),
    (b'<?xml version="1.0"?><kml><Placemark/></kml>', "not a GPX file"),
    (b'<?xml version="1.0"?>\n<!DOCTYPE gpx [<!ENTITY a "aaaaaaaaaa"><!ENTITY b "&a;&a;&a;&a;">]>\n<gpx>&b;</gpx>',
     "declares XML entities"),
    (b'<?xml version="1.0" encoding="x-no-such-code"?><gpx/>', "not a readable GPX file"),
    (gpx([(999, 15, "2026-05-03T06:00:00Z"), ("nan", 15, "2026-05-03T06:00:10Z")]).encode(),
     r"no usable point with a time \(2 points rejected, e.g. line 4: lat 999"),
    (gpx([(47, 15, None)]).encode(), "no usable point with a time"),
])
def test_unreadable_tracks_are_one_message(tmp_path, content, match):
    p = tmp_path / "t.gpx"
    p.write_bytes(content)
    with pytest.raises(SheetError, match=match):
        read_track(p)


def test_track_problems_reach_the_bearings_and_the_exit_status(tmp_path, capsys):
    pts = walk(8)
    pts[4] = (999, 15, pts[4][2])        # 06:00:40, line 8
    trk = tmp_path / "t.gpx"
    trk.write_text(gpx(pts))
    sheet = tmp_path / "s.csv"
    sheet.write_text("fix,time,bearing,sd\nA,2026-05-03T06:00:05Z,45,3\nA,2026-05-03T06:01:05Z,315,3\n")
    b = read_bearings(sheet, track=trk)
    bad = [q for q in b.problems if q.severity == "error"]
    assert [(q.source, q.line) for q in bad] == [(str(trk), 8)]
    assert b.table["lat"].max() < 47.01          # no bearing took the 999 point
    assert main(["check", str(sheet), "--track", str(trk)]) == 1
    assert "line 8, lat: lat 999 is outside -90..90" in capsys.readouterr().out
