#!/usr/bin/env bash
# Builds the libFuzzer targets with clang (ASan + UBSan) into build/fuzz and runs each one:
# first every saved regression input (tests/fuzz/regressions/<target>/, each once), then fuzzing
# from the seed corpus for SECONDS seconds per target, the targets side by side.
#   tests/fuzz/run.sh SECONDS [TARGET...]      (TARGET: fuzz_survey, fuzz_model_file; default both)
# New inputs go to build/fuzz/corpus/<target>/ (the seed corpus in the repository is only read);
# a crash is saved under build/fuzz/artifacts/<target>/ and the script fails. Copy the crash
# into tests/fuzz/regressions/<target>/ once it is fixed. Exit 77 when clang or its fuzzer
# runtime is missing.
set -uo pipefail
cd "$(dirname "$0")/../.."
secs=${1:?usage: tests/fuzz/run.sh SECONDS [TARGET...]}
shift
targets=("$@")
[ ${#targets[@]} -gt 0 ] || targets=(fuzz_survey fuzz_model_file)
out=${FUZZ_OUT:-build/fuzz}
CLANG=${CLANG:-clang}

if ! command -v "$CLANG" >/dev/null; then
  echo "fuzz: $CLANG not found (install clang and libclang-rt-14-dev); skipped" >&2
  exit 77
fi
if ! echo 'int LLVMFuzzerTestOneInput(const char *d, unsigned long n) { return 0; }' |
     "$CLANG" -x c -fsanitize=fuzzer -o /dev/null - 2>/dev/null; then
  echo "fuzz: $CLANG cannot link -fsanitize=fuzzer (install libclang-rt-14-dev); skipped" >&2
  exit 77
fi

mkdir -p "$out"
# The library code the targets reach, compiled from source with clang so that the fuzzer sees
# its coverage (the gcc archive has none). libcsv and inih are system libraries: their own code
# is not instrumented, only the callbacks into ours.
flags=(-std=c11 -g -O1 -fno-omit-frame-pointer -fno-math-errno -D_POSIX_C_SOURCE=200809L -Isrc
       -fsanitize=fuzzer,address,undefined -fno-sanitize-recover=all
       -Wall -Wextra -Wno-unused-parameter -Wno-unknown-attributes)
libs=($(pkg-config --libs gsl inih 2>/dev/null) -lcsv -lm)
# The library sources are compiled once for both targets, as many at a time as there are cores.
mkdir -p "$out/obj"
rm -f "$out"/obj/*.o
export CLANG out
flagstr="${flags[*]}"
export flagstr
if ! ls src/util/*.c src/survey/*.c src/model/*.c |
     xargs -P "$(nproc 2>/dev/null || echo 2)" -I{} sh -c \
       'o="$out/obj/$(echo "$1" | tr / _).o"; $CLANG $flagstr -c -o "$o" "$1" 2>"$o.log" || { cat "$o.log" >&2; exit 255; }' sh {}; then
  echo "fuzz: build failed" >&2
  exit 1
fi
for t in "${targets[@]}"; do
  "$CLANG" "${flags[@]}" -o "$out/$t" "tests/fuzz/$t.c" "$out"/obj/*.o "${libs[@]}" 2>"$out/$t.build.log" ||
    { cat "$out/$t.build.log" >&2; echo "fuzz: build failed" >&2; exit 1; }
done

# Leaks are reported too (detect_leaks); a crash report names the input that caused it.
export ASAN_OPTIONS=detect_leaks=1:abort_on_error=0:allocator_may_return_null=1
export UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1
dict_of() { case $1 in fuzz_survey) echo tests/fuzz/survey.dict ;; *) echo tests/fuzz/model_file.dict ;; esac; }

fails=0
for t in "${targets[@]}"; do
  reg=(tests/fuzz/regressions/$t/*)
  if [ -e "${reg[0]}" ]; then
    if ! "$out/$t" -runs=1 "${reg[@]}" >"$out/$t.regressions.log" 2>&1; then
      echo "fuzz: $t fails on a saved regression input:" >&2
      tail -n 40 "$out/$t.regressions.log" >&2
      fails=$((fails + 1))
    else
      echo "fuzz: $t: ${#reg[@]} regression inputs pass"
    fi
  fi
done
[ $fails -eq 0 ] || exit 1

run_one() {  # target
  local t=$1
  mkdir -p "$out/corpus/$t" "$out/artifacts/$t"
  # -rss_limit_mb: a survey is capped at 32 MiB, so far more than that means a runaway.
  "$out/$t" "$out/corpus/$t" "tests/fuzz/corpus/$t" -dict="$(dict_of "$t")" -max_total_time="$secs" \
    -max_len=65536 -timeout=10 -rss_limit_mb=2048 -print_final_stats=1 \
    -artifact_prefix="$out/artifacts/$t/" >"$out/$t.log" 2>&1
}
pids=()
for t in "${targets[@]}"; do run_one "$t" & pids+=($!); done
for i in "${!targets[@]}"; do
  t=${targets[$i]}
  if wait "${pids[$i]}"; then
    runs=$(sed -n 's/^stat::number_of_executed_units: *//p' "$out/$t.log")
    echo "fuzz: $t: ${runs:-?} runs in ${secs} s, no crash"
  else
    echo "fuzz: $t found a problem (input saved under $out/artifacts/$t/):" >&2
    grep -v '^#\|^INFO\|^\s*$' "$out/$t.log" | tail -n 40 >&2
    fails=$((fails + 1))
  fi
done
[ $fails -eq 0 ]
