#!/usr/bin/env bash
# End-to-end test of `tallyfit analyze`: every demo survey (the multi-population one too) with
# short settings, the files it writes, the same CSV tables whatever the thread count, exit codes
# of bad command lines and unusable surveys (nothing written), the survey never overwritten, and
# Ctrl-C (SIGINT) leaving nothing behind.
set -u
cd "$(dirname "$0")/../.."
T=${TALLYFIT:?TALLYFIT must name the binary}
fail=0
bad() { echo "analyze.sh: $*" >&2; fail=1; }
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
# Short settings: this test is about files and exit codes, not convergence; a fixed particle
# count keeps every run short.
FAST=(--iterations 480 --warmup 100 --draws 150 --particles 100 --years 30)
# Under valgrind everything runs some 50 times slower on one core: shorter still there (the
# warm-up stays long enough for every candidate's pilot to start a chain, compare.sh), two growth
# models instead of three, and the reruns that check output options and thread-count invariance
# (no memory questions; the native and sanitizer runs check them) are left out.
slow=${TF_VALGRIND:-}
[ -n "$slow" ] && FAST=(--chains 2 --iterations 60 --thin 1 --warmup 120 --draws 100 --particles 50 --runs 500
                       --years 30 --model exponential,ricker)
export SOURCE_DATE_EPOCH=1700000000

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

# Every file named in contents.csv exists, every CSV file of the folder and of its population
# folders is named there, and every CSV header follows the convention of docs/tables.md: snake_case
# names, population first.
contents_complete() {
  /usr/bin/python3 - "$1" <<'PY'
import csv, os, re, sys
d = sys.argv[1]
rows = list(csv.reader(open(os.path.join(d, "contents.csv"), newline="")))
named = {r[1] for r in rows[1:]}
have = set()
for root, dirs, files in os.walk(d):
    for f in files:
        if f.endswith(".csv"):
            have.add(os.path.relpath(os.path.join(root, f), d))
have -= {"contents.csv"}
missing, extra = named - have, have - named
bad_headers = []
for f in have | {"contents.csv"}:
    head = next(csv.reader(open(os.path.join(d, f), newline="")))
    if head[0] != "population" or not all(re.fullmatch(r"[a-z][a-z0-9_]*", h) for h in head):
        bad_headers.append((f, head[:4]))
if missing or extra or bad_headers or rows[0] != ["population", "file", "sheet", "about"]:
    print("missing", sorted(missing), "extra", sorted(extra), "bad headers", bad_headers)
    sys.exit(1)
PY
}

for f in surveys/*.csv; do
  name=$(basename "$f" .csv)
  out="$tmp/out-$name"
  "$T" analyze "$f" -o "$out" --threads 2 "${FAST[@]}" >"$tmp/stdout" 2>"$tmp/stderr"; rc=$?
  if [ $rc -ne 0 ]; then bad "$f: exit $rc, want 0"; cat "$tmp/stderr" >&2; continue; fi
  [ -s "$out/$name.xlsx" ] || bad "$f: no workbook $out/$name.xlsx"
  [ -f "$out/contents.csv" ] || { bad "$f: no contents.csv"; continue; }
  contents_complete "$out" || bad "$f: contents.csv and the CSV files disagree"
  grep -qF "workbook: $out/$name.xlsx" "$tmp/stdout" || bad "$f: stdout does not name the workbook"
  ls -a "$out" | grep -q '\.tmp-' && bad "$f: temporary files left behind"
  mapfile -t want < <(labels "$f")
  n=${#want[@]}
  rows=$(($(wc -l <"$out/populations.csv") - 1))
  [ "$rows" -eq "$n" ] || bad "$f: populations.csv has $rows rows, want $n"
  [ -f "$out/summary.csv" ] || bad "$f: no summary.csv"
  roles="abundance projection risk declines models change parameters diagnostics chains draws"
  if [ "$n" -gt 1 ]; then
    for lab in "${want[@]}"; do
      for role in $roles; do
        [ -f "$out/$lab/$role.csv" ] || bad "$f: no $lab/$role.csv"
      done
      grep -qx "$lab" "$tmp/stdout" || bad "$f: stdout has no block for $lab"
    done
  else
    for role in $roles; do
      [ -f "$out/$role.csv" ] || bad "$f: no $role.csv"
    done
  fi
  grep -q "not a formal status listing" "$tmp/stdout" || bad "$f: the caution is not printed"
  [ "$(grep -c "best-supported growth model:" "$tmp/stdout")" -eq "$n" ] || bad "$f: not one best model line per population"
  # Standard error is a file here, not a terminal: still one plain line per finished model, with
  # the population, the model and its seconds (2 growth models x 1 or 2 counting-error models).
  for lab in "${want[@]}"; do
    [ -n "$lab" ] || lab=$name
    k=$(grep -cE "^$lab: (exponential|ricker)\+[a-z-]+ (done|failed) in [0-9]+\.[0-9] s\$" "$tmp/stderr")
    [ "$k" -eq 2 ] || [ "$k" -eq 4 ] || bad "$f: $k progress lines for '$lab' on stderr, want 2 or 4: $(head -c 300 "$tmp/stderr")"
  done
done
if [ -z "$slow" ]; then
  "$T" analyze surveys/heron-colony.csv -o "$tmp/quiet" --quiet --threads 2 "${FAST[@]}" >"$tmp/stdout" 2>&1 || bad "--quiet failed"
  [ -s "$tmp/stdout" ] && bad "--quiet printed: $(head -c 200 "$tmp/stdout")"
  [ -s "$tmp/quiet/heron-colony.xlsx" ] || bad "--quiet wrote no workbook"
fi

# The raw draws stay out of the workbook unless --workbook-draws: by default the workbook has no
# draws sheet, while draws.csv is written and contents.csv lists it with no sheet; with the option
# the sheet is back. Sheet names read with openpyxl (Debian's python3-openpyxl).
sheet_names() {
  /usr/bin/python3 -c 'import openpyxl, sys; print("\n".join(openpyxl.load_workbook(sys.argv[1], read_only=True).sheetnames))' "$1"
}
if [ -z "$slow" ]; then
  "$T" analyze surveys/heron-colony.csv -o "$tmp/wd0" -q --threads 2 "${FAST[@]}" || bad "analyze (draws as CSV only) failed"
  "$T" analyze surveys/heron-colony.csv -o "$tmp/wd1" -q --threads 2 --workbook-draws "${FAST[@]}" ||
    bad "analyze --workbook-draws failed"
  sheet_names "$tmp/wd0/heron-colony.xlsx" >"$tmp/names0" || bad "cannot read the default workbook"
  sheet_names "$tmp/wd1/heron-colony.xlsx" >"$tmp/names1" || bad "cannot read the --workbook-draws workbook"
  grep -qx "Abundance" "$tmp/names0" || bad "default workbook: no Abundance sheet: $(tr '\n' ' ' <"$tmp/names0")"
  grep -qx "Draws" "$tmp/names0" && bad "default workbook has a Draws sheet"
  grep -qx "Draws" "$tmp/names1" || bad "--workbook-draws: no Draws sheet: $(tr '\n' ' ' <"$tmp/names1")"
  for d in wd0 wd1; do
    [ "$(wc -l <"$tmp/$d/draws.csv")" -gt 100 ] || bad "$d: draws.csv missing or short"
  done
  grep -q '^heron-colony,draws\.csv,,' "$tmp/wd0/contents.csv" || bad "default contents.csv does not list draws.csv as CSV only"
  grep -q '^heron-colony,draws\.csv,Draws,' "$tmp/wd1/contents.csv" || bad "--workbook-draws: contents.csv lacks the Draws sheet"
  grep -q 'CSV only: draws\.csv in the folder of this workbook' "$tmp/wd0/summary.csv" ||
    bad "the first page does not say where the draws are"
  # The same draws either way: only where they are shown changes.
  cmp -s "$tmp/wd0/draws.csv" "$tmp/wd1/draws.csv" || bad "--workbook-draws changed draws.csv"
fi

# An index that is not a whole count: refused unless --estimates says so, and then only the
# continuous log-normal counting error is compared, and the first page says why.
"$T" analyze tests/data/analyze/index.csv -o "$tmp/frac" -q "${FAST[@]}" >/dev/null 2>"$tmp/stderr"; rc=$?
[ $rc -eq 3 ] || bad "index.csv without --estimates: exit $rc, want 3"
grep -qF "is not a whole number" "$tmp/stderr" || bad "index.csv without --estimates: $(head -n 2 "$tmp/stderr")"
grep -qF -- "--estimates" "$tmp/stderr" || bad "index.csv without --estimates: the hint does not name --estimates"
[ -e "$tmp/frac" ] && bad "index.csv without --estimates: something was written"
"$T" analyze tests/data/analyze/index.csv --estimates -o "$tmp/frac" -q --threads 2 "${FAST[@]}" 2>"$tmp/stderr" ||
  { bad "index.csv: exit $?"; cat "$tmp/stderr" >&2; }
if [ -f "$tmp/frac/models.csv" ]; then
  grep -q '+lognormal,.*,fitted,' "$tmp/frac/models.csv" || bad "index.csv: no log-normal model fitted"
  grep -q '+poisson,.*,fitted,' "$tmp/frac/models.csv" && bad "index.csv: a count model was fitted to fractions"
  grep -qF ",Counts,\"read as estimates (--estimates), not whole counts\",so only counting-error models of continuous" \
    "$tmp/frac/summary.csv" || bad "index.csv: the first page does not say the counts are estimates"
else
  bad "index.csv: no models.csv"
fi
# Fractions with a zero suit no counting-error model: exit 3 and nothing written.
"$T" analyze tests/data/good/fractional.csv --estimates -o "$tmp/frac0" "${FAST[@]}" >/dev/null 2>"$tmp/stderr"; rc=$?
[ $rc -eq 3 ] || bad "fractional.csv (a zero among fractions): exit $rc, want 3"
grep -q "no candidate counting-error model suits the counts" "$tmp/stderr" || bad "fractional.csv: stderr does not say why"
[ -e "$tmp/frac0" ] && bad "fractional.csv: something was written"

# A count far from its neighbours (a typed extra zero): warned about before the fits, listed
# among the first page's cautions with its line, and fitted as it is.
"$T" analyze tests/data/good/outlier-extra-zero.csv -o "$tmp/outlier" --model exponential --obs poisson "${FAST[@]}" \
  >/dev/null 2>"$tmp/stderr" || bad "outlier: exit $?"
grep -qF "tallyfit analyze: warning: tests/data/good/outlier-extra-zero.csv:18: year 2010: count 3390 is 9.3 times" \
  "$tmp/stderr" || bad "outlier: no warning: $(head -c 300 "$tmp/stderr")"
grep -qF "Count to check,year 2010: count 3390 is 9.3 times the median of the neighbouring years (362.2),line 18 of the survey file" \
  "$tmp/outlier/summary.csv" || bad "outlier: not among the first page's cautions"
grep -q '^outlier-extra-zero,average,2010,3390,' "$tmp/outlier/abundance.csv" || bad "outlier: the count was not kept as it is"

# One population of several, and the same tables for 1 and 2 threads (except the seconds each
# fit took, a wall-clock time).
threads=(1 2)
[ -n "$slow" ] && threads=(2)
for t in "${threads[@]}"; do
  "$T" analyze surveys/three-herds.csv --population river-flats -o "$tmp/t$t" -q --threads $t "${FAST[@]}" ||
    bad "--population river-flats --threads $t: exit $?"
done
# Chosen from several, the population keeps its folder, as it would among the others.
one=$tmp/t${threads[0]}
[ "$(($(wc -l <"$one/populations.csv") - 1))" -eq 1 ] || bad "--population: not one population"
[ -f "$one/river-flats/draws.csv" ] || bad "--population: no river-flats/draws.csv"
ls "$one" | grep -q '^north-valley' && bad "--population: other populations written"
if [ ${#threads[@]} -eq 2 ]; then
  for f in "$tmp/t1"/*.csv "$tmp/t1"/river-flats/*.csv; do
    b=${f#"$tmp/t1/"}
    if [[ $b == *diagnostics.csv ]]; then
      /usr/bin/python3 - "$f" "$tmp/t2/$b" <<'PY' || bad "$b differs between 1 and 2 threads"
import csv, sys
a, b = (list(csv.reader(open(p, newline=""))) for p in sys.argv[1:])
k = a[0].index("seconds")
strip = lambda rows: [r[:k] + r[k + 1:] for r in rows]
sys.exit(strip(a) != strip(b))
PY
    else
      cmp -s "$f" "$tmp/t2/$b" || bad "$b differs between 1 and 2 threads"
    fi
  done
fi

# Bad command lines: exit 2, nothing written.
usage() {  # expected phrase, arguments...
  local phrase=$1; shift
  "$T" analyze "$@" >"$tmp/stdout" 2>"$tmp/stderr"; local rc=$?
  [ $rc -eq 2 ] || bad "analyze $*: exit $rc, want 2"
  grep -qF -- "$phrase" "$tmp/stderr" || bad "analyze $*: stderr lacks '$phrase': $(head -c 300 "$tmp/stderr")"
  [ -s "$tmp/stdout" ] && bad "analyze $*: printed on stdout"
}
usage "no survey file given" -o "$tmp/u"
usage "unknown model 'logistic'" surveys/heron-colony.csv --model logistic -o "$tmp/u"
usage "unknown model 'gauss'" surveys/heron-colony.csv --obs gauss -o "$tmp/u"
usage "threshold 'abc' is not a number" surveys/heron-colony.csv --threshold 50,abc -o "$tmp/u"
usage "--years" surveys/heron-colony.csv --years 0 -o "$tmp/u"
usage "needs a survey file" - -o "$tmp/u"
usage "unexpected argument" surveys/heron-colony.csv extra -o "$tmp/u"
usage "no population named 'south'" surveys/three-herds.csv --population south -o "$tmp/u" "${FAST[@]}"
[ -e "$tmp/u" ] && bad "a bad command line wrote $tmp/u"
"$T" analyze --help | grep -q "usage: tallyfit analyze" || bad "--help does not print the usage"

# A survey that fails validation: exit 3, the problem on stderr, nothing written.
for f in tests/data/bad/negative-count.csv tests/data/bad/too-few-years.csv; do
  "$T" analyze "$f" -o "$tmp/v" "${FAST[@]}" >"$tmp/stdout" 2>"$tmp/stderr"; rc=$?
  [ $rc -eq 3 ] || bad "$f: exit $rc, want 3"
  grep -q "$f:[0-9]*" "$tmp/stderr" || bad "$f: stderr does not name the file and line"
  [ -e "$tmp/v" ] && bad "$f: something was written"
done

# The survey is never written over: a workbook name that is a link to the survey is refused
# before any work is done, and the survey stays as it was.
mkdir -p "$tmp/p"
cp surveys/heron-colony.csv "$tmp/p/colony.csv"
ln -s colony.csv "$tmp/p/colony.xlsx"
"$T" analyze "$tmp/p/colony.csv" -o "$tmp/p" "${FAST[@]}" >/dev/null 2>"$tmp/stderr"; rc=$?
[ $rc -eq 2 ] || bad "workbook onto the survey: exit $rc, want 2"
cmp -s "$tmp/p/colony.csv" surveys/heron-colony.csv || bad "the survey was changed"
[ -e "$tmp/p/summary.csv" ] && bad "CSV tables written although the workbook was refused"

# An output folder that cannot be made: exit 1, nothing written.
touch "$tmp/file"
"$T" analyze surveys/heron-colony.csv -o "$tmp/file/out" "${FAST[@]}" >/dev/null 2>"$tmp/stderr"; rc=$?
[ $rc -eq 1 ] || bad "output under a file: exit $rc, want 1"

# SIGINT (Ctrl-C) and SIGTERM: exit 130 within a few seconds, no workbook, no CSV folder, no
# temporary file. The run gets enough work (the default sampler settings, three populations) to
# be still fitting when the signal arrives.
# Under valgrind the program needs a few seconds to get going, and its exit (the leak check)
# takes longer: the signal comes later and may take longer to act on; the native run checks the
# 3 s.
wait_s=1 limit_ms=3000
[ -n "$slow" ] && wait_s=8 limit_ms=20000
for sig in INT TERM; do
  "$T" analyze surveys/three-herds.csv -o "$tmp/int-$sig" --threads 2 >/dev/null 2>"$tmp/stderr" &
  pid=$!
  sleep $wait_s
  if ! kill -0 $pid 2>/dev/null; then bad "SIG$sig: analyze ended before the signal"; wait $pid; continue; fi
  t0=$(date +%s%3N)
  kill -$sig $pid
  wait $pid; rc=$?
  ms=$(($(date +%s%3N) - t0))
  [ $rc -eq 130 ] || bad "SIG$sig: exit $rc, want 130"
  # The chains poll every iteration; 3 s leaves room for the sanitizers and a busy machine.
  [ $ms -le $limit_ms ] || bad "SIG$sig: took $ms ms to stop"
  grep -q "interrupted" "$tmp/stderr" || bad "SIG$sig: no message"
  [ -e "$tmp/int-$sig" ] && [ -n "$(ls -A "$tmp/int-$sig")" ] && bad "SIG$sig: files left: $(ls -A "$tmp/int-$sig")"
done

# The comparison's options are analyze's too (cmd/args.h): prior model weights reach the models
# table, and a weight for a model that is not a candidate is refused before any fit.
"$T" analyze surveys/heron-colony.csv -o "$tmp/weights" -q --threads 2 "${FAST[@]}" --model exponential,ricker \
  --obs poisson --model-weights ricker=3 2>/dev/null || bad "--model-weights: analyze failed"
/usr/bin/python3 - "$tmp/weights/models.csv" <<'PY' || bad "--model-weights: prior weights not 0.25 / 0.75"
import csv, sys
rows = {r["model"]: r for r in csv.DictReader(open(sys.argv[1], newline=""))}
sys.exit(0 if abs(float(rows["exponential+poisson"]["prior_prob"]) - 0.25) < 1e-12 and
         abs(float(rows["ricker+poisson"]["prior_prob"]) - 0.75) < 1e-12 else 1)
PY
usage "--model-weights: 'gompertz' names no candidate model" surveys/heron-colony.csv --model ricker \
  --model-weights gompertz=2 -o "$tmp/u"
[ -e "$tmp/u" ] && bad "a refused --model-weights wrote $tmp/u"

exit $fail
