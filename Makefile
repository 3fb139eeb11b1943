# One documented entry point for developers and CI (see README.md).
#   make demo        build, install into .venv and run the main example
#   make test        build, install and run every test (Rust and Python)
#   make wheel       build a release wheel into dist/ (pip install dist/gyrokit-*.whl)
#   make lint        cargo fmt --check and cargo clippy -D warnings (core and pyo3 layer)
#   make fuzz-smoke  a short fuzzing run (20 000 inputs) over every public function
#   make fuzz        a long fuzzing run in survey mode (FUZZ_RUNS inputs; findings logged)
SHELL   := /bin/bash
PY      ?= python3
VENV    := .venv
VPY     := $(VENV)/bin/python
STAMP   := $(VENV)/.deps-stamp
# Build and test dependencies (numpy etc. come with the package's own requirements).
DEPS    := "maturin>=1.5,<2" numpy scipy mpmath hypothesis pytest mypy scikit-learn pandas atheris networkx matplotlib "dask[array]" distributed tqdm zarr
FUZZ_RUNS ?= 1000000
FUZZ_DIR  ?= target/fuzz
export VIRTUAL_ENV := $(abspath $(VENV))
export PATH := $(abspath $(VENV))/bin:$(PATH)

.PHONY: demo test build rust-test py-test wheel lint fuzz-smoke fuzz bench clean

$(STAMP): pyproject.toml Makefile
	$(PY) -m venv $(VENV)
	$(VPY) -m pip install -q --upgrade pip
	$(VPY) -m pip install -q $(DEPS)
	touch $(STAMP)

build: $(STAMP)
	$(VENV)/bin/maturin develop --release -q

demo: build
	$(VPY) examples/demo.py

rust-test:
	cargo test --release

# pytest exits with 5 when it collected no tests: that is a failure too.
py-test: build
	$(VPY) -m pytest -q tests/python; rc=$$?; \
	  if [ $$rc -eq 5 ]; then echo "pytest collected no tests" >&2; exit 1; fi; exit $$rc
	$(VPY) -m mypy.stubtest gyrokit._native --ignore-missing-stub --mypy-config-file /dev/null
	for f in examples/*.py; do $(VPY) $$f > /dev/null || exit 1; done

test: rust-test py-test

wheel: $(STAMP)
	rm -f dist/gyrokit-*.whl
	$(VENV)/bin/maturin build --release --out dist
	@ls dist/gyrokit-*.whl

# The pyo3 layer compiles only with the `python` feature, against the venv's
# interpreter.
lint: $(STAMP)
	cargo fmt --check
	cargo clippy --release --all-targets -- -D warnings
	PYO3_PYTHON=$(abspath $(VPY)) cargo clippy --release --all-targets --features python -- -D warnings

# Fixed seed: the same 20 000 inputs every time; stops at the first finding
# and prints its reproducer. Checks that all inputs ran.
fuzz-smoke: build
	mkdir -p $(FUZZ_DIR)
	RAYON_NUM_THREADS=1 $(VPY) tests/fuzz/fuzz_api.py -runs=20000 -seed=1 -max_len=64 -timeout=60 \
	  -artifact_prefix=$(FUZZ_DIR)/ 2>&1 | tee $(FUZZ_DIR)/smoke.log | grep -E "^(Done|=== |Finding|  call|    ->)" ; \
	  rc=$${PIPESTATUS[0]}; grep -q "^Done 20000 runs" $(FUZZ_DIR)/smoke.log || { echo "fuzz smoke failed (rc $$rc): see $(FUZZ_DIR)/smoke.log" >&2; exit 1; }

fuzz: build
	GYROKIT_FUZZ_DIR=$(abspath $(FUZZ_DIR)) $(VPY) tests/fuzz/survey.py $(FUZZ_RUNS) 50000

bench: build
	$(VPY) benches/bench.py --single-thread
	$(VPY) benches/bench_index.py
	$(VPY) benches/bench_centroids.py

clean:
	rm -rf $(VENV) target dist
