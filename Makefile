# Two commands for a fresh clone with only python3: `make demo` and `make test`.
PYTHON ?= python3
VENV := .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.installed

.PHONY: demo test test-fast bench wheelhouse clean samples

$(STAMP): pyproject.toml
	test -x $(PY) || $(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --upgrade pip
	$(PY) -m pip install --quiet -e '.[test]'
	touch $(STAMP)

demo: $(STAMP)
	$(PY) -m dfkit check sample_bearings/field_sheet_with_mistakes.csv -o demo_output/mistakes_normalized.csv || test $$? -eq 1
	$(PY) -m dfkit fix sample_bearings/animal_fix.csv -o demo_output/animal_fix.csv
	$(PY) -m dfkit fix sample_bearings/hunt.csv --window 90 --method andrews -o demo_output/hunt.geojson
	$(PY) -m dfkit fix sample_bearings/week_tracking.csv --track sample_bearings/week_track.gpx -o demo_output/week_fixes.csv -o demo_output/week_fixes.gpx || test $$? -eq 1
	$(PY) -m dfkit map sample_bearings/week_tracking.csv --track sample_bearings/week_track.gpx -o demo_output/week_map.html || test $$? -eq 1
	@echo "Demo outputs are in demo_output/ (open demo_output/week_map.html in a browser; it works offline)."

test: $(STAMP)
	$(PY) -m pytest tests notebooks --nbmake

test-fast: $(STAMP)
	$(PY) -m pytest tests -x -q

samples: $(STAMP)
	$(PY) sample_bearings/make_samples.py

bench: $(STAMP)
	$(PY) benchmarks/bench_fix.py

wheelhouse: $(STAMP)
	$(PY) -m pip wheel --quiet -w wheelhouse '.[test]'

clean:
	rm -rf $(VENV) demo_output wheelhouse .pytest_cache
