# tidepost - plain GNU make.  `make` builds build/libtidepost.a and
# build/tidepost; `make check` installs what it needs and runs the tests.
# User CFLAGS are appended to the project's; CC is never assigned.

PREFIX     ?= /usr/local
BINDIR     ?= $(PREFIX)/bin
LIBDIR     ?= $(PREFIX)/lib
INCLUDEDIR ?= $(PREFIX)/include
MANDIR     ?= $(PREFIX)/share/man
SYSCONFDIR ?= /etc
PKG_CONFIG ?= pkg-config
PYTHON     ?= /usr/bin/python3
BUILD      ?= build
VERSION    := 0.1.0

WARN    := -Wall -Wextra -Wshadow -Wstrict-prototypes -Wmissing-prototypes \
           -Wformat=2 -Wvla -Wno-unused-parameter
ifeq ($(CI),true)
WARN    += -Werror
endif
BASE_CFLAGS := -std=c11 -O2 -g $(WARN) -Iinclude -Idaemon \
               -D_DEFAULT_SOURCE -D_GNU_SOURCE -DTP_VERSION=\"$(VERSION)\"
ifdef SANITIZE
BASE_CFLAGS += -fsanitize=$(SANITIZE) -fno-omit-frame-pointer -fno-sanitize-recover=all
LDSAN       := -fsanitize=$(SANITIZE)
endif
ALL_CFLAGS  := $(BASE_CFLAGS) $(CFLAGS)

DEPS_PKGS   := libcjson libcurl libserialport
DEPS_CFLAGS  = $(shell $(PKG_CONFIG) --cflags $(DEPS_PKGS) 2>/dev/null)
DEPS_LIBS    = $(shell $(PKG_CONFIG) --libs $(DEPS_PKGS) 2>/dev/null || echo -lcjson -lcurl -lserialport)
CMOCKA_LIBS  = $(shell $(PKG_CONFIG) --libs cmocka 2>/dev/null || echo -lcmocka)

LIB_SRC     := $(sort $(wildcard decoder/*.c))
DAEMON_SRC  := $(sort $(filter-out daemon/main.c,$(wildcard daemon/*.c)))
UNIT_SRC    := $(sort $(wildcard tests/unit/test_*.c))
FUZZ_SRC    := $(sort $(wildcard tests/fuzz/fuzz_*.c))
TOOLS_SRC   := $(sort $(wildcard tests/tools/*.c))

LIB_OBJ     := $(LIB_SRC:%.c=$(BUILD)/obj/%.o)
DAEMON_OBJ  := $(DAEMON_SRC:%.c=$(BUILD)/obj/%.o)
UNIT_BIN    := $(UNIT_SRC:tests/unit/%.c=$(BUILD)/tests/%)
FUZZ_REPLAY := $(FUZZ_SRC:tests/fuzz/%.c=$(BUILD)/fuzz/%-replay)
TOOLS_BIN   := $(TOOLS_SRC:tests/tools/%.c=$(BUILD)/tools/%)

LIB         := $(BUILD)/libtidepost.a
DAEMON_LIB  := $(BUILD)/libdaemon.a
BIN         := $(BUILD)/tidepost

.PHONY: all deps check unit integration fuzz-replay fuzz bench demo lint clean \
        install uninstall

all: $(LIB) $(BIN) $(TOOLS_BIN)

$(BUILD)/obj/decoder/%.o: decoder/%.c $(wildcard include/tidepost/*.h) decoder/*.h
	@mkdir -p $(@D)
	$(CC) $(ALL_CFLAGS) -c $< -o $@

$(BUILD)/obj/%.o: %.c $(wildcard include/tidepost/*.h daemon/*.h tests/unit/*.h)
	@mkdir -p $(@D)
	$(CC) $(ALL_CFLAGS) $(DEPS_CFLAGS) -c $< -o $@

$(LIB): $(LIB_OBJ)
	@mkdir -p $(@D)
	rm -f $@ && $(AR) rcs $@ $^

$(DAEMON_LIB): $(DAEMON_OBJ)
	@mkdir -p $(@D)
	rm -f $@ && $(AR) rcs $@ $^

$(BIN): $(BUILD)/obj/daemon/main.o $(DAEMON_LIB) $(LIB)
	$(CC) $(ALL_CFLAGS) $(LDSAN) $(LDFLAGS) -o $@ $^ $(DEPS_LIBS) -lm

$(BUILD)/tests/%: $(BUILD)/obj/tests/unit/%.o $(DAEMON_LIB) $(LIB)
	@mkdir -p $(@D)
	$(CC) $(ALL_CFLAGS) $(LDSAN) $(LDFLAGS) -o $@ $^ $(CMOCKA_LIBS) $(DEPS_LIBS) -lm

# Small test helper programs (tests/tools/X.c -> $(BUILD)/tools/X), used by
# integration and reference tests.
$(BUILD)/tools/%: $(BUILD)/obj/tests/tools/%.o $(DAEMON_LIB) $(LIB)
	@mkdir -p $(@D)
	$(CC) $(ALL_CFLAGS) $(LDSAN) $(LDFLAGS) -o $@ $^ $(DEPS_LIBS) -lm

# Fuzz targets: replay driver (any compiler) and libFuzzer builds (clang).
$(BUILD)/fuzz/%-replay: tests/fuzz/%.c tests/fuzz/replay.c $(DAEMON_LIB) $(LIB)
	@mkdir -p $(@D)
	$(CC) $(ALL_CFLAGS) $(DEPS_CFLAGS) $(LDSAN) -o $@ $^ $(DEPS_LIBS) -lm

SHIM := $(BUILD)/shim/ptyshim.so
# LD_PRELOAD shim for the serial integration tests.  No $(CFLAGS) or
# sanitizer flags on purpose: a preloaded library must not bring a
# sanitizer runtime.
$(SHIM): tests/shim/ptyshim.c
	@mkdir -p $(@D)
	$(CC) -std=c11 -O2 -g $(WARN) -shared -fPIC -o $@ $< -ldl

deps:
	@sh tests/deps.sh

unit: $(UNIT_BIN)
	@sh tests/run-unit.sh $(UNIT_BIN)

integration: all $(SHIM)
	@sh tests/run-integration.sh $(BUILD)

fuzz-replay: $(FUZZ_REPLAY)
	@sh tests/fuzz/run-replay.sh $(BUILD)

check: deps
	$(MAKE) all
	$(MAKE) unit
	$(MAKE) fuzz-replay
	$(MAKE) integration

fuzz: deps
	@sh tests/fuzz/run-fuzz.sh $(or $(FUZZ_SECONDS),60)

bench: deps all
	@sh tests/bench/run.sh $(BUILD)

demo: deps all
	@sh demo/run.sh $(BUILD)

lint:
	@sh tests/lint.sh

clean:
	rm -rf $(BUILD) build-*
