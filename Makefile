# SPDX-License-Identifier: MIT
# sinew: plain GNU Makefile. `make` builds build/sinew and build/libsinew.a.
# Knobs: SANITIZE=1 (ASan+UBSan), OPENMP=0, DEBUG=1, ARCH=native. Each knob set gets
# its own build folder so objects never mix.

CC      ?= cc
PREFIX  ?= /usr/local
DESTDIR ?=
SANITIZE ?= 0
OPENMP  ?= 1
DEBUG   ?= 0
ARCH    ?=
PYTHON  ?= /usr/bin/python3

BUILD := build
ifeq ($(SANITIZE),1)
BUILD := $(BUILD)/asan
endif
ifeq ($(OPENMP),0)
BUILD := $(BUILD)/noomp
endif
ifeq ($(DEBUG),1)
BUILD := $(BUILD)/debug
endif
ifneq ($(ARCH),)
BUILD := $(BUILD)/arch-$(ARCH)
endif
# FUZZ=1: clang with libFuzzer instrumentation, ASan+UBSan, no OpenMP (used by `make fuzz`).
FUZZ ?= 0
ifeq ($(FUZZ),1)
BUILD := build/fuzz
CC := clang
OPENMP := 0
endif

PKGS := libpng libturbojpeg libcjson
PKG_CFLAGS := $(shell pkg-config --cflags $(PKGS) 2>/dev/null)
PKG_LIBS   := $(shell pkg-config --libs $(PKGS) 2>/dev/null)
CMOCKA_CFLAGS := $(shell pkg-config --cflags cmocka 2>/dev/null)
CMOCKA_LIBS   := $(shell pkg-config --libs cmocka 2>/dev/null)

WARN := -Wall -Wextra -Wpedantic -Wshadow -Wstrict-prototypes -Wmissing-prototypes \
        -Wformat=2 -Wvla -Wundef -Wno-format-nonliteral -Werror
OPT  := -O2
ifeq ($(DEBUG),1)
OPT  := -O0
endif
CFLAGS_ALL := -std=c11 $(OPT) -g $(WARN) -I. $(PKG_CFLAGS) -MMD -MP $(CFLAGS)
LDFLAGS_ALL := $(LDFLAGS)
LIBS_ALL := $(PKG_LIBS) -lm
ifeq ($(OPENMP),1)
CFLAGS_ALL += -fopenmp
LDFLAGS_ALL += -fopenmp
endif
ifeq ($(SANITIZE),1)
CFLAGS_ALL += -fsanitize=address,undefined -fno-omit-frame-pointer -fno-sanitize-recover=all
LDFLAGS_ALL += -fsanitize=address,undefined
endif
ifneq ($(ARCH),)
CFLAGS_ALL += -march=$(ARCH)
endif
ifeq ($(FUZZ),1)
CFLAGS_ALL += -fsanitize=fuzzer-no-link,address,undefined -fno-omit-frame-pointer -fno-sanitize-recover=all
endif

# The red-black solver in flow/variational.c is written so its row loops vectorise. GCC's
# -O2 cost model ("very-cheap") skips loops whose trip count is not a multiple of the
# vector width, and errno handling keeps sqrtf out of vector loops; neither flag changes a
# result (no reassociation, no contraction). Clang vectorises at -O2 without them.
VEC_FLAGS := $(shell $(CC) -fvect-cost-model=cheap -E -x c /dev/null >/dev/null 2>&1 && \
               echo -fvect-cost-model=cheap) -fno-math-errno
$(BUILD)/obj/flow/variational.o: CFLAGS_ALL += $(VEC_FLAGS)
$(BUILD)/obj/flow/stereo.o: CFLAGS_ALL += $(VEC_FLAGS)

LIB_SRC  := $(sort $(wildcard flow/*.c))
TOOL_SRC := $(filter-out tools/bench_%.c,$(sort $(wildcard tools/*.c)))
TEST_SUPPORT_SRC := $(sort $(wildcard tests/support/*.c))
TEST_UNIT_SRC := $(sort $(wildcard tests/unit/test_*.c))
DEMO_SRC := $(sort $(wildcard demo/*.c))

FUZZ_TARGETS := $(sort $(patsubst tests/fuzz/fuzz_%.c,%,$(wildcard tests/fuzz/fuzz_*.c)))
FUZZ_REPLAY := $(FUZZ_TARGETS:%=$(BUILD)/fuzz/replay_%)
FUZZ_BINS := $(FUZZ_TARGETS:%=$(BUILD)/fuzz/fuzz_%)
SECONDS ?= 60

LIB_OBJ  := $(LIB_SRC:%.c=$(BUILD)/obj/%.o)
TOOL_OBJ := $(TOOL_SRC:%.c=$(BUILD)/obj/%.o)
TEST_SUPPORT_OBJ := $(TEST_SUPPORT_SRC:%.c=$(BUILD)/obj/%.o)
TEST_BINS := $(TEST_UNIT_SRC:tests/unit/%.c=$(BUILD)/tests/%)
DEMO_BINS := $(DEMO_SRC:demo/%.c=$(BUILD)/demo/%)

LIB := $(BUILD)/libsinew.a
BIN := $(BUILD)/sinew

.SECONDARY:
.PHONY: all deps test check demo bench fuzz fuzz-build install clean info lint format format-check tests-build
all: $(BIN) $(LIB)

$(BUILD)/obj/%.o: %.c
	@mkdir -p $(dir $@)
	$(CC) $(CFLAGS_ALL) -c $< -o $@

$(BUILD)/obj/tests/%.o: tests/%.c
	@mkdir -p $(dir $@)
	$(CC) $(CFLAGS_ALL) $(CMOCKA_CFLAGS) -c $< -o $@

$(LIB): $(LIB_OBJ)
	@mkdir -p $(dir $@)
	rm -f $@
	ar rcs $@ $^

$(BIN): $(TOOL_OBJ) $(LIB)
	$(CC) $(LDFLAGS_ALL) -o $@ $(TOOL_OBJ) $(LIB) $(LIBS_ALL)

$(BUILD)/tests/%: $(BUILD)/obj/tests/unit/%.o $(TEST_SUPPORT_OBJ) $(LIB)
	@mkdir -p $(dir $@)
	$(CC) $(LDFLAGS_ALL) -o $@ $< $(TEST_SUPPORT_OBJ) $(LIB) $(CMOCKA_LIBS) $(LIBS_ALL)

$(BUILD)/demo/%: $(BUILD)/obj/demo/%.o $(LIB)
	@mkdir -p $(dir $@)
	$(CC) $(LDFLAGS_ALL) -o $@ $< $(LIB) $(LIBS_ALL)

# Fuzz targets: a replay program per target (normal builds, run by `make test`) and
# a libFuzzer binary per target (FUZZ=1 builds, run by `make fuzz`).
$(BUILD)/fuzz/replay_%: $(BUILD)/obj/tests/fuzz/fuzz_%.o $(BUILD)/obj/tests/fuzz/replay.o \
		$(BUILD)/obj/tests/fuzz/common.o $(LIB)
	@mkdir -p $(dir $@)
	$(CC) $(LDFLAGS_ALL) -o $@ $(filter %.o,$^) $(LIB) $(LIBS_ALL)

$(BUILD)/fuzz/fuzz_%: $(BUILD)/obj/tests/fuzz/fuzz_%.o $(BUILD)/obj/tests/fuzz/common.o $(LIB)
	@mkdir -p $(dir $@)
	$(CC) $(LDFLAGS_ALL) -fsanitize=fuzzer,address,undefined -o $@ $(filter %.o,$^) $(LIB) $(LIBS_ALL)

fuzz-build: $(FUZZ_BINS)

# `make fuzz SECONDS=N`: run every target for N seconds (needs clang; installs it if missing).
fuzz:
	@SINEW_EXTRA_DEPS="clang libclang-rt-dev" tools/install-deps
	@$(MAKE) --no-print-directory FUZZ=1 fuzz-build
	@tools/fuzz-run build/fuzz/fuzz $(SECONDS) $(FUZZ_TARGETS)

# Install missing Debian packages (as root) or print the command to do so.
deps:
	@tools/install-deps

tests-build: $(BIN) $(LIB) $(TEST_BINS) $(DEMO_BINS) $(FUZZ_REPLAY)

# Runs every unit test binary and end-to-end script; ends with "N passed, N failed".
test: deps
	@$(MAKE) --no-print-directory tests-build
	@SINEW_BUILD=$(BUILD) PYTHON=$(PYTHON) tests/run

check: test

demo: deps
	@$(MAKE) --no-print-directory all
	@SINEW_BUILD=$(BUILD) demo/run

# Benchmark programs (tools/bench_*.c) are kept out of build/sinew.
$(BUILD)/bench_%: $(BUILD)/obj/tools/bench_%.o $(LIB)
	$(CC) $(LDFLAGS_ALL) -o $@ $< $(LIB) $(LIBS_ALL)

bench: deps
	@$(MAKE) --no-print-directory all $(BUILD)/bench_flow $(BUILD)/bench_stereo
	@SINEW_BUILD=$(BUILD) tools/bench

install: $(BIN) $(LIB)
	install -d $(DESTDIR)$(PREFIX)/bin $(DESTDIR)$(PREFIX)/lib/pkgconfig \
	    $(DESTDIR)$(PREFIX)/include/sinew/flow
	install -m 755 $(BIN) $(DESTDIR)$(PREFIX)/bin/sinew
	install -m 644 $(LIB) $(DESTDIR)$(PREFIX)/lib/libsinew.a
	install -m 644 $(wildcard flow/*.h) $(DESTDIR)$(PREFIX)/include/sinew/flow/
	sed -e 's|@PREFIX@|$(PREFIX)|g' -e 's|@VERSION@|$(shell sed -n 's/^#define SINEW_VERSION_STRING "\(.*\)"/\1/p' flow/core.h)|g' \
	    tools/sinew.pc.in > $(DESTDIR)$(PREFIX)/lib/pkgconfig/sinew.pc

info:
	@echo "BUILD=$(BUILD) CC=$(CC)"
	@echo "CFLAGS=$(CFLAGS_ALL)"
	@echo "LIBS=$(LIBS_ALL)"

# Static analysis with cppcheck (Debian package; installed on demand like the other
# dependencies). Three checks are off: uninitvar (reports arrays filled by a loop whose
# count it cannot bound: 6 findings on the tree of issue 19, all of that kind; the
# compiler's -Wmaybe-uninitialized stays on) and negativeIndex in flow/stereo.c (the
# cost rows are padded: l[k] points one element into its buffer, so l[k][-1] is valid);
# duplicateAssignExpression in flow/camera.c (the distortion Jacobian is symmetric:
# its two off-diagonal terms are the same expression on purpose).
LINT_FLAGS := --quiet --error-exitcode=1 --std=c11 --enable=warning,portability \
    --inline-suppr -I. --suppress=uninitvar --suppress=negativeIndex:flow/stereo.c \
    --suppress=duplicateAssignExpression:flow/camera.c
lint:
	@command -v cppcheck >/dev/null 2>&1 || SINEW_EXTRA_DEPS=cppcheck tools/install-deps
	cppcheck $(LINT_FLAGS) flow tools tests/unit tests/support

# Every C file is formatted to .clang-format; CI fails on a file that is not
# (`make format` fixes it).
FORMAT_SRC = $(wildcard flow/*.c flow/*.h flow/internal/*.h tools/*.c tools/*.h tests/unit/*.c \
    tests/support/*.c tests/support/*.h tests/fuzz/*.c tests/fuzz/*.h demo/*.c)
format:
	clang-format -i $(FORMAT_SRC)

format-check:
	@command -v clang-format >/dev/null 2>&1 || SINEW_EXTRA_DEPS=clang-format tools/install-deps
	clang-format --dry-run --Werror $(FORMAT_SRC)

clean:
	rm -rf build

-include $(shell find $(BUILD)/obj -name '*.d' 2>/dev/null)
