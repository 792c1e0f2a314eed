# Two entry points for a fresh Debian machine:
#   make demo   install dependencies, build (Release), run the demo end to end
#   make test   install dependencies, build, run every test through ctest
# Other targets: build, deps, bench, format, clean.

BUILD ?= build/release
ASAN_BUILD ?= build/asan
JOBS  ?= 2
CMAKE_FLAGS ?=

.PHONY: demo test build deps bench format clean

deps:
	@scripts/install-deps.sh

build: deps
	@cmake -S . -B $(BUILD) -DCMAKE_BUILD_TYPE=Release $(CMAKE_FLAGS) > /dev/null
	@cmake --build $(BUILD) -j$(JOBS)

demo: build
	$(BUILD)/pare demo --out pare-demo

# Every test on the Release build, then the unit tests again under AddressSanitizer and
# UndefinedBehaviorSanitizer (the reference checks are not repeated there: they test numbers, not memory).
test: build
	ctest --test-dir $(BUILD) -j$(JOBS) --output-on-failure
	@cmake -S . -B $(ASAN_BUILD) -DCMAKE_BUILD_TYPE=None -DCMAKE_CXX_FLAGS=-O1 \
	  -DPARE_SANITIZE=address,undefined > /dev/null
	@cmake --build $(ASAN_BUILD) -j$(JOBS) --target pare_tests
	ASAN_OPTIONS=detect_leaks=1:abort_on_error=1 UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1 \
	  ctest --test-dir $(ASAN_BUILD) -j$(JOBS) -R '^unit' --output-on-failure

bench: build
	benchmarks/bench_read.sh $(BUILD)/pare

format:
	clang-format -i include/pare/*.h src/*.cpp src/internal/*.h src/cli/*.cpp src/cli/*.h tests/*.cpp tests/support/*.h

clean:
	rm -rf build
