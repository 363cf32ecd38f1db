# ratecast: every target installs what it needs into .venv first.
PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed
# A fixed compile cache: PyMC models compile in ~50 s cold and ~5 s warm.
export PYTENSOR_FLAGS ?= compiledir=$(CURDIR)/.cache/pytensor
export RATECAST_STORE ?= $(CURDIR)/store

.PHONY: install browser demo test check bench evidence clean

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[dev,nutpie]'
	touch $(STAMP)

install: $(STAMP)

# The page's browser test drives Debian's Chromium (headless); install it when missing and root.
browser:
	@command -v chromium >/dev/null 2>&1 || { \
		if [ "$$(id -u)" = 0 ] && command -v apt-get >/dev/null 2>&1; then \
			apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq chromium >/dev/null; \
		else echo "chromium is not installed (apt-get install chromium): the page test will be skipped"; fi; }

demo: $(STAMP)
	$(BIN)/ratecast example-data --out .demo
	$(BIN)/ratecast fit --series ferry-desk --events .demo/ferry_desk_events.csv \
		--tz America/Halifax --open 'Mon-Fri 06:30-21:00; Sat-Sun 08:00-18:00' --holidays CA:NS
	$(BIN)/ratecast forecast --series ferry-desk --start 2026-04-27T06:00 --end 2026-04-27T21:00 \
		--step 1h --quantiles 0.5 --at-least 15
	$(BIN)/ratecast forecast --series ferry-desk --start 2026-04-27T09:00 --end 2026-04-27T09:30 \
		--at-least 1,10

test: $(STAMP) browser
	$(BIN)/python -m pytest

check: $(STAMP)
	$(BIN)/ruff check models service tests bench
	$(BIN)/mypy

bench: $(STAMP)
	$(BIN)/python bench/run.py

# Backtests on open real data (seven series of six kinds, day-ahead and 7 days ahead, 2 chains x
# 500 draws: about 95 minutes of fitting on a 2-core machine, 4 December), the joint-fit evidence and the
# intraday-update evidence (about 10 more). Writes docs/evidence.md, docs/evidence/ and the README's
# evidence table; the joint and intraday scripts print the tables recorded in docs/hierarchy.md and
# docs/capacity.md.
evidence: $(STAMP)
	$(BIN)/python bench/evidence.py --draws 500 --tune 500 --chains 2
	$(BIN)/python bench/evidence_joint.py
	$(BIN)/python bench/evidence_intraday.py

clean:
	rm -rf .demo .pytest_cache .mypy_cache .ruff_cache build *.egg-info
