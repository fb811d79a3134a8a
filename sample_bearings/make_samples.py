"""Make the invented sample sheets of dfkit from a known truth kept beside them.

Everything here is invented: the transmitters, the people (team letters only),
and the positions (an unnamed patch of forest and farmland in central Europe,
UTM zone 33N). Bearings are computed from the truth with pyproj's WGS84
geodesics and NOAA's WMM2025 (wmm-calculator), *not* with dfkit, then given
random errors drawn from a fixed seed. Run from the repository root:

    .venv/bin/python sample_bearings/make_samples.py

Files written (in this folder):

* ``animal_fix.csv``: three compass bearings on one VHF tag from UTM positions;
* ``hunt.csv``: a club hunt, four teams reporting bearings on two hidden
  transmitters over an hour (one team reads mils, one bearing is a reflection);
* ``week_tracking.csv`` + ``week_track.gpx``: a week of tracking three tags;
  rows have a time but no position, which comes from the GPS track;
* ``beacon_trials.csv``: bearings on test transmitters (beacons) at known spots with three antennas, and
  ``tracking_after_trials.csv``: field fixes taken with the same antennas (for ``dfkit calibrate``);
* ``field_sheet_with_mistakes.csv``: a hand-typed sheet with the usual mistakes and
  the usual ways of writing (GPS-style UTM zones, degrees and minutes, day-first
  dates, a label used again another day), for ``dfkit check``;
* ``season_2026_05.csv``, ``season_2026_06.csv``: two months of tracking three tags
  whose true home ranges are known (``truth_season.csv``), for ``dfkit season``
  and ``dfkit ranges``;
* ``hunt_spots.csv``: trail junctions and road pull-outs of the hunt's area, the
  candidate spots for ``dfkit plan`` (positions written as lat/lon, UTM and MGRS);
* ``truth_*.csv``: the true transmitter positions behind each sheet.
"""

from __future__ import annotations

import csv
import os
import warnings
from datetime import datetime, timedelta, timezone

import numpy as np
import pyproj

HERE = os.path.dirname(os.path.abspath(__file__))
GEOD = pyproj.Geod(ellps="WGS84")
UTM33 = pyproj.Transformer.from_crs("EPSG:4326", "EPSG:32633", always_xy=True)
rng = np.random.default_rng(20260503)

BASE_LAT, BASE_LON = 47.862, 15.168   # an unnamed area; nothing here refers to a real site


def offset(lat, lon, east_m, north_m):
    az = np.degrees(np.arctan2(east_m, north_m))
    lon2, lat2, _ = GEOD.fwd(lon, lat, az, np.hypot(east_m, north_m))
    return lat2, lon2


def azimuth(lat1, lon1, lat2, lon2):
    az, _, _ = GEOD.inv(lon1, lat1, lon2, lat2)
    return az % 360.0


def declination(lat, lon, when: datetime):
    from wmm import wmm_calc

    start = datetime(when.year, 1, 1, tzinfo=timezone.utc)
    end = datetime(when.year + 1, 1, 1, tzinfo=timezone.utc)
    dyear = when.year + (when - start) / (end - start)
    m = wmm_calc()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        m.setup_env(np.array([lat]), np.array([lon]), np.array([0.0]), unit="km")
        m.setup_time(dyear=np.array([dyear]))
        return float(np.asarray(m.get_all()["dec"])[0])


def write(name, header, rows):
    with open(os.path.join(HERE, name), "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(header)
        w.writerows(rows)


def iso(t: datetime, tz=timezone.utc):
    return t.astimezone(tz).isoformat(timespec="seconds").replace("+00:00", "Z")


CEST = timezone(timedelta(hours=2))


def animal_fix():
    """Tag 150.412 MHz, one morning fix: three compass bearings from UTM positions."""
    t_lat, t_lon = offset(BASE_LAT, BASE_LON, 420.0, 610.0)
    stations = [(-350.0, -280.0), (780.0, -150.0), (960.0, 1150.0)]
    t0 = datetime(2026, 5, 3, 4, 12, tzinfo=timezone.utc)
    rows = []
    for k, (e, n) in enumerate(stations):
        slat, slon = offset(BASE_LAT, BASE_LON, e, n)
        when = t0 + timedelta(minutes=4 * k)
        true_b = azimuth(slat, slon, t_lat, t_lon)
        mag = (true_b - declination(slat, slon, when) + rng.normal(0.0, 5.0)) % 360.0
        x, y = UTM33.transform(slon, slat)
        rows.append(["F001", "150.412", iso(when, CEST), "33N", f"{x:.0f}", f"{y:.0f}", f"{mag:.0f}", "magnetic",
                     "5", "A", "3-element Yagi", ["steady signal", "", "faint, wind"][k]])
    write("animal_fix.csv", ["fix", "tag", "time", "utm_zone", "easting", "northing", "bearing", "north", "sd",
                             "observer", "antenna", "note"], rows)
    write("truth_animal_fix.csv", ["fix", "tag", "lat", "lon"], [["F001", "150.412", f"{t_lat:.7f}", f"{t_lon:.7f}"]])


def hunt():
    """Two hidden transmitters; four teams report bearings one at a time over an hour."""
    foxes = {"fox-1": offset(BASE_LAT, BASE_LON, 2300.0, 3100.0), "fox-2": offset(BASE_LAT, BASE_LON, -1800.0, 2600.0)}
    t0 = datetime(2026, 9, 12, 8, 0, tzinfo=timezone.utc)
    teams = {"A": (-300.0, 0.0), "B": (1500.0, -400.0), "C": (3400.0, 900.0), "D": (-2500.0, 500.0)}
    rows = []
    events = []
    for fox in foxes:
        for team, (e, n) in teams.items():
            for k in range(2):
                minute = float(rng.uniform(0, 60))
                events.append((minute, fox, team, e + k * 600.0 + rng.normal(0, 80), n + k * 700.0 + rng.normal(0, 80)))
    events.sort()
    reflection_done = False
    for minute, fox, team, e, n in events:
        slat, slon = offset(BASE_LAT, BASE_LON, e, n)
        flat, flon = foxes[fox]
        b = azimuth(slat, slon, flat, flon) + rng.normal(0.0, 4.0)
        note = ""
        if fox == "fox-1" and team == "C" and not reflection_done:
            b += 38.0   # a reflection off a hillside: the classic wild bearing
            note = "signal bouncing?"
            reflection_done = True
        b %= 360.0
        unit, value = ("mil", f"{b * 6400 / 360:.0f}") if team == "B" else ("deg", f"{b:.0f}")
        when = t0 + timedelta(minutes=minute)
        rows.append([fox, fox, iso(when), f"{slat:.6f}", f"{slon:.6f}", value, unit, "true", "6", team, note])
    write("hunt.csv", ["fix", "tag", "time", "lat", "lon", "bearing", "unit", "north", "sd", "observer", "note"], rows)
    write("truth_hunt.csv", ["fix", "tag", "lat", "lon"],
          [[f, f, f"{la:.7f}", f"{lo:.7f}"] for f, (la, lo) in foxes.items()])


def week_tracking():
    """Three tags, seven days; bearings timed, positions from a GPS track."""
    tags = {"150.118": (600.0, 900.0), "150.262": (-900.0, 1400.0), "150.731": (1500.0, -200.0)}
    track = []   # (time, lat, lon)
    rows = []
    truth = []
    start_day = datetime(2026, 6, 1, 5, 30, tzinfo=timezone.utc)
    for day in range(7):
        t = start_day + timedelta(days=day)
        here_e, here_n = 0.0, -1500.0
        for tag, (ce, cn) in tags.items():
            ae, an = ce + rng.normal(0, 250), cn + rng.normal(0, 250)   # the animal today
            alat, alon = offset(BASE_LAT, BASE_LON, ae, an)
            first_time = None
            angles = rng.uniform(0, 2 * np.pi) + np.array([0.0, 2.1, 4.2]) + rng.normal(0, 0.25, 3)
            n_bearings = 2 if (day == 4 and tag == "150.262") else 3
            for k in range(n_bearings):
                ang = angles[k] if n_bearings == 3 else [0.0, 0.25][k] + angles[0]  # a shallow pair on day 5
                r = rng.uniform(500, 1100)
                se, sn = ae + r * np.sin(ang), an + r * np.cos(ang)
                # walk from here to the station: a point every 10 s for 5 minutes
                for s in range(30):
                    f = (s + 1) / 30
                    la, lo = offset(BASE_LAT, BASE_LON, here_e + f * (se - here_e), here_n + f * (sn - here_n))
                    track.append((t, la, lo))
                    t += timedelta(seconds=10)
                slat, slon = offset(BASE_LAT, BASE_LON, se, sn)
                for s in range(9):   # standing for 90 s; the bearing is read in the middle
                    jit = offset(slat, slon, rng.normal(0, 2), rng.normal(0, 2))
                    track.append((t + timedelta(seconds=10 * s), *jit))
                when = t + timedelta(seconds=45)
                t += timedelta(seconds=90)
                here_e, here_n = se, sn
                true_b = azimuth(slat, slon, alat, alon)
                mag = (true_b - declination(slat, slon, when) + rng.normal(0.0, 5.0)) % 360.0
                rows.append([tag, iso(when, CEST), f"{mag:.0f}", "magnetic", "5", "B", ""])
                first_time = first_time or when
            truth.append([tag, iso(first_time), f"{alat:.7f}", f"{alon:.7f}", n_bearings])
            t += timedelta(minutes=12)
    write("week_tracking.csv", ["tag", "time", "bearing", "north", "sd", "observer", "note"], rows)
    write("truth_week_tracking.csv", ["tag", "first_bearing_time", "lat", "lon", "n_bearings"], truth)
    with open(os.path.join(HERE, "week_track.gpx"), "w", encoding="utf-8") as fh:
        fh.write('<?xml version="1.0" encoding="UTF-8"?>\n<gpx version="1.1" creator="dfkit sample maker" '
                 'xmlns="http://www.topografix.com/GPX/1/1">\n<trk><name>tracking week</name><trkseg>\n')
        for when, la, lo in track:
            fh.write(f'<trkpt lat="{la:.7f}" lon="{lo:.7f}"><time>{iso(when)}</time></trkpt>\n')
        fh.write("</trkseg></trk>\n</gpx>\n")


def beacon_trials():
    """Beacon trials with two antennas (and a borrowed third), then field fixes taken with the same antennas.

    Each antenna has its own bias and SD (``truth_beacon_antennas.csv``); bearings are read on a compass and
    written to whole degrees. Beacons stand at known spots (``truth_beacon_trials.csv``), given in the sheet as
    lat/lon, UTM or MGRS; three trials are wild (two reflections, one loop read the wrong way round). The field
    sheet ``tracking_after_trials.csv`` (no ``sd`` column) has fixes taken with the same antennas on two tags,
    whose true positions are in ``truth_tracking_after_trials.csv``. Uses its own random stream, so the other
    samples do not depend on it.
    """
    import mgrs

    rng2 = np.random.default_rng(20260420)
    antennas = {"3-element Yagi": ("yagi", "A", 2.0, 3.5), "hand loop": ("loop", "B", -3.0, 7.0),
                "2-element (borrowed)": ("two", "C", 0.5, 5.0)}
    # beacons stand where the animals live, inside the ring of the usual tracking spots
    beacons = {"B1": (300.0, 800.0), "B2": (-700.0, 1200.0), "B3": (1400.0, 300.0), "B4": (-900.0, -400.0),
               "B5": (700.0, 1800.0), "B6": (2000.0, 1300.0)}
    stations = [(-400.0, -300.0), (900.0, -500.0), (1600.0, 1400.0), (-1200.0, 200.0), (200.0, 2600.0),
                (2500.0, -200.0), (1900.0, 2800.0), (-1600.0, -1300.0)]
    wild = {("B2", "yagi", 2, 1): 41.0, ("B4", "loop", 1, 3): -57.0, ("B6", "loop", 3, 0): 180.0}
    header = ["fix", "tag", "time", "lat", "lon", "bearing", "north", "beacon", "beacon_lat", "beacon_lon",
              "beacon_utm_zone", "beacon_easting", "beacon_northing", "beacon_mgrs", "observer", "antenna",
              "note"]
    rows, truth = [], []
    t = datetime(2026, 4, 20, 6, 30, tzinfo=timezone.utc)
    to_mgrs = mgrs.MGRS()
    for k, (bid, (be, bn)) in enumerate(beacons.items()):
        blat, blon = offset(BASE_LAT, BASE_LON, be, bn)
        truth.append([bid, f"150.{k * 20 + 40:03d}", f"{blat:.7f}", f"{blon:.7f}"])
        where = ["", "", "", "", "", ""]
        if bid == "B5":
            x, y = UTM33.transform(blon, blat)
            where[2:5] = ["33N", f"{x:.0f}", f"{y:.0f}"]
        elif bid == "B6":
            where[5] = to_mgrs.toMGRS(blat, blon, MGRSPrecision=5)
        else:
            where[0:2] = [f"{blat:.6f}", f"{blon:.6f}"]
        for antenna, (short, observer, bias, sd) in antennas.items():
            rounds = 3 if short != "two" else (1 if bid in ("B2", "B5", "B6") else 0)
            for rnd in range(1, rounds + 1):
                spots = rng2.choice(len(stations), 4, replace=False)
                for j, s_idx in enumerate(spots):
                    se, sn = stations[s_idx]
                    slat, slon = offset(BASE_LAT, BASE_LON, se + rng2.normal(0, 15), sn + rng2.normal(0, 15))
                    t += timedelta(minutes=3)
                    err = rng2.normal(bias, sd) + wild.get((bid, short, rnd, j), 0.0)
                    mag = (azimuth(slat, slon, blat, blon) - declination(slat, slon, t) + err) % 360.0
                    notes = {41.0: "bouncy signal", 180.0: "loop: null both ways?"}
                    note = notes.get(wild.get((bid, short, rnd, j)), "")
                    rows.append([f"{bid}-{short}-{rnd}", truth[-1][1], iso(t), f"{slat:.6f}", f"{slon:.6f}",
                                 f"{round(mag) % 360:d}", "magnetic", bid, *where, observer, antenna, note])
                t += timedelta(minutes=6)
    write("beacon_trials.csv", header, rows)
    write("truth_beacon_trials.csv", ["beacon", "tag", "lat", "lon"], truth)
    write("truth_beacon_antennas.csv", ["antenna", "bias_deg", "sd_deg", "note"],
          [[a, f"{v[2]:g}", f"{v[3]:g}", "error drawn normal(bias, sd), then the compass bearing written to "
            "whole degrees (adds about 0.3 deg SD)"] for a, v in antennas.items()])

    # field fixes with the same antennas, a month later, on two tags
    rows, truth = [], []
    t = datetime(2026, 5, 18, 4, 40, tzinfo=timezone.utc)
    names = list(antennas)
    for k in range(60):
        tag = ("150.318", "150.544")[k % 2]
        antenna = names[0] if k % 5 < 3 else names[1]
        if k in (17, 38, 51):
            antenna = names[2]
        short, observer, bias, sd = antennas[antenna]
        ae, an = rng2.uniform(-1500, 2500), rng2.uniform(-1000, 2500)
        alat, alon = offset(BASE_LAT, BASE_LON, ae, an)
        label = f"{'AB'[k % 2]}{k // 2 + 1:02d}"
        truth.append([label, tag, f"{alat:.7f}", f"{alon:.7f}"])
        angles = rng2.uniform(0, 360) + np.array([0.0, 120.0, 240.0]) + rng2.normal(0, 20, 3)
        for ang in angles:
            r = rng2.uniform(400, 1500)
            slat, slon = offset(alat, alon, r * np.sin(np.radians(ang)), r * np.cos(np.radians(ang)))
            t += timedelta(minutes=4)
            err = rng2.normal(bias, sd)
            mag = (azimuth(slat, slon, alat, alon) - declination(slat, slon, t) + err) % 360.0
            rows.append([label, tag, iso(t, CEST), f"{slat:.6f}", f"{slon:.6f}", f"{round(mag) % 360:d}",
                         "magnetic", observer, antenna])
        t += timedelta(hours=5, minutes=int(rng2.integers(0, 120)))
    write("tracking_after_trials.csv", ["fix", "tag", "time", "lat", "lon", "bearing", "north", "observer",
                                        "antenna"], rows)
    write("truth_tracking_after_trials.csv", ["fix", "tag", "lat", "lon"], truth)


UTM32 = pyproj.Transformer.from_crs("EPSG:4326", "EPSG:32632", always_xy=True)


def _dms(value, pos, neg, style):
    """An angle written by hand: 'dms' 47°51'43.2"N, 'ddm' N47 51.720, 'spaced' 47 51 43 N."""
    letter = pos if value >= 0 else neg
    v = abs(value)
    d = int(v)
    m = (v - d) * 60.0
    if style == "dms":
        s_ = (m - int(m)) * 60.0
        return f"{d}°{int(m):02d}'{s_:04.1f}\"{letter}"
    if style == "ddm":
        return f"{letter}{d} {m:06.3f}"
    return f"{d} {int(m)} {round((m - int(m)) * 60.0):d} {letter}"


def mistakes():
    """A hand-typed sheet with the usual mistakes and the usual ways of writing (for ``dfkit check``)."""
    header = ["fix", "tag", "time", "lat", "lon", "utm_zone", "easting", "northing", "bearing", "unit", "north", "note"]

    def ll(fix, time, lat, lon, bearing, unit="", north="magnetic", note=""):
        return [fix, "150.412", time, lat, lon, "", "", "", bearing, unit, north, note]

    def grid(fix, time, zone, e_m, n_m, bearing, note, crs=UTM33):
        lat, lon = offset(BASE_LAT, BASE_LON, e_m, n_m)
        x, y = crs.transform(lon, lat)
        return [fix, "150.412", time, "", "", zone, f"{x:.0f}", f"{y:.0f}", bearing, "", "magnetic", note]

    def hand(fix, time, e_m, n_m, style, bearing, note="", swap=False):
        lat, lon = offset(BASE_LAT, BASE_LON, e_m, n_m)
        a, b = _dms(lat, "N", "S", style), _dms(lon, "E", "W", style)
        return ll(fix, time, b if swap else a, a if swap else b, bearing, note=note)

    rows = [
        ll("M1", "2026-05-10T06:02:00+02:00", "47.8581", "15.1631", "52"),
        ll("M1", "2026-05-10T06:07:00+02:00", "47.8602", "15.1802", "412", note="mils, not degrees"),
        ll("M1", "2026-05-10T06:11:00+02:00", "15.1779", "47.8733", "200", note="lat/lon swapped"),
        ll("M1", "2026-05-10 06:15", "47.8712", "15.1611", "118", note="no UTC offset"),
        ll("M2", "2026-05-10T07:30:00+02:00", "47.8590", "15.1650", "1025", "mil"),
        ll("M2", "2026-05-10T07:34:00+02:00", "47.8611", "15.1822", "", note="forgot the bearing"),
        ll("M2", "2026-05-10T07:38:00+02:00", "47.8745", "15.1760", "205", "deg", "compass"),
        ll("M2", "2026-05-10T07:41:00+02:00", "47.8705", "15.1625", "121", "degs", note="unknown unit"),
        ll("M3", "2031-05-10T07:41:00+02:00", "47.8705", "15.1625", "121", note="past the model"),
        # UTM as a GPS shows it: the letter is the latitude band (T = 40-48 N), not the hemisphere
        grid("M4", "2026-05-11T06:00:00+02:00", "33T", -300.0, -200.0, "40", "zone as the GPS shows it"),
        grid("M4", "2026-05-11T06:06:00+02:00", "33T", 700.0, -100.0, "331", ""),
        grid("M4", "2026-05-11T06:12:00+02:00", "33U", 900.0, 1000.0, "243", "band letter U: this is band T"),
        grid("M4", "2026-05-11T06:18:00+02:00", "32T", -200.0, 900.0, "118", "copied off a zone-32 map", UTM32),
        # positions read off a GPS in degrees and minutes, or typed in degrees, minutes and seconds
        hand("M5", "11.05.2026 07:05 +02:00", -250.0, 150.0, "dms", "61"),
        hand("M5", "11.05.2026 07:12 +02:00", 650.0, 300.0, "ddm", "302"),
        hand("M5", "11.05.2026 07:20 +02:00", 400.0, 1100.0, "spaced", "196"),
        hand("M5", "11.05.2026 07:26 +02:00", 100.0, 700.0, "ddm", "150", "columns swapped", swap=True),
        # day-first dates: 13.05 shows the column is day.month.year
        ll("M6", "13.05.2026 07:00 +02:00", "47.8650", "15.1700", "75"),
        ll("M6", "2206-05-13T07:10:00+02:00", "47.8690", "15.1580", "130", note="year typed wrong"),
        # the label M1 used again two days later: another fix
        ll("M1", "2026-05-12T06:02:00+02:00", "47.8580", "15.1633", "49", note="M1 again, another day"),
        ll("M1", "2026-05-12T06:09:00+02:00", "47.8604", "15.1800", "318"),
    ]
    write("field_sheet_with_mistakes.csv", header, rows)


def season():
    """Two monthly sheets of a tracking season on three tags whose true home ranges are known.

    Each animal's daily position is drawn from a bivariate normal (its true utilisation
    distribution, whose 95 % isopleth has the area -2 ln(0.05) pi sigma_e sigma_n); most days
    it gets one fix of three compass bearings. The June sheet begins with the last three days
    of May, as a cumulative export would. Uses its own random generator, so the other samples
    do not change when this scenario does.
    """
    g = np.random.default_rng(20260815)
    tags = {"151.040": (-800.0, 600.0, 300.0, 200.0), "151.310": (900.0, 1100.0, 450.0, 250.0),
            "151.620": (300.0, -900.0, 250.0, 350.0)}
    rows, fixes = [], []
    start = datetime(2026, 5, 1, 5, 0, tzinfo=timezone.utc)
    for day in range(61):
        t = start + timedelta(days=day)
        for tag, (ce, cn, se_, sn_) in tags.items():
            t += timedelta(minutes=int(g.integers(20, 50)))
            if g.random() > 0.85:
                continue                                   # not found that day
            ae, an = ce + g.normal(0, se_), cn + g.normal(0, sn_)
            alat, alon = offset(BASE_LAT, BASE_LON, ae, an)
            angles = g.uniform(0, 2 * np.pi) + np.array([0.0, 2.1, 4.2]) + g.normal(0, 0.3, 3)
            first = None
            for k in range(3):
                r = g.uniform(500, 1200)
                slat, slon = offset(BASE_LAT, BASE_LON, ae + r * np.sin(angles[k]), an + r * np.cos(angles[k]))
                when = t + timedelta(minutes=5 * k)
                err = g.normal(0.0, 4.0) if g.random() > 0.02 else g.uniform(30, 60)   # now and then a reflection
                mag = (azimuth(slat, slon, alat, alon) - declination(slat, slon, when) + err) % 360.0
                rows.append([day, tag, iso(when, CEST), f"{slat:.6f}", f"{slon:.6f}", f"{mag:.0f}", "magnetic", "4",
                             "KL"[k % 2], ""])
                first = first or when
            fixes.append([tag, iso(first), f"{alat:.7f}", f"{alon:.7f}"])
    rows[100][5] = str(int(rows[100][5]) * 10 + 7)           # a slip of the pen: dfkit rejects the row
    rows[100][9] = "typed in the evening"
    header = ["tag", "time", "lat", "lon", "bearing", "north", "sd", "observer", "note"]
    write("season_2026_05.csv", header, [r[1:] for r in rows if r[0] <= 30])
    write("season_2026_06.csv", header, [r[1:] for r in rows if r[0] >= 28])
    write("truth_season.csv", ["tag", "centre_lat", "centre_lon", "sigma_east_m", "sigma_north_m"],
          [[tag, *(f"{v:.7f}" for v in offset(BASE_LAT, BASE_LON, ce, cn)), f"{se_:g}", f"{sn_:g}"]
           for tag, (ce, cn, se_, sn_) in tags.items()])
    write("truth_season_fixes.csv", ["tag", "first_bearing_time", "lat", "lon"], fixes)
def hunt_spots():
    """Places in the hunt's area a team can reach and take a bearing from (for ``dfkit plan``).

    Chosen by hand (no random numbers), in metres east and north of the same base
    as the hunt; a few are written in UTM or MGRS, as read off a map or a GPS.
    """
    import mgrs

    spots = [  # label, kind, east m, north m, form, note
        ("J-brook", "trail junction", 400.0, 1500.0, "latlon", "footbridge over the brook"),
        ("J-beech", "trail junction", 1700.0, 2300.0, "latlon", ""),
        ("J-saddle", "trail junction", -600.0, 3900.0, "utm", "steep last 200 m"),
        ("J-ridge", "trail junction", 1200.0, 4300.0, "latlon", ""),
        ("J-spring", "trail junction", 3600.0, 4000.0, "mgrs", ""),
        ("J-meadow", "trail junction", -2200.0, 4000.0, "latlon", "grazing: ask the farmer first"),
        ("J-hut", "trail junction", 2900.0, 5200.0, "utm", ""),
        ("P-quarry", "road pull-out", 4300.0, 2200.0, "latlon", "room for two cars"),
        ("P-bridge", "road pull-out", 2600.0, 700.0, "utm", ""),
        ("P-sawmill", "road pull-out", -2900.0, 2200.0, "mgrs", "weekdays: lorries"),
        ("P-crossroads", "road pull-out", -1000.0, 1100.0, "latlon", ""),
        ("P-layby", "road pull-out", 800.0, 2800.0, "latlon", ""),
    ]
    to_mgrs = mgrs.MGRS()
    rows = []
    for label, kind, e, n, form, note in spots:
        lat, lon = offset(BASE_LAT, BASE_LON, e, n)
        row = [label, kind, "", "", "", "", "", "", note]
        if form == "latlon":
            row[2:4] = [f"{lat:.6f}", f"{lon:.6f}"]
        elif form == "utm":
            x, y = UTM33.transform(lon, lat)
            row[4:7] = ["33N", f"{x:.0f}", f"{y:.0f}"]
        else:
            row[7] = to_mgrs.toMGRS(lat, lon, MGRSPrecision=5)
        rows.append(row)
    write("hunt_spots.csv", ["spot", "kind", "lat", "lon", "utm_zone", "easting", "northing", "mgrs", "note"], rows)


if __name__ == "__main__":
    animal_fix()
    hunt()
    week_tracking()
    beacon_trials()
    mistakes()
    season()
    hunt_spots()
    print("sample sheets written to", HERE)
