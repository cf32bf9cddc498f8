# streakwright: set-up, build, demo and tests on a fresh Debian 12 machine.
#   make demo   install missing Debian packages, build, simulate a preset scan and retrieve it
#   make test   install missing Debian packages, build, run the whole test suite
#   make demo-batch  simulate a small archive and reprocess it with `batch`
#   make bench  build and run the Google Benchmark programs (figures go in docs/performance.md)
#   make fuzz   coverage-guided fuzzing of the input readers with clang's libFuzzer (FUZZ_SECONDS)

BUILD   ?= build
JOBS    ?= $(shell nproc 2>/dev/null || echo 2)
SUDO    := $(shell [ "$$(id -u)" = 0 ] || echo sudo)
DEMO    ?= demo-out
PRESET  ?= neon-150as

# Debian 12 package names of everything the build and the tests need.
DEPS := cmake g++ make pkg-config libeigen3-dev libfftw3-dev libceres-dev \
        libopencv-core-dev libopencv-imgproc-dev libopencv-imgcodecs-dev \
        catch2 libcli11-dev nlohmann-json3-dev libfmt-dev libhdf5-dev libbenchmark-dev \
        python3-dev pybind11-dev python3-numpy python3-scipy python3-pytest clang-format
# python3-matplotlib: the batch-trends example (docs/examples/plot_batch_trends.py) and its test.
# slurm-wlm, munge: the Slurm array test (tests/slurm/, runs only as root); their services stay
# off until /etc/slurm/slurm.conf exists, the test starts private daemons of its own.
DEPS += python3-matplotlib slurm-wlm munge

FUZZ_SECONDS ?= 60

.PHONY: deps configure build test demo demo-batch bench fuzz clean format format-check

deps:
	@missing=""; for p in $(DEPS); do dpkg -s $$p >/dev/null 2>&1 || missing="$$missing $$p"; done; \
	if [ -n "$$missing" ]; then \
	  echo "installing:$$missing"; \
	  $(SUDO) env DEBIAN_FRONTEND=noninteractive apt-get update -qq && \
	  $(SUDO) env DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends $$missing; \
	fi

configure: deps
	cmake -S . -B $(BUILD) -DCMAKE_BUILD_TYPE=Release

build: configure
	cmake --build $(BUILD) -j$(JOBS)

test: build
	cd $(BUILD) && ctest --output-on-failure -j$(JOBS)

demo: build
	./$(BUILD)/cli/streakwright simulate --preset $(PRESET) --out $(DEMO) --seed 7
	./$(BUILD)/cli/streakwright retrieve $(DEMO)/$(PRESET).json --out $(DEMO)/retrieval --bootstrap 4

# A small archive of simulated scans (nested folders, a duplicated file name) reprocessed in batch.
demo-batch: build
	./$(BUILD)/cli/streakwright simulate --preset neon-150as --out $(DEMO)/archive/day1 --name scan_001 --seed 1 --quiet
	./$(BUILD)/cli/streakwright simulate --preset neon-chirped-pos --out $(DEMO)/archive/day1 --name scan_002 --seed 2 --quiet
	./$(BUILD)/cli/streakwright simulate --preset neon-satellites --out $(DEMO)/archive/day2 --name scan_001 --seed 3 --quiet
	./$(BUILD)/cli/streakwright simulate --preset argon-rabbitt --out $(DEMO)/archive/day2 --name scan_002 --seed 4 --quiet
	./$(BUILD)/cli/streakwright batch $(DEMO)/archive --out $(DEMO)/reprocessed --jobs 2 --bootstrap 2

bench: deps
	cmake -S . -B $(BUILD) -DCMAKE_BUILD_TYPE=Release -DSTREAKWRIGHT_BUILD_BENCHMARKS=ON
	cmake --build $(BUILD) -j$(JOBS)
	tests/bench/run_bench.sh $(BUILD)

# `make test` already runs the readers' fuzz target for a bounded time (ctest entry
# fuzz_readers: a seeded mutation loop, no extra packages). This target builds the same target
# with clang's libFuzzer and AddressSanitizer in $(BUILD)-fuzz (every source instrumented) and
# runs it from the committed seeds.
fuzz: deps
	@dpkg -s clang >/dev/null 2>&1 || $(SUDO) env DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends clang
	CXX=clang++ cmake -S . -B $(BUILD)-fuzz -DCMAKE_BUILD_TYPE=RelWithDebInfo -DSTREAKWRIGHT_LIBFUZZER=ON \
	  -DCMAKE_CXX_FLAGS="-fsanitize=fuzzer-no-link,address" -DSTREAKWRIGHT_BUILD_TESTS=ON
	cmake --build $(BUILD)-fuzz -j$(JOBS) --target fuzz_readers_libfuzzer
	mkdir -p $(BUILD)-fuzz/corpus && cp tests/fuzz/corpus/* $(BUILD)-fuzz/corpus/
	$(BUILD)-fuzz/tests/fuzz/fuzz_readers_libfuzzer -max_total_time=$(FUZZ_SECONDS) -rss_limit_mb=2048 $(BUILD)-fuzz/corpus

format:
	clang-format -i $$(git ls-files '*.h' '*.cpp')

# Fails (and lists the places) when a tracked source is not clang-format clean (.ci/run).
format-check: deps
	clang-format --dry-run --Werror $$(git ls-files '*.h' '*.cpp')

clean:
	rm -rf $(BUILD) $(DEMO)
