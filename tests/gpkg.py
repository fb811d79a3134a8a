"""GDAL's GeoPackage validator, for the tests of every GeoPackage dfkit writes (season store, GIS outputs, ranges)."""

import os
import subprocess
import sys


def validator_path():
    try:
        import osgeo_utils.samples.validate_gpkg as v
    except ImportError:
        return None
    return v.__file__


def validate(path):
    """GDAL's GeoPackage validator (osgeo_utils.samples.validate_gpkg), strict: every requirement checked,
    extra checks on, warnings as errors. Run with this Python (no GDAL bindings: geometry blobs are then
    checked by test_geometry_blobs_follow_the_standard) and, where Debian's python3-gdal is installed,
    with /usr/bin/python3 too, which also parses every geometry with OGR."""
    script = validator_path()
    assert script, "gdal-utils is not installed (make installs it: pip install --no-deps gdal-utils)"
    runs = [sys.executable]
    if os.path.exists("/usr/bin/python3") and subprocess.run(
            ["/usr/bin/python3", "-c", "from osgeo import ogr"], capture_output=True).returncode == 0:
        runs.append("/usr/bin/python3")
    for py in runs:
        r = subprocess.run([py, script, "-k", "--extra", "--warning-as-error", str(path)], capture_output=True,
                           text=True)
        assert r.returncode == 0, f"{py}: {r.stdout}{r.stderr}"
    return runs
