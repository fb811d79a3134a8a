"""`dfkit fix` to CSV loads only what it uses: no plotting, mapping, GIS or scipy modules (they cost start-up time
and memory on every run; they are imported inside the functions that need them)."""

from __future__ import annotations

import subprocess
import sys

HEAVY = ("scipy", "matplotlib", "folium", "branca", "jinja2", "geopandas", "shapely", "pyogrio", "tqdm",
         "python_calamine", "openpyxl", "pyarrow")

PROBE = """
import sys
from dfkit.cli import main
try:
    main(sys.argv[1:])
except SystemExit:
    pass
print(" ".join(sorted({m.split(".")[0] for m in sys.modules})))
"""


def _loaded(args, cwd):
    r = subprocess.run([sys.executable, "-c", PROBE, *args], capture_output=True, text=True, cwd=cwd, check=True)
    return set(r.stdout.split())


def test_fix_help_and_a_csv_fix_load_no_heavy_module(tmp_path):
    sheet = tmp_path / "s.csv"
    sheet.write_text("fix,lat,lon,bearing,sd\nA,47.0,15.0,45,3\nA,47.0,15.02,315,3\nA,46.99,15.01,0,3\n")
    for args in (["fix", "--help"], ["fix", str(sheet), "-o", str(tmp_path / "out.csv")]):
        loaded = _loaded(args, tmp_path)
        assert "dfkit" in loaded and "pandas" in loaded          # the probe ran
        assert not loaded & set(HEAVY), (args, sorted(loaded & set(HEAVY)))
    assert (tmp_path / "out.csv").exists()


def _run(code, env_extra=None, drop=()):
    import os

    env = {k: v for k, v in os.environ.items() if k not in drop}
    env.update(env_extra or {})
    return subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                          env=env).stdout.split()


def test_the_package_loads_numpy_only_when_its_names_are_used():
    assert _run("import sys, dfkit; print('numpy' in sys.modules)") == ["False"]
    assert _run("import sys; from dfkit import read_bearings, Bearings, SheetError; import dfkit; "
                "print('numpy' in sys.modules, read_bearings is dfkit.read_bearings, callable(read_bearings))") == [
        "True", "True", "True"]
    assert _run("import dfkit\ntry:\n    dfkit.no_such_name\nexcept AttributeError:\n    print('refused')") == [
        "refused"]


def test_the_command_line_caps_blas_threads_only_before_numpy_and_unless_told():
    blas = ("OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")
    show = "import os; print(os.environ.get('OPENBLAS_NUM_THREADS'), os.environ.get('MKL_NUM_THREADS'))"
    assert _run("import dfkit.cli; " + show, drop=blas) == ["1", "1"]
    assert _run("import dfkit.cli; " + show, {"OPENBLAS_NUM_THREADS": "2"}, drop=blas) == ["2", "1"]
    assert _run("import numpy; import dfkit.cli; " + show, drop=blas) == ["None", "None"]
