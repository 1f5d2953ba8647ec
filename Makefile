# tallyfit build. `make` builds ./tallyfit; `make check` runs the whole suite;
# `make sanitize` runs it again under ASan+UBSan; `make V=1` shows the commands.

PREFIX   ?= /usr/local
# `make MPI=1` builds build/mpi/tallyfit with mpicc, in which `mpirun -n P tallyfit analyze`
# spreads a batch over P processes (src/batch/batch_mpi.c); the plain build compiles no MPI.
ifeq ($(MPI),1)
BUILD    := build/mpi
BIN      := build/mpi/tallyfit
CC       := mpicc
CPPFLAGS += -DTF_MPI
endif
BUILD    ?= build
CC       ?= cc
PKGS     := gsl xlsxwriter inih check
# x86-64-v3 (AVX2 + FMA) gives glibc's vector exp (libmvec) to the hot loops, runs on every machine
# of this class (Zen 3 and newer Intel parts alike) and, unlike -march=native on AVX-512 parts,
# under valgrind. `make ARCH=` builds for baseline x86-64.
ARCH     ?= -march=x86-64-v3
OPT      ?= -O2
WARN     := -Wall -Wextra -Werror -Wshadow -Wstrict-prototypes -Wmissing-prototypes -Wno-unused-parameter
CPPFLAGS += -D_POSIX_C_SOURCE=200809L -Isrc
CFLAGS   += -std=c11 $(OPT) $(ARCH) -g -pthread $(WARN) $(shell pkg-config --cflags $(PKGS) 2>/dev/null)
LDLIBS   += $(shell pkg-config --libs gsl xlsxwriter inih 2>/dev/null) -lcsv -lnettle -lm -pthread
CHECK_LIBS := $(shell pkg-config --libs check 2>/dev/null)
# Hot loops (particle filter and model kernels) get -O3 and vector maths.
HOT_CFLAGS := -O3 -fno-math-errno -fno-trapping-math

ifeq ($(V),1)
Q :=
else
Q := @
endif

SRC      := $(filter-out src/main.c $(if $(filter 1,$(MPI)),,src/batch/batch_mpi.c),$(wildcard src/*/*.c))
OBJ      := $(SRC:%.c=$(BUILD)/%.o)
DEP      := $(OBJ:.o=.d) $(BUILD)/src/main.d
LIB      := $(BUILD)/libtallyfit.a
TEST_SRC := $(wildcard tests/unit/test_*.c)
TEST_BIN := $(TEST_SRC:tests/unit/%.c=$(BUILD)/tests/%)
BENCH_SRC := $(wildcard bench/*.c)
BENCH_BIN := $(BENCH_SRC:bench/%.c=$(BUILD)/bench/%)

.PHONY: all check unit e2e sanitize valgrind bench demo deps install uninstall clean validate fuzz

BIN ?= tallyfit

all: $(BIN)

$(BIN): $(BUILD)/src/main.o $(LIB)
	@echo "  LD      $@"
	$(Q)$(CC) $(CFLAGS) -o $@ $^ $(LDLIBS)

$(LIB): $(OBJ)
	@echo "  AR      $@"
	$(Q)rm -f $@ && ar rcs $@ $^

$(BUILD)/src/filter/%.o $(BUILD)/src/model/%.o: CFLAGS += $(HOT_CFLAGS)
# A binary inside this source tree (./tallyfit, build/mpi/tallyfit, build/san/tallyfit) finds the
# model files of the tree, wherever it lies in it (src/model/model_file.c).
$(BUILD)/src/model/model_file.o: CPPFLAGS += -DTF_SOURCE_DIR='"$(CURDIR)"'
$(BUILD)/src/model/model_file.o: Makefile

$(BUILD)/%.o: %.c
	@mkdir -p $(dir $@)
	@echo "  CC      $<"
	$(Q)$(CC) $(CPPFLAGS) $(CFLAGS) -MMD -MP -c -o $@ $<

# Unit tests see file-static helpers through -DTESTING (see DEVELOPERS.md).
$(BUILD)/tests/%: tests/unit/%.c tests/unit/tf_test.h $(LIB)
	@mkdir -p $(dir $@)
	@echo "  CC      $<"
	$(Q)$(CC) $(CPPFLAGS) -DTESTING -Itests/unit $(CFLAGS) -o $@ $< $(LIB) $(CHECK_LIBS) $(LDLIBS)

$(BUILD)/bench/%: bench/%.c $(LIB)
	@mkdir -p $(dir $@)
	@echo "  CC      $<"
	$(Q)$(CC) $(CPPFLAGS) $(CFLAGS) $(HOT_CFLAGS) -o $@ $< $(LIB) $(LDLIBS)

deps:
	$(Q)tools/install-deps

# The README's test command: installs what is missing, builds, runs everything.
# Where mpicc exists the MPI build is made too, for the batch test (tests/e2e/batch.sh).
check: deps
	$(Q)$(MAKE) --no-print-directory $(BIN) $(TEST_BIN)
	$(Q)if command -v mpicc >/dev/null; then $(MAKE) --no-print-directory MPI=1; fi
	$(Q)TALLYFIT=$(CURDIR)/$(BIN) TALLYFIT_MPI=$(CURDIR)/build/mpi/tallyfit BUILD=$(BUILD) tests/run-all $(TEST_BIN)

# Same suite, separate build tree, ASan+UBSan; any report fails the run.
SAN_CC := $(CC) -fsanitize=address,undefined -fno-sanitize-recover=all -fno-omit-frame-pointer
sanitize: deps
	$(Q)$(MAKE) --no-print-directory BUILD=build/san BIN=build/san/tallyfit OPT=-O1 ARCH= CC="$(SAN_CC)" \
	  build/san/tallyfit $(TEST_BIN:$(BUILD)/%=build/san/%)
	$(Q)ASAN_OPTIONS=detect_leaks=1:abort_on_error=1 UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1 \
	  TALLYFIT=$(CURDIR)/build/san/tallyfit BUILD=build/san TF_SANITIZE=1 \
	  tests/run-all $(TEST_BIN:$(BUILD)/%=build/san/%)

valgrind: deps
	$(Q)$(MAKE) --no-print-directory tallyfit $(TEST_BIN)
	$(Q)TALLYFIT=$(CURDIR)/tallyfit BUILD=$(BUILD) TF_VALGRIND=1 tests/run-all $(TEST_BIN)

# Long fuzzing runs of the libFuzzer targets in tests/fuzz (clang, ASan + UBSan): FUZZ_SECONDS
# per target, the targets side by side. `make check` runs a short one (tests/e2e/fuzz_short.sh).
FUZZ_SECONDS ?= 600
fuzz: deps
	$(Q)tests/fuzz/run.sh $(FUZZ_SECONDS)

bench: deps
	$(Q)$(MAKE) --no-print-directory tallyfit $(BENCH_BIN)
	$(Q)if command -v mpicc >/dev/null; then $(MAKE) --no-print-directory MPI=1; fi
	$(Q)for b in $(BENCH_BIN); do $$b || exit 1; done
	$(Q)bench/bench_batch.sh

# The long statistical checks: parameter coverage over more simulated surveys, then
# simulation-based calibration of the sampler (tests/ref/test_fit_recovery.py), and the model
# comparison checks (tests/unit/test_compare.c) with more replicates and longer runs.
validate: deps
	$(Q)$(MAKE) --no-print-directory tallyfit $(BUILD)/tests/test_compare
	$(Q)TALLYFIT=$(CURDIR)/tallyfit TF_VALIDATE=1 /usr/bin/python3 tests/ref/test_fit_recovery.py
	$(Q)TF_VALIDATE=1 $(BUILD)/tests/test_compare

# The README's first command: install what is missing, build, run the main job on a demo survey.
demo: deps
	$(Q)$(MAKE) --no-print-directory tallyfit
	./tallyfit $(DEMO_CMD) surveys/heron-colony.csv

DEMO_CMD ?= analyze

# The manual page is made from the binary's own --help texts (tools/make-man).
$(BUILD)/tallyfit.1: $(BIN) tools/make-man
	$(Q)tools/make-man ./$(BIN) > $@.tmp && mv $@.tmp $@

install: $(BIN) $(BUILD)/tallyfit.1
	install -d $(DESTDIR)$(PREFIX)/bin $(DESTDIR)$(PREFIX)/share/tallyfit/models $(DESTDIR)$(PREFIX)/share/man/man1
	install -m 755 $(BIN) $(DESTDIR)$(PREFIX)/bin/tallyfit
	install -m 644 models/*.ini $(DESTDIR)$(PREFIX)/share/tallyfit/models/
	install -m 644 $(BUILD)/tallyfit.1 $(DESTDIR)$(PREFIX)/share/man/man1/tallyfit.1

uninstall:
	rm -f $(DESTDIR)$(PREFIX)/bin/tallyfit $(DESTDIR)$(PREFIX)/share/man/man1/tallyfit.1
	rm -rf $(DESTDIR)$(PREFIX)/share/tallyfit

clean:
	rm -rf build tallyfit

-include $(DEP)
