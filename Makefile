# Two commands do all the set-up on a fresh machine:
#   make app   install, seed the demo store, serve the app on 127.0.0.1:$(PORT)
#   make test  install (venv, Python packages, the Debian packages the browser,
#              PDF and PostgreSQL tests need, the hub's proxy), run every test; the
#              tests start (and stop) their own PostgreSQL server and JupyterHub on
#              127.0.0.1, on free ports
#   make hub   the multi-user deployment on this machine (deploy/README.md)
PYTHON ?= $(shell command -v python3.11 || command -v python3)
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed-stamp
SENSORS_STAMP := $(VENV)/.sensors-stamp
PORT   ?= 8866
DEMO_DB ?= $(CURDIR)/var/demo.db
DEMO_SETTINGS ?= $(CURDIR)/var/demo-settings.toml
PIP    := $(BIN)/python -m pip --disable-pip-version-check -q

PROXY_DIR := deploy/proxy
PROXY  := $(PROXY_DIR)/node_modules/.bin/configurable-http-proxy
HUB_PORT ?= 8000
HUB_API_PORT ?= 8081
HUB_DIR ?= $(CURDIR)/var/hub
HUB_SPAWNER ?= systemd
HUB_ADMINS ?=
HUB_LEADS ?=

.PHONY: install install-sensors system-deps pg-deps hub-deps app seed test test-fast bench lock clean hub \
        translations translations-update

install: $(STAMP) translations

$(STAMP): pyproject.toml requirements.lock
	@test -x $(BIN)/python || $(PYTHON) -m venv $(VENV)
	$(PIP) install -r requirements.lock
	$(PIP) install --no-deps -e .
	@touch $@

# The optional worn-sensor readers (scikit-digital-health, about 500 MB): the tests and
# benchmarks read real .cwa and .bin files with them; the core install stays light.
install-sensors: $(SENSORS_STAMP)

$(SENSORS_STAMP): $(STAMP) requirements-sensors.lock
	$(PIP) install -r requirements-sensors.lock
	@touch $@

# chromium drives the browser tests; poppler-utils turns handout PDFs into text and PNG;
# DejaVu Sans is the handouts' first font (Liberation Sans the fallback); WenQuanYi Micro Hei
# (fonts-wqy-microhei) sets the Chinese person's pages, and the PDF embeds it.
SYSTEM_PACKAGES := chromium fonts-dejavu-core fonts-liberation fonts-wqy-microhei poppler-utils
system-deps:
	@if [ -x /usr/bin/chromium ] && command -v pdftoppm >/dev/null && command -v pdftotext >/dev/null \
	  && [ -f /usr/share/fonts/truetype/dejavu/DejaVuSans.ttf ] && [ -f /usr/share/fonts/truetype/wqy/wqy-microhei.ttc ]; then :; \
	elif [ "$$(id -u)" = 0 ] && command -v apt-get >/dev/null; then \
	  echo "Installing chromium, the handout fonts and poppler-utils from Debian's packages"; \
	  DEBIAN_FRONTEND=noninteractive apt-get update -qq && \
	  DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends $(SYSTEM_PACKAGES) >/dev/null; \
	else \
	  echo "The tests need Debian's $(SYSTEM_PACKAGES):"; \
	  echo "  sudo apt-get install --no-install-recommends $(SYSTEM_PACKAGES)"; exit 1; \
	fi

# The person's pages in other languages (docs/languages.md): the message catalogues are
# prescribe/handout/locale/<language>/LC_MESSAGES/person.po, compiled here to person.mo.
# `make translations-update` extracts every text of the person's pages (babel.cfg) into
# person.pot and merges it into each language's .po: new texts arrive untranslated, and the
# tests fail until each is translated.
LOCALE := prescribe/handout/locale
PO_FILES := $(wildcard $(LOCALE)/*/LC_MESSAGES/person.po)
MO_FILES := $(PO_FILES:.po=.mo)

translations: $(MO_FILES)

$(LOCALE)/%/LC_MESSAGES/person.mo: $(LOCALE)/%/LC_MESSAGES/person.po $(STAMP)
	$(BIN)/pybabel compile --statistics -D person -i $< -o $@

translations-update: $(STAMP)
	PYTHONPATH=$(CURDIR) $(BIN)/pybabel extract -F babel.cfg -k N_ -k pgettext:1c,2 --no-wrap --sort-by-file \
	  --project=prescribe --version=0.1.0 --copyright-holder="prescribe developers" \
	  --msgid-bugs-address="the prescribe developers" -o $(LOCALE)/person.pot .
	$(BIN)/pybabel update --no-wrap --no-fuzzy-matching --ignore-obsolete -D person -i $(LOCALE)/person.pot -d $(LOCALE)

# Debian's PostgreSQL server binaries: the store's tests run on SQLite and on a private
# PostgreSQL server they start themselves (tests/pg_server.py).  In CI (CI=true) a
# missing PostgreSQL fails the tests; on a developer machine those variants are skipped.
pg-deps:
	@if ls /usr/lib/postgresql/*/bin/initdb >/dev/null 2>&1; then :; \
	elif [ "$$(id -u)" = 0 ] && command -v apt-get >/dev/null; then \
	  echo "Installing PostgreSQL from Debian's packages"; \
	  DEBIAN_FRONTEND=noninteractive apt-get update -qq && \
	  DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends postgresql >/dev/null && \
	  { pg_lsclusters -h 2>/dev/null | awk '$$4 == "online" {print $$1, $$2}' | \
	    while read ver name; do echo "Stopping the cluster $$ver/$$name the package started (the tests run their own)"; \
	      pg_ctlcluster "$$ver" "$$name" stop; done; }; \
	else \
	  echo "PostgreSQL is not installed: its store tests will be skipped here (and fail in CI)."; \
	  echo "  sudo apt-get install --no-install-recommends postgresql"; \
	fi

# The hub's proxy (configurable-http-proxy, pinned in deploy/proxy/package.json and its
# lock) from the npm registry, into the project folder: nothing is installed globally.
hub-deps: $(PROXY)

$(PROXY): $(PROXY_DIR)/package.json $(PROXY_DIR)/package-lock.json
	@command -v npm >/dev/null || { echo "make hub-deps needs node and npm (the hub's proxy is a node program)"; exit 1; }
	cd $(PROXY_DIR) && npm ci --no-audit --no-fund --loglevel=error
	@touch $@

# The multi-user app on this machine: JupyterHub with NativeAuthenticator (sign-up, then
# an admin approves), the app as each clinician's page, idle culling.  Give it a store
# shared by the clinicians (PRESCRIBE_DB=postgresql+psycopg://...); see deploy/README.md.
hub: install hub-deps
	@mkdir -p $(HUB_DIR)
	cd $(HUB_DIR) && PATH=$(CURDIR)/$(PROXY_DIR)/node_modules/.bin:$(CURDIR)/$(BIN):$$PATH \
	  PRESCRIBE_CHECKOUT=$(CURDIR) PRESCRIBE_HUB_PORT=$(HUB_PORT) PRESCRIBE_HUB_API_PORT=$(HUB_API_PORT) PRESCRIBE_HUB_DIR=$(HUB_DIR) \
	  PRESCRIBE_HUB_SPAWNER=$(HUB_SPAWNER) PRESCRIBE_HUB_ADMINS=$(HUB_ADMINS) PRESCRIBE_HUB_LEADS=$(HUB_LEADS) \
	  $(CURDIR)/$(BIN)/jupyterhub -f $(CURDIR)/deploy/jupyterhub_config.py

seed: install
	@mkdir -p $(dir $(DEMO_DB))
	PRESCRIBE_DB=$(DEMO_DB) $(BIN)/prescribe db init
	PRESCRIBE_DB=$(DEMO_DB) $(BIN)/python -m prescribe.demo --settings $(DEMO_SETTINGS)

# The demo runs with the invented clinic's settings (name and phone on every handout).
app: seed
	PRESCRIBE_DB=$(DEMO_DB) PRESCRIBE_SETTINGS=$(DEMO_SETTINGS) $(BIN)/prescribe app --port $(PORT)

test: install install-sensors system-deps pg-deps hub-deps
	$(BIN)/python -m pytest

# Everything but the browser tests (quicker while working on the engine).
test-fast: install install-sensors
	$(BIN)/python -m pytest -m "not browser"

bench: install install-sensors
	@for b in benchmarks/bench_*.py; do echo "== $$b"; $(BIN)/python $$b || exit 1; done

# Regenerate the lock file from pyproject's pins (run after changing a dependency).
lock:
	rm -rf /tmp/prescribe-lock && $(PYTHON) -m venv /tmp/prescribe-lock
	/tmp/prescribe-lock/bin/pip install -q -e .[test,postgresql,hub]
	( echo '# Exact versions CI and `make` install (pip install -r requirements.lock). Regenerate with `make lock`.'; \
	  /tmp/prescribe-lock/bin/pip freeze --exclude-editable | grep -v '^-e' ) > requirements.lock
	/tmp/prescribe-lock/bin/pip install -q -e .[sensors]
	( echo '# The optional worn-sensor readers (pip install -r requirements-sensors.lock), on top of requirements.lock.'; \
	  echo '# scikit-digital-health (MIT) and what it brings; none is GPL. Regenerate with `make lock`.'; \
	  /tmp/prescribe-lock/bin/pip freeze --exclude-editable | grep -v '^-e' | grep -vxFf requirements.lock ) > requirements-sensors.lock

clean:
	rm -rf $(VENV) var test-artifacts .pytest_cache .hypothesis $(MO_FILES)
