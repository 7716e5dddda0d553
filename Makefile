# statherm: the species database as a build.  `make` rebuilds output/ from species/.
#
#   make            build (incremental: only changed species are recomputed)
#   make check      exit 1 if output/ is stale (species, settings or code changed)
#   make test       the test suite
#   make nightly    build, check, test, then a review of what changed against the last commit
#   make bench      the benchmark (cold, no-op and one-species rebuilds against a measured floor)
#   make -j4 sharded SHARDS=4   compute in 4 parallel shards, then assemble
#
# Variables: PYTHON (default python3), JOBS (worker processes for build), SHARDS.

PYTHON ?= python3
STATHERM := $(PYTHON) -m pipeline
JOBS ?=
SHARDS ?= 4
JOBS_FLAG := $(if $(JOBS),--jobs $(JOBS))

.PHONY: build check test nightly report bench sharded FORCE
.DEFAULT_GOAL := build

build:
	$(STATHERM) build $(JOBS_FLAG)

check:
	$(STATHERM) check

test:
	$(PYTHON) -m pytest -q

# one after the other, also under make -j
nightly:
	$(MAKE) build
	$(MAKE) check
	$(MAKE) test
	$(MAKE) report

# What changed against the committed output (empty when nothing did).
report:
	@tmp=$$(mktemp); \
	if git show HEAD:output/thermo.dat > "$$tmp" 2>/dev/null; then \
	  $(STATHERM) diff "$$tmp" output/thermo.dat; \
	else \
	  echo "report: no committed output/thermo.dat to compare with"; \
	fi; \
	rm -f "$$tmp"

bench:
	$(STATHERM) bench

SHARD_TARGETS := $(addprefix shard-,$(shell seq 1 $(SHARDS)))

sharded: $(SHARD_TARGETS)
	$(STATHERM) build

shard-%: FORCE
	$(STATHERM) build --quiet --shard $*/$(SHARDS)

FORCE:
