# One command serves, one tests; both create the virtual environment when it is missing.
VENV ?= .venv
PYTHON ?= python3
PY := $(VENV)/bin/python
STAMP := $(VENV)/.installed-stamp

.PHONY: install serve test bench openapi clean

install: $(STAMP)

$(STAMP): pyproject.toml requirements.lock
	test -x $(PY) || $(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet -c requirements.lock -e '.[test]'
	touch $(STAMP)

serve: $(STAMP)
	$(VENV)/bin/gunicorn --config deploy/gunicorn.conf.py tailgauge.asgi:app

test: $(STAMP)
	$(PY) -m pytest

# The hostile-input suite alone (also part of `make test`): one line per case with statuses and peak RSS.
.PHONY: hostile
hostile: $(STAMP)
	$(PY) -m pytest tests/system/test_hostile.py -rA -s

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
	rm -rf $(VENV) .pytest_cache .hypothesis

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
