# One command serves, one tests; both create the virtual environment when it is missing.
# `make serve` installs the serving profile only (requirements/serve.txt); `make test` adds the
# test tools (requirements/test.txt) to the same environment.
VENV ?= .venv
PYTHON ?= python3
PY := $(VENV)/bin/python
SERVE_STAMP := $(VENV)/.serve-stamp
STAMP := $(VENV)/.test-stamp

.PHONY: install install-serve serve test bench openapi clean lock

# Each profile: every version pinned with its hashes (pip's hash-checking mode refuses anything
# else), then the project itself without touching them. `--no-index` there: pip only checks that
# the lock already holds every requirement of the extras named, and fails if it does not.
# `--no-build-isolation`: the build backend is the lock's setuptools, hash-checked too.
define install_profile
	test -x $(PY) || $(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --require-hashes -r requirements/$(1).txt
	$(PY) -m pip install --quiet --no-index --no-build-isolation -e '.[$(2)]'
	$(PY) -m pip check
endef

install: $(STAMP)
install-serve: $(SERVE_STAMP)

$(SERVE_STAMP): pyproject.toml requirements/serve.txt
	$(call install_profile,serve,server)
	touch $@

$(STAMP): pyproject.toml requirements/test.txt
	$(call install_profile,test,test)
	touch $@ $(SERVE_STAMP)

serve: $(SERVE_STAMP)
	$(VENV)/bin/gunicorn --config deploy/gunicorn.conf.py tailgauge.asgi:app

test: $(STAMP)
	$(PY) -m pytest

# The hostile-input suite alone (also part of `make test`): one line per case with statuses and peak RSS.
.PHONY: hostile
hostile: $(STAMP)
	$(PY) -m pytest tests/system/test_hostile*.py -rA -s

# Every benchmark section (tests/benchmarks/run.py --help). BENCH_ARGS: e.g. "--quick", "small order",
# "--tree /path/to/other/checkout --json before.json".
BENCH_ARGS ?=
bench: $(STAMP)
	$(PY) tests/benchmarks/run.py $(BENCH_ARGS)

# Mixed load against gunicorn (2 workers, own port): req/s, p50/p99 per class, ratio to /health/live.
.PHONY: load
LOAD_SECONDS ?= 30
load: $(STAMP)
	$(PY) -m tests.system.load --seconds $(LOAD_SECONDS) --concurrency 8 --output test-artifacts/load.json

# The response examples are the app's answers, recorded in process first; then the document that shows them.
openapi: $(STAMP)
	$(PY) -c 'from tailgauge.api import examples; examples.write()'
	$(PY) -c 'import sys; from tailgauge.api.openapi import document_bytes; sys.stdout.buffer.write(document_bytes())' > openapi/openapi.json

clean:
	rm -rf $(VENV) $(LOCK_VENV) .pytest_cache .hypothesis

# Long schemathesis CLI run against gunicorn (2 workers, own port), JSON and MessagePack answers;
# reports and a summary in test-artifacts/fuzz. Bounded by examples per operation and seconds per pass.
.PHONY: fuzz
FUZZ_SEED ?= 8
FUZZ_EXAMPLES ?= 500
FUZZ_SECONDS ?= 300
fuzz: $(STAMP)
	$(PY) -m tests.fuzz.long_run --seed $(FUZZ_SEED) --max-examples $(FUZZ_EXAMPLES) --max-seconds $(FUZZ_SECONDS)

# The KLL sketch parser against the native decoder (child processes): mutated library-built
# sketches; every accepted case must read the same natively. Not part of `make test` (which
# runs a 2,000-case sample in tests/fuzz/test_sketch_fuzz.py).
.PHONY: fuzz-sketches
SKETCH_CASES ?= 100000
SKETCH_SEED ?= 1
fuzz-sketches: $(STAMP)
	$(PY) -m tests.fuzz.sketch_fuzz --cases $(SKETCH_CASES) --seed $(SKETCH_SEED)

# Regenerate the locks from pyproject.toml (after changing a pin or adding a dependency):
# requirements/base.txt (no extras: the client, partial states and sketches), serve.txt (`server`),
# test.txt (`test`, which includes `server` and `dask`) and container-checks.txt (installed beside
# test.txt by deploy/check-container.sh, so held to its versions). Versions already in a lock are
# kept unless needed otherwise; LOCK_ARGS=--upgrade takes the newest allowed. uv is pinned here and
# runs from its own environment ($(LOCK_VENV)). tests/deploy/test_install_profiles.py checks the
# locks against pyproject.toml.
UV_VERSION := 0.13.8
LOCK_VENV ?= .venv-lock
UV := $(LOCK_VENV)/bin/uv
LOCK_ARGS ?=
UV_COMPILE = $(UV) pip compile --quiet --generate-hashes --universal --python-version 3.11 \
	--custom-compile-command 'make lock' $(LOCK_ARGS)
# The build backend ([build-system] requires) is locked with every profile: installs use it without isolation.
BUILD_REQUIRES = $(PYTHON) -c 'import tomllib; print(*tomllib.load(open("pyproject.toml", "rb"))["build-system"]["requires"], sep="\n")'
lock:
	test -x $(UV) || { $(PYTHON) -m venv $(LOCK_VENV) && $(LOCK_VENV)/bin/pip install --quiet uv==$(UV_VERSION); }
	$(BUILD_REQUIRES) | $(UV_COMPILE) pyproject.toml - -o requirements/base.txt
	$(BUILD_REQUIRES) | $(UV_COMPILE) --extra server pyproject.toml - -o requirements/serve.txt
	$(BUILD_REQUIRES) | $(UV_COMPILE) --extra test pyproject.toml - -o requirements/test.txt
	$(UV_COMPILE) --extra container-checks --constraint requirements/test.txt pyproject.toml -o requirements/container-checks.txt
