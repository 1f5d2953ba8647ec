#!/usr/bin/env bash
# End-to-end test of `tallyfit compare`: a demo survey with short settings writes the comparison
# CSV with the expected header, fitted rows with finite numbers and probabilities summing to 1,
# excluded models listed with their reasons; an index survey (fractional counts) leaves only the
# continuous log-normal; refused requests exit with a usage error; the same seed gives the same
# file whatever the thread count.
set -u
cd "$(dirname "$0")/../.."
T=${TALLYFIT:?TALLYFIT must name the binary}
# The binary may live outside the tree (build/san): point it at the model files here.
export TALLYFIT_MODELS=${TALLYFIT_MODELS:-$PWD/models}
fail=0
bad() { echo "compare.sh: $*" >&2; fail=1; }
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
# Under the sanitizers everything is 10-20 times slower: shorter runs there. The warm-up stays at
# 120: with 40 (a 20-iteration pilot) the pilot of gompertz+negbin ends far from the posterior in the
# unoptimised build and a chain cannot start, which is a fair outcome of so short a run, not a memory fault.
if [ -n "${TF_SANITIZE:-}${TF_VALGRIND:-}" ]; then
  SHORT=(--chains 2 --iterations 60 --thin 1 --warmup 120 --draws 100 --seed 4)
else
  SHORT=(--chains 2 --iterations 400 --thin 1 --warmup 300 --draws 300 --seed 4)
fi
# Under valgrind (some 50 times slower on one core) the demo survey compares one growth model,
# not two, and the 1-thread rerun is left out: thread-count invariance is not a memory question,
# and the native and sanitizer runs check it.
heron_models=exponential,gompertz heron_excluded=gompertz+lognormal
if [ -n "${TF_VALGRIND:-}" ]; then heron_models=exponential heron_excluded=exponential+lognormal; fi
# How many candidates the comparison lists follows from the program's table, not from this file.
. tests/e2e/lib/models.bash
obs=$(tf_model_list observation) || exit 1

want_header='population,model,growth,observation,likelihood_of,status,log_ml,log_ml_mcse,log_ml_check,log_ml_check_mcse,check_z,bayes_factor,ln_bf,ln_bf_mcse,two_ln_b,reading,prior_prob,model_prob,model_prob_mcse,pareto_k,pareto_k_check,weight_ess,particles,particles_mean,max_r_hat,min_ess,note'

# Checks one comparison CSV with Python's csv module: header, fitted rows complete, the best
# model first with Bayes factor 1, probabilities summing to 1, every excluded row with a reason.
# Prints "fitted excluded" counts.
check_csv() {
  /usr/bin/python3 - "$1" "$want_header" <<'PY'
import csv, math, sys
import os
path, want = sys.argv[1], sys.argv[2].split(",")
# The sanitizer runs are too short for the diagnostics to be defined; they check the rest.
short = bool(os.environ.get("TF_SANITIZE") or os.environ.get("TF_VALGRIND"))
with open(path, newline="") as f:
    r = csv.reader(f)
    header = next(r)
    rows = [dict(zip(header, row)) for row in r]
problems = []
if header != want:
    problems.append(f"header {header}")
fitted = [x for x in rows if x["status"] == "fitted"]
failed = [x for x in rows if x["status"] == "failed"]
if len({x["likelihood_of"] for x in fitted}) > 1:
    problems.append("fitted rows on different likelihood scales")
excluded = [x for x in rows if x["status"] == "excluded"]
for x in fitted:
    keys = ["log_ml", "log_ml_mcse", "log_ml_check", "bayes_factor", "model_prob", "model_prob_mcse"]
    if not short:
        keys += ["pareto_k", "max_r_hat", "min_ess"]
    for k in keys:
        # Runs this short can leave a tail ESS undefined (a quantile indicator that one split
        # chain never crosses); that is allowed only when R-hat shows the chains apart, so that
        # the table still flags the fit.
        if k == "min_ess" and not x[k] and x["max_r_hat"] and float(x["max_r_hat"]) > 1.1:
            continue
        if not x[k] or not math.isfinite(float(x[k])):
            problems.append(f"{x['model']}: {k} = {x[k]!r}")
if fitted:
    if float(fitted[0]["bayes_factor"]) != 1.0 or fitted[0]["reading"] != "best model":
        problems.append(f"first row {fitted[0]['model']} is not the best model")
    lm = [float(x["log_ml"]) for x in fitted]
    if lm != sorted(lm, reverse=True):
        problems.append("fitted rows not in decreasing log_ml")
    s = sum(float(x["model_prob"]) for x in fitted)
    if any(x["log_ml"] or x["model_prob"] for x in failed):
        problems.append("a failed row has numbers")
    if abs(s - 1) > 1e-9:
        problems.append(f"posterior probabilities sum to {s}")
# A fit may fail at the sanitizer runs' few iterations (then it must say why, and it counts with
# the fitted ones); at the normal settings none may.
for x in failed:
    if not short or not x["note"]:
        problems.append(f"{x['model']} failed: {x['note']}")
for x in excluded:
    if not x["note"] or x["log_ml"]:
        problems.append(f"excluded {x['model']}: note {x['note']!r}, log_ml {x['log_ml']!r}")
if problems:
    print("PROBLEMS: " + "; ".join(problems))
    sys.exit(1)
print(len(fitted) + (len(failed) if short else 0), len(excluded))
PY
}

# 1. A demo survey of whole counts: count models compared, the continuous log-normal excluded.
out="$tmp/heron"
"$T" compare surveys/heron-colony.csv --model $heron_models -o "$out" "${SHORT[@]}" --threads 2 \
  >"$tmp/stdout" 2>"$tmp/stderr"; rc=$?
[ $rc -eq 0 ] || { bad "heron: exit $rc"; cat "$tmp/stderr" >&2; }
csv="$out/models.csv"
if [ -f "$csv" ]; then
  counts=$(check_csv "$csv") || bad "heron: $counts"
  # Every growth model named with every counting-error model of the table, each on its scale: the
  # count models fitted, the densities (the continuous log-normal) excluded.
  n_cand=$(( $(tr ',' '\n' <<<"$heron_models" | wc -l) * $(wc -l <<<"$obs") ))
  whole=$(grep -c ',whole counts,' "$csv") amounts=$(grep -c ',continuous amounts,' "$csv")
  [ $((whole + amounts)) -eq $n_cand ] || bad "heron: $((whole + amounts)) candidates listed, want $n_cand"
  [ "$amounts" -ge 1 ] || bad "heron: no candidate on the scale of continuous amounts"
  [ "$counts" = "$whole $amounts" ] || bad "heron: fitted/excluded counts '$counts', want '$whole $amounts'"
  grep -q '^heron-colony,exponential+lognormal,exponential,lognormal,continuous amounts,excluded,.*does not compare with the count models' "$csv" ||
    bad "heron: the continuous log-normal is not excluded with its reason"
else
  bad "heron: no $csv"
fi
grep -q 'likelihoods are probabilities of whole counts' "$tmp/stdout" || bad "heron: stdout does not name the scale"
grep -q "excluded: $heron_excluded: " "$tmp/stdout" || bad "heron: stdout does not list the excluded models"
grep -q 'Kass & Raftery (1995)' "$tmp/stdout" || bad "heron: no Kass & Raftery reading printed"
grep -q "files: $out/ (models," "$tmp/stdout" || bad "heron: stdout does not name the files"

# 2. The same seed with one thread: the same file.
if [ -z "${TF_VALGRIND:-}" ]; then
  "$T" compare surveys/heron-colony.csv --model $heron_models -o "$tmp/heron1" "${SHORT[@]}" --threads 1 \
    --quiet 2>/dev/null || bad "heron, 1 thread: failed"
  for t in models change parameters diagnostics chains draws; do
    cmp -s "$out/$t.csv" "$tmp/heron1/$t.csv" || bad "heron: $t.csv differs between 1 and 2 threads"
  done
fi

# 3. An index survey (fractional, positive): only the continuous log-normal can be fitted.
cat >"$tmp/index.csv" <<'EOF'
year,count
2001,12.5
2002,14.25
2003,13.0
2004,15.5
2005,16.75
2006,15.0
2007,18.5
2008,17.25
2009,19.0
2010,18.5
EOF
# Without --estimates the fractions are refused where they are read, before any fit.
"$T" compare "$tmp/index.csv" --model ricker -o "$tmp/index" "${SHORT[@]}" --quiet 2>"$tmp/stderr"; rc=$?
[ $rc -eq 3 ] || bad "index without --estimates: exit $rc, want 3"
grep -qF "tallyfit compare: error: $tmp/index.csv:2:2: count 12.5 is not a whole number" "$tmp/stderr" || bad "index: $(head -n 1 "$tmp/stderr")"
[ -e "$tmp/index" ] && bad "index without --estimates: something was written"
"$T" compare "$tmp/index.csv" --estimates --model ricker -o "$tmp/index" "${SHORT[@]}" --quiet 2>"$tmp/stderr"; rc=$?
[ $rc -eq 0 ] || { bad "index: exit $rc"; cat "$tmp/stderr" >&2; }
counts=$(check_csv "$tmp/index/models.csv") || bad "index: $counts"
# Only the density models of the table are candidates, every one fitted.
amounts=$(grep -c ',continuous amounts,' "$tmp/index/models.csv")
[ "$amounts" -ge 1 ] && [ "$counts" = "$amounts 0" ] ||
  bad "index: fitted/excluded counts '$counts', want every one of the $amounts density models fitted and nothing else"
grep -q '^index,ricker+lognormal,' "$tmp/index/models.csv" || bad "index: ricker+lognormal not compared"
grep -q '^index,ricker+poisson,' "$tmp/index/models.csv" && bad "index: a count model was listed under --estimates"
"$T" compare "$tmp/index.csv" --estimates --obs negbin -o "$tmp/index2" "${SHORT[@]}" --quiet 2>"$tmp/stderr"; rc=$?
[ $rc -eq 2 ] || bad "--estimates --obs negbin: exit $rc, want 2"
grep -qF -- "--obs negbin is a model of whole counts" "$tmp/stderr" || bad "--estimates --obs negbin: $(head -n 1 "$tmp/stderr")"

# 4. Refusals: mixing a density with count probabilities, unknown names, bad weights.
"$T" compare surveys/heron-colony.csv --model ricker --obs poisson,lognormal -o "$tmp/x" "${SHORT[@]}" \
  >/dev/null 2>"$tmp/stderr"; rc=$?
[ $rc -eq 2 ] || bad "mixed scales: exit $rc, want 2"
grep -q 'cannot be compared' "$tmp/stderr" && grep -q 'lognormal-int' "$tmp/stderr" ||
  bad "mixed scales: message does not explain ($(cat "$tmp/stderr"))"
[ -e "$tmp/x" ] && bad "mixed scales: output written anyway"
"$T" compare surveys/heron-colony.csv --model rikker "${SHORT[@]}" >/dev/null 2>"$tmp/stderr"; rc=$?
[ $rc -eq 2 ] || bad "unknown model: exit $rc, want 2"
grep -q "unknown growth model 'rikker'" "$tmp/stderr" || bad "unknown model: $(cat "$tmp/stderr")"
"$T" compare surveys/heron-colony.csv --model ricker --model-weights gompertz+poisson=2 "${SHORT[@]}" \
  >/dev/null 2>"$tmp/stderr"; rc=$?
[ $rc -ne 0 ] && grep -q 'names no candidate' "$tmp/stderr" || bad "weight for a missing model: exit $rc"
"$T" compare surveys/heron-colony.csv --model-weights ricker=abc >/dev/null 2>&1; rc=$?
[ $rc -eq 2 ] || bad "non-numeric weight: exit $rc, want 2"
"$T" compare >/dev/null 2>&1; rc=$?
[ $rc -eq 2 ] || bad "no survey: exit $rc, want 2"
for v in -1 abc 11; do
  "$T" compare surveys/heron-colony.csv --ml-se "$v" -o "$tmp/x" >/dev/null 2>"$tmp/stderr"; rc=$?
  [ $rc -eq 2 ] && grep -q -- '--ml-se' "$tmp/stderr" || bad "--ml-se $v: exit $rc, want 2 naming the option"
done
"$T" compare --help | grep -q -- '--ml-se S' || bad "--help lacks --ml-se"
"$T" compare --help | grep -q 'usage: tallyfit compare' || bad "--help"

# 5. Prior model weights enter the probabilities: ricker weighted 3 against exponential 1.
"$T" compare surveys/heron-colony.csv --model exponential,ricker --obs poisson -o "$tmp/w" "${SHORT[@]}" \
  --model-weights ricker=3 --quiet 2>/dev/null || bad "weights: failed"
/usr/bin/python3 - "$tmp/w/models.csv" <<'PY' || bad "weights: prior weights not 0.25 / 0.75"
import csv, sys
rows = {r["model"]: r for r in csv.DictReader(open(sys.argv[1], newline=""))}
ok = abs(float(rows["exponential+poisson"]["prior_prob"]) - 0.25) < 1e-12 and \
     abs(float(rows["ricker+poisson"]["prior_prob"]) - 0.75) < 1e-12
sys.exit(0 if ok else 1)
PY

# 6. The user's priors reach the candidates they are for (README, "One set of option names"): a
# priors file naming ricker changes ricker's marginal likelihood and leaves gompertz's digit for
# digit (same seed, same streams); the first-year prior changes both. A file for no candidate,
# or with a section no candidate has, is refused before any fit, nothing written.
printf '[model]\nname = ricker\n[K]\nprior = lognormal\nmeanlog = 3\nsdlog = 0.3\n' >"$tmp/rk.ini"
for run in "p0" "p1 --prior-file $tmp/rk.ini" "p2 --prior x1_mean=3,x1_sd=0.2"; do
  set -- $run
  name=$1; shift
  "$T" compare surveys/heron-colony.csv --model ricker,gompertz --obs poisson -o "$tmp/$name" "${SHORT[@]}" "$@" \
    --quiet 2>/dev/null || bad "priors: compare $* failed"
done
/usr/bin/python3 - "$tmp/p0/models.csv" "$tmp/p1/models.csv" "$tmp/p2/models.csv" <<'PY' ||
import csv, sys
def log_ml(path):
    return {r["model"]: float(r["log_ml"]) for r in csv.DictReader(open(path, newline=""))}
p0, p1, p2 = (log_ml(p) for p in sys.argv[1:])
problems = []
if p1["gompertz+poisson"] != p0["gompertz+poisson"]:
    problems.append("the ricker priors file changed gompertz")
if p1["ricker+poisson"] == p0["ricker+poisson"]:
    problems.append("the ricker priors file left ricker unchanged")
if any(p2[m] == p0[m] for m in p0):
    problems.append("--prior x1_mean,x1_sd left a model unchanged")
if problems:
    print("; ".join(problems), file=sys.stderr)
sys.exit(1 if problems else 0)
PY
  bad "priors: not applied as documented"
printf '[model]\nname = gompertz\n[K]\nprior = lognormal\nmeanlog = 3\nsdlog = 0.3\n' >"$tmp/gz.ini"
printf '[model]\nname = mine\n[phi]\nprior = lognormal\nmeanlog = 1\nsdlog = 0.3\n' >"$tmp/phi.ini"
for case in "gz.ini:which is not among the candidates" "phi.ini:section \[phi\]"; do
  "$T" compare surveys/heron-colony.csv --model ricker --obs poisson --prior-file "$tmp/${case%%:*}" -o "$tmp/pn" \
    "${SHORT[@]}" >/dev/null 2>"$tmp/stderr"; rc=$?
  [ $rc -eq 3 ] && grep -q "${case#*:}" "$tmp/stderr" || bad "priors file ${case%%:*}: exit $rc: $(cat "$tmp/stderr")"
  [ -e "$tmp/pn" ] && bad "priors file ${case%%:*}: output written anyway"
done

[ $fail -eq 0 ] && echo "compare.sh: all checks passed"
exit $fail
