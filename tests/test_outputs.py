"""Outputs never overwrite an input and never appear half-written, whatever happens during the run."""

import json
import os
import shutil
import signal
import subprocess
import sys
import time

import numpy as np
import pytest

from dfkit.cli import main

from .conftest import ROOT

SHEET = "fix,time,lat,lon,bearing,sd,station\nA,2026-05-03T06:00:05Z,47,15,45,3,\nA,2026-05-03T06:01:05Z,47,15.02,315,3,\n" \
        "A,2026-05-03T06:02:00Z,47.02,15.01,180,3,\n"
STATIONS = "station,lat,lon\nR1,47.0,15.0\n"
TRACK = ('<?xml version="1.0" encoding="UTF-8"?>\n<gpx version="1.1" creator="t" '
         'xmlns="http://www.topografix.com/GPX/1/1"><trk><trkseg>\n'
         '<trkpt lat="47" lon="15"><time>2026-05-03T06:00:00Z</time></trkpt>\n'
         '<trkpt lat="47" lon="15.001"><time>2026-05-03T06:00:10Z</time></trkpt>\n'
         "</trkseg></trk></gpx>\n")


@pytest.fixture
def inputs(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "sheet.csv").write_text(SHEET)
    (tmp_path / "stations.csv").write_text(STATIONS)
    (tmp_path / "track.gpx").write_text(TRACK)
    return tmp_path


def _alias(tmp_path, target, kind):
    if kind == "same":
        return target
    if kind == "dot":
        return f"./{target}"
    if kind == "absolute":
        return str(tmp_path / target)
    if kind == "up_and_back":
        return f"../{tmp_path.name}/{target}"
    link = tmp_path / f"{kind}_{target}"
    if kind == "symlink":
        link.symlink_to(tmp_path / target)
    else:
        os.link(tmp_path / target, link)
    return link.name


COMMANDS = {
    "check -o": lambda out: ["check", "sheet.csv", "-o", out],
    "fix -o": lambda out: ["fix", "sheet.csv", "-o", out],
    "fix --bearings-out": lambda out: ["fix", "sheet.csv", "--bearings-out", out],
    "map -o": lambda out: ["map", "sheet.csv", "-o", out],
}
EXTRA = {"stations.csv": ["--stations", "stations.csv"], "track.gpx": ["--track", "track.gpx"], "sheet.csv": []}


@pytest.mark.parametrize("kind", ["same", "dot", "absolute", "up_and_back", "symlink", "hardlink"])
@pytest.mark.parametrize("command", list(COMMANDS))
@pytest.mark.parametrize("target", ["sheet.csv", "stations.csv", "track.gpx"])
def test_an_output_that_is_an_input_is_refused(inputs, capsys, kind, command, target):
    before = {p.name: p.read_bytes() for p in inputs.iterdir()}
    out = _alias(inputs, target, kind)
    assert main(COMMANDS[command](str(out)) + EXTRA[target]) == 2
    err = capsys.readouterr().err
    assert "never overwrites its input" in err and err.count("\n") == 1
    for name, data in before.items():
        assert (inputs / name).read_bytes() == data


def test_two_outputs_with_one_name_are_refused_before_any_work(inputs, capsys):
    assert main(["fix", "sheet.csv", "-o", "f.csv", "--bearings-out", "./f.csv"]) == 2
    assert "same file" in capsys.readouterr().err
    assert not (inputs / "f.csv").exists()


def test_an_output_that_is_a_folder_is_refused(inputs, capsys):
    (inputs / "out.csv").mkdir()
    assert main(["check", "sheet.csv", "-o", "out.csv"]) == 2
    assert "is a folder" in capsys.readouterr().err


OUTPUTS = [("check -o", "t.csv"), ("fix -o", "t.csv"), ("fix -o", "t.geojson"), ("fix -o", "t.gpx"),
           ("fix -o", "t.gpkg"), ("fix -o", "t.kml"), ("fix --bearings-out", "t.csv"), ("map -o", "t.html")]


@pytest.mark.parametrize("command, name", OUTPUTS)
def test_a_failed_write_leaves_the_old_file_and_no_debris(inputs, monkeypatch, capsys, command, name):
    # Every writer must go through the atomic path: a failure while syncing (disk full, pulled USB stick)
    # leaves the previous result whole. A writer that opened the target itself would have emptied it.
    target = inputs / name
    target.write_text("OLD")

    def no_space(fd):
        raise OSError(28, "No space left on device (injected)")

    monkeypatch.setattr(os, "fsync", no_space)
    assert main(COMMANDS[command](name)) == 2
    assert "No space left" in capsys.readouterr().err
    assert target.read_text() == "OLD"
    assert sorted(p.name for p in inputs.iterdir()) == ["sheet.csv", "stations.csv", name, "track.gpx"]


def test_a_failed_figure_leaves_no_partial_png(inputs, monkeypatch, capsys):
    def no_space(fd):
        raise OSError(28, "No space left on device (injected)")

    monkeypatch.setattr(os, "fsync", no_space)
    assert main(["fix", "sheet.csv", "--figures", "figs"]) == 2
    assert "No space left" in capsys.readouterr().err
    assert list((inputs / "figs").iterdir()) == []


OTHER_COMMANDS = [
    ("calibrate", ["calibrate", "{trials}", "-o", "{alias}"], "trials"),
    ("calibrate --trials-out", ["calibrate", "{trials}", "--trials-out", "{alias}"], "trials"),
    ("plan", ["plan", "sheet.csv", "--fix", "A", "--around", "500", "-o", "{alias}"], "sheet.csv"),
    ("plan --spots", ["plan", "sheet.csv", "--fix", "A", "--spots", "stations.csv", "-o", "{alias}"], "stations.csv"),
    ("ranges", ["ranges", "fixes.csv", "-o", "{alias}"], "fixes.csv"),
]


@pytest.mark.parametrize("kind", ["dot", "symlink", "hardlink"])
@pytest.mark.parametrize("name, args, target", OTHER_COMMANDS, ids=[c[0] for c in OTHER_COMMANDS])
def test_other_commands_refuse_to_overwrite_their_input(inputs, capsys, kind, name, args, target):
    from .conftest import SAMPLES

    shutil.copy(SAMPLES / "beacon_trials.csv", inputs / "trials.csv")
    (inputs / "fixes.csv").write_text("fix,tag,lat,lon,status\nA,T,47,15,ok\n")
    target = "trials.csv" if target == "trials" else target
    before = (inputs / target).read_bytes()
    alias = _alias(inputs, target, kind)
    argv = [a.replace("{trials}", "trials.csv").replace("{alias}", str(alias)) for a in args]
    assert main(argv) == 2
    assert "never overwrites its input" in capsys.readouterr().err
    assert (inputs / target).read_bytes() == before


def test_season_show_refuses_a_hard_link_to_its_store(inputs, capsys):
    assert main(["season", "add", "season.gpkg", "sheet.csv"]) == 0
    os.link(inputs / "season.gpkg", inputs / "copy.csv")
    before = (inputs / "season.gpkg").read_bytes()
    assert main(["season", "show", "season.gpkg", "-o", "copy.csv"]) == 2
    assert "is the season file" in capsys.readouterr().err
    assert (inputs / "season.gpkg").read_bytes() == before


KILL_AT_SYNC = ("import os, signal, sys\n"
                "os.fsync = lambda fd: os.kill(os.getpid(), signal.SIGKILL)\n"
                "from dfkit.cli import main\n"
                "sys.exit(main(sys.argv[1:]))\n")


@pytest.mark.parametrize("command, name", [o for o in OUTPUTS if o[1] != "t.kml"])
def test_kill_9_just_before_the_rename_leaves_the_old_file(inputs, command, name):
    # The process is killed (SIGKILL) after every byte is written to the temporary file but before the rename.
    target = inputs / name
    target.write_text("OLD")
    r = subprocess.run([sys.executable, "-c", KILL_AT_SYNC] + COMMANDS[command](name), cwd=inputs,
                       capture_output=True, text=True, env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert r.returncode == -signal.SIGKILL
    assert target.read_text() == "OLD"
    stem = os.path.splitext(name)[0]
    debris = sorted(p.name for p in inputs.iterdir() if p.name.startswith("."))
    assert len(debris) == 1 and debris[0].startswith(f".{stem}.") and ".part" in debris[0]   # hidden, documented


def _big_sheet(path, n_fix, rng):
    lat = 47 + rng.uniform(0, 1, n_fix)
    lon = 15 + rng.uniform(0, 1, n_fix)
    rows = ["fix,lat,lon,bearing,sd"]
    for i in range(n_fix):
        for k in range(4):
            # Four stations about 1 km around the spot, bearings pointing roughly at it.
            az = 90.0 * k
            rows.append(f"F{i},{lat[i] + 0.009 * np.cos(np.radians(az)):.6f},"
                        f"{lon[i] + 0.013 * np.sin(np.radians(az)):.6f},{(az + 180) % 360:.1f},4")
    path.write_text("\n".join(rows) + "\n")


def test_kill_9_during_a_large_run_leaves_nothing_partial(tmp_path):
    # A real kill at a moment we do not choose: as soon as a temporary output appears, the run is killed.
    # Whatever the moment, each final name holds either its old content or a complete result.
    sheet = tmp_path / "season.csv"
    n_fix = 8000
    _big_sheet(sheet, n_fix, np.random.default_rng(3))
    gj, bo = tmp_path / "out.geojson", tmp_path / "bearings.csv"
    gj.write_text("OLD")
    bo.write_text("OLD")
    proc = subprocess.Popen([sys.executable, "-m", "dfkit", "fix", str(sheet), "-o", str(gj), "--bearings-out",
                             str(bo)], cwd=tmp_path, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                            env={**os.environ, "PYTHONPATH": str(ROOT)})
    seen = False
    deadline = time.monotonic() + 300
    while proc.poll() is None and time.monotonic() < deadline:
        if any(p.name.endswith(".part") for p in tmp_path.iterdir()):
            proc.send_signal(signal.SIGKILL)
            seen = True
            break
        time.sleep(0.002)
    proc.wait()
    if not seen:
        pytest.skip("the run finished before a temporary output was seen; nothing was killed")
    assert proc.returncode == -signal.SIGKILL
    text = gj.read_text()
    if text != "OLD":
        assert len(json.loads(text)["features"]) > n_fix          # complete: it parses and holds every fix
    lines = bo.read_text().splitlines()
    if lines != ["OLD"]:
        assert len(lines) == 4 * n_fix + 1 and bo.read_text().endswith("\n")
