#!/usr/bin/env bash
# End-to-end checks of management scenarios and the largest safe removal (--scenario,
# --safe-removal) on forecast and analyze: bad settings are refused at once, naming the bad key,
# with exit 2 and nothing written; on the hunted-herd demo survey the scenario tables are written
# with their headers, each difference is the scenario's probability minus the status quo's, and the
# paired Monte Carlo error of a difference is well below each scenario's own (common random
# numbers); analyze writes the scenario sheets, one chart with a curve per scenario, and the
# management lines of the first page.
set -uo pipefail
: "${TALLYFIT:?TALLYFIT must name the binary}"
repo=$(cd "$(dirname "$0")/../.." && pwd)
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
fails=0
fail() { echo "scenarios.sh: $*" >&2; fails=$((fails + 1)); }
lf() { tr -d '\r' <"$1"; }
herd="$repo/surveys/hunted-herd.csv"

# A refusal: exit 2 within seconds (the settings are the defaults, whose fits take minutes, so a
# late refusal would time out), a message naming WORD, nothing written.
refused() {  # description, word, command, arguments...
  local what=$1 word=$2; shift 2
  local dir="$tmp/bad"
  timeout 60 "$TALLYFIT" "$@" -o "$dir" >"$tmp/stdout" 2>"$tmp/stderr"
  local rc=$?
  [ "$rc" -eq 2 ] || fail "$what: exit $rc, expected 2 ($(head -c 300 "$tmp/stderr"))"
  grep -qF -- "$word" "$tmp/stderr" || fail "$what: the message does not name '$word': $(head -c 300 "$tmp/stderr")"
  [ -e "$dir" ] && { fail "$what: left $dir behind"; rm -rf "$dir"; }
}
fixed=(forecast --parameter r=0.02,sigma=0.1 --start 500)
refused "unknown key" "remov" "${fixed[@]}" --scenario 'hunt:remov=40'
refused "not a number" "remove=lots" "${fixed[@]}" --scenario 'hunt:remove=lots'
refused "share of 100 %" "remove" "${fixed[@]}" --scenario 'hunt:remove=100%'
refused "no label" ":" "${fixed[@]}" --scenario 'remove=40'
refused "repeated key" "given twice" "${fixed[@]}" --scenario 'hunt:add=4,add=5'
refused "repeated label" "hunt" "${fixed[@]}" --scenario 'hunt:remove=4' --scenario 'hunt:remove=5'
refused "capacity without K (fixed)" "carrying capacity" "${fixed[@]}" --scenario 'habitat:capacity=1.2'
refused "capacity without K (fit)" "carrying capacity" forecast "$herd" --model exponential --scenario 'habitat:capacity=1.2'
refused "capacity without K (analyze defaults)" "carrying capacity" analyze "$herd" --scenario 'habitat:capacity=1.2'
refused "from a past year" "from=2020" forecast "$herd" --model ricker --scenario 'later:remove=5,from=2020'
refused "from a past year (analyze)" "from=2020" analyze "$herd" --scenario 'later:remove=5,from=2020'
refused "from without survey years" "from=2030" "${fixed[@]}" --scenario 'later:remove=5,from=2030'
refused "safe removal: risk" "risk" "${fixed[@]}" --safe-removal 1.5,20
refused "safe removal: kind" "neither count nor share" analyze "$herd" --safe-removal 0.05,20,head
refused "safe removal given twice" "given twice" forecast "$herd" --model ricker --safe-removal 0.05,20 --safe-removal 0.1,10
refused "safe removal past the horizon" "beyond the 50 projected years" analyze "$herd" --safe-removal 0.05,80

# Scenarios on the hunted herd, from a short fit (the numbers need not be final for these checks).
out="$tmp/herd"
FIT=(--model ricker --obs poisson --iterations 300 --warmup 150 --particles 40 --threads 2 --runs 4000 --seed 4)
if ! "$TALLYFIT" forecast "$herd" "${FIT[@]}" --threshold 300,50% --years 30 \
     --scenario 'light:remove=72' --scenario 'none:remove=0' --scenario 'restock:add=20,from=2030' \
     --safe-removal 0.1,20 -o "$out" >"$tmp/stdout" 2>"$tmp/stderr"; then
  fail "forecast with scenarios failed: $(cat "$tmp/stderr")"
fi
[ "$(lf "$out/scenarios.csv" | head -n 1)" = "population,model,scenario,threshold,threshold_kind,years_ahead,year,probability,probability_mcse,unit,median,lower_50,upper_50,lower_95,upper_95" ] ||
  fail "scenarios.csv header: $(lf "$out/scenarios.csv" | head -n 1)"
[ "$(lf "$out/scenario-differences.csv" | head -n 1)" = "population,model,scenario,threshold,threshold_kind,years_ahead,year,probability,difference,difference_mcse" ] ||
  fail "scenario-differences.csv header"
[ "$(lf "$out/scenario-declines.csv" | head -n 1)" = "population,model,scenario,window_years,decline,probability,probability_mcse,difference,difference_mcse" ] ||
  fail "scenario-declines.csv header"
grep -q "net removal of" "$tmp/stdout" || fail "the status quo's removals are not said"
grep -q "net removal of" "$out/summary.csv" || fail "the summary does not say the status quo"
grep -q "^[^,]*,safe_removal," "$out/summary.csv" || fail "summary.csv has no safe_removal"
grep -q "^[^,]*,safe_removal_mcse," "$out/summary.csv" || fail "summary.csv has no safe_removal_mcse"
grep -q "not a quota\|It is not a quota" "$out/summary.csv" || fail "the safe removal's caution is missing"
# Rows: 3 scenarios x 2 thresholds x 31 years.
[ "$(lf "$out/scenarios.csv" | tail -n +2 | wc -l)" -eq 186 ] || fail "scenarios.csv: not 186 rows"
[ "$(lf "$out/scenario-differences.csv" | tail -n +2 | wc -l)" -eq 186 ] || fail "scenario-differences.csv: not 186 rows"

/usr/bin/python3 - "$out" <<'EOF' || fail "the scenario tables do not agree with the status quo (see above)"
import csv, math, sys
d = sys.argv[1]
read = lambda n: list(csv.DictReader(open(f"{d}/{n}", newline="")))
risk = {(r["threshold"], r["years_ahead"]): float(r["probability"]) for r in read("risk.csv")}
curves = {(r["scenario"], r["threshold"], r["years_ahead"]): r for r in read("scenarios.csv")}
bad = 0
paired = []
for r in read("scenario-differences.csv"):
    key = (r["threshold"], r["years_ahead"])
    p = float(r["probability"])
    # The difference is the scenario's probability minus the status quo's (risk.csv: the usual
    # projection, the same futures), to rounding of the per-run sums.
    if abs(float(r["difference"]) - (p - risk[key])) > 1e-9:
        print(f"{r['scenario']} {key}: difference {r['difference']} vs {p} - {risk[key]}"); bad += 1
    own = float(curves[(r["scenario"], r["threshold"], r["years_ahead"])]["probability_mcse"])
    if r["scenario"] == "light" and 0.05 < p < 0.95 and 0.05 < risk[key] < 0.95:
        paired.append((float(r["difference_mcse"]), own, math.sqrt(risk[key] * (1 - risk[key]) / 4000)))
    # Before 2030 (years_ahead 5, the step into 2030 acts) the restocking scenario is the status quo: the same runs, no difference at all.
    if r["scenario"] == "restock" and int(r["years_ahead"]) < 5 and float(r["difference"]) != 0:
        print(f"restock before its first year: difference {r['difference']}"); bad += 1
# Common random numbers: the paired error of the difference is well below each projection's own
# binomial error (half of it, a margin chosen for the check) for a quota near the status quo's
# (72 against 73.6 a year: with a larger change more runs switch and the paired error grows).
if not paired:
    print("no rows of 'light' to compare"); bad += 1
print("largest ratio of paired to own mcse: %.3f" % max(dm / min(o, s) for dm, o, s in paired))
for dm, own, sq in paired:
    if not dm < 0.5 * min(own, sq):
        print(f"paired mcse {dm} not well below {own} and {sq}"); bad += 1
sys.exit(1 if bad else 0)
EOF

# analyze: the scenario sheets and their chart, the first page's management lines.
an="$tmp/an"
if ! "$TALLYFIT" analyze "$herd" --model ricker,gompertz --threads 2 --iterations 300 --warmup 100 --draws 150 \
     --particles 60 --years 30 --runs 2000 --scenario 'no hunt:remove=0' --scenario 'cull:remove=100' \
     --scenario 'habitat:capacity=1.3' --safe-removal 5%,20,share -o "$an" -q >"$tmp/stdout" 2>"$tmp/stderr"; then
  fail "analyze with scenarios failed: $(cat "$tmp/stderr")"
fi
for f in scenarios scenario-differences scenario-declines; do
  [ -f "$an/$f.csv" ] || fail "analyze wrote no $f.csv"
  grep -q "^[^,]*,$f.csv," "$an/contents.csv" || fail "contents.csv does not list $f.csv"
done
for item in "Management scenarios" "safe_removal" "safe_removal_mcse" "Status quo" "no hunt" "within 20 years"; do
  grep -qF "$item" "$an/summary.csv" || fail "the first page has no '$item'"
done
/usr/bin/python3 - "$an/hunted-herd.xlsx" <<'EOF' || fail "the workbook's scenario sheets (see above)"
import re, sys, zipfile
z = zipfile.ZipFile(sys.argv[1])
book = z.read("xl/workbook.xml").decode()
names = re.findall(r'<sheet name="([^"]+)"', book)
need = ["Scenarios", "Scenario differences", "Scenario declines"]
missing = [n for n in need if n not in names]
# One chart holds a curve per scenario: three series named by the labels.
charts = [z.read(n).decode() for n in z.namelist() if n.startswith("xl/charts/chart")]
found = any(all(lbl in c for lbl in ("no hunt", "cull", "habitat")) and c.count("<c:ser>") == 3 for c in charts)
if missing or not found:
    print("missing sheets", missing, "chart with a curve per scenario found:", found)
    sys.exit(1)
EOF

# The prior sensitivity's row of the fitted priors projects as the headline does, status quo
# removals included: its model-averaged risks are the risk table's.
/usr/bin/python3 - "$an" <<'EOF' || fail "the prior-sensitivity risks leave out the status quo (see above)"
import csv, sys
d = sys.argv[1]
with open(f"{d}/risk.csv", newline="") as f:
    rows = [r for r in csv.DictReader(f) if r["model"] == "average"]
risk = {(r["threshold"], r["years_ahead"]): float(r["probability"]) for r in rows}
thresholds = list(dict.fromkeys(r["threshold"] for r in rows))
with open(f"{d}/prior-sensitivity.csv", newline="") as f:
    row = next(r for r in csv.DictReader(f) if r["alternative"] == "fitted" and r["model"] == "average")
bad = 0
for k, th in enumerate(thresholds, 1):
    for y in ("10", "20"):
        a, b = float(row[f"risk_{k}_{y}y"]), risk[(th, y)]
        if a != b:
            print(f"threshold {th}, {y} years: prior-sensitivity {a} against risk.csv {b}"); bad += 1
sys.exit(1 if bad else 0)
EOF

[ "$fails" -eq 0 ] && echo "scenarios.sh: all passed"
exit $((fails > 0))
