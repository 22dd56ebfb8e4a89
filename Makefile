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
PKG_CFLAGS := $(shell pkg-config --cflags $(PKGS) 2>/dev/null)
PKG_LIBS := $(shell pkg-config --libs $(PKGS) 2>/dev/null)
# nifticlib and libcsv ship no pkg-config file on Debian
NIFTI_CFLAGS = -I/usr/include/nifti
NIFTI_LIBS = -lnifti2 -lnifticdf -lznz
CFLAGS_ALL = -std=c11 -D_POSIX_C_SOURCE=200809L -D_DEFAULT_SOURCE $(OPT) $(SAN) $(WARN) \
	$(NIFTI_CFLAGS) $(PKG_CFLAGS) -pthread $(CFLAGS)
LIBS = $(NIFTI_LIBS) -lcsv $(PKG_LIBS) -lz -lm -pthread

LIB_SRC := $(sort $(wildcard src/core/*.c src/io/*.c src/cmd/*.c))
LIB_OBJ := $(LIB_SRC:%.c=$(BUILD)/%.o)
TEST_SRC := $(sort $(wildcard tests/unit/test_*.c))
TEST_BIN := $(TEST_SRC:tests/unit/%.c=$(BUILD)/tests/%)
# Helper programs the Python and command-line tests drive (tests/tools/*.c).
TOOL_SRC := $(sort $(wildcard tests/tools/*.c))
TOOL_BIN := $(TOOL_SRC:tests/tools/%.c=$(BUILD)/tests/tools/%)

.PHONY: all deps check check-asan check-valgrind test demo bench calibrate install uninstall clean
all: $(BUILD)/splitroi

$(BUILD)/%.o: %.c
	@mkdir -p $(dir $@)
	$(CC) $(CFLAGS_ALL) -MMD -MP -c $< -o $@

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

# Installs the Debian packages the build and tests need (only those missing).
deps:
	@bash tools/deps.sh

# Every test: unit binaries, command-line scripts, Python reference checks.
test: all $(TEST_BIN) $(TOOL_BIN)
	@BUILD=$(BUILD) PYTHON=$(PYTHON) bash tests/run.sh

check: deps
	@$(MAKE) --no-print-directory test

# The same tests built with AddressSanitizer and UndefinedBehaviorSanitizer.
check-asan: deps
	@$(MAKE) --no-print-directory BUILD=build-asan OPT="-O1 -g -fno-omit-frame-pointer" \
		SAN="-fsanitize=address,undefined -fno-sanitize-recover=undefined" \
		SPLITROI_TEST_LEVEL=quick test

check-valgrind: deps all $(TEST_BIN)
	@BUILD=$(BUILD) PYTHON=$(PYTHON) SPLITROI_VALGRIND=1 bash tests/run.sh unit

demo: deps all
	@bash tools/demo.sh $(BUILD)/splitroi

bench: deps all
	@bash tools/bench.sh $(BUILD)/splitroi

# False-positive shares of the first-level t maps on simulated null noise, every noise model
# (about 10 minutes; not part of make check, which runs a few of its cells). Fails when
# ar1-adjusted leaves the 99.9% binomial range at 0.05 or 0.01 under AR(1) noise.
calibrate: all $(BUILD)/tests/tools/glmtool
	@$(PYTHON) tools/calibrate.py --glmtool $(BUILD)/tests/tools/glmtool --research --assert --markdown

install: all
	install -d $(DESTDIR)$(PREFIX)/bin
	install -m 755 $(BUILD)/splitroi $(DESTDIR)$(PREFIX)/bin/splitroi

uninstall:
	rm -f $(DESTDIR)$(PREFIX)/bin/splitroi

clean:
	rm -rf build build-asan

-include $(LIB_OBJ:.o=.d) $(BUILD)/src/main.d
