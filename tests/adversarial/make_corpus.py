"""Write the hostile inputs of the adversarial corpus into ``files/``, one file per kind of trouble.

Run from the repository root (a test checks the committed files match):

    .venv/bin/python tests/adversarial/make_corpus.py

Every file is invented here, by hand or from a fixed seed; positions are a made-up patch around 47 N 15 E.
What each file should make dfkit do is written in ``cases.toml`` beside this script.
"""

from __future__ import annotations

import os
import random

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "files")

HEAD = "fix,lat,lon,bearing,sd,note\n"
#: Three bearings that cross well (a fix with status ok at an SD of 3 degrees).
GOOD = ["{f},47.000,15.000,45,3,{n}", "{f},47.000,15.020,315,3,{n}", "{f},47.020,15.010,180,3,{n}"]


def rows(label, note=""):
    return "\n".join(r.format(f=label, n=note) for r in GOOD) + "\n"


def gpx(points, enc="UTF-8", name="track"):
    body = "".join(f'<trkpt lat="{la}" lon="{lo}"><time>{t}</time></trkpt>\n' for la, lo, t in points)
    return (f'<?xml version="1.0" encoding="{enc}"?>\n<gpx version="1.1" creator="corpus" '
            f'xmlns="http://www.topografix.com/GPX/1/1">\n<trk><name>{name}</name><trkseg>\n{body}'
            "</trkseg></trk>\n</gpx>\n")


def walk(n=30):
    # 47.0000 N 15.0000 E walking north-east, one point every 10 s from 06:00:00Z (about 1.6 m/s).
    return [(f"{47 + i * 1e-4:.4f}", f"{15 + i * 1e-4:.4f}", f"2026-05-03T06:{10 * i // 60:02d}:{10 * i % 60:02d}Z")
            for i in range(n)]


def _track_bearings():
    """Exact bearings (pyproj geodesics) from the walk at 06:00:05, 06:01:05, 06:02:05, 06:03:05 to a transmitter
    at 47.0015 N 14.9995 E (half-way between two track points, as dfkit interpolates)."""
    import pyproj

    geod = pyproj.Geod(ellps="WGS84")
    out = []
    for m in range(4):
        k = 6 * m + 0.5
        az, _, _ = geod.inv(15 + k * 1e-4, 47 + k * 1e-4, 14.9995, 47.0015)
        out.append(az % 360)
    return out


def corpus() -> dict[str, bytes]:
    f: dict[str, str | bytes] = {}
    f["plain.csv"] = HEAD + rows("A")
    # -- comments and quotes
    f["quoted_hash_label.csv"] = HEAD + rows('"#B"') + rows("A")
    f["hash_note_column.csv"] = HEAD + rows("A", "#2 antenna")
    f["comment_lines.csv"] = "# field sheet, team 3\n" + HEAD + "# before lunch\n" + rows("A") + "#C,47,15,45,3,\n"
    f["indented_hash.csv"] = HEAD + rows("A") + "  # not a comment,47,15,45,3,\n"
    f["unbalanced_quote.csv"] = HEAD + 'A,47.000,15.000,45,3,"antenna loose\n' + "\n".join(GOOD[1:]).format(
        f="A", n="") + "\n" + rows("B")
    f["unbalanced_quote_closed_later.csv"] = (HEAD + 'A,47.000,15.000,45,3,"antenna loose\n'
                                              + GOOD[1].format(f="A", n='ok"') + "\n" + rows("B"))
    f["multi_line_note.csv"] = HEAD + 'A,47.000,15.000,45,3,"first line\nsecond line"\n' + \
        "\n".join(GOOD[1:]).format(f="A", n="") + "\n"
    f["only_delimiters.csv"] = HEAD + rows("A") + ",,,,,\n;;;\n"
    # -- encodings and bytes
    f["cp1252_one_line.csv"] = (HEAD + rows("A", "Böschung")).encode() + \
        "B,47.000,15.000,45,3,Böschung\n".encode("cp1252")
    f["cp1252_whole_file.csv"] = (HEAD + rows("Grün", "Straße")).encode("cp1252")
    f["utf16_bom.csv"] = (HEAD + rows("Ä")).encode("utf-16")
    f["utf16_no_bom.csv"] = (HEAD + rows("A")).encode("utf-16-le")
    f["nul_row.csv"] = (HEAD + rows("A")).encode() + b"\x00\x00\x00\n" + b"B,47,15,45,3,\x00note\n"
    f["nul_only.csv"] = b"\x00" * 4096
    rnd = random.Random(20260503)
    f["random_bytes.csv"] = bytes(rnd.randrange(256) for _ in range(4096))
    f["workbook.xlsx.csv"] = b"PK\x03\x04\x14\x00\x06\x00" + bytes(rnd.randrange(256) for _ in range(200))
    f["empty.csv"] = b""
    f["header_only.csv"] = HEAD
    f["bom_crlf_lone_cr.csv"] = ("\ufeff" + HEAD + rows("A")).replace("\n", "\r\n").encode() + \
        b"B,47,15,45,3,x\rB,47,15.02,315,3,y\r"
    # -- limits
    f["huge_header_field.csv"] = 'fix,lat,lon,bearing,"' + "h" * 140_000 + '"\n' + rows("A")
    f["huge_cell.csv"] = HEAD + "A,47.000,15.000,45,3," + "x" * 140_000 + "\n" + "\n".join(GOOD[1:]).format(
        f="A", n="") + "\n"
    f["wide_header_empty.csv"] = "fix,lat,lon,bearing,sd" + "," * 50_000 + "\n" + rows("A").replace(",\n", "\n")
    f["wide_header_named.csv"] = "fix,lat,lon,bearing,sd," + ",".join(f"c{i}" for i in range(1500)) + "\n" + \
        rows("A").replace(",\n", "\n")
    f["repeated_known_column.csv"] = "fix,lat,lon,bearing,bearing\nA,47,15,45,46\n"
    f["many_repeated_unknown_columns.csv"] = HEAD.strip() + "," + ",".join(["extra"] * 800) + "\n" + rows("A")
    # -- hostile labels and notes
    f["formula_labels.csv"] = HEAD + rows('"=HYPERLINK(""http://example.invalid"",""x"")"', "@SUM(A1:A9)") + \
        rows("+1-1", "-2+3") + rows("-7", "\tcmd") + rows("ok", "-12.5")
    f["script_labels.csv"] = ("fix,tag,lat,lon,bearing,sd,note\n" + "\n".join(
        r.format(f='"<!--<script>"', n="x").replace(",47.", ",__proto__,47.", 1) for r in GOOD) + "\n" +
        "\n".join(r.format(f='"</script><b>x</b>"', n="y").replace(",47.", ",constructor,47.", 1) for r in GOOD)
        + "\n" + "\n".join(r.format(f="C", n="z").replace(",47.", ",toString,47.", 1) for r in GOOD) + "\n")
    f["proto_tags.csv"] = "fix,tag,lat,lon,bearing,sd\n" + "".join(
        "\n".join(r.format(f=lab, n="").rstrip(",").replace(",47.", f",{tag},47.", 1) for r in GOOD) + "\n"
        for lab, tag in (("A", "__proto__"), ("B", "constructor"), ("C", "hasOwnProperty")))
    f["control_char_label.csv"] = HEAD + rows("A\x01B\x1fC", "bell\x07") + rows('"two\nlines"', "tab\there")
    f["long_label.csv"] = HEAD + rows("L" * 20_000)
    f["quote_comma_label.csv"] = HEAD + rows('"say ""hi"", ok"', '"a, b"')
    # -- reasons that must say what happened
    f["far_crossing.csv"] = HEAD + "FAR,47.000,15.000,0.5,3,\nFAR,47.000,15.010,0,3,\n" + \
        "DIV,47.000,15.000,359.5,3,\nDIV,47.000,15.010,0,3,\n" + "PAR,47.000,15.000,0,3,\nPAR,47.000,15.010,0,3,\n"
    f["no_sd_column.csv"] = "fix,lat,lon,bearing\n" + "A,47.000,15.000,45\nA,47.000,15.020,315\nA,47.020,15.010,180\n"
    f["fix_table_hostile.csv"] = ("fix,tag,lat,lon,status\n" + "".join(
        f'"#{i}",T,{47 + i * 1e-3:.4f},{15 + (i % 3) * 1e-3:.4f},ok\n' for i in range(6))
        + "X,T,999,15,ok\n" + '"=cmd()",T,47.01,15.01,ok\n').encode() + b"Y,T,47\x00,15,ok\n"
    # -- GPS tracks and stations
    f["track_sheet.csv"] = "fix,time,bearing,sd\n" + "".join(
        f"T,2026-05-03T06:0{m}:05Z,{b:.1f},3\n" for m, b in zip(range(4), _track_bearings()))
    pts = walk()
    bad = list(pts)
    bad[3] = ("999", bad[3][1], bad[3][2])
    bad[9] = ("NaN", bad[9][1], bad[9][2])
    bad[15] = (bad[15][0], "inf", bad[15][2])
    bad[21] = ("47.1", bad[21][1], bad[21][2])      # a glitch 11 km away and back
    f["track_bad_points.gpx"] = gpx(bad)
    f["track_iso8859.gpx"] = gpx(pts, enc="ISO-8859-1", name="Böschung").encode("latin-1")
    f["track_utf16.gpx"] = gpx(pts, enc="UTF-16", name="Böschung").encode("utf-16")
    dup = list(pts)
    dup[5] = ("47.0100", "15.0100", dup[6][2])     # same time as the next point, 1.3 km away
    dup[12], dup[13] = dup[13], dup[12]             # time runs backwards
    f["track_dup_and_backwards.gpx"] = gpx(dup)
    f["track_all_bad.gpx"] = gpx([("999", "15", p[2]) for p in pts[:3]])
    f["track_entities.gpx"] = ('<?xml version="1.0"?>\n<!DOCTYPE gpx [\n<!ENTITY a "aaaaaaaaaa">\n'
                               '<!ENTITY b "&a;&a;&a;&a;&a;&a;&a;&a;&a;&a;">\n<!ENTITY c "&b;&b;&b;&b;&b;&b;&b;&b;">\n'
                               ']>\n<gpx version="1.1"><trk><name>&c;</name></trk></gpx>\n')
    f["track_not_xml.gpx"] = bytes(rnd.randrange(256) for _ in range(512))
    f["track_kml.gpx"] = '<?xml version="1.0"?>\n<kml><Document/></kml>\n'
    f["station_sheet.csv"] = "fix,station,bearing,sd\n" + "".join(
        f"S,{s},{b},3\n" for s, b in (("R1", 45), ("R2", 315), ("R3", 180), ("R4", 90), ("R5", 90), ("R6", 90)))
    f["stations_bad.csv"] = ("station,lat,lon\nR1,47.000,15.000\nR2,47.000,15.020\nR3,47.020,15.010\n"
                             "R4,NaN,15\nR5,999,15\nR1,47.5,15.5\nR6,47,inf\n")
    f["stations_utf16.csv"] = "station,lat,lon\nR1,47.000,15.000\nR2,47.000,15.020\nR3,47.020,15.010\n".encode(
        "utf-16")
    return {k: v.encode() if isinstance(v, str) else v for k, v in f.items()}


def main():
    os.makedirs(OUT, exist_ok=True)
    for name, data in corpus().items():
        with open(os.path.join(OUT, name), "wb") as fh:
            fh.write(data)
    print(f"wrote {len(corpus())} files to {OUT}")


if __name__ == "__main__":
    main()
