# Two entry points for a fresh Debian machine:
#   make demo   install dependencies, build (Release), run the demo end to end
#   make test   install dependencies, build, run every test through ctest
# Other targets: build, deps, bench, format, clean.

BUILD ?= build/release
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

test: build
	ctest --test-dir $(BUILD) -j$(JOBS) --output-on-failure

bench: build
	benchmarks/bench_read.sh $(BUILD)/pare

format:
	clang-format -i include/pare/*.h src/*.cpp src/internal/*.h src/cli/*.cpp src/cli/*.h tests/*.cpp tests/support/*.h

clean:
	rm -rf build
