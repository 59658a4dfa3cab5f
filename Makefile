# muarc: two commands on a fresh Debian machine with Go.
#   make demo   runs the whole job on the built-in synthetic study
#   make test   runs every test
# Both install the system packages they need first (make deps).

GO      ?= go
BIN     := bin/muarc
DEMO    ?= demo-out
# Debian packages. RUN_PACKAGES are what muarc needs to build and run (HDF5,
# the compressor, pkg-config): make build and make demo install only these.
# DEB_PACKAGES add the outside references the tests check against (h5dump,
# h5py, jsonschema, numpy/scipy, pandas, headless Chromium for the report,
# python3-svg.path reading the report's shortened SVG path data):
# make test, bench and fuzz install them.
# EDF+/BDF+ references: EDFlib (libedf-dev, compiled with gcc in a test),
# MNE-Python and biosig's save2gdf. R's hdf5r and npm's h5wasm (installed
# into scripts/h5wasm from its package-lock.json) run LAYOUT.md's snippets.
# slurm-wlm and munge: archive/examples' job arrays run under a real
# single-node Slurm started by the test.
# python-tables-data: HDF5 files written by other programs (PyTables' own
# test files), run through the batch commands beside a muarc recording.
# BENCH_PACKAGES are the storage baselines only make bench uses: xz -9 and
# flac -8 of the raw converter counts (scripts/bench-storage.sh).
RUN_PACKAGES := libhdf5-dev libdeflate-dev pkg-config
DEB_PACKAGES := $(RUN_PACKAGES) hdf5-tools python3-h5py \
	python3-jsonschema python3-yaml python3-numpy python3-scipy python3-pandas python3-statsmodels chromium python3-svg.path \
	gcc libedf-dev python3-mne biosig-tools r-cran-hdf5r slurm-wlm munge python-tables-data
BENCH_PACKAGES := xz-utils flac

.PHONY: all deps deps-run deps-bench build demo test bench bench-more fuzz vet clean

all: build

# deps installs whatever of DEB_PACKAGES is missing, deps-run whatever of
# RUN_PACKAGES, deps-bench DEB_PACKAGES and BENCH_PACKAGES (apt-get update
# once, only when something is missing).
deps: PKGS = $(DEB_PACKAGES)
deps-run: PKGS = $(RUN_PACKAGES)
deps-bench: PKGS = $(DEB_PACKAGES) $(BENCH_PACKAGES)
deps deps-run deps-bench:
	@missing=""; for p in $(PKGS); do \
		dpkg-query -W -f='$${Status}' $$p 2>/dev/null | grep -q "install ok installed" || missing="$$missing $$p"; \
	done; \
	if [ -n "$$missing" ]; then \
		echo "installing:$$missing"; \
		SUDO=""; [ "$$(id -u)" = 0 ] || SUDO=sudo; \
		$$SUDO apt-get update -qq && DEBIAN_FRONTEND=noninteractive $$SUDO apt-get install -y -qq $$missing; \
	fi

build: deps-run
	$(GO) build -o $(BIN) ./cmd/muarc

demo: build
	./$(BIN) demo --out $(DEMO)

vet: deps-run
	$(GO) vet ./...

# test runs every package's tests, the fuzz seed corpora included, with the
# race detector off (cgo HDF5 calls are serialised by design) and CI=true so
# a missing outside reference fails instead of skipping.
test: deps
	cd scripts/h5wasm && npm ci --silent --no-audit --no-fund
	gofmt -l . | (! grep .) || (echo "gofmt would change the files above" && exit 1)
	$(GO) vet ./...
	CI=true $(GO) test -count=1 -timeout 30m ./...

# bench prints, in one run, the table of every measured figure against its
# baseline (muarc, baseline, ratio, peak memory): storage of realistic EMG
# against h5py int16, xz -9 and flac -8, import against pandas + h5py, and
# index, validate and deidentify on studies of small recordings against
# h5py, then peak memory on 20 against 2,000 recordings and the HDF5 filter
# sweep (scripts/bench-study.sh, scripts/bench-storage.sh). Into
# bench-out/table.txt and stdout. Not part of make test.
bench: deps-bench
	mkdir -p bench-out
	bash scripts/bench-study.sh | tee bench-out/table.txt

# bench-more runs the Go benchmarks (chunk shapes, reads, analysis,
# validate, deid, pack hashing, import parsing), import and validate of
# large files against pandas and h5py, and the peak memory of long writes.
bench-more: deps
	mkdir -p bench-out
	$(GO) test -run XXX -bench . -benchtime 3x -benchmem ./recfile ./h5 | tee bench-out/recfile.txt
	$(GO) test -run XXX -bench . -benchtime 3x ./synth | tee bench-out/synth.txt
	$(GO) test -run XXX -bench 'StatsMUAPs64ch60s30units|ReadSamples64ch60s|TemplatesInMemory' -benchtime 3x ./analysis | tee bench-out/analysis.txt
	$(GO) test -run XXX -bench . ./validate | tee bench-out/validate.txt
	$(GO) test -run XXX -bench . ./deid | tee bench-out/deid.txt
	$(GO) test -run XXX -bench 'PackHashing|IndexCatalogue' -benchtime 1x ./archive | tee bench-out/archive.txt
	$(GO) test -run XXX -bench 'ImportCSV64x2048x60|ScanAndStream|ParseBlock' -benchtime 3x -benchmem ./convert | tee bench-out/convert.txt
	sh convert/testdata/bench.sh | tee bench-out/import-vs-pandas.txt
	sh validate/testdata/bench_validate.sh | tee bench-out/validate-vs-h5py.txt
	bash scripts/bench-peak-rss.sh | tee bench-out/peak-rss.txt

# fuzz runs each fuzz target for FUZZTIME (default 30s).
FUZZTIME ?= 30s
fuzz: deps
	bash scripts/fuzz-all.sh $(FUZZTIME)
	MUARC_DAMAGE_ALL=1 CI=true $(GO) test -count=1 -run 'TestDamagedCorpus' -timeout 60m ./cmd/muarc
	DIFF_CASES=20000 CI=true $(GO) test -count=1 -timeout 60m -run Differential ./convert
	MUARC_MIXED_CASES=400 CI=true $(GO) test -count=1 -timeout 60m -run TestLevelsAgainstStatsmodels ./analysis/study

clean:
	rm -rf bin $(DEMO) bench-out
