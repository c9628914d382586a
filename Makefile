# Kneepoint — the two commands a newcomer needs: `make demo` and `make test`.
# Both install any missing Debian package first (checked with dpkg), then build.

BUILD    ?= build
JOBS     ?= $(shell nproc 2>/dev/null || echo 2)
SUDO     := $(shell [ "$$(id -u)" = 0 ] || echo sudo)

# Everything the build, the tests, the benchmarks and the headless panel need.
PKGS := build-essential cmake ninja-build pkg-config ccache \
        libserialport-dev libsqlite3-dev sqlite3 \
        libimgui-dev libglfw3-dev libgl-dev libstb-dev \
        libgtest-dev libgmock-dev libbenchmark-dev \
        libtomlplusplus-dev libcli11-dev libfmt-dev nlohmann-json3-dev \
        libgsl-dev libboost-dev \
        xvfb xauth libgl1-mesa-dri librsvg2-bin

.PHONY: all deps configure build demo test bench clean

all: build

deps:
	@missing=""; \
	for p in $(PKGS); do \
	  dpkg-query -W -f='$${Status}' $$p 2>/dev/null | grep -q "install ok installed" || missing="$$missing $$p"; \
	done; \
	if [ -n "$$missing" ]; then \
	  echo "kneepoint: installing missing Debian packages:$$missing"; \
	  $(SUDO) apt-get update && \
	  DEBIAN_FRONTEND=noninteractive $(SUDO) apt-get install -y --no-install-recommends $$missing; \
	fi

configure: deps
	@[ -f $(BUILD)/build.ninja ] || cmake -S . -B $(BUILD) -G Ninja -DCMAKE_BUILD_TYPE=Release

build: configure
	cmake --build $(BUILD) -j $(JOBS)

demo: build
	./$(BUILD)/kneepoint demo

test: build
	ctest --test-dir $(BUILD) --output-on-failure -j $(JOBS) --timeout 300

bench: build
	./$(BUILD)/tests/bench/kneepoint_bench

clean:
	rm -rf $(BUILD)
