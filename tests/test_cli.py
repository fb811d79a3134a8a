"""The command line: exit codes, outputs and messages, as a user sees them."""

import json
import re
import subprocess
import sys

import gpxpy
import pytest

from dfkit.cli import main

from .conftest import ROOT, SAMPLES

GOOD = "fix,lat,lon,bearing,sd\nA,47,15,45,3\nA,47,15.02,315,3\nA,47.02,15.01,180,3\n"


def test_check_exit_codes(write_sheet, tmp_path, capsys):
    assert main(["check", str(write_sheet(GOOD))]) == 0
    assert main(["check", str(write_sheet(GOOD + "A,47,15,412,3\n"))]) == 1
    out = capsys.readouterr().out
    assert "line 5, bearing: 412 is out of range for degrees (mils? set unit to mil)" in out
    assert main(["check", str(tmp_path / "missing.csv")]) == 2
    assert main(["check", str(write_sheet(""))]) == 2
    assert main(["check"]) == 2                        # misuse
    assert main(["check", str(write_sheet(GOOD)), "--unit", "furlong"]) == 2


def test_check_writes_the_normalized_table(write_sheet, tmp_path):
    out = tmp_path / "n.csv"
    assert main(["check", str(write_sheet(GOOD + "A,47,15,412,3\n")), "-o", str(out)]) == 1
    import pandas as pd

    t = pd.read_csv(out)
    for col in ("line", "fix", "tag", "time", "lat", "lon", "true_bearing", "sd", "declination", "convergence"):
        assert col in t.columns
    assert t["line"].tolist() == [2, 3, 4]


def test_fix_writes_csv_geojson_gpx(write_sheet, tmp_path, capsys):
    paths = [tmp_path / "f.csv", tmp_path / "f.geojson", tmp_path / "f.gpx"]
    args = ["fix", str(write_sheet(GOOD + "B,47,15,45,3\n"))]
    for p in paths:
        args += ["-o", str(p)]
    assert main(args) == 1          # fix B has one bearing: flagged, so exit 1
    err = capsys.readouterr().err
    assert re.search(r"2 fixes: 1 ok, 0 flagged, 1 failed", err)
    assert "not for life-safety search" in err
    import pandas as pd

    t = pd.read_csv(paths[0])
    required = ["fix", "tag", "time", "lat", "lon", "n_bearings", "method", "sd_deg", "level", "semi_major_m",
                "semi_minor_m", "orientation_deg", "area_m2", "status", "reason"]
    assert all(c in t.columns for c in required)
    assert t["fix"].tolist() == ["A", "B"] and t["status"].tolist() == ["ok", "too_few"]
    gj = json.loads(paths[1].read_text())
    kinds = sorted({f["properties"]["kind"] for f in gj["features"]})
    assert kinds == ["bearing", "fix", "region", "station"]      # likelihood regions in place of ellipses
    gpx = gpxpy.parse(paths[2].read_text())
    assert [w.name for w in gpx.waypoints] == ["A"]


def test_geojson_is_split_at_the_antimeridian(write_sheet, tmp_path):
    sheet = write_sheet("fix,lat,lon,bearing,sd\nA,-17.0,179.98,90,3\nA,-16.98,-179.9999,180,3\n")
    out = tmp_path / "a.geojson"
    main(["fix", str(sheet), "-o", str(out)])
    gj = json.loads(out.read_text())
    for f in gj["features"]:
        g = f["geometry"]
        flat = json.dumps(g["coordinates"])
        lons = [float(x) for x in re.findall(r"\[(-?[\d.e-]+), -?[\d.e-]+\]", flat)]
        assert all(-180 <= x <= 180 for x in lons), f["properties"]["kind"]
    reg = [f for f in gj["features"] if f["properties"]["kind"] == "region"][0]
    assert reg["geometry"]["type"] == "MultiPolygon"   # the region straddles 180 deg (RFC 7946 3.1.9)


def test_python_m_dfkit_and_console_script_run():
    r = subprocess.run([sys.executable, "-m", "dfkit", "--version"], capture_output=True, text=True)
    assert r.returncode == 0 and "dfkit" in r.stdout


def test_readme_commands_exist():
    # Every `dfkit ...` command shown in the README parses.
    text = (ROOT / "README.md").read_text()
    cmds = re.findall(r"^\s*dfkit (check|fix|map) ", text, flags=re.M)
    assert len(cmds) >= 3
    assert "make demo" in text and "make test" in text


@pytest.mark.parametrize("name, extra", [("animal_fix.csv", []), ("hunt.csv", ["--window", "90", "--method", "andrews"])])
def test_sample_sheets_solve_ok(name, extra, tmp_path):
    assert main(["fix", str(SAMPLES / name), "-o", str(tmp_path / "x.csv")] + extra) == 0


# ----------------------------------------------------------------------- help says what each option accepts

def _option_help(*path, dest):
    """The help text of option ``dest`` of the (sub)command ``path`` (``"season", "show"``)."""
    import argparse

    from dfkit.cli import build_parser

    p = build_parser()
    for name in path:
        sub = next(a for a in p._actions if isinstance(a, argparse._SubParsersAction))
        p = sub.choices[name]
    return next(a.help for a in p._actions if a.dest == dest)


def _extensions(text):
    return re.findall(r"(?<![\w.])\.[a-z]+\b", text)


def test_fix_output_help_lists_exactly_what_it_writes_and_each_is_written(write_sheet, tmp_path, capsys):
    from dfkit.export import WRITERS

    kinds = _extensions(_option_help("fix", dest="output"))
    assert sorted(kinds) == sorted(WRITERS) and {".gpkg", ".kml", ".fgb", ".json"} <= set(kinds)
    sheet = write_sheet(GOOD)
    for ext in kinds:
        out = tmp_path / f"out{ext}"
        assert main(["fix", str(sheet), "-o", str(out)]) == 0, ext
        assert out.stat().st_size > 0
    assert main(["fix", str(sheet), "-o", str(tmp_path / "out.xlsx")]) == 2
    assert "cannot write" in capsys.readouterr().err and not (tmp_path / "out.xlsx").exists()


@pytest.mark.parametrize("path, dest, module_constant", [
    (("plan",), "output", ("dfkit.cli.plan", "OUTPUTS")),
    (("season", "show"), "output", ("dfkit.cli.season", "SHOW_KINDS")),
    (("ranges",), "output", ("dfkit.season.range_files", "RANGE_KINDS")),
])
def test_output_help_of_every_command_names_what_it_accepts(path, dest, module_constant):
    import importlib

    accepted = getattr(importlib.import_module(module_constant[0]), module_constant[1])
    assert set(_extensions(_option_help(*path, dest=dest))) == set(accepted)


def test_csv_and_html_outputs_refuse_other_kinds_before_any_work(write_sheet, tmp_path, capsys):
    sheet = str(write_sheet(GOOD))
    trials = str(SAMPLES / "beacon_trials.csv")
    for argv in (["check", sheet, "-o", "n.xlsx"], ["fix", sheet, "--bearings-out", "b.geojson"],
                 ["map", sheet, "-o", "m.csv"], ["calibrate", trials, "-o", "cal.json"],
                 ["calibrate", trials, "--trials-out", "t.xlsx"], ["calibrate", trials, "--check-out", "c.gpx"]):
        bad = tmp_path / argv[-1]
        assert main(argv[:-1] + [str(bad)]) == 2, argv
        err = capsys.readouterr().err
        assert f"cannot write '{bad}': use one of" in err and f"for {argv[-2]}" in err and not bad.exists()
    assert "use one of .html or .htm for -o" in (main(["map", sheet, "-o", str(tmp_path / "m.png")]), capsys.readouterr().err)[1]
    for h in (_option_help("check", dest="output"), _option_help("calibrate", dest="output")):
        assert "CSV" in h or ".csv" in h
    assert ".xlsx" in _option_help("fix", dest="sheet") and ".ods" in _option_help("season", "add", dest="sheets")
    assert "regions" in _option_help("fix", dest="level")


def test_north_and_unit_options_take_the_spellings_a_sheet_takes(write_sheet, capsys):
    sheet = str(write_sheet(GOOD))
    for spelling in ("grid north", "Grid North", "GN", "grid"):
        assert main(["check", sheet, "--north", spelling, "--grid-crs", "EPSG:32633"]) == 0, spelling
    for spelling in ("magnetic north", "mag north", "Mag", "true north", "TN"):
        assert main(["check", sheet, "--north", spelling, "--declination", "4.5"]) == 0, spelling
    assert main(["check", sheet, "--unit", "degrees"]) == 0
    assert main(["check", sheet, "--north", "up"]) == 2
    assert "'up' is not one of grid, magnetic, true" in capsys.readouterr().err


def test_a_date_without_a_time_column_is_reported_against_the_date_column(write_sheet, capsys):
    # a date alone is a coarse time (issue 7); a date that does not exist is refused, against the date column
    sheet = write_sheet("fix,tag,date,lat,lon,bearing,sd\n1,150.1,2026-02-30,47.85,15.15,20,3\n")
    assert main(["check", str(sheet)]) == 1
    out = capsys.readouterr().out
    assert "line 2, date: '2026-02-30' is not a valid date" in out
    both = write_sheet("fix,date,time,lat,lon,bearing\n1,2026-02-30,,47.85,15.15,20\n", "both.csv")
    assert main(["check", str(both)]) == 1
    assert "line 2, time: '2026-02-30' is not a valid date" in capsys.readouterr().out


def test_check_counts_fixes_as_tag_and_label(write_sheet, capsys):
    # label 1 on tags a and b is two fixes; label 2 on b a third: 3 fixes from 2 distinct labels
    sheet = write_sheet("tag,fix,lat,lon,bearing\na,1,47,15,45\na,1,47,15.02,315\nb,1,47.1,15,45\n"
                        "b,1,47.1,15.02,315\nb,2,47.2,15,45\n")
    main(["check", str(sheet)])
    assert "; 3 fixes from 2 distinct labels" in capsys.readouterr().out


def test_process_command_line_freezes_import_objects_and_callers_keep_their_collector():
    # Python's gc.freeze (docs: "move all objects tracked by the garbage collector to a permanent generation")
    # only when main() is the process's own command line (argv from sys.argv); a caller's collector is untouched
    import gc
    import subprocess
    import sys as _sys

    code = ("import gc, sys; sys.argv = ['dfkit', '--version']; from dfkit.cli import main; "
            "before = gc.get_freeze_count(); main(); print(before, gc.get_freeze_count())")
    out = subprocess.run([_sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.split()[-2:]
    assert int(out[0]) == 0 and int(out[1]) > 1000
    from dfkit.cli import main

    before = gc.get_freeze_count()
    assert main(["--version"]) == 0
    assert gc.get_freeze_count() == before


@pytest.mark.parametrize("extra", [[], ["--bearings-out", "b.csv"], ["-o", "f.geojson"]])
def test_the_summary_counts_the_bearings_used_whatever_is_written(write_sheet, tmp_path, capsys, monkeypatch, extra):
    # 4 rows, one refused (bearing out of range): 3 used, whether the bearings are kept for an output or not
    monkeypatch.chdir(tmp_path)
    sheet = write_sheet(GOOD + "A,47,15,412,3\n")
    assert main(["fix", str(sheet), "-o", "f.csv"] + extra) == 1
    err = capsys.readouterr().err
    assert "1 fix: 1 ok, 0 flagged, 0 failed; 3 of 4 rows used, 1 rejected" in err
    assert (tmp_path / "f.csv").read_text().count("\n") == 2       # header and the one fix
