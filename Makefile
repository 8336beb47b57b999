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
BASE_MODEL ?= fixtures/base-model/base.omen

.PHONY: all deps deps-test check unit shell ref fuzz-replay manlint asan valgrind \
	bench base-model fuzz demo install uninstall clean

all: deps $(OMEN)

deps:
	@sh .ci/deps.sh build

deps-test:
	@sh .ci/deps.sh test

$(BUILD)/%.o: %.c
	@mkdir -p $(dir $@)
	$(CC) $(ALL_CFLAGS) -MMD -MP -c $< -o $@

# src/nn/ kernels: -O3 so the register-blocked tiles unroll (AVX2 is chosen
# at run time inside the code, so the objects still run on any x86-64);
# -fno-math-errno lets sqrtf vectorise (no value changes: errno only).
$(BUILD)/src/nn/%.o: ALL_CFLAGS += -O3 -fno-math-errno
# where `make install` puts the base model (issue 11); the binary also looks
# beside itself (<bindir>/../share/git-omen), so a DESTDIR install finds it.
$(BUILD)/src/model/base.o: ALL_CFLAGS += -DOMEN_DATADIR='"$(PREFIX)/share/git-omen"'

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
	@OMEN="$(abspath $(OMEN))" sh tests/run-shell.sh

ref: $(OMEN) $(REF_BIN)
	@OMEN="$(abspath $(OMEN))" BUILD="$(abspath $(BUILD))" PYTHON=$(PYTHON) sh tests/run-ref.sh

fuzz-replay: $(FUZZ_REPLAY)
	@for f in $(FUZZ_REPLAY); do n=$$(basename $$f -replay); \
		$$f fixtures/corpora/$${n#fuzz_} || exit 1; done

manlint:
	@sh tests/run-manlint.sh $(MANS)

# AddressSanitizer + UBSan build of everything in its own directory
# ($(BUILD)-asan), then the unit tests, fuzz replays and shell tests on it.
# Leaks fail (LeakSanitizer); any UB report aborts (-fno-sanitize-recover).
ASAN_BUILD ?= $(BUILD)-asan
ASAN_FLAGS := -fsanitize=address,undefined -fno-omit-frame-pointer -fno-sanitize-recover=all
asan:
	$(MAKE) BUILD=$(ASAN_BUILD) OPT=-O1 CFLAGS="$(ASAN_FLAGS) $(CFLAGS)" \
		LDLIBS="$(ASAN_FLAGS) $(LDLIBS)" $(ASAN_BUILD)/git-omen unit-asan

ASAN_ENV := ASAN_OPTIONS=detect_leaks=1:abort_on_error=1:detect_stack_use_after_return=1 \
	UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1 LSAN_OPTIONS=suppressions=$(CURDIR)/tests/lsan.supp:print_suppressions=0
unit-asan: $(UNIT_BIN) $(FUZZ_REPLAY)
	@$(ASAN_ENV) sh tests/run-unit.sh $(UNIT_BIN)
	@for f in $(FUZZ_REPLAY); do n=$$(basename $$f -replay); \
		$(ASAN_ENV) $$f fixtures/corpora/$${n#fuzz_} || exit 1; done
	@$(ASAN_ENV) OMEN="$(abspath $(OMEN))" sh tests/run-shell.sh

valgrind: $(UNIT_BIN)
	@VALGRIND=1 sh tests/run-unit.sh $(UNIT_BIN)

# The base model (issue 11) from the corpus snapshots in $OMEN_CORPUS_DIR,
# built under $OMEN_CORPUS_WORK (fixtures/corpus/build.sh says how).
base-model: $(OMEN)
	@OMEN="$(abspath $(OMEN))" sh fixtures/corpus/build.sh $(BASE_FLAGS)

bench: $(OMEN) $(BENCH_BIN)
	@OMEN="$(abspath $(OMEN))" BUILD="$(abspath $(BUILD))" sh tests/bench/run.sh $(BENCH_BIN)

# libFuzzer builds: the library is compiled once more with clang, coverage
# instrumentation and ASan+UBSan into $(BUILD)/fuzz/lib/ (incremental), each
# target links it with -fsanitize=fuzzer. `make fuzz` runs every target for
# FUZZ_SECONDS on a work corpus in $(BUILD)/fuzz/corpus/<x> seeded from
# fixtures/corpora/<x>; crashes go to $(BUILD)/fuzz/artifacts/<x>/. Of the new
# inputs of at most FUZZ_KEEP_BYTES that add coverage, the FUZZ_KEEP_FILES
# smallest go into fixtures/corpora/<x> (FUZZ_KEEP_BYTES=0: fixtures untouched).
FUZZ_CC     ?= clang
FUZZ_CFLAGS := -std=c11 -g -O1 -D_POSIX_C_SOURCE=200809L -D_DEFAULT_SOURCE -Iinclude -Isrc \
	-pthread -fno-strict-aliasing -fno-omit-frame-pointer -fno-sanitize-recover=undefined \
	-fsanitize-coverage-ignorelist=tests/fuzz/coverage-ignore.txt
FUZZ_LIB_OBJ := $(LIB_SRC:%.c=$(BUILD)/fuzz/lib/%.o)

$(BUILD)/fuzz/lib/%.o: %.c
	@mkdir -p $(dir $@)
	$(FUZZ_CC) $(FUZZ_CFLAGS) -fsanitize=fuzzer-no-link,address,undefined $(PKG_CFLAGS) \
		-MMD -MP -c $< -o $@

# src/nn with the ordinary compiler and no instrumentation: the parsers never
# reach the kernels, and clang 14 cannot link target_clones functions called
# from another file (it defines only the .ifunc symbol)
$(BUILD)/fuzz/lib/src/nn/%.o: src/nn/%.c
	@mkdir -p $(dir $@)
	$(CC) $(ALL_CFLAGS) -MMD -MP -c $< -o $@

$(BUILD)/fuzz/libomen-fuzz.a: $(FUZZ_LIB_OBJ)
	@rm -f $@
	ar rcs $@ $^

$(BUILD)/fuzz/%-libfuzzer: tests/fuzz/%.c $(BUILD)/fuzz/libomen-fuzz.a
	@mkdir -p $(dir $@)
	$(FUZZ_CC) $(FUZZ_CFLAGS) -fsanitize=fuzzer,address,undefined $(PKG_CFLAGS) -o $@ $< \
		$(BUILD)/fuzz/libomen-fuzz.a $(PKG_LIBS) -lm -pthread

FUZZ_SECONDS ?= 60
FUZZ_MAX_LEN ?= 4096
FUZZ_KEEP_BYTES ?= 256
FUZZ_KEEP_FILES ?= 4
fuzz: $(FUZZ_LF)
	@for f in $(FUZZ_LF); do n=$$(basename $$f -libfuzzer); x=$${n#fuzz_}; \
		d=fixtures/corpora/$$x; w=$(BUILD)/fuzz/corpus/$$x; a=$(BUILD)/fuzz/artifacts/$$x; \
		mkdir -p $$d $$w $$a; echo "fuzz: $$x for $(FUZZ_SECONDS)s"; \
		$$f -max_total_time=$(FUZZ_SECONDS) -max_len=$(FUZZ_MAX_LEN) -timeout=10 \
			-rss_limit_mb=2048 -print_final_stats=1 -artifact_prefix=$$a/ $$w $$d \
			2>$(BUILD)/fuzz/$$x.log; r=$$?; \
		grep -E '^(stat::number_of_executed_units|stat::peak_rss_mb|#[0-9]+ +DONE)' \
			$(BUILD)/fuzz/$$x.log | sed "s/^/  $$x: /"; \
		if [ $$r -ne 0 ]; then tail -40 $(BUILD)/fuzz/$$x.log; \
			echo "fuzz: $$x FAILED, reproducer in $$a/"; exit 1; fi; \
		if [ "$(FUZZ_KEEP_BYTES)" -gt 0 ]; then printf '  %s: ' $$x; \
			sh tests/fuzz/keep-small.sh $$f $$d $$w $(BUILD)/fuzz/keep/$$x \
				$(FUZZ_KEEP_BYTES) $(FUZZ_KEEP_FILES); fi; \
	done

demo: all
	@OMEN="$(abspath $(OMEN))" sh fixtures/demo/run-demo.sh

install: all
	install -d $(DESTDIR)$(PREFIX)/bin $(DESTDIR)$(PREFIX)/share/man/man1 \
		$(DESTDIR)$(PREFIX)/share/git-omen/hooks \
		$(DESTDIR)$(PREFIX)/share/bash-completion/completions
	install -m 755 $(OMEN) $(DESTDIR)$(PREFIX)/bin/git-omen
	install -m 644 $(MANS) $(DESTDIR)$(PREFIX)/share/man/man1/
	install -m 755 hooks/pre-push $(DESTDIR)$(PREFIX)/share/git-omen/hooks/pre-push
	install -m 644 $(BASE_MODEL) $(DESTDIR)$(PREFIX)/share/git-omen/base.omen
	@if [ -f hooks/git-omen.bash ]; then install -m 644 hooks/git-omen.bash \
		$(DESTDIR)$(PREFIX)/share/bash-completion/completions/git-omen; fi

uninstall:
	rm -f $(DESTDIR)$(PREFIX)/bin/git-omen $(DESTDIR)$(PREFIX)/share/man/man1/git-omen.1 \
		$(DESTDIR)$(PREFIX)/share/man/man1/git-omen-*.1
	rm -rf $(DESTDIR)$(PREFIX)/share/git-omen
	rm -f $(DESTDIR)$(PREFIX)/share/bash-completion/completions/git-omen

clean:
	rm -rf build build-asan build-*

-include $(LIB_OBJ:.o=.d) $(CLI_OBJ:.o=.d) $(FUZZ_LIB_OBJ:.o=.d)
