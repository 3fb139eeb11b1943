# One documented entry point for developers and CI (see README.md).
#   make demo   build, install into .venv and run the main example
#   make test   build, install and run every test (Rust and Python)
PY      ?= python3
VENV    := .venv
VPY     := $(VENV)/bin/python
STAMP   := $(VENV)/.deps-stamp
export VIRTUAL_ENV := $(abspath $(VENV))
export PATH := $(abspath $(VENV))/bin:$(PATH)

.PHONY: demo test build rust-test py-test bench lint clean

$(STAMP): pyproject.toml
	$(PY) -m venv $(VENV)
	$(VPY) -m pip install -q --upgrade pip
	$(VPY) -m pip install -q "maturin>=1.5,<2" numpy scipy mpmath hypothesis pytest mypy
	touch $(STAMP)

build: $(STAMP)
	$(VENV)/bin/maturin develop --release -q

demo: build
	$(VPY) examples/demo.py

rust-test:
	cargo test --release

py-test: build
	$(VPY) -m pytest -q tests/python
	$(VPY) -m mypy.stubtest gyrokit._native --ignore-missing-stub --mypy-config-file /dev/null
	for f in examples/*.py; do $(VPY) $$f > /dev/null || exit 1; done

test: rust-test py-test

bench: build
	$(VPY) benches/bench.py --single-thread
	$(VPY) benches/bench_index.py
	$(VPY) benches/bench_centroids.py

clean:
	rm -rf $(VENV) target
