# The two commands a new user runs: `make demo` and `make test`. Both install any missing
# Debian packages first (scripts/install-deps), configure and build.
BUILD_DIR ?= build
ASAN_DIR ?= build-asan
JOBS ?= 2
CMAKE_FLAGS ?=
PINCHOFF = $(BUILD_DIR)/pinchoff
MAKEFLAGS += --no-print-directory

.PHONY: all deps configure build build-asan demo test test-release test-asan bench soak clean

all: build

deps:
	@scripts/install-deps

configure: deps
	@cmake -S . -B $(BUILD_DIR) -DCMAKE_BUILD_TYPE=Release $(CMAKE_FLAGS) > $(BUILD_DIR).configure.log 2>&1 || { cat $(BUILD_DIR).configure.log; exit 1; }

build: configure
	@cmake --build $(BUILD_DIR) -j$(JOBS)

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
	@echo "== pinchoff render: the demo clip through two presets, loudness-matched, into out/"
	@$(PINCHOFF) render presets/bass-booster-9v.toml presets/clean-preamp-18v.toml \
	  --input samples/pluck-phrase-48k.wav --output out --dry --force

# The whole suite runs twice: on the Release build, and on a build with AddressSanitizer
# and UndefinedBehaviorSanitizer that stops at the first report.
test: test-release test-asan

test-release: build
	@echo "== tests: Release build"
	@ctest --test-dir $(BUILD_DIR) --output-on-failure -j$(JOBS)

build-asan: deps
	@cmake -S . -B $(ASAN_DIR) -DCMAKE_BUILD_TYPE=RelWithDebInfo -DPINCHOFF_SANITIZE=ON $(CMAKE_FLAGS) > $(ASAN_DIR).configure.log 2>&1 || { cat $(ASAN_DIR).configure.log; exit 1; }
	@cmake --build $(ASAN_DIR) -j$(JOBS)

test-asan: build-asan
	@echo "== tests: AddressSanitizer + UndefinedBehaviorSanitizer build"
	@ASAN_OPTIONS=halt_on_error=1:detect_leaks=1 UBSAN_OPTIONS=halt_on_error=1:print_stacktrace=1 \
	  ctest --test-dir $(ASAN_DIR) --output-on-failure -j$(JOBS)

# 100 000 random valid stages (PINCHOFF_SOAK_COUNT to change), with counts printed.
soak: build
	@$(BUILD_DIR)/pinchoff_tests -tc="soak*" --no-skip --success=false

bench: build
	@if [ -x $(BUILD_DIR)/pinchoff_bench ]; then $(BUILD_DIR)/pinchoff_bench; else echo "no benchmarks built"; fi

clean:
	rm -rf $(BUILD_DIR) $(BUILD_DIR).configure.log $(ASAN_DIR) $(ASAN_DIR).configure.log out
