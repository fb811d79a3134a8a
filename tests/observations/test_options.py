"""Options are validated like sheet values: Python names the parameter, the command line names the flag."""

import pytest

from dfkit import read_bearings
from dfkit.cli import main
from dfkit.observations import OptionError

GOOD = "fix,lat,lon,bearing\nA,47.0,15.0,45\nA,47.0,15.02,315\nA,47.02,15.01,180\n"


@pytest.mark.parametrize("kwargs, param, flag_args, flag", [
    ({"sd": 1e-150}, "sd=", ["--sd", "1e-150"], "--sd 1e-150"),
    ({"sd": float("nan")}, "sd=", ["--sd", "nan"], "--sd nan"),
    ({"sd": 90}, "sd=", ["--sd", "90"], "--sd 90"),
    ({"declination": float("nan")}, "declination=", ["--declination", "nan"], "--declination nan"),
    ({"declination": float("inf")}, "declination=", ["--declination", "inf"], "--declination inf"),
    ({"declination": 720}, "declination=", ["--declination", "720"], "--declination 720"),
    ({"window_min": 0}, "window_min=", ["--window", "0"], "--window 0"),
    ({"window_min": float("inf")}, "window_min=", ["--window", "inf"], "--window inf"),
    ({"window_min": 1e6}, "window_min=", ["--window", "1e6"], "--window 1e+06"),
    ({"track_gap_s": -1}, "track_gap_s=", ["--track-gap", "-1"], "--track-gap -1"),
    ({"track_gap_s": float("nan")}, "track_gap_s=", ["--track-gap", "nan"], "--track-gap nan"),
    ({"tz": "Mars/Olympus"}, "tz=", ["--tz", "Mars/Olympus"], "--tz Mars/Olympus"),
    ({"date_format": "whenever"}, "date_format=", ["--date-format", "whenever"], "--date-format whenever"),
])
def test_options_are_refused_by_name(write_sheet, capsys, kwargs, param, flag_args, flag):
    sheet = write_sheet(GOOD)
    with pytest.raises(ValueError, match="^" + param) as info:
        read_bearings(sheet, **kwargs)
    assert isinstance(info.value, OptionError)
    assert main(["check", str(sheet)] + flag_args) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith(f"dfkit: {flag} ")


@pytest.mark.parametrize("level, words", [("95", "give 0.95"), ("0", "between 0 and 1"), ("nan", "finite"),
                                          ("1", "between 0 and 1")])
def test_level_is_refused_by_flag(write_sheet, capsys, level, words):
    assert main(["fix", str(write_sheet(GOOD)), "--level", level]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith(f"dfkit: --level {level}") and words in err


def test_the_lowest_sd_is_stated_and_applies_to_the_sheet_too(write_sheet):
    from dfkit.policy import MIN_SD_DEG

    b = read_bearings(write_sheet(GOOD.replace("bearing\n", "bearing,sd\n").replace("45\n", f"45,{MIN_SD_DEG / 10}\n")
                                  .replace("315\n", f"315,{MIN_SD_DEG}\n").replace("180\n", "180,\n")), sd=MIN_SD_DEG)
    errs = [p for p in b.problems if p.severity == "error"]
    assert [p.line for p in errs] == [2] and "from 0.01" in errs[0].message
    assert b.table["sd"].tolist() == [MIN_SD_DEG, MIN_SD_DEG]


def test_unknown_option_names_are_a_type_error(write_sheet):
    with pytest.raises(TypeError, match="'sd_deg'"):
        read_bearings(write_sheet(GOOD), sd_deg=3)


def test_importing_dfkit_changes_no_global_state():
    # PROJ's network switch and matplotlib's backend belong to the user: dfkit must leave both as it found them,
    # and conversions must not try the network even where it is switched on.
    import subprocess
    import sys

    code = """
import socket, sys
import pyproj, matplotlib
pyproj.network.set_network_enabled(True)
matplotlib.use("svg")
def guard(*a, **k):
    raise SystemExit("network touched")
socket.socket.connect = guard
import dfkit, dfkit.grids, dfkit.geodesy, dfkit.locate, dfkit.maps, dfkit.figures, dfkit.cli
from dfkit import grids
lat, lon = grids.utm_to_latlon([33], [False], [512300.0], [5301200.0])
assert pyproj.network.is_network_enabled() is True, "PROJ network setting changed"
assert matplotlib.get_backend().lower() == "svg", matplotlib.get_backend()
assert 47 < lat[0] < 48
print("ok")
"""
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert r.returncode == 0 and r.stdout.strip() == "ok", r.stderr
