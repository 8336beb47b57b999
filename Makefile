# omen — build, test, install. `make` builds build/git-omen; `make check` runs
# every test; both first install missing Debian packages (see .ci/deps.sh).
CC      ?= cc
PREFIX  ?= /usr/local
DESTDIR ?=
BUILD   ?= build
PKGS    := libgit2 libcjson
PYTHON  ?= /usr/bin/python3

OPT     ?= -O2
CFLAGS_BASE := -std=c11 -g $(OPT) -D_POSIX_C_SOURCE=200809L -D_DEFAULT_SOURCE \
	-Iinclude -Isrc -pthread -fno-strict-aliasing
ifeq ($(DEVELOPER),1)
CFLAGS_BASE += -Wall -Wextra -Werror -Wshadow -Wstrict-prototypes -Wmissing-prototypes \
	-Wpointer-arith -Wvla -Wno-unused-parameter -Wformat=2 -Wno-format-truncation -Wno-format-nonliteral
else
CFLAGS_BASE += -Wall
endif
PKG_CFLAGS  = $(shell pkg-config --cflags $(PKGS) 2>/dev/null)
PKG_LIBS    = $(shell pkg-config --libs $(PKGS) 2>/dev/null)
CMOCKA_LIBS = $(shell pkg-config --libs cmocka 2>/dev/null)
ALL_CFLAGS  = $(CFLAGS_BASE) $(PKG_CFLAGS) $(CFLAGS)
LIBS        = $(PKG_LIBS) -lm -pthread $(LDLIBS)

LIB_SRC  := $(sort $(filter-out src/cli/%,$(wildcard src/*/*.c)))
CLI_SRC  := $(sort $(wildcard src/cli/*.c))
LIB_OBJ  := $(LIB_SRC:%.c=$(BUILD)/%.o)
CLI_OBJ  := $(CLI_SRC:%.c=$(BUILD)/%.o)
UNIT_SRC := $(sort $(wildcard tests/unit/test_*.c))
UNIT_BIN := $(UNIT_SRC:tests/unit/%.c=$(BUILD)/tests/%)
REF_SRC  := $(sort $(wildcard tests/ref/*.c))
REF_BIN  := $(REF_SRC:tests/ref/%.c=$(BUILD)/ref/%)
BENCH_SRC:= $(sort $(wildcard tests/bench/*.c))
BENCH_BIN:= $(BENCH_SRC:tests/bench/%.c=$(BUILD)/bench/%)
FUZZ_SRC := $(sort $(wildcard tests/fuzz/fuzz_*.c))
FUZZ_REPLAY := $(FUZZ_SRC:tests/fuzz/%.c=$(BUILD)/fuzz/%-replay)
FUZZ_LF  := $(FUZZ_SRC:tests/fuzz/%.c=$(BUILD)/fuzz/%-libfuzzer)
MANS     := $(sort $(wildcard man/*.1))
OMEN     := $(BUILD)/git-omen

.PHONY: all deps deps-test check unit shell ref fuzz-replay manlint asan valgrind \
	bench fuzz demo install uninstall clean

all: deps $(OMEN)

deps:
	@sh .ci/deps.sh build

deps-test:
	@sh .ci/deps.sh test

$(BUILD)/%.o: %.c
	@mkdir -p $(dir $@)
	$(CC) $(ALL_CFLAGS) -MMD -MP -c $< -o $@

$(BUILD)/libomen.a: $(LIB_OBJ)
	@rm -f $@
	ar rcs $@ $^

$(OMEN): $(CLI_OBJ) $(BUILD)/libomen.a
	$(CC) $(ALL_CFLAGS) -o $@ $(CLI_OBJ) $(BUILD)/libomen.a $(LIBS)

$(BUILD)/tests/%: tests/unit/%.c $(BUILD)/libomen.a
	@mkdir -p $(dir $@)
	$(CC) $(ALL_CFLAGS) -o $@ $< $(BUILD)/libomen.a $(CMOCKA_LIBS) $(LIBS)

$(BUILD)/ref/%: tests/ref/%.c $(BUILD)/libomen.a
	@mkdir -p $(dir $@)
	$(CC) $(ALL_CFLAGS) -o $@ $< $(BUILD)/libomen.a $(LIBS)

$(BUILD)/bench/%: tests/bench/%.c $(BUILD)/libomen.a
	@mkdir -p $(dir $@)
	$(CC) $(ALL_CFLAGS) -O3 -march=native -o $@ $< $(BUILD)/libomen.a $(LIBS)

$(BUILD)/fuzz/%-replay: tests/fuzz/%.c tests/fuzz/replay.c $(BUILD)/libomen.a
	@mkdir -p $(dir $@)
	$(CC) $(ALL_CFLAGS) -o $@ $< tests/fuzz/replay.c $(BUILD)/libomen.a $(LIBS)

# ---- tests ---------------------------------------------------------------
check: deps deps-test $(OMEN) unit shell ref fuzz-replay manlint asan valgrind
	@echo "make check: all suites passed"

unit: $(UNIT_BIN)
	@sh tests/run-unit.sh $(UNIT_BIN)

shell: $(OMEN)
	@OMEN="$(CURDIR)/$(OMEN)" sh tests/run-shell.sh

ref: $(OMEN) $(REF_BIN)
	@OMEN="$(CURDIR)/$(OMEN)" BUILD="$(CURDIR)/$(BUILD)" PYTHON=$(PYTHON) sh tests/run-ref.sh

fuzz-replay: $(FUZZ_REPLAY)
	@for f in $(FUZZ_REPLAY); do n=$$(basename $$f -replay); \
		$$f fixtures/corpora/$${n#fuzz_} || exit 1; done

manlint:
	@sh tests/run-manlint.sh $(MANS)

asan:
	$(MAKE) BUILD=build-asan OPT=-O1 \
		CFLAGS="-fsanitize=address,undefined -fno-omit-frame-pointer -fno-sanitize-recover=all" \
		LDLIBS="-fsanitize=address,undefined" build-asan/git-omen unit-asan

unit-asan: $(UNIT_BIN) $(FUZZ_REPLAY)
	@ASAN_OPTIONS=detect_leaks=1 UBSAN_OPTIONS=print_stacktrace=1 sh tests/run-unit.sh $(UNIT_BIN)
	@for f in $(FUZZ_REPLAY); do n=$$(basename $$f -replay); \
		$$f fixtures/corpora/$${n#fuzz_} || exit 1; done
	@OMEN="$(CURDIR)/$(OMEN)" sh tests/run-shell.sh

valgrind: $(UNIT_BIN)
	@VALGRIND=1 sh tests/run-unit.sh $(UNIT_BIN)

bench: $(OMEN) $(BENCH_BIN)
	@OMEN="$(CURDIR)/$(OMEN)" BUILD="$(CURDIR)/$(BUILD)" sh tests/bench/run.sh $(BENCH_BIN)

$(BUILD)/fuzz/%-libfuzzer: tests/fuzz/%.c $(LIB_SRC)
	@mkdir -p $(dir $@)
	clang -std=c11 -g -O1 -D_POSIX_C_SOURCE=200809L -D_DEFAULT_SOURCE -Iinclude -Isrc \
		$(PKG_CFLAGS) -fsanitize=fuzzer,address,undefined -o $@ $< $(LIB_SRC) $(PKG_LIBS) -lm -pthread

FUZZ_SECONDS ?= 60
fuzz: $(FUZZ_LF)
	@for f in $(FUZZ_LF); do n=$$(basename $$f -libfuzzer); d=fixtures/corpora/$${n#fuzz_}; \
		mkdir -p $$d; echo "fuzz: $$n for $(FUZZ_SECONDS)s"; \
		$$f -max_total_time=$(FUZZ_SECONDS) -max_len=65536 $$d || exit 1; done

demo: all
	@OMEN="$(CURDIR)/$(OMEN)" sh fixtures/demo/run-demo.sh

install: all
	install -d $(DESTDIR)$(PREFIX)/bin $(DESTDIR)$(PREFIX)/share/man/man1 \
		$(DESTDIR)$(PREFIX)/share/git-omen/hooks \
		$(DESTDIR)$(PREFIX)/share/bash-completion/completions
	install -m 755 $(OMEN) $(DESTDIR)$(PREFIX)/bin/git-omen
	install -m 644 $(MANS) $(DESTDIR)$(PREFIX)/share/man/man1/
	install -m 755 hooks/pre-push $(DESTDIR)$(PREFIX)/share/git-omen/hooks/pre-push
	@if [ -f hooks/git-omen.bash ]; then install -m 644 hooks/git-omen.bash \
		$(DESTDIR)$(PREFIX)/share/bash-completion/completions/git-omen; fi

uninstall:
	rm -f $(DESTDIR)$(PREFIX)/bin/git-omen $(addprefix $(DESTDIR)$(PREFIX)/share/man/man1/,$(notdir $(MANS)))
	rm -rf $(DESTDIR)$(PREFIX)/share/git-omen
	rm -f $(DESTDIR)$(PREFIX)/share/bash-completion/completions/git-omen

clean:
	rm -rf build build-asan build-*

-include $(LIB_OBJ:.o=.d) $(CLI_OBJ:.o=.d)
