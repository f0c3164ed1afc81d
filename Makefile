# Two commands set everything up: `make demo` and `make test`.
# Both create .venv with python3 -m venv and install sdrx into it on first use.
PYTHON ?= python3
VENV := .venv
PY := $(VENV)/bin/python
STAMP := $(VENV)/.sdrx-installed

.PHONY: demo test fuzz bench browser clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(PY) -m pip install --quiet --disable-pip-version-check -e '.[test]'
	touch $(STAMP)

demo: $(STAMP)
	$(VENV)/bin/sdrx --version
	bash demo_signals/demo.sh

# pytest exits 5 when it collects nothing; that is a failure here too (any non-zero status is).
# The suite runs on one worker process per core (pytest-xdist); `$(PY) -m pytest -q` runs it in one.
test: $(STAMP) browser
	$(PY) -m pytest -q -n auto

# Property-based fuzz of the README's promises (tests/fuzzing.py): FUZZ_CASES cases, counts by outcome;
# fails on any traceback, hang over 20 s, partial file, written input or noise on stderr.
FUZZ_CASES ?= 10000
fuzz: $(STAMP)
	$(PY) tests/fuzz.py --cases $(FUZZ_CASES)

bench: $(STAMP)
	$(PY) bench/bench.py

# The browser test needs Debian's chromium and chromium-driver; install them once if missing.
browser:
	@command -v chromium >/dev/null 2>&1 || { \
	  echo "installing Debian chromium for the browser test"; \
	  SUDO=$$( [ "$$(id -u)" = 0 ] || echo sudo ); \
	  $$SUDO env DEBIAN_FRONTEND=noninteractive apt-get update -qq && \
	  $$SUDO env DEBIAN_FRONTEND=noninteractive apt-get install -y -qq chromium chromium-driver >/dev/null; }

clean:
	rm -rf $(VENV) build *.egg-info demo_out
