# tachist — plain Makefile. Sources are found by folder: every app/<layer>/*.c is part of the
# program, every tests/test_*.c is one cmocka test program, every tests/e2e/*.sh one end-to-end
# script, every tests/bench/*.sh one benchmark. Adding a file needs no edit here.

BUILD    ?= build
CC       ?= cc
CFLAGS   ?= -O2 -g
WARN     := -std=c11 -Wall -Wextra -Wpedantic -Werror
PKGS     := sdl2 SDL2_image SDL2_ttf fontconfig libevdev libpq libpng sqlite3 inih libcjson gsl ncursesw
# The pkg-config flags are computed the first time a recipe uses them, never when this file is read:
# `make demo` and `make test` run `deps` first, which may install the very packages they come from.
# A library pkg-config cannot find is named and stops the build.
pkg_missing = $(shell for p in $(PKGS); do pkg-config --exists $$p 2>/dev/null || printf '%s ' $$p; done)
pkg_flags   = $(if $(shell command -v pkg-config),,$(error pkg-config is not installed; run `make deps`))$\
              $(if $(strip $(pkg_missing)),$(error pkg-config cannot find: $(strip $(pkg_missing)); run `make deps`))$\
              $(shell pkg-config $(1) $(PKGS))
PKG_CFLAGS  = $(eval PKG_CFLAGS := $(call pkg_flags,--cflags))$(PKG_CFLAGS)
PKG_LIBS    = $(eval PKG_LIBS := $(call pkg_flags,--libs) -lcsv -lm)$(PKG_LIBS)
CPPFLAGS += -Iinclude -D_POSIX_C_SOURCE=200809L -D_DEFAULT_SOURCE
Q        ?= @
ALL_CFLAGS = $(WARN) $(CPPFLAGS) $(PKG_CFLAGS) $(CFLAGS) -MMD -MP

SRC      := $(wildcard app/*/*.c)
LIBSRC   := $(filter-out app/cmd/main.c,$(SRC))
OBJ      := $(SRC:%.c=$(BUILD)/%.o)
LIBOBJ   := $(LIBSRC:%.c=$(BUILD)/%.o)
TESTSRC  := $(wildcard tests/test_*.c)
TESTBIN  := $(TESTSRC:tests/%.c=$(BUILD)/tests/%)
TOOLSRC  := $(wildcard tests/tools/*.c)
TOOLBIN  := $(TOOLSRC:tests/tools/%.c=$(BUILD)/tools/%)

# Debian packages the build, the tests and the reference checks need.
DEB_PKGS := gcc make pkg-config libncurses-dev libsdl2-dev libsdl2-image-dev libsqlite3-dev \
            libinih-dev libcsv-dev libcjson-dev libgsl-dev libcmocka-dev xvfb xauth \
            r-base-core r-cran-psyphy python3-numpy python3-scipy python3-statsmodels \
            clang libclang-rt-14-dev librsvg2-bin sqlite3 tmux libxml2-utils time \
            libsdl2-ttf-dev libfontconfig-dev fonts-dejavu-core libevdev-dev libpq-dev \
            postgresql mandoc libpng-dev

PREFIX   ?= /usr/local
BINDIR   ?= $(PREFIX)/bin
MANDIR   ?= $(PREFIX)/share/man

.PHONY: all deps test unit e2e check-build bench demo fuzz clean demo-assets soak compilers \
        man install uninstall layers fuzz-build
all: $(BUILD)/tachist

$(BUILD)/tachist: $(OBJ)
	$(CC) $(CFLAGS) -o $@ $(OBJ) $(PKG_LIBS) $(LDFLAGS)

$(BUILD)/libtachist.a: $(LIBOBJ)
	@rm -f $@
	ar rcs $@ $(LIBOBJ)

$(BUILD)/%.o: %.c
	@mkdir -p $(dir $@)
	@echo "  CC      $<"
	$(Q)$(CC) $(ALL_CFLAGS) -c -o $@ $<

$(BUILD)/tests/%: tests/%.c $(BUILD)/libtachist.a
	@mkdir -p $(dir $@)
	$(CC) $(ALL_CFLAGS) -o $@ $< $(BUILD)/libtachist.a $(PKG_LIBS) -lcmocka $(LDFLAGS)

$(BUILD)/tools/%: tests/tools/%.c $(BUILD)/libtachist.a
	@mkdir -p $(dir $@)
	$(CC) $(ALL_CFLAGS) -o $@ $< $(BUILD)/libtachist.a $(PKG_LIBS) $(LDFLAGS)

check-build: $(BUILD)/tachist $(TESTBIN) $(TOOLBIN)

# Install what is missing on a Debian 12 machine; nothing when all is there. As another user than
# root, print the one command that installs them and stop. Every package still missing afterwards
# is named.
deps:
	@missing=""; for p in $(DEB_PKGS); do \
	  dpkg-query -W -f='$${Status}' $$p 2>/dev/null | grep -q 'ok installed' || missing="$$missing $$p"; \
	done; \
	if [ -z "$$missing" ]; then exit 0; fi; \
	if [ "$$(id -u)" != 0 ]; then \
	  echo "deps: missing packages. Run:"; echo "  sudo apt-get install -y$$missing"; exit 1; \
	fi; \
	echo "deps: installing$$missing"; \
	apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends $$missing >/dev/null; \
	still=""; for p in $$missing; do \
	  dpkg-query -W -f='$${Status}' $$p 2>/dev/null | grep -q 'ok installed' || still="$$still $$p"; \
	done; \
	if [ -n "$$still" ]; then echo "deps: could not install:$$still" >&2; exit 1; fi

# Tests build with AddressSanitizer and UBSan in their own folder, one compiler per processor
# unless make was already given -j.
SAN := -O1 -g -fsanitize=address,undefined -fno-omit-frame-pointer -fno-sanitize-recover=undefined
PAR  = $(if $(findstring -j,$(MAKEFLAGS))$(findstring jobserver,$(MAKEFLAGS)),,-j$(shell nproc 2>/dev/null || echo 1))
test: deps
	$(MAKE) --no-print-directory $(PAR) BUILD=build/san CFLAGS="$(SAN)" LDFLAGS="$(SAN)" check-build
	$(MAKE) --no-print-directory demo-assets
	$(MAKE) --no-print-directory layers
	@BUILD=build/san sh tests/run.sh

# Every #include against the layer rules in docs/design.md.
layers:
	@sh tests/tools/layers.sh

bench: deps
	$(MAKE) --no-print-directory $(PAR) BUILD=build/rel CFLAGS="-O2 -g -DNDEBUG" check-build
	@BUILD=build/rel sh tests/bench/run.sh

# demo, test and bench build in a sub-make, after `deps` has installed what was missing.
demo: deps
	$(MAKE) --no-print-directory $(PAR) $(BUILD)/tachist demo-assets
	./$(BUILD)/tachist demo

fuzz:
	@sh tests/fuzz/run.sh

# The libFuzzer targets (tests/fuzz/fuzz_*.c): all of core and the text parsers of io, nothing that
# needs SDL or SQLite, built with clang into build/fuzz/ (each source compiled once for both).
FUZZ_CC   ?= clang
FUZZ_SAN  := -fsanitize=address,undefined -fno-sanitize-recover=undefined
FUZZ_SRC  := $(wildcard app/core/*.c) app/io/infile.c app/io/inifile.c $(wildcard app/io/protocol*.c) \
             app/io/rig.c app/io/rig_lum.c app/io/ini_edit.c app/io/store_pg_names.c app/io/stimlist.c
FUZZ_OBJ  := $(FUZZ_SRC:%.c=build/fuzz/obj/%.o)
FUZZ_BIN  := $(patsubst tests/fuzz/%.c,build/fuzz/%,$(wildcard tests/fuzz/fuzz_*.c))
fuzz-build: $(FUZZ_BIN)
build/fuzz/obj/%.o: %.c
	@mkdir -p $(dir $@)
	$(Q)$(FUZZ_CC) -std=c11 -Wall -g -O1 -fsanitize=fuzzer-no-link $(FUZZ_SAN) $(CPPFLAGS) \
	  $(shell pkg-config --cflags gsl inih) -MMD -MP -c -o $@ $<
build/fuzz/fuzz_%: tests/fuzz/fuzz_%.c $(FUZZ_OBJ)
	$(Q)$(FUZZ_CC) -std=c11 -Wall -g -O1 -fsanitize=fuzzer $(FUZZ_SAN) $(CPPFLAGS) \
	  $(shell pkg-config --cflags gsl inih) -o $@ $< $(FUZZ_OBJ) $(shell pkg-config --libs inih gsl) -lcsv -lm
-include $(FUZZ_OBJ:.o=.d)

# Long robustness runs (every exact interval, simulated fits, the whole malformed-input corpus):
# tests/soak/*.sh, each printing ok/not ok lines like an end-to-end script. Minutes, not in `test`.
soak: deps
	$(MAKE) --no-print-directory $(PAR) BUILD=build/san CFLAGS="$(SAN)" LDFLAGS="$(SAN)" check-build
	@BUILD=build/san sh tests/soak/run.sh

# The program, its tests and tools build without a warning (-Werror) with gcc and clang at every
# optimisation level, each in build/cc/COMPILER-LEVEL/. Minutes; not part of `test`.
COMPILERS ?= gcc clang
LEVELS    ?= -O0 -O1 -O2 -O3
CC_TARGET ?= check-build
compilers: deps
	@for cc in $(COMPILERS); do for o in $(LEVELS); do echo "compilers: $$cc $$o"; \
	  $(MAKE) --no-print-directory $(PAR) Q=@ CC=$$cc BUILD=build/cc/$$cc$$o CFLAGS="$$o -g" \
	    $(CC_TARGET) >build/cc-$$cc$$o.log 2>&1 || { tail -n 30 build/cc-$$cc$$o.log; exit 1; }; \
	done; done; echo "compilers: $(COMPILERS) at $(LEVELS): no warnings"

# The demo stimulus set is committed; it is drawn again only when its list is missing.
demo-assets:
	@[ -f assets-demo/stimuli.csv ] || { $(MAKE) --no-print-directory $(BUILD)/tools/make_demo_assets && \
	  $(BUILD)/tools/make_demo_assets assets-demo; }

# The manual page is written by the program from its command and option tables.
man: $(BUILD)/tachist.1
$(BUILD)/tachist.1: $(BUILD)/tachist
	./$(BUILD)/tachist --man >$@

# The binary and tachist(1), nothing else; DESTDIR and PREFIX (or BINDIR, MANDIR) as usual.
install: $(BUILD)/tachist $(BUILD)/tachist.1
	install -d "$(DESTDIR)$(BINDIR)" "$(DESTDIR)$(MANDIR)/man1"
	install -m 755 $(BUILD)/tachist "$(DESTDIR)$(BINDIR)/tachist"
	install -m 644 $(BUILD)/tachist.1 "$(DESTDIR)$(MANDIR)/man1/tachist.1"

uninstall:
	rm -f "$(DESTDIR)$(BINDIR)/tachist" "$(DESTDIR)$(MANDIR)/man1/tachist.1"

clean:
	rm -rf build

-include $(OBJ:.o=.d) $(TESTBIN:=.d) $(TOOLBIN:=.d)
