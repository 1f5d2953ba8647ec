#!/usr/bin/env bash
# End-to-end test of `tallyfit fit`: the files and their headers, byte-identical results for any
# thread count, Ctrl-C / SIGTERM leaving no file behind, and the errors with their exit codes
# (0 ok, 2 usage, 3 unusable input, 130 interrupted; src/cmd/cmd.h).
set -u
cd "$(dirname "$0")/../.."
T=${TALLYFIT:?TALLYFIT must name the binary}
# The binary may live outside the tree (build/san): point it at the model files here.
export TALLYFIT_MODELS=${TALLYFIT_MODELS:-$PWD/models}
fail=0
bad() { echo "fit.sh: $*" >&2; fail=1; }
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
# Under the sanitizers everything is 10-20 times slower: shorter runs there.
if [ -n "${TF_SANITIZE:-}${TF_VALGRIND:-}" ]; then short="--iterations 60 --warmup 40 --thin 4"; else short="--iterations 400 --warmup 300 --thin 4"; fi

expect() {  # CODE PATTERN CMD...: exit code CODE and PATTERN (grep -E) on stderr
  local code=$1 pat=$2; shift 2
  "$@" >"$tmp/o" 2>"$tmp/e"; local rc=$?
  [ $rc -eq "$code" ] || bad "'$*': exit $rc, want $code ($(head -c 300 "$tmp/e"))"
  grep -qE -- "$pat" "$tmp/e" || bad "'$*': stderr lacks /$pat/: $(head -c 300 "$tmp/e")"
}

"$T" simulate --model exponential --parameter r=0.02,sigma=0.1 --years 15 --start 200 --seed 4 -o "$tmp/s.csv" ||
  bad "simulate failed"
"$T" simulate --model exponential --parameter r=-0.01,sigma=0.1 --years 12 --start 80 --seed 5 --label b -o "$tmp/b.csv" ||
  bad "simulate failed"
{ cat "$tmp/s.csv" | sed '1s/^/population,/; 2,$s/^/a,/'; tail -n +2 "$tmp/b.csv"; } >"$tmp/two.csv"

# Files, headers and row counts.
"$T" fit "$tmp/s.csv" --model exponential -o "$tmp/one" $short --quiet --threads 2 2>/dev/null ||
  bad "fit failed: $(cat "$tmp/one" 2>&1 | head -c 200)"
for t in draws parameters abundance change diagnostics chains; do
  [ -s "$tmp/one/$t.csv" ] || bad "missing $t.csv"
  # The convention of docs/tables.md: snake_case names, population first, then the model.
  head -n 1 "$tmp/one/$t.csv" | tr -d '\r' | grep -qE '^population,model(,[a-z][a-z0-9_]*)+$' ||
    bad "$t.csv header: $(head -n 1 "$tmp/one/$t.csv")"
done
# The draws have a column for every parameter the program knows (blank where the model lacks it),
# so that the draws of every command and model share one header.
head -n 1 "$tmp/one/draws.csv" | tr -d '\r' | grep -q '^population,model,chain,draw,log_likelihood,r,k,' ||
  bad "draws header: $(head -n 1 "$tmp/one/draws.csv")"
grep -q '^s,exponential+poisson,1,1,' "$tmp/one/draws.csv" || bad "draws: no row of chain 1 named by population and model"
n_iter=$(echo "$short" | sed 's/--iterations \([0-9]*\).*/\1/')
want=$((4 * (n_iter / 4) + 1))   # 4 chains, every 4th iteration kept
[ "$(wc -l <"$tmp/one/draws.csv")" -eq $want ] || bad "draws: want $want lines"
[ "$(head -n 1 "$tmp/one/abundance.csv" | tr -d '\r')" = \
  "population,model,year,count,effort,count_per_effort,unit,median,lower_50,upper_50,lower_95,upper_95" ] ||
  bad "abundance header"
[ "$(wc -l <"$tmp/one/abundance.csv")" -eq 16 ] || bad "abundance: want 15 years"
grep -q '^s,exponential+poisson,r,' "$tmp/one/parameters.csv" || bad "parameters: no row for r"
# The change is a fraction a year, as in every table (the simulated growth rate is 0.02).
/usr/bin/python3 - "$tmp/one/change.csv" <<'PY' || bad "change.csv: not a fraction: $(cat "$tmp/one/change.csv")"
import csv, sys
r = next(csv.DictReader(open(sys.argv[1])))
sys.exit(0 if abs(float(r["median"])) < 0.5 and r["model"] == "exponential+poisson" else 1)
PY
# The stdout summary is silent with --quiet, present without.
"$T" fit "$tmp/s.csv" --model exponential -o "$tmp/one" $short --threads 2 >"$tmp/sum" 2>/dev/null
grep -q "average change" "$tmp/sum" || bad "summary lacks the average change"
grep -qE "^  sigma +[0-9.e-]+" "$tmp/sum" || bad "summary lacks the sigma row"

# The same seed gives byte-identical files whatever the thread count (each chain has its own
# stream, derived from seed, population, model and chain).
"$T" fit "$tmp/two.csv" --model exponential -o "$tmp/t1" $short --quiet --threads 1 2>/dev/null || bad "fit --threads 1 failed"
"$T" fit "$tmp/two.csv" --model exponential -o "$tmp/t3" $short --quiet --threads 3 2>/dev/null || bad "fit --threads 3 failed"
for f in "$tmp"/t1/*/*.csv; do
  g="$tmp/t3/${f#"$tmp"/t1/}"
  cmp -s "$f" "$g" || bad "threads 1 and 3 differ: ${f#"$tmp"/t1/}"
done
[ "$(ls "$tmp"/t1/a/*.csv "$tmp"/t1/b/*.csv | wc -l)" -eq 12 ] || bad "two populations: want 6 files in each of a/ and b/"
"$T" fit "$tmp/two.csv" --model exponential -o "$tmp/pb" $short --quiet --population b 2>/dev/null || bad "--population b failed"
cmp -s "$tmp/t1/b/draws.csv" "$tmp/pb/b/draws.csv" ||
  bad "--population b differs from b fitted with a"
"$T" fit "$tmp/two.csv" --model exponential -o "$tmp/s9" $short --quiet --seed 9 --population b 2>/dev/null
cmp -s "$tmp/pb/b/draws.csv" "$tmp/s9/b/draws.csv" &&
  bad "--seed 9 gives the same draws as seed 1"

# Interrupted runs stop within a second and leave nothing: no directory, no file, no temporary.
for sig in INT TERM; do
  "$T" fit "$tmp/s.csv" --model exponential -o "$tmp/int-$sig" --iterations 9000000 --thin 900 --quiet 2>"$tmp/e" &
  pid=$!
  sleep 1
  start=$(date +%s%N)
  kill -"$sig" $pid
  wait $pid; rc=$?
  ms=$((($(date +%s%N) - start) / 1000000))
  [ $rc -eq 130 ] || bad "SIG$sig: exit $rc, want 130"
  [ -e "$tmp/int-$sig" ] && bad "SIG$sig: $tmp/int-$sig exists"
  grep -q "interrupted" "$tmp/e" || bad "SIG$sig: no message"
  lim=1000; [ -n "${TF_SANITIZE:-}${TF_VALGRIND:-}" ] && lim=5000
  [ $ms -le $lim ] || bad "SIG$sig: took $ms ms to stop"
done
# An interrupted run leaves an earlier result untouched.
cp -r "$tmp/one" "$tmp/keep"
"$T" fit "$tmp/s.csv" --model exponential -o "$tmp/one" --iterations 9000000 --thin 900 --quiet 2>/dev/null &
pid=$!; sleep 1; kill -INT $pid; wait $pid
diff -r "$tmp/one" "$tmp/keep" >/dev/null || bad "an interrupted run changed the earlier files"

# Counts a model cannot have: the message names the file and line.
printf 'year,count\n2001,10\n2002,12.5\n2003,9\n2004,11\n2005,13\n2006,12\n' >"$tmp/frac.csv"
expect 3 "frac.csv:3:.*not a whole number" "$T" fit "$tmp/frac.csv" --model exponential --quiet -o "$tmp/x"
printf 'year,count\n2001,10\n2002,12\n2003,0\n2004,11\n2005,13\n2006,12\n' >"$tmp/zero.csv"
expect 3 "zero.csv:4:.*impossible under the lognormal" "$T" fit "$tmp/zero.csv" --model exponential --obs lognormal --quiet -o "$tmp/x"
[ -e "$tmp/x" ] && bad "a refused input left output behind"

# Usage errors.
expect 2 "no survey file" "$T" fit --model exponential
expect 2 "--model is required" "$T" fit "$tmp/s.csv"
expect 2 "unknown|not a known|known growth" "$T" fit "$tmp/s.csv" --model nosuch
expect 2 "--prior takes x1_mean and x1_sd" "$T" fit "$tmp/s.csv" --model exponential --prior r=0.1
expect 2 "x1_sd" "$T" fit "$tmp/s.csv" --model exponential --prior x1_sd=-1
expect 2 "no population named" "$T" fit "$tmp/two.csv" --model exponential --population c
expect 2 "keeps no draw" "$T" fit "$tmp/s.csv" --model exponential --iterations 3 --thin 4
expect 2 "--chains" "$T" fit "$tmp/s.csv" --model exponential --chains 0
expect 2 "cannot be combined" "$T" fit "$tmp/s.csv" --model exponential --iterations 500 --max-iterations 900
expect 2 "is above --max-iterations" "$T" fit "$tmp/s.csv" --model exponential --min-iterations 900 --max-iterations 500
expect 2 "--min-ess" "$T" fit "$tmp/s.csv" --model exponential --min-ess 0
expect 2 "--kept-draws" "$T" fit "$tmp/s.csv" --model exponential --kept-draws 3
expect 2 "unrecognized|unknown option" "$T" fit "$tmp/s.csv" --model exponential --doublings 2
expect 2 "neither on nor off" "$T" fit "$tmp/s.csv" --model exponential --delayed-acceptance maybe

# A run by need: it stops between its bounds once the checks pass (a low ESS target, so that it
# is quick), says so in the sampler table, and keeps at most --kept-draws draws per chain.
"$T" fit "$tmp/s.csv" --model exponential -o "$tmp/need" --warmup 300 --min-ess 50 --min-iterations 200 \
  --max-iterations 100000 --kept-draws 64 --quiet --threads 2 2>/dev/null || bad "run by need failed"
/usr/bin/python3 - "$tmp/need/chains.csv" "$tmp/need/draws.csv" <<'PY' || bad "run by need: $(cat "$tmp/need/chains.csv")"
import csv, sys
rows = list(csv.DictReader(open(sys.argv[1])))
draws = list(csv.DictReader(open(sys.argv[2])))
r = rows[0]
ok = (r["converged"] == "1" and 200 <= int(r["iterations"]) < 100000 and int(r["kept_draws"]) <= 64
      and len(draws) == 4 * int(r["kept_draws"]))
sys.exit(0 if ok else 1)
PY
printf '[model]\nname = exponential\n[K]\nprior = normal\nmean = 1\nsd = 1\n' >"$tmp/p.ini"
expect 3 "K" "$T" fit "$tmp/s.csv" --model exponential --prior-file "$tmp/p.ini" --quiet -o "$tmp/x"
# A priors file made for another model is refused, not applied to the parameters the two share.
printf '[model]\nname = exponential\n[sigma]\nprior = halfnormal\nsd = 0.3\n' >"$tmp/p2.ini"
expect 3 "for model 'exponential', not ricker" "$T" fit "$tmp/s.csv" --model ricker --prior-file "$tmp/p2.ini" --quiet -o "$tmp/x"
# A models folder that is not there is refused, not silently replaced by the defaults.
TALLYFIT_MODELS=$tmp/no-such-folder expect 3 "TALLYFIT_MODELS names .*not a folder" \
  "$T" fit "$tmp/s.csv" --model exponential --quiet -o "$tmp/x"
"$T" fit --help | grep -q -- "--correlated" || bad "--help lacks --correlated"

exit $fail
