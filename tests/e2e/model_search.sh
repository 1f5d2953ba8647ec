#!/usr/bin/env bash
# The model files are found without TALLYFIT_MODELS: by the plain binary and by the MPI binary
# of the build tree (build/mpi/tallyfit, which lies two folders below the tree's models/), run
# from another folder; the installed binary is checked by tests/e2e/install.sh. The MPI command
# is run as README shows it, `mpirun -n 3 build/mpi/tallyfit analyze scheme.csv -o ...`, from a
# folder holding scheme.csv (with build/ linked into it) and short sampler settings after it.
# Where mpirun or the MPI build is missing that part is skipped with a message, but fails under CI.
set -uo pipefail
cd "$(dirname "$0")/../.."
repo=$PWD
T=${TALLYFIT:?TALLYFIT must name the binary}
M=${TALLYFIT_MPI:-$repo/build/mpi/tallyfit}
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
fails=0
bad() { echo "model_search.sh: $*" >&2; fails=$((fails + 1)); }
unset TALLYFIT_MODELS
FAST=(-q --iterations 480 --warmup 100 --draws 150 --particles 100 --years 30 --model exponential --obs poisson)

"$T" simulate --scheme 2 --seed 3 -o "$tmp/scheme.csv" || bad "simulate failed"

# The plain binary, from another folder.
(cd "$tmp" && "$T" analyze scheme.csv -o plain "${FAST[@]}" 2>"$tmp/err") || bad "plain binary: $(head -c 300 "$tmp/err")"
[ -s "$tmp/plain/scheme.xlsx" ] || bad "plain binary: no workbook"

if [ -n "${TF_SANITIZE:-}${TF_VALGRIND:-}" ]; then
  echo "model_search.sh: MPI part skipped under the sanitizers and valgrind (they run the plain binary only)"
elif [ -x "$M" ] && command -v mpirun >/dev/null; then
  [ "$(id -u)" -eq 0 ] && export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1
  # More processes than cores on a small machine, without changing the command line.
  export OMPI_MCA_rmaps_base_oversubscribe=1
  # The README's relative path: build/mpi/tallyfit, here a link into this tree's build folder.
  ln -s "$(dirname "$(dirname "$M")")" "$tmp/build"
  (cd "$tmp" && mpirun -n 3 build/mpi/tallyfit analyze scheme.csv -o results "${FAST[@]}" >"$tmp/out" 2>"$tmp/err")
  rc=$?
  [ $rc -eq 0 ] || bad "mpirun -n 3 build/mpi/tallyfit analyze: exit $rc: $(tail -c 400 "$tmp/err")"
  grep -qF "not found" "$tmp/err" && bad "MPI binary: a model file was not found: $(head -c 300 "$tmp/err")"
  [ -s "$tmp/results/scheme.xlsx" ] || bad "MPI binary: no summary workbook"
  [ "$(find "$tmp/results" -mindepth 1 -maxdepth 1 -type d | wc -l)" -eq 2 ] || bad "MPI binary: not 2 population folders"
  # The same binary without mpirun, from another folder.
  (cd "$tmp" && "$M" fit scheme.csv --population site-0001 --model exponential --iterations 200 --warmup 100 \
    --chains 2 -q -o mpi-plain 2>"$tmp/err") || bad "MPI binary without mpirun: $(head -c 300 "$tmp/err")"
elif [ "${CI:-}" ]; then
  bad "CI must run the MPI part: no MPI build ($M) or no mpirun"
else
  echo "model_search.sh: MPI part skipped: no mpirun or no $M (install openmpi-bin and libopenmpi-dev; make check then builds it)"
fi

[ $fails -eq 0 ] && echo "model_search.sh: all passed"
exit $((fails > 0))
