# Two entry points for a fresh Debian machine:
#   make demo   install dependencies, build (Release), run the demo end to end
#   make test   install dependencies, build, run every test through ctest
# Other targets: build, deps, bench, format, clean.

BUILD ?= build/release
ASAN_BUILD ?= build/asan
JOBS  ?= 2
CMAKE_FLAGS ?=

.PHONY: demo test build deps bench bench-read fuzz format clean

deps:
	@scripts/install-deps.sh

build: deps
	@cmake -S . -B $(BUILD) -DCMAKE_BUILD_TYPE=Release $(CMAKE_FLAGS) > /dev/null
	@cmake --build $(BUILD) -j$(JOBS)

demo: build
	$(BUILD)/pare demo --out pare-demo

# Every test on the Release build; then the library and the whole suite again under
# AddressSanitizer and UndefinedBehaviorSanitizer; then the libFuzzer targets (clang) replay their
# corpora and run briefly (`make fuzz FUZZ_SECONDS=3600` for a long session).
test: build
	ctest --test-dir $(BUILD) -j$(JOBS) --output-on-failure
	@cmake -S . -B $(ASAN_BUILD) -DCMAKE_BUILD_TYPE=None -DCMAKE_CXX_FLAGS=-O1 \
	  -DPARE_SANITIZE=address,undefined > /dev/null
	@cmake --build $(ASAN_BUILD) -j$(JOBS)
	ASAN_OPTIONS=detect_leaks=1:abort_on_error=1 UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1 \
	  ctest --test-dir $(ASAN_BUILD) -j$(JOBS) -LE heavy --output-on-failure
	@$(MAKE) --no-print-directory fuzz FUZZ_SECONDS=20

FUZZ_BUILD ?= build/fuzz
FUZZ_SECONDS ?= 20
FUZZ_TARGETS = reader sheet plan options
fuzz: deps
	@cmake -S . -B $(FUZZ_BUILD) -DCMAKE_CXX_COMPILER=clang++-14 -DCMAKE_BUILD_TYPE=RelWithDebInfo \
	  -DPARE_BUILD_TESTS=OFF -DPARE_FUZZ=ON -DPARE_SANITIZE=fuzzer-no-link,address,undefined > /dev/null
	@cmake --build $(FUZZ_BUILD) -j$(JOBS)
	@set -e; for t in $(FUZZ_TARGETS); do \
	  bin=$(CURDIR)/$(FUZZ_BUILD)/tests/fuzz/fuzz_$$t; corpus=$(CURDIR)/tests/fuzz/corpus/$$t; work=$$(mktemp -d); \
	  echo "fuzz $$t: replaying $$corpus, then $(FUZZ_SECONDS) s of fuzzing"; \
	  $$bin -runs=0 $$corpus > $$work/replay.log 2>&1 || { tail -n 40 $$work/replay.log; exit 1; }; \
	  (cd $$work && ASAN_OPTIONS=detect_leaks=1 $$bin -max_total_time=$(FUZZ_SECONDS) -timeout=30 -rss_limit_mb=2048 \
	    -print_final_stats=1 $$work $$corpus > $$work/fuzz.log 2>&1) || { tail -n 40 $$work/fuzz.log; exit 1; }; \
	  grep -E "^stat::number_of_executed_units" $$work/fuzz.log; \
	  rm -rf $$work; \
	done

# Side by side with the same pipeline in Python (numpy/pandas/scipy/scikit-learn), data cached in
# /tmp/pare-bench-data; SIZE = SAMPLESxFEATURES. bench-read: reading only, next to pandas.
SIZE ?= 1000x50000
bench: build
	/usr/bin/python3 benchmarks/bench_reduce.py --pare $(BUILD)/pare --size $(SIZE)

bench-read: build
	benchmarks/bench_read.sh $(BUILD)/pare

format:
	clang-format -i include/pare/*.h src/*.cpp src/internal/*.h src/cli/*.cpp src/cli/*.h tests/*.cpp tests/support/*.h

clean:
	rm -rf build
