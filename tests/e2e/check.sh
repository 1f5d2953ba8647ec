#!/usr/bin/env bash
# End-to-end test of `tallyfit check`: the demo surveys, every bad file in tests/data/bad (expected
# line and phrase from tests/data/bad/EXPECT), and the command's options and exit codes.
set -u
cd "$(dirname "$0")/../.."
T=${TALLYFIT:?TALLYFIT must name the binary}
fail=0
bad() { echo "check.sh: $*" >&2; fail=1; }
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT

# Population labels in order of first appearance, read with Python's csv module ("" = no label).
labels() {
  /usr/bin/python3 - "$1" <<'PY'
import csv, sys
with open(sys.argv[1], encoding="utf-8-sig", newline="") as f:
    rows = csv.DictReader(l for l in f if not l.startswith("#"))
    seen = []
    for r in rows:
        lab = r.get("population") or ""
        if lab not in seen:
            seen.append(lab)
print("\n".join(seen))
PY
}

# Demo surveys: usable, and every population is listed, in file order.
for f in surveys/*.csv; do
  "$T" check "$f" >"$tmp/out" 2>"$tmp/err"; rc=$?
  if [ $rc -ne 0 ]; then bad "$f: exit $rc, want 0"; cat "$tmp/err" >&2; continue; fi
  [ -s "$tmp/err" ] && bad "$f: unexpected stderr: $(cat "$tmp/err")"
  mapfile -t want < <(labels "$f")
  n=${#want[@]}
  [ "$n" -ge 1 ] || bad "$f: no population found by the csv module"
  head -n 1 "$tmp/out" | grep -qF "$f: $n population" || bad "$f: first line does not say $n population(s)"
  mapfile -t got < <(grep -E '^[^ ]' "$tmp/out" | tail -n +2)
  for ((i = 0; i < n; i++)); do
    w=${want[i]:-(unnamed population)}
    [ "${got[i]:-}" = "$w" ] || bad "$f: population $((i + 1)) is '${got[i]:-}', want '$w'"
  done
  [ "${#got[@]}" -eq "$n" ] || bad "$f: ${#got[@]} populations printed, want $n"
  for key in "years:" "surveyed:" "counts:" "effort:" "crude screening figure, not a model estimate"; do
    [ "$(grep -cF "$key" "$tmp/out")" -eq "$n" ] || bad "$f: '$key' not printed once per population"
  done
  "$T" check --quiet "$f" >"$tmp/out" 2>&1 || bad "$f: --quiet: non-zero exit"
  [ -s "$tmp/out" ] && bad "$f: --quiet printed something"
done

# Bad files: exit 3, nothing on stdout, stderr names file:line and carries the phrase.
n_bad=0
while read -r file line phrase; do
  case $file in '#'* | '') continue ;; esac
  n_bad=$((n_bad + 1))
  p=tests/data/bad/$file
  "$T" check "$p" >"$tmp/out" 2>"$tmp/err"; rc=$?
  [ $rc -eq 3 ] || bad "$p: exit $rc, want 3"
  [ -s "$tmp/out" ] && bad "$p: printed an overview"
  grep -q "^tallyfit check: error: $p:$line:" "$tmp/err" || bad "$p: stderr does not name $p:$line: $(head -n 1 "$tmp/err")"
  grep -qF -- "$phrase" "$tmp/err" || bad "$p: stderr lacks '$phrase'"
  grep -q '^  hint: ' "$tmp/err" || bad "$p: no hint"
done <tests/data/bad/EXPECT
[ $n_bad -ge 30 ] || bad "only $n_bad bad files"

# Numbers written with regional settings: one hint, which names the export and never suggests
# writing "4,835" with a point (that would read as 4.835 animals).
for f in tests/data/bad/count-thousands-*.csv tests/data/bad/count-*comma*.csv tests/data/bad/effort-decimal-comma.csv; do
  "$T" check "$f" 2>"$tmp/err" >/dev/null
  grep -qxF "  hint: export the file with plain numbers: no thousands separators, a point as the decimal mark (4835, 2.5)" \
    "$tmp/err" || bad "$f: not the one number hint: $(cat "$tmp/err")"
  grep -qi "write decimals with a point" "$tmp/err" && bad "$f: a hint invites the thousands mistake"
done

# A count that is not whole: an error naming --estimates, unless the option says so.
"$T" check tests/data/bad/count-fraction.csv 2>"$tmp/err"; rc=$?
[ $rc -eq 3 ] || bad "count-fraction: exit $rc, want 3"
grep -qF -- "say so with --estimates" "$tmp/err" || bad "count-fraction: the hint does not name --estimates"
"$T" check tests/data/bad/count-fraction.csv --estimates >"$tmp/out" 2>"$tmp/err" || bad "--estimates: non-zero exit"
grep -qF "counts read as estimates: continuous counting-error models only" "$tmp/out" || bad "--estimates: not said"

# A tab-separated file reads like the others.
"$T" check tests/data/good/tab-separated.csv >"$tmp/out" 2>"$tmp/err" || bad "tab-separated: $(cat "$tmp/err")"
grep -qF "counts:       min 9, median 12.5, max 15" "$tmp/out" || bad "tab-separated: $(cat "$tmp/out")"

# A count far from its neighbours (a typed extra zero) is usable, with a warning naming it.
"$T" check tests/data/good/outlier-extra-zero.csv >"$tmp/out" 2>"$tmp/err"; rc=$?
[ $rc -eq 0 ] || bad "outlier: exit $rc, want 0"
grep -qF "tallyfit check: warning: tests/data/good/outlier-extra-zero.csv:18: year 2010: count 3390 is 9.3 times the median of the neighbouring years" \
  "$tmp/err" || bad "outlier: $(cat "$tmp/err")"
[ "$(grep -c ': warning: ' "$tmp/err")" -eq 1 ] || bad "outlier: not exactly one warning"
grep -qF "max 3390" "$tmp/out" || bad "outlier: the count was not kept"

# Choosing populations, and leaving out those that cannot be used.
cp tests/data/multi/one-short-population.csv "$tmp/three.csv"
"$T" check "$tmp/three.csv" 2>"$tmp/err"; rc=$?
[ $rc -eq 3 ] || bad "short population: exit $rc, want 3"
grep -qF "tallyfit check: error: $tmp/three.csv:7:3: population 'short' has 1 surveyed year" "$tmp/err" || bad "short: $(cat "$tmp/err")"
grep -qF -- "--skip-unusable" "$tmp/err" || bad "short: the hint does not name --skip-unusable"
"$T" check "$tmp/three.csv" --skip-unusable >"$tmp/out" 2>"$tmp/err" || bad "--skip-unusable: non-zero exit"
grep -qF "warning: $tmp/three.csv:7: population 'short' is left out" "$tmp/err" || bad "--skip-unusable: no warning"
head -n 1 "$tmp/out" | grep -qF "2 of 3 populations, usable" || bad "--skip-unusable: $(head -n 1 "$tmp/out")"
"$T" check "$tmp/three.csv" --population west,east >"$tmp/out" 2>"$tmp/err" || bad "--population west,east: failed"
[ "$(grep -E '^(east|west)$' "$tmp/out" | tr '\n' ' ')" = "east west " ] || bad "--population west,east: $(cat "$tmp/out")"
grep -q '^short$' "$tmp/out" && bad "--population west,east: showed 'short'"
"$T" check "$tmp/three.csv" --population short 2>"$tmp/err"; rc=$?
[ $rc -eq 3 ] || bad "--population short: exit $rc, want 3"
"$T" check "$tmp/three.csv" --population north 2>"$tmp/err"; rc=$?
[ $rc -eq 2 ] || bad "--population north: exit $rc, want 2"
grep -qF "no population named 'north'" "$tmp/err" || bad "--population north: $(cat "$tmp/err")"
grep -qF "the file has 'east', 'short', 'west'" "$tmp/err" || bad "--population north: labels not listed"

# Several errors in one file, and the cap.
"$T" check tests/data/multi/several-errors.csv 2>"$tmp/err"; rc=$?
[ $rc -eq 3 ] || bad "several-errors: exit $rc"
[ "$(grep -c ': error: ' "$tmp/err")" -eq 5 ] || bad "several-errors: want 5 errors"
"$T" check tests/data/multi/error-cap.csv 2>"$tmp/err"
grep -qF "(10 more errors not shown)" "$tmp/err" || bad "error-cap: dropped errors not counted"

# Options and exit codes.
"$T" check --help >"$tmp/out" 2>&1 || bad "--help: non-zero exit"
grep -q '^usage: tallyfit check SURVEY.csv' "$tmp/out" || bad "--help: no usage line"
grep -qF "not a model estimate" "$tmp/out" || bad "--help: does not explain the crude trend"
"$T" check -h >/dev/null || bad "-h: non-zero exit"
"$T" check --frobnicate surveys/heron-colony.csv >"$tmp/out" 2>"$tmp/err"; rc=$?
[ $rc -eq 2 ] || bad "unknown option: exit $rc, want 2"
grep -qF "unknown option '--frobnicate'" "$tmp/err" || bad "unknown option: not named"
grep -qxF "  hint: run 'tallyfit check --help' for the options" "$tmp/err" || bad "unknown option: no hint"
"$T" check -z surveys/heron-colony.csv 2>/dev/null; [ $? -eq 2 ] || bad "unknown short option: want exit 2"
"$T" check 2>/dev/null; [ $? -eq 2 ] || bad "no file: want exit 2"
"$T" check surveys/heron-colony.csv surveys/three-herds.csv 2>/dev/null; [ $? -eq 2 ] || bad "two files: want exit 2"
"$T" check "$tmp/none.csv" 2>"$tmp/err"; rc=$?
[ $rc -eq 3 ] || bad "missing file: exit $rc, want 3"
grep -qxF "tallyfit check: error: $tmp/none.csv: cannot open the survey file: No such file or directory" "$tmp/err" ||
  bad "missing file: $(cat "$tmp/err")"
"$T" --help | grep -q '^  check ' || bad "tallyfit --help does not list check"

[ $fail -eq 0 ] && echo "check.sh: all passed"
exit $fail
