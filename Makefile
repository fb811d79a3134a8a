# Two commands for a fresh clone with only python3: `make demo` and `make test`.
PYTHON ?= python3
VENV := .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.installed

.PHONY: demo test test-fast bench wheelhouse clean samples

$(STAMP): pyproject.toml Makefile
	test -x $(PY) || $(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e '.[test]'
	# GDAL's GeoPackage validator for the tests; --no-deps, or pip tries to build GDAL from source
	$(PY) -m pip install --quiet --no-deps gdal-utils
	touch $(STAMP)

demo: $(STAMP)
	$(PY) -m dfkit check sample_bearings/field_sheet_with_mistakes.csv -o demo_output/mistakes_normalized.csv || test $$? -eq 1
	$(PY) -m dfkit fix sample_bearings/animal_fix.csv -o demo_output/animal_fix.csv
	$(PY) -m dfkit fix sample_bearings/hunt.csv --window 90 --method andrews -o demo_output/hunt.geojson
	$(PY) -m dfkit fix sample_bearings/week_tracking.csv --track sample_bearings/week_track.gpx -o demo_output/week_fixes.csv -o demo_output/week_fixes.gpx -o demo_output/week_fixes.gpkg -o demo_output/week_fixes.kml || test $$? -eq 1
	$(PY) -m dfkit map sample_bearings/week_tracking.csv --track sample_bearings/week_track.gpx -o demo_output/week_map.html || test $$? -eq 1
	$(PY) -m dfkit season add demo_output/season.gpkg sample_bearings/season_2026_05.csv sample_bearings/season_2026_06.csv || test $$? -eq 1
	$(PY) -m dfkit season show demo_output/season.gpkg -o demo_output/season_review.html || test $$? -eq 1
	$(PY) -m dfkit ranges demo_output/season.gpkg --method kde --levels 50,95 -o demo_output/home_ranges.geojson -o demo_output/home_ranges.gpkg
	$(PY) -m dfkit calibrate sample_bearings/beacon_trials.csv -o demo_output/calibration.csv --figures demo_output/calibration_figures || test $$? -eq 1
	$(PY) -m dfkit fix sample_bearings/tracking_after_trials.csv --calibration demo_output/calibration.csv -o demo_output/after_trials.csv || test $$? -eq 1
	$(PY) -m dfkit plan sample_bearings/hunt.csv --window 90 --fix fox-2 --spots sample_bearings/hunt_spots.csv -o demo_output/hunt_plan_fox2.csv -o demo_output/hunt_plan_fox2.html
	$(PY) -m dfkit plan sample_bearings/hunt.csv --window 90 --method andrews --fix fox-1 --around 3000 --step 250 -o demo_output/hunt_plan_fox1_grid.html
	@echo "Demo outputs are in demo_output/ (open demo_output/week_map.html in a browser; it works offline)."

test: $(STAMP)
	$(PY) -m pytest tests notebooks --nbmake
	$(PY) -m pytest --doctest-modules dfkit -q

test-fast: $(STAMP)
	$(PY) -m pytest tests -x -q

samples: $(STAMP)
	$(PY) sample_bearings/make_samples.py

bench: $(STAMP)
	$(PY) benchmarks/bench_fix.py
	$(PY) benchmarks/bench_season.py
	$(PY) benchmarks/calibration_study.py
	$(PY) benchmarks/bench_map.py run --fixes 20000
	$(PY) benchmarks/bench_planning.py

wheelhouse: $(STAMP)
	$(PY) -m pip wheel --quiet -w wheelhouse '.[test]'

clean:
	rm -rf $(VENV) demo_output wheelhouse .pytest_cache
