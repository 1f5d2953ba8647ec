#!/usr/bin/env bash
# End-to-end test of the prior sensitivity of `tallyfit compare` (and the checks analyze shares):
# prior-sensitivity.csv with its header, one block of rows per set of priors, probabilities
# summing to 1 in each; a model without K unchanged under `K x2`; a folder of model files given
# with --prior-alternative labelled by its name and giving, for the same prior written by hand,
# the very numbers of the matching change of scale; --prior-sensitivity off writes no table; bad
# folders (an unknown parameter, an improper prior, a file named after no model, a folder that
# does not exist) refused with their file and line before any fit.
set -u
cd "$(dirname "$0")/../.."
T=${TALLYFIT:?TALLYFIT must name the binary}
export TALLYFIT_MODELS=${TALLYFIT_MODELS:-$PWD/models}
fail=0
bad() { echo "prior_sensitivity.sh: $*" >&2; fail=1; }
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
if [ -n "${TF_SANITIZE:-}${TF_VALGRIND:-}" ]; then
  SHORT=(--chains 2 --iterations 60 --thin 1 --warmup 120 --draws 100 --seed 4)
else
  SHORT=(--chains 2 --iterations 400 --thin 1 --warmup 300 --draws 300 --seed 4)
fi
survey=surveys/heron-colony.csv

# A folder whose ricker.ini sets K's prior to twice the default sdlog (1.5 in models/ricker.ini).
mkdir "$tmp/wide-k"
cat > "$tmp/wide-k/ricker.ini" <<'INI'
[model]
name = ricker
description = the default Ricker priors with K twice as spread out

[K]
prior = lognormal
meanlog = survey
sdlog = 3
INI
grep -q '^sdlog = 1.5' models/ricker.ini || bad "models/ricker.ini no longer has sdlog = 1.5 for K; change wide-k"

"$T" compare "$survey" --model exponential,ricker --obs poisson "${SHORT[@]}" --prior-alternative "$tmp/wide-k" \
  -o "$tmp/out" -q 2> "$tmp/err" || bad "compare with --prior-alternative failed: $(cat "$tmp/err")"
/usr/bin/python3 - "$tmp/out/prior-sensitivity.csv" <<'PY' || fail=1
import csv, math, sys
want = ["population", "alternative", "model", "status", "log_ml", "log_ml_mcse", "model_prob", "model_prob_mcse",
        "pareto_k", "draws_pareto_k", "note"]
with open(sys.argv[1], newline="") as f:
    r = csv.reader(f)
    header = next(r)
    rows = [dict(zip(header, x)) for x in r]
problems = []
if header != want:
    problems.append(f"header {header}")
by = {(x["alternative"], x["model"]): x for x in rows}
alts = []
for x in rows:
    if x["alternative"] not in alts:
        alts.append(x["alternative"])
# The standard sets for exponential and Ricker (K is the one parameter beyond the exponential's),
# then the folder, in that order.
if alts != ["fitted", "K x0.5", "K x2", "all x0.5", "all x2", "wide-k"]:
    problems.append(f"sets of priors {alts}")
for a in alts:
    p = sum(float(by[(a, m)]["model_prob"]) for m in ("exponential+poisson", "ricker+poisson") if (a, m) in by)
    if abs(p - 1) > 1e-9:
        problems.append(f"{a}: probabilities sum to {p}")
e0, e2 = by.get(("fitted", "exponential+poisson")), by.get(("K x2", "exponential+poisson"))
if not e0 or not e2 or e0["log_ml"] != e2["log_ml"] or "as they were" not in e2["note"]:
    problems.append("the exponential model changed under K x2")
k2, w = by.get(("K x2", "ricker+poisson")), by.get(("wide-k", "ricker+poisson"))
if not k2 or not w or k2["log_ml"] != w["log_ml"] or k2["model_prob"] != w["model_prob"]:
    problems.append(f"wide-k ({w and w['log_ml']}) is not K x2 ({k2 and k2['log_ml']})")
f0 = by.get(("fitted", "ricker+poisson"))
if f0 and k2 and not float(k2["log_ml"]) < float(f0["log_ml"]):
    problems.append("a wider prior on K did not lower Ricker's log marginal likelihood")
for p in problems:
    print("prior_sensitivity.sh:", p, file=sys.stderr)
sys.exit(1 if problems else 0)
PY

"$T" compare "$survey" --model exponential --obs poisson "${SHORT[@]}" --prior-sensitivity off -o "$tmp/off" -q \
  2> "$tmp/err" || bad "compare --prior-sensitivity off failed: $(cat "$tmp/err")"
[ -e "$tmp/off/prior-sensitivity.csv" ] && bad "--prior-sensitivity off wrote prior-sensitivity.csv"
[ -e "$tmp/off/models.csv" ] || bad "--prior-sensitivity off wrote no models.csv"

# Bad folders: refused with the file and line, exit status 3 (2 for the command line), before any fit
# (no output folder is made).
refused() {   # refused NAME WANT_STATUS PATTERN CMD...
  local name=$1 want=$2 pattern=$3
  shift 3
  "$@" > /dev/null 2> "$tmp/err"
  local st=$?
  [ "$st" = "$want" ] || bad "$name: exit status $st, want $want ($(cat "$tmp/err"))"
  grep -qE "$pattern" "$tmp/err" || bad "$name: message does not match '$pattern': $(cat "$tmp/err")"
}
mkdir "$tmp/unknown" "$tmp/improper" "$tmp/misnamed"
printf '[model]\nname = ricker\ndescription = a prior for a parameter the model lacks\n\n[M]\nprior = normal\nmean = 0\nsd = 1\n' \
  > "$tmp/unknown/ricker.ini"
printf '[model]\nname = observation\ndescription = an improper prior: uniform on an unbounded range\n\n[phi]\nprior = uniform\nmin = 0\nmax = inf\n' \
  > "$tmp/improper/observation.ini"
printf '[model]\nname = ricker\ndescription = a file named after no model at all\n\n[K]\nprior = lognormal\nmeanlog = 5\nsdlog = 1\n' \
  > "$tmp/misnamed/rickr.ini"
for cmd in compare analyze; do
  refused "$cmd unknown parameter" 3 "unknown/ricker.ini:6: .*no parameter 'M'" \
    "$T" $cmd "$survey" --prior-alternative "$tmp/unknown" -o "$tmp/never"
  refused "$cmd improper prior" 3 "improper/observation.ini:8: .*finite" \
    "$T" $cmd "$survey" --prior-alternative "$tmp/improper" -o "$tmp/never"
  refused "$cmd misnamed file" 3 "rickr.ini: .*not a model file" \
    "$T" $cmd "$survey" --prior-alternative "$tmp/misnamed" -o "$tmp/never"
  refused "$cmd missing folder" 3 "nowhere: .*cannot open" \
    "$T" $cmd "$survey" --prior-alternative "$tmp/nowhere" -o "$tmp/never"
  refused "$cmd bad switch" 2 "on or off" "$T" $cmd "$survey" --prior-sensitivity maybe -o "$tmp/never"
  refused "$cmd bad refit switch" 2 "prior-refit takes on or off" "$T" $cmd "$survey" --prior-refit maybe -o "$tmp/never"
  refused "$cmd folder without sensitivity" 2 "needs the prior sensitivity" \
    "$T" $cmd "$survey" --prior-sensitivity off --prior-alternative "$tmp/wide-k" -o "$tmp/never"
done
[ -e "$tmp/never" ] && bad "a refused run made its output folder"
exit $fail
