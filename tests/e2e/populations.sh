#!/usr/bin/env bash
# Choosing populations (--population LABEL[,LABEL]) and leaving out the unusable ones with a
# warning (--skip-unusable), on every fitting command, with a file of three herds of which one has
# a single surveyed year. Short sampler settings: the checks are about which populations are
# fitted and where their files go, not about the numbers.
set -uo pipefail
cd "$(dirname "$0")/../.."
T=${TALLYFIT:?TALLYFIT must name the binary}
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
fails=0
bad() { echo "populations.sh: $*" >&2; fails=$((fails + 1)); }
SHORT=(--iterations 200 --warmup 100 --chains 2 --particles 100)
AFAST=(-q --iterations 480 --warmup 100 --draws 150 --particles 100 --years 30 --model exponential --obs poisson)

cp tests/data/multi/one-short-population.csv "$tmp/herds.csv"
H=$tmp/herds.csv
warning="warning: $H:7: population 'short' is left out: population 'short' has 1 surveyed year"

# Without a choice the file is refused, and the hint names both ways out.
"$T" analyze "$H" -o "$tmp/a0" "${AFAST[@]}" 2>"$tmp/err"; rc=$?
[ $rc -eq 3 ] || bad "analyze, unusable population: exit $rc, want 3"
grep -qF "hint: survey more years, or leave this population out (--population to choose the others, or --skip-unusable)" \
  "$tmp/err" || bad "analyze, unusable population: $(cat "$tmp/err")"
[ -e "$tmp/a0" ] && bad "analyze, unusable population: something was written"

# --skip-unusable: a warning naming the population, line and problem; the others analysed.
"$T" analyze "$H" --skip-unusable -o "$tmp/a1" "${AFAST[@]:1}" >/dev/null 2>"$tmp/err" || bad "analyze --skip-unusable: exit $?"
grep -qF "tallyfit analyze: $warning" "$tmp/err" || bad "analyze --skip-unusable: no warning: $(head -c 300 "$tmp/err")"
cut -d, -f1 "$tmp/a1/populations.csv" | tail -n +2 | tr '\n' ' ' | grep -qx "east west " ||
  bad "analyze --skip-unusable: populations $(cut -d, -f1 "$tmp/a1/populations.csv" | tr '\n' ' ')"
grep -qF "Population left out,\"'short', not analysed: population 'short' has 1 surveyed year; at least 5 are needed to fit a model\",line 7 of the survey file" \
  "$tmp/a1/summary.csv" || bad "analyze --skip-unusable: the first page does not name the population left out"

# --population with two labels: only those, in file order, whatever the order given.
"$T" analyze "$H" --population west,east -o "$tmp/a2" "${AFAST[@]}" 2>"$tmp/err" || bad "analyze --population: exit $?"
cut -d, -f1 "$tmp/a2/populations.csv" | tail -n +2 | tr '\n' ' ' | grep -qx "east west " ||
  bad "analyze --population west,east: $(cut -d, -f1 "$tmp/a2/populations.csv" | tr '\n' ' ')"
[ -s "$tmp/err" ] && bad "analyze --population west,east: warned: $(cat "$tmp/err")"

# fit and compare: one folder per chosen population, as with the whole file.
"$T" fit "$H" --population east,west --model exponential "${SHORT[@]}" -q -o "$tmp/f" 2>/dev/null ||
  bad "fit --population east,west: exit $?"
[ "$(ls "$tmp/f" | tr '\n' ' ')" = "east west " ] || bad "fit --population east,west: $(ls "$tmp/f")"
"$T" fit "$H" --population west --model exponential "${SHORT[@]}" -q -o "$tmp/f1" 2>/dev/null || bad "fit --population west"
[ "$(ls "$tmp/f1" | tr '\n' ' ')" = "west " ] || bad "fit --population west: $(ls "$tmp/f1")"
"$T" fit "$H" --skip-unusable --model exponential "${SHORT[@]}" -q -o "$tmp/f2" 2>"$tmp/err" || bad "fit --skip-unusable"
grep -qF "tallyfit fit: $warning" "$tmp/err" || bad "fit --skip-unusable: no warning (-q keeps warnings)"
[ "$(ls "$tmp/f2" | tr '\n' ' ')" = "east west " ] || bad "fit --skip-unusable: $(ls "$tmp/f2")"
"$T" compare "$H" --skip-unusable --model exponential --obs poisson "${SHORT[@]}" --draws 150 --quiet -o "$tmp/c" \
  2>"$tmp/err" || bad "compare --skip-unusable: exit $?"
grep -qF "tallyfit compare: $warning" "$tmp/err" || bad "compare --skip-unusable: no warning"
[ -s "$tmp/c/east/models.csv" ] && [ -s "$tmp/c/west/models.csv" ] && [ ! -e "$tmp/c/short" ] ||
  bad "compare --skip-unusable: $(find "$tmp/c" -type f)"
"$T" forecast "$H" --population east,west --model exponential "${SHORT[@]}" -q -o "$tmp/p" >/dev/null 2>&1 ||
  bad "forecast --population east,west: exit $?"
[ "$(ls "$tmp/p" | tr '\n' ' ')" = "east west " ] || bad "forecast --population east,west: $(ls "$tmp/p")"

# Choosing the unusable one, or leaving every one out, is an error.
"$T" fit "$H" --population short --model exponential "${SHORT[@]}" -q -o "$tmp/x" 2>"$tmp/err"; rc=$?
[ $rc -eq 3 ] || bad "fit --population short: exit $rc, want 3"
grep -qF "tallyfit fit: error: $H:7:3: population 'short' has 1 surveyed year" "$tmp/err" || bad "fit --population short: $(cat "$tmp/err")"
"$T" fit "$H" --population short --skip-unusable --model exponential "${SHORT[@]}" -q -o "$tmp/x" 2>"$tmp/err"; rc=$?
[ $rc -eq 3 ] || bad "nothing left: exit $rc, want 3"
grep -qF "no usable population is left (1 left out)" "$tmp/err" || bad "nothing left: $(cat "$tmp/err")"
[ -e "$tmp/x" ] && bad "a refused run wrote $tmp/x"

[ $fails -eq 0 ] && echo "populations.sh: all passed"
exit $((fails > 0))
