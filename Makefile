# station: one Makefile for the program, its libraries, tests and benchmarks.
# `make` builds build/station; `make check` runs every test; `make check SAN=1`
# builds into build-san/ with AddressSanitizer + UndefinedBehaviorSanitizer.
# Every .c file in core/, calib/ and station/ belongs to its library or the
# program; every tests/*/test_*.c is one cmocka test program.

VERSION := 0.1.0
PREFIX  ?= /usr/local
DESTDIR ?=
PYTHON  ?= /usr/bin/python3

SAN ?= 0
ifeq ($(SAN),1)
BUILD   ?= build-san
OPT     ?= -O1 -g -fno-omit-frame-pointer
SANFLAGS := -fsanitize=address,undefined -fno-sanitize-recover=undefined
else
BUILD   ?= build
OPT     ?= -O2 -g
SANFLAGS :=
endif

PKGS      := libpng xgboost inih jansson nettle sqlite3 sdl2 SDL2_ttf libv4l2 libprotobuf-c openblas \
             libsodium libpq
TEST_PKGS := cmocka
PKG_CFLAGS := $(shell pkg-config --cflags $(PKGS) 2>/dev/null)
PKG_LIBS   := $(shell pkg-config --libs $(PKGS) 2>/dev/null)
TEST_CFLAGS := $(shell pkg-config --cflags $(TEST_PKGS) 2>/dev/null)
TEST_LIBS   := $(shell pkg-config --libs $(TEST_PKGS) 2>/dev/null)

# Our flags come first and user CFLAGS after, but the warnings are restated
# last so no CFLAGS from outside can drop them.
WARN := -Wall -Wextra -Werror
ST_CFLAGS := -std=c11 -D_POSIX_C_SOURCE=200809L $(OPT) -fno-math-errno $(SANFLAGS) $(PKG_CFLAGS) \
             -I. -I$(BUILD)/gen -MMD -MP $(CFLAGS) $(WARN) -DSTATION_VERSION='"$(VERSION)"'
ST_LDFLAGS := $(SANFLAGS) $(LDFLAGS)
LIBS := $(PKG_LIBS) -lpthread -lm

CORE_SRC    := $(sort $(wildcard core/*.c))
CALIB_SRC   := $(sort $(wildcard calib/*.c))
STATION_SRC := $(sort $(wildcard station/*.c))
STATION_LIB_SRC := $(filter-out station/main.c,$(STATION_SRC))
TEST_SRC    := $(sort $(wildcard tests/*/test_*.c))
TOOL_SRC    := $(sort $(wildcard tests/tools/*.c))
BENCH_SRC   := $(sort $(wildcard tests/bench/*.c))

obj = $(patsubst %.c,$(BUILD)/obj/%.o,$(1))
CORE_LIB    := $(BUILD)/libstationcore.a
CALIB_LIB   := $(BUILD)/libstationcalib.a
STATION_LIB := $(BUILD)/libstationapp.a
STATION_BIN := $(BUILD)/station
TEST_BINS   := $(patsubst %.c,$(BUILD)/%,$(TEST_SRC))
TOOL_BINS   := $(patsubst %.c,$(BUILD)/%,$(TOOL_SRC))
BENCH_BINS  := $(patsubst %.c,$(BUILD)/%,$(BENCH_SRC))
APP_LIBS    := $(STATION_LIB) $(CALIB_LIB) $(CORE_LIB)
# The emulated camera: a libv4l2 plugin the camera tests bind-mount over
# libv4l2's plugin folder (tests/emucam/emucam.h).
EMUCAM_SO   := $(BUILD)/tests/emucam/libv4l-emucam.so

.PHONY: all check demo bench soak install uninstall clean deps deps-test deps-bench fuzz fuzz-smoke \
        fuzz-programs deps-fuzz memcheck
all: $(STATION_BIN)

$(BUILD)/obj/%.o: %.c
	@mkdir -p $(dir $@)
	$(CC) $(ST_CFLAGS) -c $< -o $@

$(BUILD)/tests/%.o: tests/%.c
	@mkdir -p $(dir $@)
	$(CC) $(ST_CFLAGS) $(TEST_CFLAGS) -c $< -o $@

# The ONNX reader's protobuf-c code is generated from Debian's onnx.proto into
# the build folder, never committed; core/onnx.c needs its header first.
ONNX_PROTO := /usr/include/onnx/onnx.proto
ONNX_GEN   := $(BUILD)/gen/onnx/onnx.pb-c.c
ONNX_GEN_O := $(BUILD)/obj/gen/onnx.pb-c.o
$(ONNX_GEN): $(ONNX_PROTO)
	@mkdir -p $(BUILD)/gen
	protoc-c --proto_path=$(dir $(ONNX_PROTO)).. --c_out=$(BUILD)/gen onnx/onnx.proto
$(ONNX_GEN_O): $(ONNX_GEN)
	@mkdir -p $(dir $@)
	$(CC) -std=c11 $(OPT) $(SANFLAGS) $(PKG_CFLAGS) -I$(BUILD)/gen -c $< -o $@
$(call obj,core/onnx.c) $(BUILD)/tests/core/test_cnnfeat.o: $(ONNX_GEN)

$(CORE_LIB): $(call obj,$(CORE_SRC)) $(ONNX_GEN_O)
	$(AR) rcs $@ $^
$(CALIB_LIB): $(call obj,$(CALIB_SRC))
	$(AR) rcs $@ $^
$(STATION_LIB): $(call obj,$(STATION_LIB_SRC))
	$(AR) rcs $@ $^

$(STATION_BIN): $(call obj,station/main.c) $(APP_LIBS)
	$(CC) $(ST_LDFLAGS) -o $@ $^ $(LIBS)

# core and calib tests link only the libraries they test; station tests and
# tools may use the program's modules too.
$(BUILD)/tests/core/%: $(BUILD)/tests/core/%.o $(CORE_LIB)
	$(CC) $(ST_LDFLAGS) -o $@ $^ $(LIBS) $(TEST_LIBS)
$(BUILD)/tests/calib/%: $(BUILD)/tests/calib/%.o $(CALIB_LIB) $(CORE_LIB)
	$(CC) $(ST_LDFLAGS) -o $@ $^ $(LIBS) $(TEST_LIBS)
$(BUILD)/tests/%: $(BUILD)/tests/%.o $(APP_LIBS)
	$(CC) $(ST_LDFLAGS) -o $@ $^ $(LIBS) $(TEST_LIBS)

# A plugin is loaded into the program under test, so it takes no sanitizer
# runtime of its own.
$(EMUCAM_SO): tests/emucam/emucam.c tests/emucam/emucam.h
	@mkdir -p $(dir $@)
	$(CC) -std=c11 -D_POSIX_C_SOURCE=200809L $(OPT) -fPIC -shared -fvisibility=hidden -I. \
	    $(CFLAGS) $(WARN) -o $@ $<
$(BUILD)/tests/station/test_camera: | $(EMUCAM_SO)
# The log fault tests' LD_PRELOAD shim (tests/faultio/faultio.c): like the
# plugin, no sanitizer runtime of its own.
FAULTIO_SO  := $(BUILD)/tests/faultio/libfaultio.so
$(FAULTIO_SO): tests/faultio/faultio.c
	@mkdir -p $(dir $@)
	$(CC) -std=c11 $(OPT) -fPIC -shared -fvisibility=hidden $(CFLAGS) $(WARN) -o $@ $< -ldl

# Debian packages: `make deps` installs what is missing when run as root,
# otherwise prints the exact apt-get line and stops.
DEB_BUILD := gcc make pkg-config libpng-dev libxgboost-dev libinih-dev libjansson-dev nettle-dev \
             libsqlite3-dev libsdl2-dev libsdl2-ttf-dev fonts-dejavu-core libv4l-dev \
             libonnx-dev protobuf-c-compiler libprotobuf-c-dev libopenblas-dev libsodium-dev libpq-dev
DEB_TEST  := libcmocka-dev python3-numpy python3-scipy python3-skimage python3-sklearn \
             python3-xgboost python3-opencv python3-pil libsixel-examples opencv-doc xvfb \
             libonnx-testdata python3-onnx python3-torch python3-nacl \
             postgresql python3-psycopg2
# Only make bench needs this: callgrind's instruction counts.
DEB_BENCH := valgrind
deps:
	@sh tests/deps.sh $(DEB_BUILD)
deps-test:
	@sh tests/deps.sh $(DEB_BUILD) $(DEB_TEST)
deps-bench:
	@sh tests/deps.sh $(DEB_BUILD) $(DEB_TEST) $(DEB_BENCH)
# Only make fuzz and fuzz-smoke need these: clang and its libFuzzer runtime.
DEB_FUZZ := clang libclang-rt-14-dev
deps-fuzz:
	@sh tests/deps.sh $(DEB_BUILD) $(DEB_FUZZ)

check: deps-test
	@$(MAKE) --no-print-directory test-programs
	@BUILD=$(BUILD) PYTHON=$(PYTHON) SAN=$(SAN) sh tests/run.sh

.PHONY: test-programs
test-programs: $(STATION_BIN) $(TEST_BINS) $(TOOL_BINS) $(BENCH_BINS) $(EMUCAM_SO) $(FAULTIO_SO)

DEMO_OUT ?= $(BUILD)/demo
demo: deps
	@$(MAKE) --no-print-directory $(STATION_BIN)
	$(STATION_BIN) demo --out $(DEMO_OUT)

bench: deps-bench
	@$(MAKE) --no-print-directory test-programs
	@BUILD=$(BUILD) PYTHON=$(PYTHON) sh tests/bench/run.sh

# Fuzzing (tests/fuzz/, DEVELOPERS.md "Fuzzing"): every library source again
# with clang, ASan, UBSan and libFuzzer's coverage, into $(BUILD)/fuzz/, and
# one program per tests/fuzz/fuzz_*.c.  `make fuzz` runs each FUZZ_SECONDS,
# `make fuzz-smoke` (CI) FUZZ_SMOKE_SECONDS; without clang both say SKIP.
FUZZ_CC ?= clang
FUZZ_SECONDS ?= 300
FUZZ_SMOKE_SECONDS ?= 20
FUZZ_DIR := $(BUILD)/fuzz
FUZZ_SAN := -fsanitize=address,undefined -fno-sanitize-recover=undefined
FUZZ_CFLAGS := -std=c11 -D_POSIX_C_SOURCE=200809L -O1 -g -fno-omit-frame-pointer -fno-math-errno \
               $(FUZZ_SAN) -fsanitize=fuzzer-no-link $(PKG_CFLAGS) -I. -I$(BUILD)/gen -MMD -MP \
               $(CFLAGS) $(WARN) -DSTATION_VERSION='"$(VERSION)"'
FUZZ_SRC  := $(sort $(wildcard tests/fuzz/fuzz_*.c))
FUZZ_BINS := $(patsubst tests/fuzz/%.c,$(FUZZ_DIR)/%,$(FUZZ_SRC))
FUZZ_LIB  := $(FUZZ_DIR)/libfuzzstation.a
$(FUZZ_DIR)/obj/%.o: %.c
	@mkdir -p $(dir $@)
	$(FUZZ_CC) $(FUZZ_CFLAGS) -c $< -o $@
# protobuf-c's generated code is outside data's first reader: instrumented too
$(FUZZ_DIR)/obj/gen/onnx.pb-c.o: $(ONNX_GEN)
	@mkdir -p $(dir $@)
	$(FUZZ_CC) -std=c11 -O1 -g $(FUZZ_SAN) -fsanitize=fuzzer-no-link $(PKG_CFLAGS) -I$(BUILD)/gen \
	    -c $< -o $@
$(FUZZ_DIR)/obj/core/onnx.o: $(ONNX_GEN)
$(FUZZ_LIB): $(patsubst %.c,$(FUZZ_DIR)/obj/%.o,$(CORE_SRC) $(STATION_LIB_SRC)) \
             $(FUZZ_DIR)/obj/gen/onnx.pb-c.o
	$(AR) rcs $@ $^
$(FUZZ_DIR)/fuzz_%: $(FUZZ_DIR)/obj/tests/fuzz/fuzz_%.o $(FUZZ_LIB)
	$(FUZZ_CC) $(FUZZ_SAN) -fsanitize=fuzzer $(LDFLAGS) -o $@ $^ $(LIBS)
fuzz-programs: $(FUZZ_BINS)
fuzz:
	@sh tests/deps.sh $(DEB_FUZZ) || true
	@MAKE="$(MAKE)" FUZZ_CC=$(FUZZ_CC) sh tests/fuzz/run.sh $(BUILD) $(FUZZ_SECONDS) $(FUZZ_TARGETS); \
	    rc=$$?; [ $$rc = 77 ] && exit 0; exit $$rc
fuzz-smoke:
	@sh tests/deps.sh $(DEB_FUZZ) || true
	@MAKE="$(MAKE)" FUZZ_CC=$(FUZZ_CC) sh tests/fuzz/run.sh $(BUILD) $(FUZZ_SMOKE_SECONDS) $(FUZZ_TARGETS); \
	    rc=$$?; [ $$rc = 77 ] && exit 0; exit $$rc

# The demo, reduced, under valgrind memcheck (tests/memcheck.sh): no error,
# nothing definitely lost.  Minutes; not part of check.
memcheck:
	@sh tests/deps.sh $(DEB_BUILD) valgrind
	@$(MAKE) --no-print-directory $(STATION_BIN)
	@sh tests/memcheck.sh $(BUILD); rc=$$?; [ $$rc = 77 ] && exit 0; exit $$rc

# Not part of check: hours at the default 100000 inspections
# (SOAK_INSPECTIONS=N for fewer); tests/soak/soak.sh says what it watches.
soak: deps
	@$(MAKE) --no-print-directory $(STATION_BIN)
	@BUILD=$(BUILD) PYTHON=$(PYTHON) sh tests/soak/soak.sh

install: $(STATION_BIN)
	install -d $(DESTDIR)$(PREFIX)/bin $(DESTDIR)$(PREFIX)/share/station/recipes
	install -m 755 $(STATION_BIN) $(DESTDIR)$(PREFIX)/bin/station
	install -m 644 recipes/*.ini recipes/README.md $(DESTDIR)$(PREFIX)/share/station/recipes/

uninstall:
	rm -f $(DESTDIR)$(PREFIX)/bin/station
	rm -rf $(DESTDIR)$(PREFIX)/share/station

clean:
	rm -rf build build-san

-include $(shell find $(BUILD) -name '*.d' 2>/dev/null)
