# Tauline: one verb per target; CI (.ci/run) calls the same ones.
#
#   make run     set up everything, migrate the local SQLite database, load the demo, serve
#                http://127.0.0.1:8000/ (background tasks run in-process unless REDIS_URL is set)
#   make test    the whole test suite (extra pytest arguments: make test PYTEST_ARGS="-k envelope")
#   make lint    ruff, formatting, mypy, import contracts, migrations check, Django system checks
#   make bench   every benchmarks/bench_*.py in turn
#   make loadtest  50 clients for 60 s against gunicorn + PostgreSQL + Celery (scripts/topology.py)
#   make install / make clean / make distclean

PY ?= python3
VENV ?= .venv
PYTEST_ARGS ?=

BIN := $(VENV)/bin
PYTHON := $(BIN)/python
STAMP := $(VENV)/.installed

.DEFAULT_GOAL := help
.PHONY: help install system-deps run test lint bench loadtest clean distclean

help:
	@sed -n '3,10p' Makefile | sed 's/^# \{0,1\}//'

# System libraries first (WeasyPrint's Pango, fonts): installed with apt as root on
# Debian/Ubuntu, otherwise the script prints the one command to run and stops.
system-deps:
	@bash scripts/system-deps.sh

install: system-deps $(STAMP)

# Reinstall only when pyproject.toml is newer than the stamp.
$(STAMP): pyproject.toml | system-deps
	@test -x $(PYTHON) || { echo "Creating $(VENV) with $(PY)"; $(PY) -m venv $(VENV); }
	$(PYTHON) -m pip install --disable-pip-version-check --quiet -e '.[dev]'
	@touch $(STAMP)

run: install
	@mkdir -p var
	$(PYTHON) manage.py migrate --noinput
	$(PYTHON) manage.py loaddemo
	$(PYTHON) manage.py runserver 127.0.0.1:8000

test: install
	$(BIN)/pytest $(PYTEST_ARGS)

lint: install
	$(BIN)/ruff check .
	$(BIN)/ruff format --check .
	$(BIN)/mypy labsite testing reports
	$(BIN)/lint-imports
	$(PYTHON) manage.py makemigrations --check --dry-run
	$(PYTHON) manage.py check

bench: install
	@failed=""; found=0; \
	for f in benchmarks/bench_*.py; do \
		[ -e "$$f" ] || continue; \
		found=1; \
		echo "==> $$f"; \
		$(PYTHON) "$$f" || failed="$$failed $$f"; \
	done; \
	if [ "$$found" = 0 ]; then echo "No benchmarks/bench_*.py found."; fi; \
	if [ -n "$$failed" ]; then echo "Benchmarks failed:$$failed" >&2; exit 1; fi

# Starts its own redis-server, scratch PostgreSQL database, gunicorn and a Celery worker; fails on
# any failed request or a p99 over benchmarks/loadtest_budget.json.
loadtest: install
	$(PYTHON) scripts/loadtest.py

# Build and tool caches only; keeps .venv and var/ (the local database and media).
clean:
	rm -rf build dist *.egg-info .pytest_cache .mypy_cache .ruff_cache .hypothesis staticfiles
	find . -path ./$(VENV) -prune -o -type d -name __pycache__ -prune -exec rm -rf {} +

# Also removes the virtualenv (the next target reinstalls it). var/ is still kept.
distclean: clean
	rm -rf $(VENV)
