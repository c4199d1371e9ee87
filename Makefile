# Thin wrapper: install what is missing, configure with CMake, build, run.
#   make demo   - set up, build and run the demo on built-in synthetic data
#   make test   - set up, build and run the whole suite through ctest
#   make build  - set up and build only
BUILD    ?= build
FUZZ     ?= $(BUILD)/fuzz
JOBS     ?= $(shell nproc 2>/dev/null || echo 2)
CMAKE_FLAGS ?=

# Debian 12 packages the build, the tests and the reference checks need.
DEB_PKGS = cmake make gcc pkg-config clang libclang-rt-14-dev \
  libopenblas-dev liblapacke-dev libcjson-dev libpng-dev zlib1g-dev \
  libmodbus-dev libv4l-dev libsystemd-dev libcmocka-dev \
  python3-numpy python3-scipy python3-sklearn python3-skimage \
  python3-opencv python3-pymodbus chromium

ifneq ($(CI),)
WERROR = ON
else
WERROR ?= OFF
endif

.PHONY: all deps configure build fuzz test demo clean

all: build

# apt-get only when something is missing; sudo only when not root.
deps:
	@missing=""; for p in $(DEB_PKGS); do \
	  dpkg-query -W -f='$${Status}' $$p 2>/dev/null | grep -q 'install ok installed' || missing="$$missing $$p"; \
	done; \
	if [ -n "$$missing" ]; then \
	  echo "modeband: installing missing Debian packages:$$missing"; \
	  if [ "$$(id -u)" -eq 0 ]; then SUDO=""; else SUDO="sudo"; fi; \
	  $$SUDO apt-get update -qq && \
	  DEBIAN_FRONTEND=noninteractive $$SUDO apt-get install -y -qq --no-install-recommends $$missing; \
	fi

configure: deps
	cmake -S . -B $(BUILD) -DMB_WERROR=$(WERROR) -DMB_FUZZ_DIR=$(abspath $(FUZZ)) $(CMAKE_FLAGS)

build: configure
	cmake --build $(BUILD) -j $(JOBS)

# libFuzzer targets need clang: a separate build folder with MB_FUZZ=ON.
fuzz: deps
	CC=clang cmake -S . -B $(FUZZ) -DMB_FUZZ=ON -DMB_WERROR=$(WERROR)
	cmake --build $(FUZZ) -j $(JOBS)

test: build fuzz
	ctest --test-dir $(BUILD) --output-on-failure -j $(JOBS)

demo: build
	sh inspect/demo.sh $(BUILD)

clean:
	rm -rf $(BUILD)
