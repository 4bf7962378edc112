# Thin wrapper over CMake. `make demo` and `make test` install missing Debian packages first.
BUILD ?= build
JOBS ?= 2
CMAKE_FLAGS ?= -DCMAKE_BUILD_TYPE=RelWithDebInfo

# Debian packages the build, the tests and the demo need.
DEB_PACKAGES = build-essential cmake pkg-config clang libclang-rt-14-dev valgrind \
  libsndfile1-dev libfftw3-dev libgsl-dev libjansson-dev libyaml-dev nettle-dev \
  libcairo2-dev libsamplerate0-dev libpng-dev python3 python3-numpy python3-scipy chromium

.PHONY: all deps build demo test sanitize fuzz bench clean

all: build

deps:
	@missing=""; for p in $(DEB_PACKAGES); do \
	  dpkg-query -W -f='$${Status}' $$p 2>/dev/null | grep -q 'install ok installed' || missing="$$missing $$p"; \
	done; \
	if [ -z "$$missing" ]; then echo "deps: all Debian packages present"; \
	elif ! command -v apt-get >/dev/null 2>&1; then \
	  echo "deps: not a Debian system; install the equivalents of:$$missing"; exit 1; \
	else \
	  if [ "$$(id -u)" = 0 ]; then SUDO=""; else SUDO=sudo; fi; \
	  echo "deps: installing$$missing"; \
	  $$SUDO apt-get update -qq && DEBIAN_FRONTEND=noninteractive $$SUDO apt-get install -y -qq --no-install-recommends $$missing; \
	fi

build:
	cmake -S . -B $(BUILD) $(CMAKE_FLAGS)
	cmake --build $(BUILD) -j $(JOBS)

demo: deps build
	@sh fixtures/demo/run-demo.sh $(BUILD)

test: deps build
	cd $(BUILD) && ctest --output-on-failure -j $(JOBS)

sanitize: deps
	cmake -S . -B $(BUILD)-san -DCMAKE_BUILD_TYPE=Debug -DSE_SANITIZE=ON
	cmake --build $(BUILD)-san -j $(JOBS)
	cd $(BUILD)-san && ctest --output-on-failure -j $(JOBS)

clean:
	rm -rf $(BUILD) $(BUILD)-san

# libFuzzer: every tests/fuzz/*.c target for FUZZ_SECONDS each, seeded from the fixtures; prints the
# executions and the findings (crash-/leak-/timeout- files in build-fuzz/findings/TARGET/).
FUZZ_SECONDS ?= 60
fuzz: deps
	CC=clang cmake -S . -B build-fuzz -DCMAKE_BUILD_TYPE=RelWithDebInfo -DSE_FUZZ=ON -DBUILD_TESTING=OFF
	cmake --build build-fuzz -j $(JOBS)
	@set -e; cd build-fuzz; rm -rf seeds findings; \
	mkdir -p seeds/fuzz_csv seeds/fuzz_recording seeds/fuzz_line seeds/fuzz_units seeds/fuzz_pulse; \
	cp ../fixtures/bad/*.csv seeds/fuzz_csv/; \
	for f in ../fixtures/bad/*.wav ../fixtures/bad/*.rf64 ../fixtures/bad/*.aiff ../fixtures/bad/*.flac; do \
	  head -c 16384 "$$f" > "seeds/fuzz_recording/$$(basename "$$f")"; done; \
	cp ../fixtures/lines/*.yaml ../fixtures/bad/lines/*.yaml seeds/fuzz_line/; \
	i=0; for t in "100 kN" "5kg/m" "141.4" "2 %" "-3.5e2 ft/s" "0.2264 lb/ft" "12 us" "1e308 km" "3 N s/m"; do \
	  i=$$((i+1)); k=$$((i % 12)); printf "\\$$(printf %03o $$k)%s" "$$t" > seeds/fuzz_units/s$$i; done; \
	i=0; for t in hann:4ms halfsine:2ms gauss:3ms ricker:200Hz triangle:2ms burst:5@2kHz \
	  chirp:100Hz-2kHz:50ms chirp:100-2000Hz:50ms hann:1us; do \
	  i=$$((i+1)); printf "%s" "$$t" > seeds/fuzz_pulse/s$$i; done; \
	for t in $$(ls fuzz); do \
	  mkdir -p findings/$$t work/$$t; \
	  for r in ../fixtures/bad/fuzz/$$t-*; do [ -f "$$r" ] || continue; cp "$$r" seeds/$$t/; \
	    ./fuzz/$$t "$$r" > /dev/null 2>&1 && echo "fuzz: $$t: reproducer $$(basename $$r) passes" \
	      || echo "fuzz: $$t: reproducer $$(basename $$r) FAILS"; done; \
	  ./fuzz/$$t -max_total_time=$(FUZZ_SECONDS) -timeout=10 -rss_limit_mb=2048 -max_len=16384 \
	    -print_final_stats=1 -artifact_prefix=findings/$$t/ work/$$t seeds/$$t > findings/$$t.log 2>&1 || true; \
	  runs=$$(sed -n 's/^stat::number_of_executed_units: *//p' findings/$$t.log); \
	  n=$$(ls findings/$$t | wc -l); \
	  echo "fuzz: $$t: $${runs:-?} executions in $(FUZZ_SECONDS) s, $$n findings $$(ls findings/$$t | tr '\n' ' ')"; \
	done
