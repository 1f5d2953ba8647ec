#!/usr/bin/env bash
# Everything that can fail before the work fails before it, for every command: an output folder
# that cannot be used (a file in the way, the survey file itself, a folder that cannot be written),
# a model file that is wrong, a population that does not exist, a bad option. Each run asks for a
# fit far too long to finish (--iterations 10000000, the most allowed), so the test proves that nothing was fitted
# by content, not by the clock: the right message and exit status, nothing on standard output,
# no progress or fitting line, and no output file or folder. `timeout` only guards against a hang
# (a failure of this test), it measures nothing.
set -uo pipefail
cd "$(dirname "$0")/../.."
T=${TALLYFIT:?TALLYFIT must name the binary}
tmp=$(mktemp -d)
cleanup() { chmod -R u+rwx "$tmp" 2>/dev/null; rm -rf "$tmp"; }
trap cleanup EXIT
fails=0
fail() { echo "fail_fast.sh: $*" >&2; fails=$((fails + 1)); }
limit=120
[ -n "${TF_VALGRIND:-}" ] && limit=600

# expect NAME RC PHRASE CMD...: the run must end with exit RC, print nothing on stdout, and hold
# PHRASE in stderr, with no line about fitting, progress or results.
expect() {
  local name=$1 want=$2 phrase=$3
  shift 3
  timeout "$limit" "$@" >"$tmp/out" 2>"$tmp/err"
  local rc=$?
  if [ $rc -eq 124 ]; then fail "$name: still running after $limit s: the work started"; return; fi
  [ $rc -eq "$want" ] || fail "$name: exit $rc, want $want; stderr: $(head -c 300 "$tmp/err")"
  grep -qF -- "$phrase" "$tmp/err" || fail "$name: stderr lacks '$phrase': $(head -c 300 "$tmp/err")"
  [ -s "$tmp/out" ] && fail "$name: printed on stdout: $(head -c 200 "$tmp/out")"
  grep -qiE 'fitting|pilot|warm-up|chain|done in|workbook:' "$tmp/err" && fail "$name: a fit started: $(head -c 300 "$tmp/err")"
  return 0
}

LONG=(--iterations 10000000 --warmup 100000 --particles 100000 -q)
S=$tmp/heron.csv
cp surveys/heron-colony.csv "$S"
echo "not a folder" >"$tmp/file"

# A file where the output folder goes.
expect "fit -o FILE" 1 "'$tmp/file' is a file, not a directory" "$T" fit "$S" --model ricker "${LONG[@]}" -o "$tmp/file"
expect "compare -o FILE/sub" 1 "'$tmp/file' is a file, not a directory" \
  "$T" compare "$S" "${LONG[@]/-q/--quiet}" -o "$tmp/file/sub"
expect "forecast --model -o FILE" 1 "'$tmp/file' is a file, not a directory" \
  "$T" forecast "$S" --model ricker "${LONG[@]}" -o "$tmp/file"
expect "forecast --average -o FILE" 1 "'$tmp/file' is a file, not a directory" \
  "$T" forecast "$S" --average "${LONG[@]}" -o "$tmp/file"
expect "forecast --parameter -o FILE" 1 "'$tmp/file' is a file, not a directory" \
  "$T" forecast "$S" --parameter r=0.1,sigma=0.1 --runs 10000000 --years 500 -q -o "$tmp/file"
expect "analyze -o FILE" 1 "'$tmp/file' is a file, not a directory" "$T" analyze "$S" "${LONG[@]}" -o "$tmp/file"
expect "analyze --batch -o FILE" 1 "'$tmp/file' is a file, not a directory" \
  "$T" analyze "$S" --batch "${LONG[@]}" -o "$tmp/file"
expect "simulate -o FILE/x.csv" 1 "Not a directory" \
  "$T" simulate --scheme 5000 -o "$tmp/file/x.csv"
[ "$(cat "$tmp/file")" = "not a folder" ] || fail "the file in the way was changed"

# The survey file itself as the output folder.
for cmd in "fit --model ricker" "forecast --model ricker" "analyze"; do
  # shellcheck disable=SC2086
  expect "$cmd -o SURVEY" 2 "the output folder would be the survey file '$S'" "$T" $cmd "$S" "${LONG[@]}" -o "$S"
done
expect "compare -o SURVEY" 2 "the output folder would be the survey file '$S'" \
  "$T" compare "$S" "${LONG[@]/-q/--quiet}" -o "$S"
cmp -s "$S" surveys/heron-colony.csv || fail "the survey file was changed"

# A folder that cannot be written (for an ordinary user; root writes anywhere).
if [ "$(id -u)" -ne 0 ]; then
  mkdir "$tmp/locked"
  chmod 555 "$tmp/locked"
  expect "fit into a locked folder" 1 "Permission denied" "$T" fit "$S" --model ricker "${LONG[@]}" -o "$tmp/locked"
  expect "analyze below a locked folder" 1 "Permission denied" "$T" analyze "$S" "${LONG[@]}" -o "$tmp/locked/sub"
  [ -z "$(ls -A "$tmp/locked")" ] || fail "locked folder: something was written"
else
  echo "fail_fast.sh: running as root, the unwritable-folder cases are left to tests/e2e/hostile.sh"
fi

# A model file that is wrong is found before the first candidate is fitted, whichever it is.
mkdir "$tmp/models"
cp models/*.ini "$tmp/models/"
printf '[model]\nname = gompertz\n[r]\nprior = nonsense\n' >"$tmp/models/gompertz.ini"
expect "compare, a broken model file" 3 "gompertz.ini" \
  env TALLYFIT_MODELS="$tmp/models" "$T" compare "$S" "${LONG[@]/-q/--quiet}" -o "$tmp/o-models"
expect "analyze, a broken model file" 3 "gompertz.ini" \
  env TALLYFIT_MODELS="$tmp/models" "$T" analyze "$S" "${LONG[@]}" -o "$tmp/o-models"
expect "forecast --average, a broken model file" 3 "gompertz.ini" \
  env TALLYFIT_MODELS="$tmp/models" "$T" forecast "$S" --average "${LONG[@]}" -o "$tmp/o-models"
expect "fit, a missing priors file" 3 "$tmp/none.ini" \
  "$T" fit "$S" --model ricker --prior-file "$tmp/none.ini" "${LONG[@]}" -o "$tmp/o-models"

# Populations: a label the file lacks, an unusable one, and options the data refuse.
cp tests/data/multi/one-short-population.csv "$tmp/three.csv"
expect "fit --population north" 2 "no population named 'north'" \
  "$T" fit "$tmp/three.csv" --model ricker --population east,north "${LONG[@]}" -o "$tmp/o-pop"
expect "analyze with an unusable population" 3 "population 'short' has 1 surveyed year" \
  "$T" analyze "$tmp/three.csv" "${LONG[@]}" -o "$tmp/o-pop"
expect "likelihood --population short" 3 "population 'short' has 1 surveyed year" \
  "$T" likelihood "$tmp/three.csv" --model ricker --parameter r=0.5,K=20,sigma=0.1 --population short
expect "check --population north" 2 "no population named 'north'" "$T" check "$tmp/three.csv" --population north
expect "forecast --estimates --obs poisson" 2 "--obs poisson is a model of whole counts" \
  "$T" forecast "$S" --model ricker --obs poisson --estimates "${LONG[@]}" -o "$tmp/o-pop"
# A bad name for the effort (--effort-name: short, printable, no comma) is refused by every
# command that takes it.
expect "fit --effort-name with a comma" 2 "holds a comma" \
  "$T" fit "$S" --model ricker --effort-name "trap,night" "${LONG[@]}" -o "$tmp/o-eff1"
expect "compare --effort-name too long" 2 "at most 32" \
  "$T" compare "$S" --effort-name "$(printf 'x%.0s' $(seq 33))" "${LONG[@]}" -o "$tmp/o-eff2"
expect "forecast --effort-name with a newline" 2 "control character" \
  "$T" forecast "$S" --model ricker --effort-name "$(printf 'trap\nnight')" "${LONG[@]}" -o "$tmp/o-eff3"
expect "analyze --effort-name empty" 2 "the effort's name is empty" \
  "$T" analyze "$S" --effort-name "" "${LONG[@]}" -o "$tmp/o-eff4"
for d in o-eff1 o-eff2 o-eff3 o-eff4; do [ -e "$tmp/$d" ] && fail "$d: an output folder was made"; done
expect "analyze, a bad threshold" 2 "threshold 'abc' is not a number" "$T" analyze "$S" --threshold 50,abc "${LONG[@]}" -o "$tmp/o-pop"
# The last population suits no candidate (a zero under log-normal counting error): refused before
# the first population is fitted.
sed 's/^west,2003,5$/west,2003,0/; /^short,/d' "$tmp/three.csv" >"$tmp/zero.csv"
for cmd in analyze compare "forecast --average"; do
  # shellcheck disable=SC2086
  expect "$cmd, a population no candidate suits" 3 "no candidate counting-error model suits the counts of population 'west'" \
    "$T" $cmd "$tmp/zero.csv" --obs lognormal "${LONG[@]/-q/--quiet}" -o "$tmp/o-pop"
done
for d in o-models o-pop; do [ -e "$tmp/$d" ] && fail "$d: an output folder was made"; done

# Nothing was left by the probes.
leftovers=$(find "$tmp" -name '.tallyfit-probe-*' -o -name '*.tmp*' | head -n 3)
[ -z "$leftovers" ] || fail "probe files left: $leftovers"

[ $fails -eq 0 ] && echo "fail_fast.sh: all passed"
exit $((fails > 0))
