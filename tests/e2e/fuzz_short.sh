#!/usr/bin/env bash
# A short fuzzing run of each libFuzzer target (tests/fuzz/): builds them with clang
# (-fsanitize=fuzzer,address,undefined) into build/fuzz, replays every saved regression input,
# then fuzzes each target for FUZZ_SHORT_SECONDS (default 20) from the seed corpus, both side by
# side. `make fuzz` runs the same for longer. Skipped, with a message, where clang is missing, and
# under `make sanitize` / `make valgrind`: the targets already run under ASan and UBSan.
set -uo pipefail
cd "$(dirname "$0")/../.."
if [ -n "${TF_SANITIZE:-}${TF_VALGRIND:-}" ]; then
  echo "fuzz_short.sh: skipped under the sanitizer and valgrind runs (the fuzz targets carry ASan and UBSan themselves)"
  exit 0
fi
tests/fuzz/run.sh "${FUZZ_SHORT_SECONDS:-20}"
rc=$?
if [ $rc -eq 77 ]; then
  echo "fuzz_short.sh: SKIPPED: clang with libFuzzer is not installed (tools/install-deps installs clang and libclang-rt-14-dev)"
  exit 0
fi
exit $rc
