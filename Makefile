# Kneepoint — the two commands a newcomer needs: `make demo` and `make test`.
# Both install any missing Debian package first (checked with dpkg), then build.

SHELL    := /bin/bash
BUILD    ?= build
JOBS     ?= $(shell nproc 2>/dev/null || echo 2)
SUDO     := $(shell [ "$$(id -u)" = 0 ] || echo sudo)

# Everything the build, the tests, the benchmarks and the headless panel need.
PKGS := build-essential cmake ninja-build pkg-config ccache \
        libserialport-dev libsqlite3-dev sqlite3 \
        libimgui-dev libglfw3-dev libgl-dev libstb-dev \
        libgtest-dev libbenchmark-dev libxml2-utils \
        libtomlplusplus-dev libcli11-dev libfmt-dev nlohmann-json3-dev libxlsxwriter-dev \
        libgsl-dev liblxi-dev libtirpc-dev postgresql libpq-dev libcpp-httplib-dev \
        xvfb xauth libgl1-mesa-dri help2man dpkg-dev

# Hardening (see DEVELOPERS.md, "Hardening"): a second build with clang under
# AddressSanitizer + UndefinedBehaviorSanitizer with libFuzzer coverage, which
# runs the whole suite and also holds the fuzz targets; bounded libFuzzer runs;
# and the static checkers. `.ci/run` runs test, sanitize, fuzz, lint.
HARDEN_PKGS := clang libclang-rt-14-dev clang-tidy cppcheck
SAN_BUILD  ?= build-asan
FUZZ_SECONDS ?= 20
FUZZ_TARGETS := procedure scpi_number profile rig_file sim_command
# Any report fails the test that produced it: UBSan halts, ASan aborts.
SAN_ENV    := ASAN_OPTIONS=abort_on_error=1:detect_leaks=1:strict_string_checks=1:detect_stack_use_after_return=1 \
              UBSAN_OPTIONS=halt_on_error=1:print_stacktrace=1 \
              LSAN_OPTIONS=suppressions=$(CURDIR)/.ci/lsan-suppressions.txt
LINT_DIRS  := analysis drivers procedures rig ui

.PHONY: all deps deps-harden configure build demo test bench clean san-configure sanitize fuzz lint fault-campaign \
        install package package-check

all: build

# $(call install-missing,PACKAGES): installs those of PACKAGES that dpkg does
# not list as installed; apt-get update runs only when something is missing.
define install-missing
	@missing=""; \
	for p in $(1); do \
	  dpkg-query -W -f='$${Status}' $$p 2>/dev/null | grep -q "install ok installed" || missing="$$missing $$p"; \
	done; \
	if [ -n "$$missing" ]; then \
	  echo "kneepoint: installing missing Debian packages:$$missing"; \
	  $(SUDO) apt-get update && \
	  DEBIAN_FRONTEND=noninteractive $(SUDO) apt-get install -y --no-install-recommends $$missing; \
	fi
endef

deps:
	$(call install-missing,$(PKGS))

deps-harden: deps
	$(call install-missing,$(HARDEN_PKGS))

configure: deps
	@[ -f $(BUILD)/build.ninja ] || cmake -S . -B $(BUILD) -G Ninja -DCMAKE_BUILD_TYPE=Release

build: configure
	cmake --build $(BUILD) -j $(JOBS)

demo: build
	./$(BUILD)/kneepoint demo

test: build
	ctest --test-dir $(BUILD) --output-on-failure -j $(JOBS) --timeout 300

# Installs the program, its data files (share/kneepoint), the man page and the
# panel's .desktop entry under PREFIX (default /usr/local; DESTDIR honoured).
PREFIX ?= /usr/local
install: build
	cmake --install $(BUILD) --prefix $(PREFIX)

# A Debian package (CPack) in $(BUILD)/: kneepoint_<version>_<arch>.deb.
package: build
	cd $(BUILD) && cpack -G DEB

# The package installed into a temporary root and run from there with the
# source tree hidden (.ci/package-check).
package-check: package
	.ci/package-check $(BUILD)

bench: build
	./$(BUILD)/tests/bench/kneepoint_bench

# Seeded abnormal ends of runs on the simulator over TCP and ptys, with the
# guardian watching (tests/campaign/fault_campaign.cpp); prints its figures and
# fails when a target is missed. Bounded by CAMPAIGN_BUDGET_S of trials.
CAMPAIGN_TRIALS   ?= 150
CAMPAIGN_SEED     ?= 1
CAMPAIGN_BUDGET_S ?= 540
fault-campaign: build
	./$(BUILD)/tests/campaign/kp_fault_campaign --trials $(CAMPAIGN_TRIALS) --seed $(CAMPAIGN_SEED) --budget-s $(CAMPAIGN_BUDGET_S)

# The sanitizer build ($(SAN_BUILD)/, clang, -DKP_FUZZ=ON): every library and
# test is compiled with ASan + UBSan and libFuzzer's coverage, so one build
# serves both `sanitize` (the whole GoogleTest suite and every other ctest,
# benchmarks left out) and `fuzz` (the <name>_fuzz binaries).
san-configure: deps-harden
	@[ -f $(SAN_BUILD)/build.ninja ] || CXX=clang++ cmake -S . -B $(SAN_BUILD) -G Ninja -DCMAKE_BUILD_TYPE=Debug \
	  -DKP_BENCH=OFF -DKP_FUZZ=ON -DCMAKE_CXX_FLAGS_DEBUG="-O1"

# CrashResume is left out here: it kills runners that run in real time at
# 6000x and bounds the charge lost per kill by what a commit window can hold;
# under the sanitizers every step is several times slower, a window spans far
# more simulated time and the bound no longer describes the code. It runs in
# every `make test`.
sanitize: san-configure
	cmake --build $(SAN_BUILD) -j $(JOBS)
	$(SAN_ENV) ctest --test-dir $(SAN_BUILD) --output-on-failure -j $(JOBS) --timeout 600 -E '^CrashResume\.'

# libFuzzer: each target runs FUZZ_SECONDS on a scratch copy of its seed corpus.
# A crash leaves crash-* in $(SAN_BUILD)/findings/: fix the bug, then copy the
# input into tests/fuzz/corpus/<target>/ (the replay tests keep it fixed).
fuzz: san-configure
	cmake --build $(SAN_BUILD) -j $(JOBS) --target $(addsuffix _fuzz,$(FUZZ_TARGETS))
	@mkdir -p $(SAN_BUILD)/findings
	@set -e; for t in $(FUZZ_TARGETS); do \
	  rm -rf $(SAN_BUILD)/corpus/$$t; mkdir -p $(SAN_BUILD)/corpus/$$t; \
	  cp tests/fuzz/corpus/$$t/* $(SAN_BUILD)/corpus/$$t/; \
	  echo "fuzz: $$t for $(FUZZ_SECONDS) s"; \
	  $(SAN_ENV) ./$(SAN_BUILD)/tests/fuzz/$${t}_fuzz -max_total_time=$(FUZZ_SECONDS) -max_len=8192 \
	    -timeout=10 -rss_limit_mb=2048 -print_final_stats=1 \
	    -artifact_prefix=$(SAN_BUILD)/findings/$$t- $(SAN_BUILD)/corpus/$$t 2>&1 \
	    | tee $(SAN_BUILD)/$$t.log | grep -E "^(stat::number_of_executed_units|==[0-9]+==ERROR|SUMMARY)" ; \
	  [ $${PIPESTATUS[0]} -eq 0 ] || { echo "fuzz: $$t failed, see $(SAN_BUILD)/$$t.log"; exit 1; }; \
	done

# Static analysis of the project's own sources (configs and the commented
# suppressions live in .ci/). Needs the compile database of $(BUILD).
lint: configure deps-harden
	cppcheck --quiet --error-exitcode=1 -j $(JOBS) --std=c++20 --language=c++ --inline-suppr \
	  --enable=warning,performance,portability --suppressions-list=.ci/cppcheck-suppressions.txt \
	  -I . $(LINT_DIRS)
	find $(LINT_DIRS) -name '*.cpp' | sort | \
	  xargs -P $(JOBS) -n 4 clang-tidy --quiet --config-file=.ci/clang-tidy.yaml -p $(BUILD)

clean:
	rm -rf $(BUILD) $(SAN_BUILD)
