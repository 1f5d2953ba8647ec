#!/usr/bin/env bash
# End-to-end checks of `tallyfit forecast`: first the fixed-parameter form (the tables and their
# headers, the cautions, bad command lines fail with exit 2 and leave no files, atomic writes,
# Ctrl-C), then projections from a posterior (--model) and model-averaged ones (--average) on
# every demo survey: the tables, the cautions in the output and in the CSV files, the
# properties every quasi-extinction curve has, --average over one model giving that model's
# projection, --start as a what-if, and their bad command lines.
set -uo pipefail
: "${TALLYFIT:?TALLYFIT must name the binary}"
repo=$(cd "$(dirname "$0")/../.." && pwd)
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
fails=0
fail() { echo "forecast.sh: $*" >&2; fails=$((fails + 1)); }
# The tables end their lines with CRLF (RFC 4180); lf FILE gives the lines without the CR.
lf() { tr -d '\r' <"$1"; }
# bands_flat FILE YEAR CALENDAR VALUE: the projection row YEAR years ahead has calendar year
# CALENDAR ("" = none) and all five bands equal VALUE to 1e-12 relative. The CSV holds exact
# doubles, and the start goes through log and exp on the way, which moves it by a few units in the
# last place. Columns: population,model,years_ahead,year,unit, then the five bands.
bands_flat() {
  lf "$1" | awk -F, -v y="$2" -v c="$3" -v v="$4" '
    NR > 1 && $3 == y { found = 1; ok = ($4 == c && NF == 10)
      for (i = 6; i <= 10; i++) { d = $i - v; if (d < 0) d = -d; if (d > 1e-12 * v) ok = 0 } }
    END { exit !(found && ok) }'
}

# A good run: three tables with their headers, one row per year (t = 0..H) for the bands.
out="$tmp/good"
if ! "$TALLYFIT" forecast --parameter r=-0.02,sigma=0.1 --start 500 --years 30 --runs 500 \
     --threshold 50,100,20% --decline-window 24 --seed 3 -o "$out" >"$tmp/stdout" 2>"$tmp/stderr"; then
  fail "a good run failed: $(cat "$tmp/stderr")"
fi
expect_header() {  # file, header
  [ -f "$out/$1" ] || { fail "$1 was not written"; return; }
  [ "$(lf "$out/$1" | head -n 1)" = "$2" ] || fail "$1 header is '$(lf "$out/$1" | head -n 1)'"
}
expect_header projection.csv "population,model,years_ahead,year,unit,median,lower_50,upper_50,lower_95,upper_95"
expect_header risk.csv "population,model,threshold,threshold_kind,years_ahead,year,probability,probability_mcse"
expect_header declines.csv "population,model,window_years,decline,probability,probability_mcse"
[ "$(wc -l <"$out/projection.csv")" -eq 32 ] || fail "bands should have a header and 31 years"
# 3 thresholds x 31 years, and 2 windows x 3 declines.
[ "$(wc -l <"$out/risk.csv")" -eq 94 ] || fail "quasi-extinction table has the wrong length"
[ "$(wc -l <"$out/declines.csv")" -eq 7 ] || fail "declines table has the wrong length"
bands_flat "$out/projection.csv" 0 "" 500 || fail "year 0 of the bands is not the start"
# Without a survey there is no population: the column is blank; the model is 'fixed'.
lf "$out/declines.csv" | grep -q '^,fixed,24,0.5,' || fail "the extra decline window is missing"
# A threshold is a number and its kind: 20% is 0.2 of the current abundance.
lf "$out/risk.csv" | grep -q '^,fixed,0.2,fraction_of_current,30,,' || fail "the relative threshold is missing"
[ -z "$(ls "$out" | grep -v '\.csv$')" ] || fail "stray files left in the output folder: $(ls "$out")"
# The summary table says what was projected and carries every caution, the fixed-value one too.
expect_header summary.csv "population,item,value,note"
for phrase in "fixed parameter values" "not a formal status listing" "responsible authority" \
              "model-based probabilities" "fixed by hand"; do
  lf "$out/summary.csv" | grep -q "$phrase" || fail "summary.csv lacks '$phrase'"
done
for phrase in "not a formal status listing" "responsible authority" "model-based probabilities" \
              "Quasi-extinction" "Decline"; do
  grep -q "$phrase" "$tmp/stdout" || fail "output lacks '$phrase'"
done

# The same seed gives the same tables.
"$TALLYFIT" forecast --parameter r=-0.02,sigma=0.1 --start 500 --years 30 --runs 500 --threshold 50,100,20% \
  --decline-window 24 --seed 3 -o "$tmp/again" -q >/dev/null 2>&1 || fail "the repeat run failed"
cmp -s "$out/risk.csv" "$tmp/again/risk.csv" || fail "same seed, other numbers"

# --quiet means what it means in every command: no progress and no summary (the cautions
# printed under it included); the cautions stay in summary.csv.
"$TALLYFIT" forecast --parameter r=0.01,sigma=0.2 --start 80 -o "$tmp/quiet" --quiet >"$tmp/stdout" 2>&1 ||
  fail "quiet run failed"
[ -s "$tmp/stdout" ] && fail "--quiet printed: $(head -c 200 "$tmp/stdout")"
grep -q "not a formal status listing" "$tmp/quiet/summary.csv" || fail "--quiet: the summary file lacks the cautions"

# --help succeeds and names the options.
"$TALLYFIT" forecast --help >"$tmp/help" 2>&1 || fail "--help failed"
grep -q -- "--parameter" "$tmp/help" && grep -q -- "--threshold" "$tmp/help" || fail "--help lacks the options"
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
ok_fixed=(--parameter r=-0.02,sigma=0.1 --start 500)
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
bad "negative start" --parameter r=0,sigma=0.1 --start -5
bad "no start and no survey" --parameter r=0,sigma=0.1
bad "sigma missing" --parameter r=0 --start 100
bad "unknown parameter" --parameter r=0,sigma=0.1,zeta=3 --start 100
bad "parameter twice" --parameter r=0,r=1,sigma=0.1 --start 100
bad "value not a number" --parameter r=fast,sigma=0.1 --start 100
bad "negative sigma" --parameter r=0,sigma=-0.1 --start 100
bad "unknown model" --model nosuchmodel --parameter r=0,sigma=0.1 --start 100
bad "two survey files" "${ok_fixed[@]}" a.csv b.csv
bad "average with fixed" "${ok_fixed[@]}" --average
bad "nothing to project from" --start 100
grep -q -- "--model M" "$tmp/stderr" && grep -q -- "--average" "$tmp/stderr" && grep -q -- "--parameter" "$tmp/stderr" ||
  fail "with no source the message should name --model, --average and --parameter"
bad "a sampler option with --parameter" "${ok_fixed[@]}" --chains 2
grep -q -- "--chains" "$tmp/stderr" || fail "the refused sampler option is not named"

# From a survey: the last surveyed count / effort is the start (trailing years without a count are
# skipped), the calendar year of year 0 is that survey year, and the default folder is
# output/<survey name>/ below the working directory.
mkdir -p "$tmp/cwd"
(cd "$tmp/cwd" && "$TALLYFIT" forecast "$repo/tests/data/good/leading-trailing-na.csv" --parameter r=0,sigma=0.1 \
   --years 5 --runs 100) >"$tmp/stdout" 2>"$tmp/stderr" || fail "survey run failed: $(cat "$tmp/stderr")"
sv="$tmp/cwd/output/leading-trailing-na"
bands_flat "$sv/projection.csv" 0 2004 9 2>/dev/null || fail "survey start is not 9 in 2004"
lf "$sv/risk.csv" 2>/dev/null | grep -q '^leading-trailing-na,fixed,[^,]*,[a-z_]*,5,2009,' || fail "calendar years do not run on"
grep -q "last surveyed count" "$tmp/stdout" || fail "the survey start is not announced"
# Several populations: one must be chosen; the folder then names it.
(cd "$tmp/cwd" && "$TALLYFIT" forecast "$repo/tests/data/good/multi-pop.csv" --parameter r=0,sigma=0.1 -q) \
  >/dev/null 2>"$tmp/stderr"
[ $? -eq 2 ] || fail "several populations without --population should exit 2"
grep -q "'west'" "$tmp/stderr" || fail "the populations are not listed"
[ -e "$tmp/cwd/output/multi-pop" ] && fail "a refused run created output/multi-pop"
(cd "$tmp/cwd" && "$TALLYFIT" forecast "$repo/tests/data/good/multi-pop.csv" --population east \
   --parameter r=0,sigma=0.1 --runs 100 -q) >/dev/null 2>&1 || fail "--population east failed"
bands_flat "$tmp/cwd/output/multi-pop/east/projection.csv" 0 2004 198 2>/dev/null ||
  fail "population east does not start from 198 in 2004"
# Last count zero (south, 2002): cannot start on the log scale; --start overrides.
"$TALLYFIT" forecast "$repo/tests/data/good/multi-pop.csv" --population south --parameter r=0,sigma=0.1 \
  -o "$tmp/south" -q >/dev/null 2>&1
[ $? -eq 1 ] || fail "a zero last count should exit 1"
[ -e "$tmp/south" ] && fail "the zero-count run left $tmp/south"
"$TALLYFIT" forecast "$repo/tests/data/good/multi-pop.csv" --population south --start 4 \
  --parameter r=0,sigma=0.1 --runs 100 -o "$tmp/south" -q >/dev/null 2>&1 || fail "--start did not override"
# -o DIR holds one folder per population when the file has several, as with fit.
bands_flat "$tmp/south/south/projection.csv" 0 2002 4 2>/dev/null || fail "--start 4 not used"
"$TALLYFIT" forecast "$tmp/no-such.csv" --parameter r=0,sigma=0.1 -o "$tmp/nosurvey" -q >/dev/null 2>&1
[ $? -eq 3 ] || fail "a missing survey file should exit 3"
bad "population without survey" --parameter r=0,sigma=0.1 --start 5 --population east
bad "unknown population" "$repo/tests/data/good/multi-pop.csv" --parameter r=0,sigma=0.1 --population north

# A failure after the folder exists: a folder where a table should go makes the group fail before
# anything is renamed; exit 1, the earlier tables keep their content and no temporary file remains.
"$TALLYFIT" forecast "${ok_fixed[@]}" --seed 3 -o "$tmp/clash" -q >/dev/null 2>&1 || fail "first run for the clash failed"
cp "$tmp/clash/projection.csv" "$tmp/bands.before"
rm "$tmp/clash/declines.csv"
mkdir "$tmp/clash/declines.csv"
"$TALLYFIT" forecast "${ok_fixed[@]}" --seed 4 -o "$tmp/clash" -q >/dev/null 2>"$tmp/stderr"
rc=$?
[ "$rc" -eq 1 ] || fail "write failure: exit $rc, expected 1"
grep -q "declines.csv" "$tmp/stderr" || fail "write failure does not name the file"
[ "$(ls -A "$tmp/clash" | tr '\n' ' ')" = "declines.csv projection.csv risk.csv summary.csv " ] ||
  fail "write failure left: $(ls -A "$tmp/clash")"
cmp -s "$tmp/clash/projection.csv" "$tmp/bands.before" || fail "write failure changed an earlier table"
# An output path through a file: nothing is created.
: >"$tmp/plainfile"
"$TALLYFIT" forecast "${ok_fixed[@]}" -o "$tmp/plainfile/sub" -q >/dev/null 2>&1
[ $? -eq 1 ] || fail "output below a file should fail with exit 1"

# Ctrl-C during a long projection: exit 130 and no tables. A background job of a non-interactive
# shell starts with SIGINT ignored until the command installs its handler, so the signal is
# repeated until the process ends (a run this long would otherwise take minutes).
"$TALLYFIT" forecast --parameter r=0,sigma=0.1 --start 100 --runs 5000000 --years 1000 -o "$tmp/int" -q \
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


# ---- Projections from a posterior ------------------------------------------------------------------
# Short runs: these checks are about the command, its files and properties that hold for any
# draws, not about convergence (the fits' own tests cover that); a fixed particle count keeps
# each fit short, and the sanitizer runs shorten them again.
if [ -n "${TF_SANITIZE:-}${TF_VALGRIND:-}" ]; then
  FIT=(--iterations 80 --warmup 40 --particles 30 --threads 2 --years 15 --runs 400); DRAWS=(--draws 100)
else
  FIT=(--iterations 400 --warmup 100 --particles 60 --threads 2 --years 20 --runs 2000); DRAWS=(--draws 100)
fi
# Relative thresholds in increasing order, then absolute ones in increasing order; 100% is the
# start itself and 1e6 is above every demo population's abundance.
TH=(--threshold "10%,50%,100%,20,100,1000000")

# check_tables DIR MODE: the four tables of one population. MODE is "model" or "average".
# - quasi-extinction: the probability of having been at or below a threshold by year t is
#   non-decreasing in t (a run that has crossed stays counted) and, at each year, in the threshold
#   (at or below a lower level implies at or below a higher one; relative and absolute
#   thresholds are compared among their own kind); a threshold at or above the current
#   abundance (100 %, 1e6) gives probability 1 at year 0. These follow from the definition of
#   the cumulative first-passage probability (common practice, no source) and hold exactly for
#   any set of simulated runs.
# - se is the binomial standard error sqrt(p (1 - p) / n) with n the simulated futures
#   (the variance of a binomial proportion; any statistics text), to 1e-12.
# - bands are ordered 2.5 % <= 25 % <= median <= 75 % <= 97.5 %.
# - the summary holds every caution, the median time to quasi-extinction that the curve gives,
#   and, for --average, model probabilities summing to 1.
check_tables() {
  /usr/bin/python3 - "$1" "$2" <<'PY'
import csv, math, os, sys
d, mode = sys.argv[1], sys.argv[2]
def rows(name):
    with open(os.path.join(d, name), newline="") as f:
        return list(csv.reader(f))
problems = []
summ = [r[1:] for r in rows("summary.csv")]   # the population column first, then item, value, note
if summ[0] != ["item", "value", "note"]:
    problems.append(f"summary header {summ[0]}")
items = {r[0]: r[1] for r in summ[1:]}
n = int(items.get("Simulated futures", "0"))
if n < 1:
    problems.append("summary lacks the number of simulated futures")
text = " ".join(r[1] for r in summ[1:] if r[0].startswith("Caution"))
for phrase in ("model-based probabilities", "not a formal status listing", "responsible authority"):
    if phrase not in text:
        problems.append(f"summary cautions lack '{phrase}'")
if mode == "average":
    probs = [float(r[1]) for r in summ[1:] if r[0].startswith("P(") and r[1] not in ("failed", "excluded")]
    if not probs or abs(sum(probs) - 1) > 1e-9 or min(probs) < 0:
        problems.append(f"model probabilities {probs} do not sum to 1")
    if items.get("Projected from", "").find("model average") < 0:
        problems.append("summary does not say the projection is model-averaged")
else:
    if "Model" not in items or int(items.get("Posterior draws", "0")) < 1:
        problems.append("summary lacks the model or the number of posterior draws")
qe = rows("risk.csv")
if qe[0] != ["population", "model", "threshold", "threshold_kind", "years_ahead", "year", "probability",
             "probability_mcse"]:
    problems.append(f"quasi-extinction header {qe[0]}")
def label(value, kind):
    """The threshold as the command line and the summary write it: 20 animals, or 10%."""
    v = float(value)
    if kind == "fraction_of_current":
        return f"{round(v * 100, 9):g}%"
    return str(int(v)) if v.is_integer() else repr(v)
curve = {}
for r in qe[1:]:
    t, th, p, se = int(r[4]), label(r[2], r[3]), float(r[6]), float(r[7])
    curve.setdefault(th, {})[t] = p
    if not 0 <= p <= 1 or abs(se - math.sqrt(p * (1 - p) / n)) > 1e-12:
        problems.append(f"threshold {th} year {t}: p {p} se {se} for {n} runs")
labels = list(curve)
if labels != ["10%", "50%", "100%", "20", "100", "1000000"]:
    problems.append(f"thresholds {labels}")
years = sorted(curve[labels[0]])
for th in labels:
    c = curve[th]
    if sorted(c) != years:
        problems.append(f"threshold {th} has other years")
    for a, b in zip(years, years[1:]):
        if c[b] < c[a]:
            problems.append(f"threshold {th}: risk falls from {c[a]} (year {a}) to {c[b]} (year {b})")
for group in (labels[:3], labels[3:]):
    for lo, hi in zip(group, group[1:]):
        for t in years:
            if curve[hi][t] < curve[lo][t]:
                problems.append(f"year {t}: risk below {hi} ({curve[hi][t]}) < below {lo} ({curve[lo][t]})")
for th in ("100%", "1000000"):
    if curve[th][0] != 1.0:
        problems.append(f"threshold {th} at year 0: {curve[th][0]}, want 1")
# The median time to quasi-extinction in the summary is the first year with a risk of 0.5 or more.
for th in labels:
    want = next((str(t) for t in years if curve[th][t] >= 0.5), "not reached")
    if items.get(f"Threshold {th}") != want:
        problems.append(f"median time for {th}: {items.get(f'Threshold {th}')}, the curve says {want}")
if not any(0 < curve["50%"][t] for t in years):
    problems.append("the 50 % threshold is never reached: the monotonicity checks test nothing there")
bands = rows("projection.csv")
for r in bands[1:]:
    v = [float(x) for x in r[5:10]]   # median, lower_50, upper_50, lower_95, upper_95
    if not (v[3] <= v[1] <= v[0] <= v[2] <= v[4]):
        problems.append(f"bands out of order in year {r[3]}: {v}")
if len(rows("declines.csv")) < 4:
    problems.append("declines table too short")
for p in problems[:10]:
    print(f"{d}: {p}")
sys.exit(1 if problems else 0)
PY
}

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

for f in "$repo"/surveys/*.csv; do
  name=$(basename "$f" .csv)
  mapfile -t pops < <(labels "$f")
  for mode in model average; do
    if [ "$mode" = model ]; then src=(--model gompertz --obs poisson); else src=(--average "${DRAWS[@]}"); fi
    out="$tmp/$mode-$name"
    "$TALLYFIT" forecast "$f" "${src[@]}" "${FIT[@]}" "${TH[@]}" --seed 2 -o "$out" >"$tmp/stdout" 2>"$tmp/stderr"
    rc=$?
    if [ "$rc" -ne 0 ]; then fail "$name --$mode: exit $rc: $(head -c 600 "$tmp/stderr")"; continue; fi
    for phrase in "not a formal status listing" "responsible authority" "model-based probabilities" \
                  "Quasi-extinction" "simulated futures"; do
      grep -q "$phrase" "$tmp/stdout" || fail "$name --$mode: output lacks '$phrase'"
    done
    if [ "$mode" = model ]; then
      grep -q "posterior of gompertz+poisson: [0-9]* draws" "$tmp/stdout" || fail "$name: the model and draws are not printed"
    else
      grep -q "P(model)" "$tmp/stdout" || fail "$name --average: the model probabilities are not printed"
    fi
    ls -aR "$out" | grep -q '\.tmp-' && fail "$name --$mode: temporary files left behind"
    if [ "${#pops[@]}" -gt 1 ]; then
      [ "$(grep -c "^Forecast for population" "$tmp/stdout")" -eq "${#pops[@]}" ] ||
        fail "$name --$mode: not one forecast per population"
      for p in "${pops[@]}"; do check_tables "$out/$p" "$mode" || fail "$name --$mode: tables of $p"; done
    else
      check_tables "$out" "$mode" || fail "$name --$mode: tables"
    fi
  done
done

# Averaging over one model at probability 1 is that model's projection, to the last digit: the
# comparison fits the candidate with the same streams as a single fit (the sampler's streams
# hang on the seed, the population and the model name), and both projections draw from the
# stream of the seed and the population.
heron="$repo/surveys/heron-colony.csv"
"$TALLYFIT" forecast "$heron" --model ricker --obs negbin "${FIT[@]}" --seed 9 -o "$tmp/one-m" -q >/dev/null 2>&1 ||
  fail "the single-model run failed"
"$TALLYFIT" forecast "$heron" --average --model ricker --obs negbin "${DRAWS[@]}" "${FIT[@]}" --seed 9 -o "$tmp/one-a" \
  >"$tmp/stdout" 2>&1 || fail "the one-candidate average failed"
# The model column says what was projected (the model, or 'average'); every other cell is the same.
for t in projection risk declines; do
  cmp -s <(cut -d, -f1,3- "$tmp/one-m/$t.csv") <(cut -d, -f1,3- "$tmp/one-a/$t.csv") ||
    fail "--average over ricker+negbin alone differs from --model ricker --obs negbin in $t.csv"
done
lf "$tmp/one-a/projection.csv" | sed -n 2p | grep -q '^heron-colony,average,' || fail "the average is not named in the model column"
lf "$tmp/one-m/projection.csv" | sed -n 2p | grep -q '^heron-colony,ricker+negbin,' || fail "the model is not named in the model column"
lf "$tmp/one-a/summary.csv" | grep -q '^heron-colony,P(ricker+negbin),1,' || fail "the one candidate's probability is not 1"
# --average --model restricts the candidates: two growth models x two counting-error models.
"$TALLYFIT" forecast "$heron" --average --model exponential,gompertz "${DRAWS[@]}" "${FIT[@]}" -o "$tmp/two" -q \
  >/dev/null 2>&1 || fail "--average --model exponential,gompertz failed"
[ "$(lf "$tmp/two/summary.csv" | grep -c '^heron-colony,P(')" -eq 4 ] || fail "--average --model did not restrict the candidates"
lf "$tmp/two/summary.csv" | grep -q ',P(ricker' && fail "ricker is a candidate although not asked for"

# --start with a posterior: every draw starts from N (year 0 is N in every band), the summary and
# the cautions say so.
"$TALLYFIT" forecast "$heron" --model gompertz --start 40 "${FIT[@]}" -o "$tmp/whatif" >"$tmp/stdout" 2>&1 ||
  fail "--start with --model failed"
bands_flat "$tmp/whatif/projection.csv" 0 2025 40 || fail "--start 40 is not every draw's start"
grep -q "set by hand" "$tmp/stdout" || fail "the what-if caution is not printed"
lf "$tmp/whatif/summary.csv" | grep -q "given with --start" || fail "the summary does not name --start"
lf "$tmp/whatif/summary.csv" | grep -q "set by hand" || fail "the summary lacks the what-if caution"

# One population of several: its folder below -o DIR, as fit names it.
herds="$repo/surveys/three-herds.csv"
"$TALLYFIT" forecast "$herds" --population river-flats --model exponential "${FIT[@]}" -o "$tmp/rf" -q >/dev/null 2>&1 ||
  fail "--population with --model failed"
lf "$tmp/rf/river-flats/summary.csv" 2>/dev/null | grep -q '^river-flats,Population,river-flats,' ||
  fail "--population river-flats not written to $tmp/rf/river-flats"
[ "$(ls "$tmp/rf")" = river-flats ] || fail "--population wrote other folders: $(ls "$tmp/rf")"

# Bad command lines of the posterior forms: exit 2, a message, nothing written.
bad "several models without --average" "$heron" --model ricker,gompertz
grep -q -- "--average" "$tmp/stderr" || fail "the hint should suggest --average"
bad "--obs alone" "$heron" --obs poisson
bad "--draws with --model" "$heron" --model ricker --draws 500
# --average takes a priors file for the candidates of the growth model it names: one for a model
# that is not a candidate is an unusable input (3), found before any fit.
"$TALLYFIT" forecast "$heron" --average --model gompertz --prior-file "$repo/models/ricker.ini" -o "$tmp/pf" \
  >/dev/null 2>"$tmp/stderr"; rc=$?
[ $rc -eq 3 ] && grep -q "for model 'ricker', which is not among the candidates" "$tmp/stderr" ||
  fail "--average with a priors file for no candidate: exit $rc: $(head -c 300 "$tmp/stderr")"
[ -e "$tmp/pf" ] && fail "the refused priors file left $tmp/pf"
bad "--model without a survey" --model ricker
bad "--average without a survey" --average
bad "unknown growth model" "$heron" --model nosuchmodel
bad "unknown candidate" "$heron" --average --model ricker,nosuchmodel
bad "unknown counting error" "$heron" --model ricker --obs nosuchobs
bad "too few iterations for the thinning" "$heron" --model ricker --iterations 4 --thin 8
bad "--start for several populations" "$herds" --model ricker --start 100
grep -q "'north-valley'" "$tmp/stderr" || fail "--start without --population should list the populations"
bad "unknown population" "$herds" --average --population nowhere
# Fractional counts under Poisson counting error: an unusable survey for that model, exit 3.
"$TALLYFIT" forecast "$repo/tests/data/good/fractional.csv" --model ricker "${FIT[@]}" -o "$tmp/frac" -q \
  >/dev/null 2>"$tmp/stderr"
[ $? -eq 3 ] || fail "fractional counts with poisson should exit 3"
grep -q -- "--estimates" "$tmp/stderr" || fail "the fractional-count refusal should point to --estimates"
[ -e "$tmp/frac" ] && fail "the refused fit left $tmp/frac"
# The same failure gives the same exit status from fit and forecast --model (cmd.h: one mapping
# for every command): a sampler that cannot start (priors that put the population at overflowing
# sizes, so that no likelihood is finite) is a job that could not be done, 1; a priors file with
# a parameter the model lacks is an unusable input, 3. Nothing is written either way.
printf '[model]\nname = exponential\n[r]\nprior = normal\nmean = 800\nsd = 0.001\n[sigma]\nprior = uniform\nmin = 0.001\nmax = 0.002\n' \
  >"$tmp/overflow.ini"
printf '[model]\nname = mine\n[K]\nprior = normal\nmean = 1\nsd = 1\n' >"$tmp/strange.ini"
for case in "overflow.ini 1 no starting point" "strange.ini 3 K"; do
  read -r ini want phrase <<<"$case"
  for cmd in fit forecast; do
    "$TALLYFIT" "$cmd" "$heron" --model exponential --obs poisson --prior-file "$tmp/$ini" --iterations 200 --warmup 40 --particles 30 --threads 2 -o "$tmp/same-$cmd" -q \
      >/dev/null 2>"$tmp/stderr"; rc=$?
    [ $rc -eq "$want" ] || fail "$cmd with $ini: exit $rc, want $want"
    grep -q "$phrase" "$tmp/stderr" || fail "$cmd with $ini: stderr lacks '$phrase': $(head -c 300 "$tmp/stderr")"
    [ -e "$tmp/same-$cmd" ] && fail "$cmd with $ini left $tmp/same-$cmd"
  done
done
# With --estimates the log-normal is the default, and the summary says why.
"$TALLYFIT" forecast "$repo/tests/data/analyze/index.csv" --estimates --model exponential "${FIT[@]}" -o "$tmp/est" -q \
  >/dev/null 2>"$tmp/stderr" || fail "--estimates: exit $?: $(head -c 300 "$tmp/stderr")"
grep -qF ',Counts,"read as estimates (--estimates), not whole counts"' "$tmp/est/summary.csv" ||
  fail "--estimates: the summary does not say the counts are estimates"
grep -qF 'exponential+lognormal' "$tmp/est/summary.csv" || fail "--estimates: the model is not the log-normal"

# Ctrl-C during the fits: exit 130 and no tables.
"$TALLYFIT" forecast "$herds" --average --threads 2 -o "$tmp/int2" -q >/dev/null 2>&1 &
pid=$!
for _ in $(seq 100); do
  sleep 0.2
  kill -INT "$pid" 2>/dev/null || break
done
kill -KILL "$pid" 2>/dev/null && fail "interrupted fit did not stop"
wait "$pid"
rc=$?
[ "$rc" -eq 130 ] || fail "interrupted fit: exit $rc, expected 130"
[ -e "$tmp/int2" ] && fail "interrupted fit left $(ls -A "$tmp/int2")"

[ "$fails" -eq 0 ]
