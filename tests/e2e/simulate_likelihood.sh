#!/usr/bin/env bash
# End-to-end test of `tallyfit simulate` and `tallyfit likelihood`: every growth x observation
# model of the program's table (tests/e2e/lib/models.bash) through a pipe, reproducibility, theta = 1 against Ricker, atomic output, and the errors
# and exit codes (0 ok, 1 failed, 2 usage, 3 unusable input; src/cmd/cmd.h).
set -u
cd "$(dirname "$0")/../.."
T=${TALLYFIT:?TALLYFIT must name the binary}
fail=0
bad() { echo "simulate_likelihood.sh: $*" >&2; fail=1; }
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
. tests/e2e/lib/models.bash
growth=$(tf_model_list growth) || exit 1
obs=$(tf_model_list observation) || exit 1

# expect CODE PATTERN CMD...: exit code CODE and PATTERN (grep -E) on stderr.
expect() {
  local code=$1 pat=$2; shift 2
  "$@" >"$tmp/o" 2>"$tmp/e"; local rc=$?
  [ $rc -eq "$code" ] || bad "'$*': exit $rc, want $code ($(head -c 300 "$tmp/e"))"
  grep -qE -- "$pat" "$tmp/e" || bad "'$*': stderr lacks /$pat/: $(head -c 300 "$tmp/e")"
}

# A finite log-likelihood row: population,model,log_likelihood,log_likelihood_mcse,particles,
# repeats,loglik_sd,proposal.
row_ok() {  # file particles repeats
  local line
  line=$(sed -n 2p "$1")
  [ "$(head -n 1 "$1")" = "population,model,log_likelihood,log_likelihood_mcse,particles,repeats,loglik_sd,proposal" ] ||
    { bad "$1: header '$(head -n 1 "$1")'"; return; }
  [ "$(wc -l <"$1")" -eq 2 ] || bad "$1: want exactly one row"
  echo "$line" | grep -qE "^[^,]*,[a-z-]+\+[a-z-]+,-?[0-9]+\.[0-9]+,[0-9]+\.[0-9]+,$2,$3,[0-9]+\.[0-9]+,(guided|bootstrap)\$" || bad "$1: row '$line'"
}

# Parameter values of each model, for 25 years from 300 animals: a growth model added to the table
# without its values here fails this test by name (DEVELOPERS.md, "Adding a growth model").
params() {  # growth obs -> --parameter value
  local g=$1 o=$2 p
  case $g in
    exponential) p="r=0.02" ;;
    ricker|gompertz) p="r=0.5,K=600" ;;
    theta-logistic) p="r=0.5,K=600,theta=1.8" ;;
    *) return 1 ;;
  esac
  p="$p,sigma=0.12"
  case $o in
    poisson) ;;
    lognormal|lognormal-int) p="$p,tau=0.2" ;;
    negbin) p="$p,phi=15" ;;
    *) return 1 ;;
  esac
  echo "$p"
}

# Every growth x observation combination through a pipe, with each proposal of the filter.
for g in $growth; do
  for o in $obs; do
    p=$(params $g $o) || { bad "no parameter values for $g+$o: add them to params()"; continue; }
    est=()  # log-normal values are not whole counts: read them as estimates
    [ $o = lognormal ] && est=(--estimates)
    "$T" simulate --model $g --obs $o --parameter "$p" --years 25 --start 300 --seed 4 >"$tmp/sim"
    for prop in guided bootstrap; do
      "$T" likelihood - "${est[@]}" --model $g --obs $o --parameter "$p" --particles 500 --repeat 4 --proposal $prop \
        <"$tmp/sim" >"$tmp/ll" 2>"$tmp/e" || { bad "$g+$o $prop: failed: $(cat "$tmp/e")"; continue; }
      row_ok "$tmp/ll" 500 4
      sed -n 2p "$tmp/ll" | grep -q ",$prop\$" || bad "$g+$o: the row does not name the $prop proposal"
      [ -s "$tmp/e" ] && bad "$g+$o $prop: unexpected stderr $(cat "$tmp/e")"
    done
  done
done
expect 2 "unknown proposal 'blind'" "$T" likelihood "$tmp/sim" --model ricker --parameter r=0.5,K=9,sigma=0.1 --proposal blind

# Count models write whole counts; the log-normal writes positive numbers.
"$T" simulate --model ricker --obs negbin --parameter r=0.5,K=600,sigma=0.1,phi=5 --years 20 --start 50 >"$tmp/nb"
tail -n +2 "$tmp/nb" | cut -d, -f2 | grep -qvE '^[0-9]+$' && bad "negbin counts are not whole numbers"
"$T" simulate --model ricker --obs lognormal --parameter r=0.5,K=600,sigma=0.1,tau=0.3 --years 20 --start 50 >"$tmp/ln"
tail -n +2 "$tmp/ln" | cut -d, -f2 | grep -qE '^[0-9]+$' && bad "lognormal values all look whole"
[ "$(head -n 1 "$tmp/ln")" = "year,count" ] || bad "header without effort/label: $(head -n 1 "$tmp/ln")"
[ "$(sed -n 2p "$tmp/ln" | cut -d, -f1)" = 2000 ] || bad "default first year is not 2000"

# Same seed -> byte-identical output; another seed -> different.
sim() { "$T" simulate --model gompertz --obs poisson --parameter r=0.4,K=900,sigma=0.1 --years 30 --start 200 "$@"; }
sim --seed 7 >"$tmp/a"; sim --seed 7 >"$tmp/b"; sim --seed 8 >"$tmp/c"
cmp -s "$tmp/a" "$tmp/b" || bad "simulate: same seed, different output"
cmp -s "$tmp/a" "$tmp/c" && bad "simulate: different seeds, same output"
lik() { "$T" likelihood "$tmp/a" --model gompertz --parameter r=0.4,K=900,sigma=0.1 --particles 300 --repeat 5 "$@"; }
lik --seed 3 >"$tmp/la"; lik --seed 3 >"$tmp/lb"; lik --seed 4 >"$tmp/lc"
cmp -s "$tmp/la" "$tmp/lb" || bad "likelihood: same seed, different output"
cmp -s "$tmp/la" "$tmp/lc" && bad "likelihood: different seeds, same output"

# theta = 1 is the Ricker model: identical simulated files and identical estimates.
"$T" simulate --model ricker --obs negbin --parameter r=0.8,K=400,sigma=0.1,phi=9 --years 30 --start 90 >"$tmp/r1"
"$T" simulate --model theta-logistic --obs negbin --parameter r=0.8,K=400,theta=1,sigma=0.1,phi=9 --years 30 --start 90 >"$tmp/t1"
cmp -s "$tmp/r1" "$tmp/t1" || bad "simulate: theta-logistic with theta=1 differs from ricker"
"$T" likelihood "$tmp/r1" --model ricker --obs negbin --parameter r=0.8,K=400,sigma=0.1,phi=9 >"$tmp/lr"
"$T" likelihood "$tmp/r1" --model theta-logistic --obs negbin --parameter r=0.8,K=400,theta=1,sigma=0.1,phi=9 >"$tmp/lt"
# The model column names the model asked for; every number is the same.
cmp -s <(cut -d, -f1,3- "$tmp/lr") <(cut -d, -f1,3- "$tmp/lt") || bad "likelihood: theta=1 $(sed -n 2p "$tmp/lt") vs ricker $(sed -n 2p "$tmp/lr")"

# The true parameters beat a clearly wrong carrying capacity by far more than the se.
"$T" likelihood "$tmp/r1" --model ricker --obs negbin --parameter r=0.8,K=120,sigma=0.1,phi=9 >"$tmp/lw"
/usr/bin/python3 - "$tmp/lr" "$tmp/lw" <<'PY' || bad "true parameters do not beat K/3"
import sys
(l0, s0), (l1, s1) = [map(float, open(f).read().split("\n")[1].split(",")[2:4]) for f in sys.argv[1:3]]
sys.exit(0 if l0 - l1 > 10 * max(s0, s1) else 1)
PY

# Effort, label and -o: a file the importer reads, with the label as its population.
"$T" simulate --model ricker --parameter r=0.5,K=600,sigma=0.1 --years 6 --start 80 --effort 1,2,1,2,1,2 \
  --label herd-a -o "$tmp/out.csv" || bad "simulate -o failed"
[ "$(head -n 1 "$tmp/out.csv")" = "population,year,count,effort" ] || bad "header $(head -n 1 "$tmp/out.csv")"
"$T" check "$tmp/out.csv" >"$tmp/chk" 2>&1 || bad "check rejects simulate's file: $(cat "$tmp/chk")"
grep -q herd-a "$tmp/chk" || bad "check does not list the label"
"$T" likelihood "$tmp/out.csv" --population herd-a --model ricker --parameter r=0.5,K=600,sigma=0.1 >"$tmp/l" || bad "--population"
row_ok "$tmp/l" 1000 10

# Atomic output: a failed run leaves an existing file as it was and no temporary file behind.
cp "$tmp/out.csv" "$tmp/keep"
expect 1 "overflow|larger than" "$T" simulate --model exponential --parameter r=4,sigma=0.1 --years 30 --start 50 -o "$tmp/out.csv"
cmp -s "$tmp/out.csv" "$tmp/keep" || bad "a failed simulate changed the output file"
ls -A "$tmp" | grep -q 'tmp' && bad "temporary file left behind: $(ls -A "$tmp")"
expect 1 "no/dir" "$T" simulate --model ricker --parameter r=0.5,K=600,sigma=0.1 --years 6 --start 80 -o "$tmp/no/dir/x.csv"

# Usage errors: exit 2 with a message and a hint.
expect 2 "unknown growth model 'rickr'" "$T" simulate --model rickr --parameter r=1 --years 10 --start 5
# The hint of an unknown name lists every model, in the table's order, and so does the help of
# every command that takes one model (its list is made from the table at run time).
glist=$(paste -sd, <<<"$growth" | sed 's/,/, /g')
olist=$(paste -sd, <<<"$obs" | sed 's/,/, /g')
expect 2 "known growth models: $glist\$" "$T" likelihood "$tmp/a" --model logistic --parameter r=1
expect 2 "known observation models: $olist\$" "$T" likelihood "$tmp/a" --model ricker --obs binomial --parameter r=1
for c in likelihood simulate fit; do
  "$T" $c --help >"$tmp/help" 2>&1
  grep -qF -- "$glist" "$tmp/help" || bad "$c --help does not list the growth models $glist"
  grep -qF -- "$olist" "$tmp/help" || bad "$c --help does not list the observation models $olist"
done
expect 2 "value of K is missing" "$T" likelihood "$tmp/a" --model ricker --parameter r=0.5,sigma=0.1
expect 2 "K = -3 is outside its range" "$T" likelihood "$tmp/a" --model ricker --parameter r=0.5,K=-3,sigma=0.1
expect 2 "K = 1 is outside" "$T" simulate --model gompertz --parameter r=0.5,K=1,sigma=0.1 --years 10 --start 5
expect 2 "tau is not a parameter.*|hint: the parameters of ricker\+poisson" \
  "$T" likelihood "$tmp/a" --model ricker --parameter r=0.5,K=9,sigma=0.1,tau=1
expect 2 "has no '=value'" "$T" likelihood "$tmp/a" --model ricker --parameter r=0.5,K
expect 2 "given twice" "$T" likelihood "$tmp/a" --model ricker --parameter r=0.5,K=9,sigma=0.1,r=1
expect 2 "unknown option '--partcles'" "$T" likelihood "$tmp/a" --model ricker --parameter r=0.5,K=9,sigma=0.1 --partcles 9
expect 2 "likelihood --help" "$T" likelihood "$tmp/a" --model ricker --parameter r=0.5,K=9,sigma=0.1 --partcles 9
expect 2 "needs a value" "$T" simulate --model
expect 2 "--particles: 0 is outside" "$T" likelihood "$tmp/a" --model ricker --parameter r=0.5,K=9,sigma=0.1 --particles 0
expect 2 "--seed: '-1'" "$T" likelihood "$tmp/a" --model ricker --parameter r=0.5,K=9,sigma=0.1 --seed -1
expect 2 "no survey file" "$T" likelihood --model ricker --parameter r=0.5,K=9,sigma=0.1
expect 2 "--effort: 3 values for 10 years" "$T" simulate --model ricker --parameter r=0.5,K=9,sigma=0.1 --years 10 --start 5 --effort 1,2,3
expect 2 "--years is required" "$T" simulate --model ricker --parameter r=0.5,K=9,sigma=0.1 --start 5
expect 2 "x1_sd = 0 is not > 0" "$T" likelihood "$tmp/a" --model ricker --parameter r=0.5,K=9,sigma=0.1 --prior x1_sd=0
# Parameter values and the first-year prior each in their own option.
expect 2 "x1_mean is the first year's prior" "$T" likelihood "$tmp/a" --model ricker --parameter r=0.5,K=9,sigma=0.1,x1_mean=3
expect 2 "--prior takes x1_mean and x1_sd" "$T" likelihood "$tmp/a" --model ricker --parameter r=0.5,sigma=0.1 --prior K=9
expect 2 "x1_sd is the first year's prior" "$T" simulate --model ricker --parameter r=0.5,K=9,sigma=0.1,x1_sd=1 --years 10 --start 5
expect 2 "3 populations" "$T" likelihood surveys/three-herds.csv --model ricker --parameter r=0.5,K=900,sigma=0.1
expect 2 "no population named 'south'" "$T" likelihood surveys/three-herds.csv --population south --model ricker --parameter r=0.5,K=900,sigma=0.1

# Unusable input: exit 3, naming the file and line.
printf 'year,count\n2000,10\n2001,12.5\n2002,11\n2003,0\n2004,9\n2005,8\n' >"$tmp/frac.csv"
expect 3 "^tallyfit likelihood: error: .*/frac.csv:3:2: count 12.5 is not a whole number" \
  "$T" likelihood "$tmp/frac.csv" --model ricker --parameter r=0.5,K=20,sigma=0.1
expect 3 "^tallyfit likelihood: error: .*/frac.csv:5: count 0 .*lognormal" "$T" likelihood "$tmp/frac.csv" --estimates --model ricker --obs lognormal --parameter r=0.5,K=20,sigma=0.1,tau=0.2
expect 3 "hint: use a count model such as poisson or negbin" "$T" likelihood "$tmp/frac.csv" --estimates --model ricker --obs lognormal --parameter r=0.5,K=20,sigma=0.1,tau=0.2
expect 2 "with --estimates use --obs lognormal" "$T" likelihood "$tmp/frac.csv" --estimates --model ricker --obs poisson --parameter r=0.5,K=20,sigma=0.1
expect 3 "stdin:3:" sh -c "'$T' likelihood - --model ricker --obs negbin --parameter r=0.5,K=20,sigma=0.1,phi=3 <'$tmp/frac.csv'"
expect 3 "cannot open" "$T" likelihood "$tmp/missing.csv" --model ricker --parameter r=0.5,K=20,sigma=0.1
# ... while the log-normal takes fractional values.
sed '/,0$/d' "$tmp/frac.csv" >"$tmp/pos.csv"
"$T" likelihood "$tmp/pos.csv" --estimates --model ricker --parameter r=0.5,K=20,sigma=0.1,tau=0.2 >"$tmp/l" || bad "lognormal on fractions"
row_ok "$tmp/l" 1000 10

# One repeat has no standard error; an impossible data set gives -inf with a warning.
"$T" likelihood "$tmp/a" --model gompertz --parameter r=0.4,K=900,sigma=0.1 --repeat 1 >"$tmp/l"
sed -n 2p "$tmp/l" | grep -qE '^[^,]*,[a-z+-]+,-?[0-9.]+,NA,1000,1,NA,guided$' || bad "--repeat 1: $(sed -n 2p "$tmp/l")"
"$T" likelihood "$tmp/a" --model exponential --parameter r=1e6,sigma=0.1 >"$tmp/l" 2>"$tmp/e" || bad "-inf run failed"
sed -n 2p "$tmp/l" | grep -qE '^[^,]*,[a-z+-]+,-inf,NA,' || bad "impossible data: $(sed -n 2p "$tmp/l")"
grep -q warning "$tmp/e" || bad "no warning for a zero likelihood"

# Help: exit 0 on stdout.
for c in simulate likelihood; do
  "$T" $c --help >"$tmp/h" 2>&1 || bad "$c --help exit $?"
  grep -q "usage: tallyfit $c" "$tmp/h" || bad "$c --help text"
done

exit $fail
