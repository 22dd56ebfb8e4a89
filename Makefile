# splitroi - plain Makefile: `make`, `make check`, `make demo`, `make bench`, `make calibrate`.
# New .c files under src/ and tests/unit/test_*.c are picked up by themselves.

PREFIX ?= /usr/local
DESTDIR ?=
BUILD ?= build
CC ?= cc
PYTHON ?= /usr/bin/python3

# message buffers are bounded on purpose: a long path shortens a message, it never overflows
WARN = -Wall -Wextra -Wshadow -Wstrict-prototypes -Wmissing-prototypes -Wno-unused-parameter \
	-Wno-format-truncation
ifeq ($(CI),true)
WARN += -Werror
endif
OPT ?= -O2 -g
SAN ?=
PKGS = zlib lapacke openblas inih jansson libpng
# The flags are asked of pkg-config when a recipe first needs them, never when this
# file is read: on a bare machine `make demo` installs pkg-config and the libraries
# first (tools/deps.sh), so a value taken at parse time would be empty. Each is
# computed once (the assignment replaces itself with its value).
PKG_CFLAGS = $(eval PKG_CFLAGS := $(shell pkg-config --cflags $(PKGS) 2>/dev/null))$(PKG_CFLAGS)
PKG_LIBS = $(eval PKG_LIBS := $(shell pkg-config --libs $(PKGS) 2>/dev/null))$(PKG_LIBS)
# nifticlib and libcsv ship no pkg-config file on Debian
NIFTI_CFLAGS = -I/usr/include/nifti
NIFTI_LIBS = -lnifti2 -lnifticdf -lznz
# -ffp-contract=off: a product and a sum are rounded apart everywhere (C11's rule, said
# outright), so no CPU with fused multiply-add changes a result's last bits.
CFLAGS_ALL = -std=c11 -D_POSIX_C_SOURCE=200809L -D_DEFAULT_SOURCE -ffp-contract=off $(OPT) $(SAN) $(WARN) \
	$(NIFTI_CFLAGS) $(PKG_CFLAGS) -pthread $(CFLAGS)
LIBS = $(NIFTI_LIBS) -lcsv $(PKG_LIBS) -lz -lm -pthread
# ISA-L's igzip inflates .nii.gz about three times faster than zlib (src/io/gzin.c);
# without it (or with ISAL=no) zlib does all the inflating.
# Asked when a recipe first needs it, like the flags above.
ISAL ?= auto
ISAL_CFLAGS = $(eval ISAL_CFLAGS := $(if $(filter no,$(ISAL)),,$(shell pkg-config --exists libisal 2>/dev/null && echo -DSR_HAVE_ISAL $$(pkg-config --cflags libisal))))$(ISAL_CFLAGS)
ISAL_LIBS = $(eval ISAL_LIBS := $(if $(filter no,$(ISAL)),,$(shell pkg-config --libs libisal 2>/dev/null)))$(ISAL_LIBS)
CFLAGS_ALL += $(ISAL_CFLAGS)
LIBS += $(ISAL_LIBS)

LIB_SRC := $(sort $(wildcard src/core/*.c src/io/*.c src/report/*.c src/pipeline/*.c src/cmd/*.c))
LIB_OBJ := $(LIB_SRC:%.c=$(BUILD)/%.o)
TEST_SRC := $(sort $(wildcard tests/unit/test_*.c))
TEST_BIN := $(TEST_SRC:tests/unit/%.c=$(BUILD)/tests/%)
# Helper programs the Python and command-line tests drive (tests/tools/*.c); the
# tests/tools/*_shim.c are LD_PRELOAD libraries instead (shared objects, no library).
SHIM_SRC := $(sort $(wildcard tests/tools/*_shim.c))
SHIM_BIN := $(SHIM_SRC:tests/tools/%.c=$(BUILD)/tests/tools/%.so)
TOOL_SRC := $(filter-out $(SHIM_SRC),$(sort $(wildcard tests/tools/*.c)))
TOOL_BIN := $(TOOL_SRC:tests/tools/%.c=$(BUILD)/tests/tools/%)
# The afl++ harnesses (tests/fuzz/fuzz_*.c), built by make test with the normal compiler so that
# tests/cli/test_fuzz_harnesses.sh runs them on their seeds; make fuzz builds them for afl++.
FUZZ_SRC := $(sort $(wildcard tests/fuzz/fuzz_*.c))
FUZZ_BIN := $(FUZZ_SRC:tests/fuzz/%.c=$(BUILD)/tests/fuzz/%)
FUZZ_SECONDS ?= 900

.PHONY: all deps deps-build need-libs check check-asan check-valgrind test demo bench calibrate fuzz install uninstall clean
all: $(BUILD)/splitroi

# Stops a build on a machine without the libraries with the one command that fixes it,
# instead of hundreds of compiler errors.
need-libs:
	@bash tools/deps.sh --verify

$(BUILD)/%.o: %.c | need-libs
	@mkdir -p $(dir $@)
	$(CC) $(CFLAGS_ALL) -MMD -MP -c $< -o $@

# The smoothing passes are plain contiguous loops that pay off only when vectorized
# (-O2 leaves loops of unknown length scalar); the results do not depend on it.
# So are glm's copies of the pending volumes (batchsum and pwlanes state their order of
# operations; -ffp-contract=off above keeps every product and sum apart).
$(BUILD)/src/core/smooth.o: CFLAGS_ALL += -O3
$(BUILD)/src/core/batchsum.o: CFLAGS_ALL += -O3
$(BUILD)/src/core/pwlanes.o: CFLAGS_ALL += -O3
$(BUILD)/src/core/glm.o: CFLAGS_ALL += -O3

$(BUILD)/libsplitroi.a: $(LIB_OBJ)
	@rm -f $@
	ar rcs $@ $^

$(BUILD)/splitroi: $(BUILD)/src/main.o $(BUILD)/libsplitroi.a
	$(CC) $(OPT) $(SAN) -o $@ $^ $(LIBS)

$(BUILD)/tests/%: tests/unit/%.c $(wildcard tests/unit/*.h) $(BUILD)/libsplitroi.a
	@mkdir -p $(dir $@)
	$(CC) $(CFLAGS_ALL) -Isrc -o $@ $< $(BUILD)/libsplitroi.a $(LIBS)

$(BUILD)/tests/tools/%: tests/tools/%.c $(BUILD)/libsplitroi.a
	@mkdir -p $(dir $@)
	$(CC) $(CFLAGS_ALL) -Isrc -o $@ $< $(BUILD)/libsplitroi.a $(LIBS)

$(BUILD)/tests/fuzz/%: tests/fuzz/%.c tests/fuzz/fuzz_common.h $(BUILD)/libsplitroi.a
	@mkdir -p $(dir $@)
	$(CC) $(CFLAGS_ALL) -Isrc -o $@ $< $(BUILD)/libsplitroi.a $(LIBS)

# No sanitizer flags: a preloaded library cannot bring its own ASan runtime.
$(BUILD)/tests/tools/%_shim.so: tests/tools/%_shim.c
	@mkdir -p $(dir $@)
	$(CC) -std=c11 -O2 -g $(WARN) -fPIC -shared -o $@ $< -ldl

# Installs the Debian packages (only those missing): deps-build what the build and
# the demo need, deps also what the tests need.
deps:
	@bash tools/deps.sh test

deps-build:
	@bash tools/deps.sh build

# Every test: unit binaries, command-line scripts, Python reference checks.
# T=glm (or T="glm nii") runs only the test files whose names contain a word.
test: all $(TEST_BIN) $(TOOL_BIN) $(SHIM_BIN) $(FUZZ_BIN)
	@BUILD=$(BUILD) PYTHON=$(PYTHON) SPLITROI_TESTS="$(T)" bash tests/run.sh

# The targets that install packages first run a second make for the rest, so that
# nothing it does depends on what the machine had when this file was read.
check: deps
	@$(MAKE) --no-print-directory test

# The same tests built with AddressSanitizer and UndefinedBehaviorSanitizer.
check-asan: deps
	@$(MAKE) --no-print-directory BUILD=build-asan OPT="-O1 -g -fno-omit-frame-pointer" \
		SAN="-fsanitize=address,undefined -fno-sanitize-recover=undefined" \
		SPLITROI_TEST_LEVEL=quick test

check-valgrind: deps
	@$(MAKE) --no-print-directory all $(TEST_BIN)
	@BUILD=$(BUILD) PYTHON=$(PYTHON) SPLITROI_VALGRIND=1 bash tests/run.sh unit

demo: deps-build
	@$(MAKE) --no-print-directory all
	@bash tools/demo.sh $(BUILD)/splitroi

bench: deps
	@SPLITROI_DEPS_BENCH=1 bash tools/deps.sh test || echo "note: bench tools missing; make bench skips what is not installed"
	@$(MAKE) --no-print-directory all
	@bash tools/bench.sh $(BUILD)/splitroi

# False-positive shares of the first-level t maps on simulated null noise, every noise model
# (about 10 minutes; not part of make check, which runs a few of its cells). Fails when
# ar1-adjusted leaves the 99.9% binomial range at 0.05 or 0.01 under AR(1) noise.
calibrate: all $(BUILD)/tests/tools/glmtool
	@$(PYTHON) tools/calibrate.py --glmtool $(BUILD)/tests/tools/glmtool --research --assert --markdown

# afl++ on each harness of tests/fuzz/ (NIfTI, events/TSV, study file) for FUZZ_SECONDS each
# (default 900), all at once, built under ASan in build-fuzz/; not part of make check. Installs
# afl++ when missing (as root). FUZZ_HARNESSES=nii chooses some. Findings: build-fuzz/out/.
fuzz:
	@FUZZ_SECONDS=$(FUZZ_SECONDS) bash tools/fuzz.sh $(FUZZ_HARNESSES)

install: all
	install -d $(DESTDIR)$(PREFIX)/bin
	install -m 755 $(BUILD)/splitroi $(DESTDIR)$(PREFIX)/bin/splitroi

uninstall:
	rm -f $(DESTDIR)$(PREFIX)/bin/splitroi

clean:
	rm -rf build build-asan build-fuzz

-include $(LIB_OBJ:.o=.d) $(BUILD)/src/main.d
