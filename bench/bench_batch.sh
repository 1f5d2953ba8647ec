#!/usr/bin/env bash
# Batch benchmark: populations analysed per minute for an invented scheme of 200 populations
# (tallyfit simulate --scheme 200), on 1 thread, on every core as threads, and on MPI
# processes (one manager and one worker per core), with the parallel efficiency (speed-up over
# the 1-thread run divided by the cores used). Run by `make bench`; the MPI part is skipped with
# a message where the MPI build (make MPI=1) or mpirun is missing.
#
# The settings are cut down so that the three runs take a few minutes: 200 full default
# analyses take about 40 core-minutes. Fewer, shorter chains and two candidate models change
# the cost of each population, not how the queue shares the populations out, which is what
# this measures. The machine may be shared: the numbers are wall-clock times of this run.
set -u
cd "$(dirname "$0")/.."
T=${TALLYFIT:-$PWD/tallyfit}
M=${TALLYFIT_MPI:-$PWD/build/mpi/tallyfit}
export TALLYFIT_MODELS=${TALLYFIT_MODELS:-$PWD/models}
N=${BENCH_POPULATIONS:-200}
CORES=$(nproc)
SETTINGS=(--model exponential,ricker --obs poisson --chains 2 --iterations 120 --warmup 40 --draws 100
          --particles 40 --runs 200 --years 20 --workbook-limit 0)
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
"$T" simulate --scheme "$N" --seed 7 -o "$tmp/scheme.csv" || exit 1

echo "batch: $N populations of an invented scheme (simulate --scheme $N --seed 7), $CORES cores"
echo "batch: reduced settings: ${SETTINGS[*]}"
now() { date +%s.%N; }
# run LABEL OUTDIR COMMAND...: prints the line, sets $secs.
run() {
  local label=$1 out=$2; shift 2
  local t0 t1
  t0=$(now)
  "$@" "$tmp/scheme.csv" --batch -o "$tmp/$out" -q "${SETTINGS[@]}" 2>"$tmp/$out.err"
  local rc=$?
  t1=$(now)
  # Exit 1 with a summary: some populations failed (the short chains of these settings leave a
  # few without a fit), which costs the queue as much as a success.
  if [ $rc -ne 0 ] && ! { [ $rc -eq 1 ] && [ -s "$tmp/$out/scheme/all-populations.csv" ]; }; then
    echo "batch: $label failed:"; tail -5 "$tmp/$out.err"; exit 1
  fi
  failed=$(grep -c ',failed,\|,bad data,' "$tmp/$out/scheme/all-populations.csv")
  secs=$(awk -v a="$t0" -v b="$t1" 'BEGIN { print b - a }')
}
report() {  # label cores seconds
  awk -v l="$1" -v c="$2" -v s="$3" -v b="$base" -v n="$N" 'BEGIN {
    printf "batch: %-34s %7.1f s  %7.1f populations/min", l, s, 60 * n / s
    if (b > 0 && c > 1) printf "  speed-up %.2f  efficiency %.2f", b / s, b / s / c
    printf "\n" }'
  [ "$failed" -gt 0 ] && echo "batch:   ($failed of $N populations failed at these reduced settings; they count as done)"
}
base=0
run "1 thread" t1 "$T" analyze --threads 1
base=$secs
report "1 thread" 1 "$secs"
run "$CORES threads" tn "$T" analyze --threads "$CORES"
report "$CORES threads" "$CORES" "$secs"
cmp -s "$tmp/t1/scheme/all-populations.csv" "$tmp/tn/scheme/all-populations.csv" ||
  echo "batch: WARNING: the threaded summary differs from the 1-thread one"
if [ -x "$M" ] && command -v mpirun >/dev/null; then
  [ "$(id -u)" -eq 0 ] && export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1
  P=$((CORES + 1))
  run "MPI" mp mpirun --oversubscribe -n "$P" "$M" analyze
  report "MPI, $P processes ($CORES workers)" "$CORES" "$secs"
  cmp -s "$tmp/t1/scheme/all-populations.csv" "$tmp/mp/scheme/all-populations.csv" ||
    echo "batch: WARNING: the MPI summary differs from the 1-thread one"
else
  echo "batch: MPI part skipped: no MPI build at $M (make MPI=1, needs Open MPI: openmpi-bin, libopenmpi-dev)"
fi
