#!/usr/bin/env bash
# End-to-end checks of `tallyfit forecast` in its fixed-parameter form: the tables and their
# headers, the cautions, and that a bad command line fails with exit 2 and leaves no files.
set -uo pipefail
: "${TALLYFIT:?TALLYFIT must name the binary}"
repo=$(cd "$(dirname "$0")/../.." && pwd)
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
fails=0
fail() { echo "forecast.sh: $*" >&2; fails=$((fails + 1)); }
# The tables end their lines with CRLF (RFC 4180); lf FILE gives the lines without the CR.
lf() { tr -d '\r' <"$1"; }
# bands_flat FILE YEAR CALENDAR VALUE: the bands row of year YEAR has calendar year CALENDAR
# ("" = none) and all five bands equal VALUE to 1e-12 relative. The CSV holds exact doubles, and
# the start goes through log and exp on the way, which moves it by a few units in the last place.
bands_flat() {
  lf "$1" | awk -F, -v y="$2" -v c="$3" -v v="$4" '
    NR > 1 && $1 == y { found = 1; ok = ($2 == c && NF == 7)
      for (i = 3; i <= 7; i++) { d = $i - v; if (d < 0) d = -d; if (d > 1e-12 * v) ok = 0 } }
    END { exit !(found && ok) }'
}

# A good run: three tables with their headers, one row per year (t = 0..H) for the bands.
out="$tmp/good"
if ! "$TALLYFIT" forecast --fixed r=-0.02,sigma=0.1 --start 500 --years 30 --runs 500 \
     --threshold 50,100,20% --decline-window 24 --seed 3 -o "$out" >"$tmp/stdout" 2>"$tmp/stderr"; then
  fail "a good run failed: $(cat "$tmp/stderr")"
fi
expect_header() {  # file, header
  [ -f "$out/$1" ] || { fail "$1 was not written"; return; }
  [ "$(lf "$out/$1" | head -n 1)" = "$2" ] || fail "$1 header is '$(lf "$out/$1" | head -n 1)'"
}
expect_header forecast_bands.csv "year,calendar_year,median,pct25,pct75,pct5,pct95"
expect_header forecast_quasi_extinction.csv "year,calendar_year,threshold,probability,se"
expect_header forecast_declines.csv "window,decline,probability,se"
[ "$(wc -l <"$out/forecast_bands.csv")" -eq 32 ] || fail "bands should have a header and 31 years"
# 3 thresholds x 31 years, and 2 windows x 3 declines.
[ "$(wc -l <"$out/forecast_quasi_extinction.csv")" -eq 94 ] || fail "quasi-extinction table has the wrong length"
[ "$(wc -l <"$out/forecast_declines.csv")" -eq 7 ] || fail "declines table has the wrong length"
bands_flat "$out/forecast_bands.csv" 0 "" 500 || fail "year 0 of the bands is not the start"
lf "$out/forecast_declines.csv" | grep -q '^24,0.5,' || fail "the extra decline window is missing"
lf "$out/forecast_quasi_extinction.csv" | grep -q '^30,,20%,' || fail "the relative threshold is missing"
[ -z "$(ls "$out" | grep -v '\.csv$')" ] || fail "stray files left in the output folder: $(ls "$out")"
for phrase in "not a formal status listing" "responsible authority" "model-based probabilities" \
              "Quasi-extinction" "Decline"; do
  grep -q "$phrase" "$tmp/stdout" || fail "output lacks '$phrase'"
done

# The same seed gives the same tables.
"$TALLYFIT" forecast --fixed r=-0.02,sigma=0.1 --start 500 --years 30 --runs 500 --threshold 50,100,20% \
  --decline-window 24 --seed 3 -o "$tmp/again" -q >/dev/null 2>&1 || fail "the repeat run failed"
cmp -s "$out/forecast_quasi_extinction.csv" "$tmp/again/forecast_quasi_extinction.csv" || fail "same seed, other numbers"

# --quiet still prints the cautions, and nothing else of the summary.
"$TALLYFIT" forecast --fixed r=0.01,sigma=0.2 --start 80 -o "$tmp/quiet" --quiet >"$tmp/stdout" 2>&1 ||
  fail "quiet run failed"
grep -q "not a formal status listing" "$tmp/stdout" || fail "--quiet dropped the cautions"
grep -q "Quasi-extinction" "$tmp/stdout" && fail "--quiet printed the summary"

# --help succeeds and names the options.
"$TALLYFIT" forecast --help >"$tmp/help" 2>&1 || fail "--help failed"
grep -q -- "--fixed" "$tmp/help" && grep -q -- "--threshold" "$tmp/help" || fail "--help lacks the options"
"$TALLYFIT" --help | grep -q '^  forecast ' || fail "forecast is not listed by tallyfit --help"

# Bad command lines: exit 2, a message with a hint or reason, and no output folder.
bad() {  # description, arguments...
  local what=$1; shift
  local dir="$tmp/bad"
  "$TALLYFIT" forecast "$@" -o "$dir" >"$tmp/stdout" 2>"$tmp/stderr"
  local rc=$?
  [ "$rc" -eq 2 ] || fail "$what: exit $rc, expected 2"
  [ -s "$tmp/stderr" ] || fail "$what: no message"
  [ -e "$dir" ] && { fail "$what: left $dir behind"; rm -rf "$dir"; }
}
ok_fixed=(--fixed r=-0.02,sigma=0.1 --start 500)
bad "unknown option" "${ok_fixed[@]}" --frobnicate
grep -q "hint: run 'tallyfit forecast --help'" "$tmp/stderr" || fail "unknown option gives no hint"
bad "missing value" "${ok_fixed[@]}" --years
bad "zero years" "${ok_fixed[@]}" --years 0
bad "years not a number" "${ok_fixed[@]}" --years ten
bad "fractional window" "${ok_fixed[@]}" --decline-window 2.5
bad "zero runs" "${ok_fixed[@]}" --runs 0
bad "negative seed" "${ok_fixed[@]}" --seed -4
bad "zero threshold" "${ok_fixed[@]}" --threshold 0
bad "threshold not a number" "${ok_fixed[@]}" --threshold 50,lots
bad "percentage above 100" "${ok_fixed[@]}" --threshold 120%
bad "negative start" --fixed r=0,sigma=0.1 --start -5
bad "no start and no survey" --fixed r=0,sigma=0.1
bad "sigma missing" --fixed r=0 --start 100
bad "unknown parameter" --fixed r=0,sigma=0.1,zeta=3 --start 100
bad "parameter twice" --fixed r=0,r=1,sigma=0.1 --start 100
bad "value not a number" --fixed r=fast,sigma=0.1 --start 100
bad "negative sigma" --fixed r=0,sigma=-0.1 --start 100
bad "unknown model" --model nosuchmodel --fixed r=0,sigma=0.1 --start 100
bad "two survey files" "${ok_fixed[@]}" a.csv b.csv
bad "average with fixed" "${ok_fixed[@]}" --average
bad "no fixed parameters" --start 100
grep -q "sampler" "$tmp/stderr" || fail "posterior projection should say it needs the sampler"

# From a survey: the last surveyed count / effort is the start (trailing years without a count are
# skipped), the calendar year of year 0 is that survey year, and the default folder is
# output/<survey name>/ below the working directory.
mkdir -p "$tmp/cwd"
(cd "$tmp/cwd" && "$TALLYFIT" forecast "$repo/tests/data/good/leading-trailing-na.csv" --fixed r=0,sigma=0.1 \
   --years 5 --runs 100) >"$tmp/stdout" 2>"$tmp/stderr" || fail "survey run failed: $(cat "$tmp/stderr")"
sv="$tmp/cwd/output/leading-trailing-na"
bands_flat "$sv/forecast_bands.csv" 0 2004 9 2>/dev/null || fail "survey start is not 9 in 2004"
lf "$sv/forecast_quasi_extinction.csv" 2>/dev/null | grep -q '^5,2009,' || fail "calendar years do not run on"
grep -q "last surveyed count" "$tmp/stdout" || fail "the survey start is not announced"
# Several populations: one must be chosen; the folder then names it.
(cd "$tmp/cwd" && "$TALLYFIT" forecast "$repo/tests/data/good/multi-pop.csv" --fixed r=0,sigma=0.1 -q) \
  >/dev/null 2>"$tmp/stderr"
[ $? -eq 2 ] || fail "several populations without --population should exit 2"
grep -q "'west'" "$tmp/stderr" || fail "the populations are not listed"
[ -e "$tmp/cwd/output/multi-pop" ] && fail "a refused run created output/multi-pop"
(cd "$tmp/cwd" && "$TALLYFIT" forecast "$repo/tests/data/good/multi-pop.csv" --population east \
   --fixed r=0,sigma=0.1 --runs 100 -q) >/dev/null 2>&1 || fail "--population east failed"
bands_flat "$tmp/cwd/output/multi-pop/east/forecast_bands.csv" 0 2004 198 2>/dev/null ||
  fail "population east does not start from 198 in 2004"
# Last count zero (south, 2002): cannot start on the log scale; --start overrides.
"$TALLYFIT" forecast "$repo/tests/data/good/multi-pop.csv" --population south --fixed r=0,sigma=0.1 \
  -o "$tmp/south" -q >/dev/null 2>&1
[ $? -eq 1 ] || fail "a zero last count should exit 1"
[ -e "$tmp/south" ] && fail "the zero-count run left $tmp/south"
"$TALLYFIT" forecast "$repo/tests/data/good/multi-pop.csv" --population south --start 4 \
  --fixed r=0,sigma=0.1 --runs 100 -o "$tmp/south" -q >/dev/null 2>&1 || fail "--start did not override"
bands_flat "$tmp/south/forecast_bands.csv" 0 2002 4 2>/dev/null || fail "--start 4 not used"
"$TALLYFIT" forecast "$tmp/no-such.csv" --fixed r=0,sigma=0.1 -o "$tmp/nosurvey" -q >/dev/null 2>&1
[ $? -eq 3 ] || fail "a missing survey file should exit 3"
bad "population without survey" --fixed r=0,sigma=0.1 --start 5 --population east
bad "unknown population" "$repo/tests/data/good/multi-pop.csv" --fixed r=0,sigma=0.1 --population north

# A failure after the folder exists: a folder where a table should go makes the group fail before
# anything is renamed; exit 1, the earlier tables keep their content and no temporary file remains.
"$TALLYFIT" forecast "${ok_fixed[@]}" --seed 3 -o "$tmp/clash" -q >/dev/null 2>&1 || fail "first run for the clash failed"
cp "$tmp/clash/forecast_bands.csv" "$tmp/bands.before"
rm "$tmp/clash/forecast_declines.csv"
mkdir "$tmp/clash/forecast_declines.csv"
"$TALLYFIT" forecast "${ok_fixed[@]}" --seed 4 -o "$tmp/clash" -q >/dev/null 2>"$tmp/stderr"
rc=$?
[ "$rc" -eq 1 ] || fail "write failure: exit $rc, expected 1"
grep -q "forecast_declines.csv" "$tmp/stderr" || fail "write failure does not name the file"
[ "$(ls -A "$tmp/clash" | tr '\n' ' ')" = "forecast_bands.csv forecast_declines.csv forecast_quasi_extinction.csv " ] ||
  fail "write failure left: $(ls -A "$tmp/clash")"
cmp -s "$tmp/clash/forecast_bands.csv" "$tmp/bands.before" || fail "write failure changed an earlier table"
# An output path through a file: nothing is created.
: >"$tmp/plainfile"
"$TALLYFIT" forecast "${ok_fixed[@]}" -o "$tmp/plainfile/sub" -q >/dev/null 2>&1
[ $? -eq 1 ] || fail "output below a file should fail with exit 1"

# Ctrl-C during a long projection: exit 130 and no tables. A background job of a non-interactive
# shell starts with SIGINT ignored until the command installs its handler, so the signal is
# repeated until the process ends (a run this long would otherwise take minutes).
"$TALLYFIT" forecast --fixed r=0,sigma=0.1 --start 100 --runs 5000000 --years 1000 -o "$tmp/int" -q \
  >/dev/null 2>&1 &
pid=$!
for _ in $(seq 100); do
  sleep 0.2
  kill -INT "$pid" 2>/dev/null || break
done
kill -KILL "$pid" 2>/dev/null && fail "interrupted run did not stop"
wait "$pid"
rc=$?
[ "$rc" -eq 130 ] || fail "interrupted run: exit $rc, expected 130"
[ -e "$tmp/int" ] && fail "interrupted run left $(ls -A "$tmp/int")"

[ "$fails" -eq 0 ]
