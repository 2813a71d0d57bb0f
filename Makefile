# Thin wrapper around CMake: the two set-up commands from the README.
#   make demo   build fxledger and run the invented demo scenario into demo/out/
#   make console  the web console on the demo database (http://127.0.0.1:8617/)
#   make test   build fxledger and run every test (ctest)
#   make bench  build fxledger and run the benchmark on synthetic databases (docs/performance.md;
#               BENCH_SCALE=network for the network-scale database)
#   make install  build, then install fxledger into PREFIX (default /usr/local)
#   make package  build, then the Debian package build/fxledger_VERSION-1_ARCH.deb (CPack DEB)
# Both first install the Debian packages the project needs when they are missing.
# Robustness (docs/robustness.md):
#   make sanitize   AddressSanitizer + UBSan build in build-asan, every test there
#   make valgrind   unit tests and a logging session under valgrind (memcheck)
#   make fuzz       each libFuzzer harness for FUZZ_SECONDS (default 60), clang
# FXL_LONG=1 makes the crash and concurrency tests long (hundreds of kills).

BUILD ?= build
# make install: where fxledger goes (bin/ under it); DESTDIR stages a package.
PREFIX ?= /usr/local
CMAKE_FLAGS ?= -DCMAKE_BUILD_TYPE=RelWithDebInfo
ASAN_BUILD ?= build-asan
FUZZ_BUILD ?= build-fuzz
FUZZ_SECONDS ?= 60
FUZZ_PARSERS ?= plan_json readings_json corrections_json beam_json dicom_json dicom_part10

.PHONY: all deps build test demo console clean sanitize valgrind fuzz install uninstall package

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

# Installs build/fxledger as $(PREFIX)/bin/fxledger and the documentation
# under $(PREFIX)/share/doc/fxledger; DESTDIR=... stages the same tree.
install: build
	cmake --install $(BUILD) --prefix $(PREFIX)

# The Debian package (cmake/packaging.cmake, docs/deployment.md): CPack's DEB
# generator, dependencies by dpkg-shlibdeps; the .deb lands in $(BUILD)/.
package: build
	cd $(BUILD) && cpack -G DEB

# Removes what 'make install' put in place (the list CMake wrote).
uninstall:
	@test -f $(BUILD)/install_manifest.txt || { echo "nothing installed from $(BUILD)" >&2; exit 1; }
	xargs -d '\n' rm -f -- < $(BUILD)/install_manifest.txt

demo: build
	/usr/bin/python3 demo/run_demo.py $(BUILD)/fxledger-testclock

# The web console on the demo database (made first when missing), with the
# program users run (real clock): http://127.0.0.1:8617/, logins in README.md.
console: build
	@test -f demo/out/demo.db || /usr/bin/python3 demo/run_demo.py $(BUILD)/fxledger-testclock
	$(BUILD)/fxledger --db demo/out/demo.db serve --listen 127.0.0.1:8617

# Sanitizer reports go to files (a report from a command that a test expects
# to fail would otherwise pass unseen); any report fails the target.
sanitize: deps
	cmake -S . -B $(ASAN_BUILD) -DCMAKE_BUILD_TYPE=RelWithDebInfo -DFXL_SANITIZE=ON
	cmake --build $(ASAN_BUILD) -j2
	sh tests/sanitize/run_sanitize.sh $(ASAN_BUILD)

valgrind: build
	sh tests/valgrind/run_valgrind.sh $(BUILD)

fuzz: deps
	@command -v clang >/dev/null || { echo "make fuzz needs clang: apt-get install clang libclang-rt-14-dev" >&2; exit 1; }
	cmake -S . -B $(FUZZ_BUILD) -DCMAKE_C_COMPILER=clang -DCMAKE_CXX_COMPILER=clang++ -DCMAKE_BUILD_TYPE=RelWithDebInfo \
	      -DFXL_SANITIZE=ON -DFXL_FUZZ=ON
	cmake --build $(FUZZ_BUILD) -j2 --target fuzzers
	sh tests/fuzz/run_fuzz.sh $(FUZZ_BUILD) $(FUZZ_SECONDS) $(FUZZ_PARSERS)

clean:
	rm -rf $(BUILD) demo/out

# Not part of 'make test': builds two databases of invented data (about 5 GiB
# with the working copies under /tmp/fxledger-bench, reused while the
# generator and schema stay the same), times the commands and the web
# console, and prints each figure beside its target; exits 1 if one is
# missed. BENCH_SCALE=network adds ten departments' twenty years in one
# database (about 6 million measurements, some 30 GiB with its copy, most
# of an hour to build the first time). docs/performance.md.
BENCH_SCALE ?= standard
.PHONY: bench
bench: build
	/usr/bin/python3 tests/bench/run_bench.py --fxledger $(BUILD)/fxledger-testclock --scale $(BENCH_SCALE)
