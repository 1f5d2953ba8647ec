#!/usr/bin/env bash
# End-to-end test of removals and releases in a survey (columns removed, added) and
# --counted-fraction: what is refused (with its line), what is warned about, and that simulate
# --removed writes a survey the other commands read back with its removals.
set -u
cd "$(dirname "$0")/../.."
T=${TALLYFIT:?TALLYFIT must name the binary}
fail=0
bad() { echo "removals.sh: $*" >&2; fail=1; }
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT

# expect NAME RC PHRASE -- command...: exit code RC and PHRASE in stderr.
expect() {
  local name=$1 want=$2 phrase=$3
  shift 4
  "$@" >"$tmp/out" 2>"$tmp/err"; local rc=$?
  [ "$rc" -eq "$want" ] || bad "$name: exit $rc, want $want; stderr: $(head -c 400 "$tmp/err")"
  grep -qF -- "$phrase" "$tmp/err" || bad "$name: stderr lacks '$phrase': $(head -c 400 "$tmp/err")"
}

printf 'year,count,removed,added\n2000,520,40,\n2001,530,45,0\n2002,NA,50,\n2003,505,40,10\n2004,498,40,\n2005,515,45,\n' >"$tmp/ok.csv"
"$T" check "$tmp/ok.csv" >"$tmp/out" 2>"$tmp/err" || bad "check of a harvested survey failed: $(cat "$tmp/err")"
grep -qF "removed:      260 animals in 6 years; added: 10 animals in 1 years" "$tmp/out" || bad "check does not sum the removals: $(cat "$tmp/out")"
grep -qF "ok.csv:4: year 2002 has removals or releases but no count" "$tmp/err" || bad "no warning for a removal without a count"

printf 'year,count,removed\n2000,50,9000\n2001,52,1\n2002,48,1\n2003,50,1\n2004,50,1\n' >"$tmp/huge.csv"
expect "implausible removal" 3 "huge.csv:2: year 2000: 9000 animals removed is more than 10 times" -- "$T" check "$tmp/huge.csv"
# The same removals are plausible when a count holds only a tenth of the animals present.
"$T" check --counted-fraction 1% "$tmp/huge.csv" >/dev/null 2>"$tmp/err" || bad "counted fraction 1% should accept the removals: $(cat "$tmp/err")"

printf 'year,count,removed\n2000,50,3\n2001,52,-1\n2002,48,1\n2003,50,1\n2004,50,1\n' >"$tmp/neg.csv"
expect "negative removal" 3 "neg.csv:3:3: removed -1 is negative" -- "$T" check "$tmp/neg.csv"
printf 'year,count,added\n2000,50,3\n2001,52,two\n2002,48,1\n2003,50,1\n2004,50,1\n' >"$tmp/word.csv"
expect "word as release" 3 "word.csv:3:3: added 'two' is not a number" -- "$T" check "$tmp/word.csv"
printf 'year,count,removed\n2000,50,3\n2001,52,80\n2002,48,1\n2003,50,1\n2004,50,1\n' >"$tmp/over.csv"
"$T" check "$tmp/over.csv" >/dev/null 2>"$tmp/err" || bad "a removal above the count is a warning, not an error"
grep -qF "year 2001: 80 animals removed, more than the count implies were there" "$tmp/err" || bad "no warning for a removal above the count: $(cat "$tmp/err")"

expect "check --counted-fraction 0" 2 "--counted-fraction 0 is not in (0, 1]" -- "$T" check "$tmp/ok.csv" --counted-fraction 0
"$T" check --help | grep -q -- "--counted-fraction" || bad "check --help does not name --counted-fraction"
for cmd in fit compare analyze forecast likelihood; do
  expect "$cmd --counted-fraction 0" 2 "--counted-fraction 0 is not in (0, 1]" -- "$T" "$cmd" "$tmp/ok.csv" --model ricker --counted-fraction 0
  "$T" "$cmd" --help | grep -q -- "--counted-fraction" || bad "$cmd --help does not name --counted-fraction"
done

expect "simulate --removed 120%" 2 "a share must lie between 0 and 100 %" -- \
  "$T" simulate --model exponential --parameter r=0.05,sigma=0.1 --years 10 --start 100 --removed 120%
expect "simulate --removed -3" 2 "a number of animals must be >= 0" -- \
  "$T" simulate --model exponential --parameter r=0.05,sigma=0.1 --years 10 --start 100 --removed -3

# simulate --removed: a removed column of whole animals, the share asked of what the counts show.
"$T" simulate --model ricker --parameter r=0.4,K=1000,sigma=0.05 --years 20 --start 800 --removed 10% --seed 4 -o "$tmp/h.csv" ||
  bad "simulate --removed failed"
head -n 1 "$tmp/h.csv" | grep -qx "year,count,removed" || bad "simulate --removed header: $(head -n 1 "$tmp/h.csv")"
awk -F, 'NR > 1 && ($3 != int($3) || $3 < 0) { exit 1 }' "$tmp/h.csv" || bad "removed holds a value that is not a whole number >= 0"
awk -F, 'NR > 1 { r = $3 / $2; if (r < 0.05 || r > 0.2) bad = 1 } END { exit bad }' "$tmp/h.csv" ||
  bad "a 10 % removal is not near 10 % of the counts: $(cat "$tmp/h.csv")"
# The fit reads the column.
"$T" fit "$tmp/h.csv" --model ricker -q -o "$tmp/fit" || bad "fit of a harvested survey failed"
[ -s "$tmp/fit/parameters.csv" ] || bad "fit of a harvested survey wrote no parameters"

exit $fail
