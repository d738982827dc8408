# trueturn — top-level targets. `make demo` and `make test` are the two set-up commands.
PYTHON ?= python3
VENV   ?= .venv
PY     := $(VENV)/bin/python
STAMP  := $(VENV)/.installed
# numpy's BLAS in one thread: our matrices are tiny (4x4 solves, a few hundred rows), and
# on a two-core machine BLAS threads cost more than they save (the support-fit honesty
# tests ran 43 s threaded, 27 s in one thread, 2026-12-03); the app sets the same
export OPENBLAS_NUM_THREADS ?= 1

# the suite on every core, at most four (pytest-xdist); a file's tests and the firmware
# builds stay on one worker each (tests/conftest.py). PARALLEL= runs it in one process.
PARALLEL ?= -n auto --maxprocesses 4 --dist loadgroup

.PHONY: demo test test-python lint typecheck bench firmware firmware-image clean

$(STAMP): pyproject.toml
	test -x $(PY) || $(PYTHON) -m venv $(VENV)
	$(PY) -m pip install -q --upgrade pip
	$(PY) -m pip install -q -e '.[test]'
	touch $(STAMP)

demo: $(STAMP)
	$(VENV)/bin/trueturn demo

test: $(STAMP)
	$(MAKE) -C firmware test
	$(MAKE) -C firmware
	$(PY) -m ruff check host tests bench
	$(PY) -m mypy
	$(PY) -m pytest -q $(PARALLEL)

test-python: $(STAMP)
	$(PY) -m pytest -q $(PARALLEL)

lint: $(STAMP)
	$(PY) -m ruff check host tests bench

# mypy, set up in pyproject.toml [tool.mypy] (files, strictness); cache in build/mypy_cache
typecheck: $(STAMP)
	$(PY) -m mypy

bench: $(STAMP)
	$(PY) bench/run_all.py

firmware:
	$(MAKE) -C firmware

# The image shipped inside the Python package for `trueturn flash` (package data). Run after
# every firmware change and commit the file: tests/test_firmware_image.py rebuilds it with
# avr-gcc and fails while the shipped copy differs.
IMAGE := host/trueturn/firmware/trueturn.hex
firmware-image:
	$(MAKE) -C firmware build/trueturn.hex
	mkdir -p $(dir $(IMAGE))
	cp firmware/build/trueturn.hex $(IMAGE)
	@echo "wrote $(IMAGE) (commit it with the firmware change)"

clean:
	$(MAKE) -C firmware clean
	rm -rf $(VENV) build *.egg-info host/*.egg-info
