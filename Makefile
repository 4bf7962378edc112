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
