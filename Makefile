# The two commands a new user runs: `make demo` and `make test`. Both install any missing
# Debian packages first (scripts/install-deps), configure and build.
BUILD_DIR ?= build
ASAN_DIR ?= build-asan
FUZZ_DIR ?= build-fuzz
FUZZ_SECONDS ?= 60
FUZZ_SMOKE_SECONDS ?= 3
FUZZ_TARGETS = stage_file device_classes units csv_fit sound
JOBS ?= 2
CMAKE_FLAGS ?=
# Inside `make test` the three trees build side by side under one make job server (JOBS jobs
# in all, shared); a build run on its own gets -j$(JOBS) of its own.
BUILD_JOBS = $(if $(findstring jobserver,$(MAKEFLAGS)),,-j$(JOBS))
PINCHOFF = $(BUILD_DIR)/pinchoff
MAKEFLAGS += --no-print-directory

.PHONY: all deps configure build build-tests build-asan build-fuzz demo test test-all test-release test-asan test-fuzz fuzz bench soak clean

all: build

deps:
	@scripts/install-deps

configure: deps
	@cmake -S . -B $(BUILD_DIR) -DCMAKE_BUILD_TYPE=Release $(CMAKE_FLAGS) > $(BUILD_DIR).configure.log 2>&1 || { cat $(BUILD_DIR).configure.log; exit 1; }

build: configure
	+@cmake --build $(BUILD_DIR) $(BUILD_JOBS)

demo: build
	@echo
	@echo "== pinchoff bias presets/bass-booster-9v.toml"
	@$(PINCHOFF) bias presets/bass-booster-9v.toml --at 41
	@echo
	@echo "== pinchoff tune presets/bass-booster-9v.toml --target vd=4.5"
	@$(PINCHOFF) tune presets/bass-booster-9v.toml --target vd=4.5
	@echo
	@mkdir -p out
	@echo "== pinchoff sweep presets/bass-booster-9v.toml --plot out/bass-booster-sweep.svg"
	@$(PINCHOFF) sweep presets/bass-booster-9v.toml --plot out/bass-booster-sweep.svg
	@echo
	@echo "== pinchoff bias presets/three-stage-overdrive-9v.toml (a chain: which stage clips first)"
	@$(PINCHOFF) bias presets/three-stage-overdrive-9v.toml
	@echo
	@echo "== pinchoff sweep presets/three-stage-overdrive-9v.toml --from -70dBu --to -20dBu --steps 6"
	@$(PINCHOFF) sweep presets/three-stage-overdrive-9v.toml --from -70dBu --to -20dBu --steps 6
	@echo
	@echo "== pinchoff noise presets/phantom-mic-follower.toml (self-noise, and which part hisses)"
	@$(PINCHOFF) noise presets/phantom-mic-follower.toml
	@echo
	@echo "== pinchoff response presets/pickup-buffer-9v.toml (a pickup's resonance into a buffer)"
	@$(PINCHOFF) response presets/pickup-buffer-9v.toml
	@echo
	@echo "== pinchoff match samples/bag-of-twenty.csv --tolerance 6%,50mV (matched pairs from a bag of parts)"
	@$(PINCHOFF) match samples/bag-of-twenty.csv --tolerance 6%,50mV
	@echo
	@echo "== pinchoff render: the demo clip through two presets, loudness-matched, into out/"
	@$(PINCHOFF) render presets/bass-booster-9v.toml presets/clean-preamp-18v.toml \
	  --input samples/pluck-phrase-48k.wav --output out --dry --force

# `make test`: every gate. The suite on the Release build, the suite again under
# AddressSanitizer and UndefinedBehaviorSanitizer (halting on the first report), and a short
# run of each fuzz target, built in the sanitizer tree (its libraries, with coverage on the
# files the targets parse with; tests/fuzz/CMakeLists.txt). `make test-release` is the
# quick one while working. The gates run side by side, sharing JOBS compile jobs, so both
# cores stay busy until the last one ends; each gate's suite starts as soon as its own
# build is done.
test:
	+@$(MAKE) -j$(JOBS) test-release test-asan test-fuzz

# The same as `make test` (kept for old habits).
test-all: test

# Only what the suite runs (the test runner and the program): `make build`, `make bench` and
# `make demo` build the rest.
build-tests: configure
	+@cmake --build $(BUILD_DIR) $(BUILD_JOBS) --target pinchoff_tests pinchoff

test-release: build-tests
	@echo "== tests: Release build"
	@ctest --test-dir $(BUILD_DIR) --output-on-failure -j$(JOBS)

# Built with clang (installed for the fuzz targets anyway): it compiles the sanitized tree in
# about four fifths of gcc's processor time (a command-file batch 74 to 47 CPU-s), and its
# UndefinedBehaviorSanitizer checks pointer arithmetic too, which gcc's does not. -O1 with
# line tables only: all a sanitizer report needs, at half the build time of -O2 -g; the
# command files and the test files at -O0, the engines at -O2 (cli/, tests/ and model/
# CMakeLists.txt say why). Only what the suite runs is built (the test runner and the
# program; not the benchmarks or the demo-clip writer), and the fuzz targets for the smoke
# run.
build-asan: deps
	@cmake -S . -B $(ASAN_DIR) -DCMAKE_BUILD_TYPE=RelWithDebInfo "-DCMAKE_CXX_FLAGS_RELWITHDEBINFO=-O1 -gline-tables-only -DNDEBUG" \
	  -DCMAKE_CXX_COMPILER=clang++ -DPINCHOFF_SANITIZE=ON $(CMAKE_FLAGS) > $(ASAN_DIR).configure.log 2>&1 || { cat $(ASAN_DIR).configure.log; exit 1; }
	+@cmake --build $(ASAN_DIR) $(BUILD_JOBS) --target pinchoff_tests pinchoff fuzz_targets

test-asan: build-asan
	@echo "== tests: AddressSanitizer + UndefinedBehaviorSanitizer build"
	@ASAN_OPTIONS=halt_on_error=1:detect_leaks=1 UBSAN_OPTIONS=halt_on_error=1:print_stacktrace=1 \
	  ctest --test-dir $(ASAN_DIR) --output-on-failure -j$(JOBS)

# 100 000 random valid stages (PINCHOFF_SOAK_COUNT to change), with counts printed.
soak: build
	@$(BUILD_DIR)/pinchoff_tests -tc="soak*" --no-skip --success=false

# libFuzzer targets (tests/fuzz/) for long runs, built with clang in their own folder with
# every library instrumented for coverage. -O2 with line tables only: a report names file
# and line, and the full debug information cost build time and nothing else.
build-fuzz: deps
	@cmake -S . -B $(FUZZ_DIR) -DCMAKE_BUILD_TYPE=RelWithDebInfo "-DCMAKE_CXX_FLAGS_RELWITHDEBINFO=-O2 -gline-tables-only -DNDEBUG" \
	  -DCMAKE_CXX_COMPILER=clang++ -DPINCHOFF_FUZZ=ON \
	  -DPINCHOFF_TESTS=OFF $(CMAKE_FLAGS) > $(FUZZ_DIR).configure.log 2>&1 || { cat $(FUZZ_DIR).configure.log; exit 1; }
	+@cmake --build $(FUZZ_DIR) $(BUILD_JOBS) --target fuzz_targets

# Each target for FUZZ_SECONDS (default 60); prints the executions each survived.
fuzz: build-fuzz
	@echo "== fuzzing, $(FUZZ_SECONDS) s per target"
	@scripts/run-fuzz $(FUZZ_DIR) $(FUZZ_SECONDS) $(FUZZ_TARGETS)

# The smoke run of `make test`: the targets built in the sanitizer tree.
test-fuzz: build-asan
	@echo "== fuzz smoke run, $(FUZZ_SMOKE_SECONDS) s per target"
	@scripts/run-fuzz $(ASAN_DIR) $(FUZZ_SMOKE_SECONDS) $(FUZZ_TARGETS)

bench: build
	@if [ -x $(BUILD_DIR)/pinchoff_bench ]; then $(BUILD_DIR)/pinchoff_bench; else echo "no benchmarks built"; fi
	@if [ -x $(BUILD_DIR)/pinchoff_bench_api ]; then echo; $(BUILD_DIR)/pinchoff_bench_api; fi

clean:
	rm -rf $(BUILD_DIR) $(BUILD_DIR).configure.log $(ASAN_DIR) $(ASAN_DIR).configure.log $(FUZZ_DIR) $(FUZZ_DIR).configure.log out
