# Thin wrapper around CMake: the two set-up commands from the README.
#   make demo   build fxledger and run the invented demo scenario into demo/out/
#   make test   build fxledger and run every test (ctest)
#   make bench  build fxledger and run the benchmark on synthetic databases (docs/performance.md)
# Both first install the Debian packages the project needs when they are missing.

BUILD ?= build
CMAKE_FLAGS ?= -DCMAKE_BUILD_TYPE=RelWithDebInfo

.PHONY: all deps build test demo clean sanitize

all: build

deps:
	@sh tools/install-deps.sh

$(BUILD)/Makefile: CMakeLists.txt
	cmake -S . -B $(BUILD) $(CMAKE_FLAGS)

build: deps
	cmake -S . -B $(BUILD) $(CMAKE_FLAGS)
	cmake --build $(BUILD) -j2

test: build
	cd $(BUILD) && ctest --output-on-failure -j2

demo: build
	/usr/bin/python3 demo/run_demo.py $(BUILD)/fxledger

clean:
	rm -rf $(BUILD) demo/out

# Not part of 'make test': builds two databases of invented data (about 1 GiB
# under /tmp/fxledger-bench, reused while the generator and schema stay the
# same) and prints each figure beside its target; exits 1 if one is missed.
.PHONY: bench
bench: build
	/usr/bin/python3 tests/bench/run_bench.py --fxledger $(BUILD)/fxledger
