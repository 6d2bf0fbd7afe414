# doubletty — plain Makefile, dependencies through pkg-config.
#
#   make              build build/doubletty
#   make check        build and run every test (closing line: N passed, N failed)
#   make bench        benchmarks against the Python/SciPy peer
#   make install PREFIX=/usr/local
#   make deps         install the Debian/Ubuntu packages (apt-get, as root or via sudo)
#   make sanitize     ASan+UBSan build running the whole suite, then valgrind

CC       ?= cc
PREFIX   ?= /usr/local
BUILD    ?= build
VERSION  := 0.1.0

PKGS      := gsl cfitsio libcerf ncursesw libcrypto erfa wcslib cairo
DEB_PKGS  := build-essential pkg-config libgsl-dev libcfitsio-dev libcerf-dev \
             libncurses-dev libssl-dev liberfa-dev wcslib-dev libcairo2-dev
TEST_DEBS := locales python3 python3-numpy python3-scipy python3-astropy python3-periodictable tmux parallel man-db valgrind time e2fsprogs util-linux clang libclang-rt-14-dev

PKG_OK := $(shell pkg-config --exists $(PKGS) 2>/dev/null && echo yes)
ifneq ($(PKG_OK),yes)
ifeq ($(filter deps clean,$(MAKECMDGOALS)),)
$(error missing build dependencies ($(PKGS)); on Debian/Ubuntu install: \
  apt-get install $(DEB_PKGS)   (or run: make deps))
endif
endif

WARN     := -Wall -Wextra -Werror
CSTD     := -std=c11
OPT      ?= -O3 -g
CPPFLAGS += -Iinclude -D_POSIX_C_SOURCE=200809L -DDT_VERSION=\"$(VERSION)\" \
            -DDT_DATADIR=\"$(PREFIX)/share/doubletty\"
CFLAGS   += $(CSTD) $(WARN) $(OPT) -pthread $(shell pkg-config --cflags $(PKGS) 2>/dev/null)
LDLIBS   += $(shell pkg-config --libs $(PKGS) 2>/dev/null) -lm -pthread

CORE_SRC := $(sort $(wildcard src/core/*.c))
UI_SRC   := $(sort $(wildcard src/ui/*.c))
FIG_SRC  := $(sort $(wildcard src/fig/*.c))
CMD_SRC  := $(sort $(wildcard src/cmd/*.c))
DEMO_SRC := $(sort $(wildcard src/demo/*.c))
TEST_SRC := $(sort $(wildcard tests/unit/test_*.c))

CORE_OBJ := $(CORE_SRC:%.c=$(BUILD)/%.o) $(BUILD)/gen/atomic_builtin.o $(BUILD)/gen/hyperfine_builtin.o
UI_OBJ   := $(UI_SRC:%.c=$(BUILD)/%.o)
FIG_OBJ  := $(FIG_SRC:%.c=$(BUILD)/%.o)
CMD_OBJ  := $(CMD_SRC:%.c=$(BUILD)/%.o)
DEMO_OBJ := $(DEMO_SRC:%.c=$(BUILD)/%.o)
TEST_BIN := $(TEST_SRC:tests/unit/%.c=$(BUILD)/tests/%)

LIBCORE  := $(BUILD)/libdoubletty.a
LIBUI    := $(BUILD)/libdoubletty-ui.a
# Figures drawn with cairo (src/fig): PDF, PNG, SVG; no command line in it.
LIBFIG   := $(BUILD)/libdoubletty-fig.a
# The demo survey writer (src/demo): part of the program, not of the core.
LIBDEMO  := $(BUILD)/libdoubletty-demo.a
BIN      := $(BUILD)/doubletty

.PHONY: all check bench install uninstall deps clean sanitize fuzz tests
all: $(BIN)

$(BUILD)/%.o: %.c
	@mkdir -p $(dir $@)
	$(CC) $(CPPFLAGS) $(CFLAGS) -MMD -MP -c $< -o $@

# The default atomic table is built into the program: its bytes become a C
# array (od prints them as decimal numbers, so nothing needs escaping).
$(BUILD)/gen/atomic_builtin.c: share/doubletty/atomic.dat
	@mkdir -p $(dir $@)
	{ echo '/* Generated from share/doubletty/atomic.dat by the Makefile: do not edit. */'; \
	  echo '#include <stddef.h>'; \
	  echo 'extern const unsigned char dt_atomic_builtin_data[];'; \
	  echo 'extern const size_t dt_atomic_builtin_size;'; \
	  echo 'const unsigned char dt_atomic_builtin_data[] = {'; \
	  od -An -v -tu1 share/doubletty/atomic.dat | awk 'NF { line = ""; for (i = 1; i <= NF; i++) line = line $$i ","; print line }'; \
	  echo '0};'; \
	  echo "const size_t dt_atomic_builtin_size = $$(wc -c <share/doubletty/atomic.dat);"; \
	} >$@.tmp && mv $@.tmp $@

$(BUILD)/gen/atomic_builtin.o: $(BUILD)/gen/atomic_builtin.c
	$(CC) $(CPPFLAGS) $(CFLAGS) -c $< -o $@

# The same for the default hyperfine table.
$(BUILD)/gen/hyperfine_builtin.c: share/doubletty/hyperfine.dat
	@mkdir -p $(dir $@)
	{ echo '/* Generated from share/doubletty/hyperfine.dat by the Makefile: do not edit. */'; \
	  echo '#include <stddef.h>'; \
	  echo 'extern const unsigned char dt_hyperfine_builtin_data[];'; \
	  echo 'extern const size_t dt_hyperfine_builtin_size;'; \
	  echo 'const unsigned char dt_hyperfine_builtin_data[] = {'; \
	  od -An -v -tu1 share/doubletty/hyperfine.dat | awk 'NF { line = ""; for (i = 1; i <= NF; i++) line = line $$i ","; print line }'; \
	  echo '0};'; \
	  echo "const size_t dt_hyperfine_builtin_size = $$(wc -c <share/doubletty/hyperfine.dat);"; \
	} >$@.tmp && mv $@.tmp $@

$(BUILD)/gen/hyperfine_builtin.o: $(BUILD)/gen/hyperfine_builtin.c
	$(CC) $(CPPFLAGS) $(CFLAGS) -c $< -o $@

$(LIBCORE): $(CORE_OBJ)
	rm -f $@ && $(AR) rcs $@ $^

$(LIBUI): $(UI_OBJ)
	rm -f $@ && $(AR) rcs $@ $^

$(LIBFIG): $(FIG_OBJ)
	rm -f $@ && $(AR) rcs $@ $^

$(LIBDEMO): $(DEMO_OBJ)
	rm -f $@ && $(AR) rcs $@ $^

# The commands see the demo's header (src/demo/demo.h).
$(CMD_OBJ): CPPFLAGS += -Isrc/demo

$(BIN): $(CMD_OBJ) $(LIBUI) $(LIBFIG) $(LIBDEMO) $(LIBCORE)
	$(CC) $(CFLAGS) $(LDFLAGS) $(CMD_OBJ) $(LIBUI) $(LIBFIG) $(LIBDEMO) $(LIBCORE) $(LDLIBS) -o $@

# Unit tests link the core, the figures and the pure parts of the UI (no
# terminal needed).
$(BUILD)/tests/%: tests/unit/%.c tests/harness.h tests/fixtures.h $(LIBUI) $(LIBFIG) $(LIBCORE)
	@mkdir -p $(dir $@)
	$(CC) $(CPPFLAGS) -Itests $(CFLAGS) $< $(LIBUI) $(LIBFIG) $(LIBCORE) $(LDLIBS) -o $@

tests: $(BIN) $(TEST_BIN)

check: tests
	@BUILD=$(BUILD) sh tests/run

bench: $(BIN)
	@BUILD=$(BUILD) PKGS="$(PKGS)" sh tests/bench/run

# The slow tier runs here: the whole suite under ASan+UBSan, then the
# valgrind memcheck (tests marked "# tier: sanitize") on the plain build.
sanitize:
	LSAN_OPTIONS="suppressions=$(CURDIR)/tests/lsan.supp:print_suppressions=0$${LSAN_OPTIONS:+:$$LSAN_OPTIONS}" \
	$(MAKE) BUILD=build-san OPT="-O1 -g -fsanitize=address,undefined -fno-omit-frame-pointer -fno-sanitize-recover=all" \
	  LDFLAGS="-fsanitize=address,undefined" check
	$(MAKE) tests
	@BUILD=$(BUILD) TIER=sanitize sh tests/run valgrind_memcheck

# Coverage-guided fuzzing with libFuzzer (clang): the libraries are built
# with coverage instrumentation and sanitizers into build-fuzz/, then
# tests/fuzz/run links each tests/fuzz/fuzz_*.c and runs it for FUZZ_SECONDS
# on its seed corpus (FUZZ_TARGETS="fits text" runs a subset).
FUZZ_CC      ?= clang
FUZZ_SECONDS ?= 60
FUZZ_SAN     := -fsanitize=address,undefined -fno-sanitize-recover=all -fno-omit-frame-pointer
fuzz:
	$(MAKE) BUILD=build-fuzz CC=$(FUZZ_CC) OPT="-O1 -g -fsanitize=fuzzer-no-link $(FUZZ_SAN)" \
	  build-fuzz/libdoubletty.a build-fuzz/libdoubletty-ui.a build-fuzz/libdoubletty-fig.a build-fuzz/libdoubletty-demo.a
	@FUZZ_CC="$(FUZZ_CC)" FUZZ_SECONDS="$(FUZZ_SECONDS)" FUZZ_TARGETS="$(FUZZ_TARGETS)" FUZZ_BUILD=build-fuzz \
	  FUZZ_CFLAGS="$(CPPFLAGS) $(CSTD) $(WARN) -O1 -g $(FUZZ_SAN) $(shell pkg-config --cflags $(PKGS) 2>/dev/null)" \
	  FUZZ_LIBS="$(LDLIBS)" sh tests/fuzz/run

install: $(BIN)
	install -d $(DESTDIR)$(PREFIX)/bin $(DESTDIR)$(PREFIX)/share/doubletty $(DESTDIR)$(PREFIX)/share/man/man1
	install -m 755 $(BIN) $(DESTDIR)$(PREFIX)/bin/doubletty
	install -m 644 share/doubletty/*.dat share/doubletty/*.txt $(DESTDIR)$(PREFIX)/share/doubletty/
	install -m 644 share/doubletty.1 $(DESTDIR)$(PREFIX)/share/man/man1/doubletty.1

uninstall:
	rm -f $(DESTDIR)$(PREFIX)/bin/doubletty $(DESTDIR)$(PREFIX)/share/man/man1/doubletty.1
	rm -rf $(DESTDIR)$(PREFIX)/share/doubletty

deps:
	@if [ "$$(id -u)" = 0 ]; then SUDO=; else SUDO=sudo; fi; \
	$$SUDO apt-get update && DEBIAN_FRONTEND=noninteractive $$SUDO apt-get install -y $(DEB_PKGS) $(TEST_DEBS)

clean:
	rm -rf build build-san build-fuzz

-include $(CORE_OBJ:.o=.d) $(UI_OBJ:.o=.d) $(FIG_OBJ:.o=.d) $(CMD_OBJ:.o=.d) $(DEMO_OBJ:.o=.d)
