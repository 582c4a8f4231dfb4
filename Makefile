# Two commands do all the set-up on a fresh machine:
#   make app   install, seed the demo store, serve the app on 127.0.0.1:$(PORT)
#   make test  install (venv, Python packages, the Debian packages the browser
#              and PDF tests need), run every test
PYTHON ?= $(shell command -v python3.11 || command -v python3)
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed-stamp
PORT   ?= 8866
DEMO_DB ?= $(CURDIR)/var/demo.db
PIP    := $(BIN)/python -m pip --disable-pip-version-check -q

.PHONY: install system-deps app seed test test-fast bench lock clean

install: $(STAMP)

$(STAMP): pyproject.toml requirements.lock
	@test -x $(BIN)/python || $(PYTHON) -m venv $(VENV)
	$(PIP) install -r requirements.lock
	$(PIP) install --no-deps -e .
	@touch $@

# chromium drives the browser tests; poppler-utils turns handout PDFs into text and PNG;
# DejaVu Sans is the handouts' first font (Liberation Sans the fallback).
system-deps:
	@if [ -x /usr/bin/chromium ] && command -v pdftoppm >/dev/null && command -v pdftotext >/dev/null \
	  && [ -f /usr/share/fonts/truetype/dejavu/DejaVuSans.ttf ]; then :; \
	elif [ "$$(id -u)" = 0 ] && command -v apt-get >/dev/null; then \
	  echo "Installing chromium, the handout fonts and poppler-utils from Debian's packages"; \
	  DEBIAN_FRONTEND=noninteractive apt-get update -qq && \
	  DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends chromium fonts-dejavu-core fonts-liberation poppler-utils >/dev/null; \
	else \
	  echo "The tests need Debian's chromium, fonts-dejavu-core, fonts-liberation and poppler-utils:"; \
	  echo "  sudo apt-get install --no-install-recommends chromium fonts-dejavu-core fonts-liberation poppler-utils"; exit 1; \
	fi

seed: install
	@mkdir -p $(dir $(DEMO_DB))
	PRESCRIBE_DB=$(DEMO_DB) $(BIN)/prescribe db init
	PRESCRIBE_DB=$(DEMO_DB) $(BIN)/python -m prescribe.demo

app: seed
	PRESCRIBE_DB=$(DEMO_DB) $(BIN)/prescribe app --port $(PORT)

test: install system-deps
	$(BIN)/python -m pytest

# Everything but the browser tests (quicker while working on the engine).
test-fast: install
	$(BIN)/python -m pytest -m "not browser"

bench: install
	@for b in benchmarks/bench_*.py; do echo "== $$b"; $(BIN)/python $$b || exit 1; done

# Regenerate the lock file from pyproject's pins (run after changing a dependency).
lock:
	rm -rf /tmp/prescribe-lock && $(PYTHON) -m venv /tmp/prescribe-lock
	/tmp/prescribe-lock/bin/pip install -q -e .[test]
	( echo '# Exact versions CI and `make` install (pip install -r requirements.lock). Regenerate with `make lock`.'; \
	  /tmp/prescribe-lock/bin/pip freeze --exclude-editable | grep -v '^-e' ) > requirements.lock

clean:
	rm -rf $(VENV) var test-artifacts .pytest_cache .hypothesis
