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
  grep -q "^$p:$line:" "$tmp/err" || bad "$p: stderr does not name $p:$line: $(head -n 1 "$tmp/err")"
  grep -qF -- "$phrase" "$tmp/err" || bad "$p: stderr lacks '$phrase'"
  grep -q '^  hint: ' "$tmp/err" || bad "$p: no hint"
done <tests/data/bad/EXPECT
[ $n_bad -ge 30 ] || bad "only $n_bad bad files"

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
grep -qF "see 'tallyfit check --help'" "$tmp/err" || bad "unknown option: no hint"
"$T" check -z surveys/heron-colony.csv 2>/dev/null; [ $? -eq 2 ] || bad "unknown short option: want exit 2"
"$T" check 2>/dev/null; [ $? -eq 2 ] || bad "no file: want exit 2"
"$T" check surveys/heron-colony.csv surveys/three-herds.csv 2>/dev/null; [ $? -eq 2 ] || bad "two files: want exit 2"
"$T" check "$tmp/none.csv" 2>"$tmp/err"; rc=$?
[ $rc -eq 3 ] || bad "missing file: exit $rc, want 3"
grep -qF "$tmp/none.csv: error: cannot open the survey file: No such file or directory" "$tmp/err" ||
  bad "missing file: $(cat "$tmp/err")"
"$T" --help | grep -q '^  check ' || bad "tallyfit --help does not list check"

[ $fail -eq 0 ] && echo "check.sh: all passed"
exit $fail
