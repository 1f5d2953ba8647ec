#!/usr/bin/env bash
# End-to-end test of the conventions every command shares (GNU coding standards, "Standards for
# Command Line Interfaces"): `tallyfit help CMD` is `tallyfit CMD --help`; --version works on every
# command and prints the licence; one error format, "tallyfit CMD: error: ..." plus an optional
# "  hint: ..." line, for option, file and command-name errors alike; one mistake gives one error;
# every help lists the exit statuses, which are checked against the codes in src/cmd/cmd.h.
set -u
cd "$(dirname "$0")/../.."
T=${TALLYFIT:?TALLYFIT must name the binary}
fail=0
bad() { echo "cli.sh: $*" >&2; fail=1; }
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT

version=$(sed -n 's/^#define TF_VERSION "\(.*\)"$/\1/p' src/util/version.h)
[ -n "$version" ] || bad "no TF_VERSION in src/util/version.h"
# The exit codes as the source declares them: "TF_EXIT_OK = 0," ... -> "0 1 2 3 130".
codes=$(sed -n 's/^ *TF_EXIT_[A-Z]* = \([0-9]*\),.*/\1/p' src/cmd/cmd.h | tr '\n' ' ')
[ "$(echo $codes | wc -w)" -ge 5 ] || bad "cannot read the exit codes of src/cmd/cmd.h: '$codes'"

# Every code of cmd.h appears, in the "exit status:" section of the help text in $1, as a line
# "  CODE  meaning".
has_exit_list() {
  local text=$1 who=$2 c
  grep -qx 'exit status:' "$text" || { bad "$who: no 'exit status:' section"; return; }
  for c in $codes; do
    awk '/^exit status:/{on=1; next} on' "$text" | grep -qE "^  $c +[a-z]" || bad "$who: exit status $c not listed"
  done
}

# An error report: exactly one error line in the common format, at most one hint line after it.
one_error() {  # file, prog, pattern of the message, who
  local f=$1 prog=$2 pat=$3 who=$4
  local n_err n_lines
  n_err=$(grep -c ': error: ' "$f")
  n_lines=$(wc -l <"$f")
  [ "$n_err" -eq 1 ] || bad "$who: $n_err error lines, want 1: $(cat "$f")"
  head -n 1 "$f" | grep -qE "^$prog: error: $pat\$" || bad "$who: first line is not '$prog: error: $pat': $(head -n 1 "$f")"
  if [ "$n_lines" -eq 2 ]; then
    sed -n 2p "$f" | grep -q '^  hint: ' || bad "$who: second line is not a hint: $(sed -n 2p "$f")"
  elif [ "$n_lines" -ne 1 ]; then
    bad "$who: $n_lines lines on stderr, want an error and at most a hint: $(cat "$f")"
  fi
}

# General help: three ways, one text, on standard output with status 0.
"$T" --help >"$tmp/general" 2>"$tmp/err" || bad "--help: non-zero exit"
for way in help -h; do
  "$T" $way >"$tmp/out" 2>>"$tmp/err" || bad "$way: non-zero exit"
  cmp -s "$tmp/general" "$tmp/out" || bad "'tallyfit $way' differs from 'tallyfit --help'"
done
[ -s "$tmp/err" ] && bad "general help wrote to stderr: $(cat "$tmp/err")"
has_exit_list "$tmp/general" "tallyfit --help"

cmds=$(awk '/^commands:/{on=1; next} on && !NF {exit} on {print $1}' "$tmp/general")
[ "$(echo $cmds | wc -w)" -ge 7 ] || bad "tallyfit --help lists too few commands: $cmds"

"$T" --version >"$tmp/version" || bad "--version: non-zero exit"
[ "$(head -n 1 "$tmp/version")" = "tallyfit $version" ] || bad "--version: first line '$(head -n 1 "$tmp/version")'"
grep -q '^Licence: MIT' "$tmp/version" || bad "--version: no licence line (LICENSE is MIT)"

for c in $cmds; do
  # help CMD and CMD --help: the same text, status 0, nothing on stderr.
  "$T" "$c" --help >"$tmp/a" 2>"$tmp/err"; rc=$?
  [ $rc -eq 0 ] || bad "$c --help: exit $rc"
  "$T" help "$c" >"$tmp/b" 2>>"$tmp/err"; rc=$?
  [ $rc -eq 0 ] || bad "help $c: exit $rc"
  [ -s "$tmp/err" ] && bad "$c: help wrote to stderr: $(cat "$tmp/err")"
  grep -q "^usage: tallyfit $c" "$tmp/a" || bad "$c --help: no usage line"
  cmp -s "$tmp/a" "$tmp/b" || bad "'tallyfit help $c' differs from 'tallyfit $c --help'"
  has_exit_list "$tmp/a" "$c --help"
  # The list is the shared one, not a copy: identical to the general help's.
  diff <(awk '/^exit status:/{on=1} on' "$tmp/a") <(awk '/^exit status:/{on=1} on' "$tmp/general") >/dev/null ||
    bad "$c --help: the exit statuses differ from tallyfit --help's"

  # --version on the command, alone and among other arguments: the version, nothing run.
  "$T" "$c" --version >"$tmp/out" 2>"$tmp/err"; rc=$?
  [ $rc -eq 0 ] || bad "$c --version: exit $rc"
  cmp -s "$tmp/out" "$tmp/version" || bad "$c --version: '$(head -n 1 "$tmp/out")', want tallyfit --version's text"
  "$T" "$c" surveys/heron-colony.csv --model ricker -o "$tmp/never" --version >"$tmp/out" 2>"$tmp/err"; rc=$?
  [ $rc -eq 0 ] && cmp -s "$tmp/out" "$tmp/version" || bad "$c ... --version: exit $rc, $(head -n 1 "$tmp/out")"
  [ -e "$tmp/never" ] && bad "$c ... --version: ran the command (wrote $tmp/never)"

  # An unknown option is one error, whatever else is missing (survey, --model...), with the
  # command's help named in the hint.
  for args in "--frobnicate" "--frobnicate surveys/heron-colony.csv"; do
    "$T" "$c" $args >"$tmp/out" 2>"$tmp/err"; rc=$?
    [ $rc -eq 2 ] || bad "$c $args: exit $rc, want 2"
    one_error "$tmp/err" "tallyfit $c" "unknown option '--frobnicate'" "$c $args"
    grep -qxF "  hint: run 'tallyfit $c --help' for the options" "$tmp/err" || bad "$c $args: hint: $(cat "$tmp/err")"
  done
  # An option missing its value, as the last argument.
  "$T" "$c" surveys/heron-colony.csv --population >"$tmp/out" 2>"$tmp/err"; rc=$?
  if grep -q -- '--population' "$tmp/a"; then
    [ $rc -eq 2 ] || bad "$c --population (no value): exit $rc, want 2"
    one_error "$tmp/err" "tallyfit $c" "option '--population' needs a value" "$c --population"
  fi
done

# Unknown command names, with or without `help`, and no command at all.
for args in "frobnicate" "help frobnicate"; do
  "$T" $args >"$tmp/out" 2>"$tmp/err"; rc=$?
  [ $rc -eq 2 ] || bad "'$args': exit $rc, want 2"
  one_error "$tmp/err" tallyfit "unknown command 'frobnicate'" "'$args'"
  grep -qxF "  hint: run 'tallyfit help' for the list of commands" "$tmp/err" || bad "'$args': hint: $(cat "$tmp/err")"
  [ -s "$tmp/out" ] && bad "'$args': wrote to stdout"
done
"$T" >"$tmp/out" 2>"$tmp/err"; rc=$?
[ $rc -eq 2 ] || bad "no command: exit $rc, want 2"
one_error "$tmp/err" tallyfit "no command given" "no command"
"$T" --frobnicate >"$tmp/out" 2>"$tmp/err"; rc=$?
[ $rc -eq 2 ] || bad "tallyfit --frobnicate: exit $rc, want 2"
one_error "$tmp/err" tallyfit "unknown option '--frobnicate'" "tallyfit --frobnicate"

# A file error carries the file in the same format: "tallyfit CMD: error: FILE: what".
"$T" check "$tmp/none.csv" >"$tmp/out" 2>"$tmp/err"; rc=$?
[ $rc -eq 3 ] || bad "check of a missing file: exit $rc, want 3"
one_error "$tmp/err" "tallyfit check" "$tmp/none.csv: cannot open the survey file: No such file or directory" "missing file"
printf 'year,count\n2001,5\n2002,x\n' >"$tmp/bad.csv"
"$T" check "$tmp/bad.csv" >"$tmp/out" 2>"$tmp/err"; rc=$?
[ $rc -eq 3 ] || bad "check of a bad count: exit $rc, want 3"
grep -qE "^tallyfit check: error: $tmp/bad.csv:3(:[0-9]+)?: " "$tmp/err" || bad "bad count: $(cat "$tmp/err")"
grep -vE '^(tallyfit check: error: |  hint: )' "$tmp/err" | grep -q . && bad "bad count: a line in another format: $(cat "$tmp/err")"

# A bad value that swallows the survey file is one error too (not also "no survey file given").
"$T" fit --model ricker --chains surveys/heron-colony.csv >"$tmp/out" 2>"$tmp/err"; rc=$?
[ $rc -eq 2 ] || bad "fit --chains FILE: exit $rc, want 2"
one_error "$tmp/err" "tallyfit fit" "--chains: .*" "fit --chains FILE"

# ---- One vocabulary of options (src/cmd/args.h) ----
# -q/--quiet on every command, with one help text.
"$T" fit --help | awk '/^  -q, --quiet/{print; on=1; next} on && /^          /{print; next} {on=0}' | tr -s ' ' >"$tmp/quiet-fit"
[ "$(wc -l <"$tmp/quiet-fit")" -ge 2 ] || bad "fit --help: no -q, --quiet text: $(cat "$tmp/quiet-fit")"
for c in $cmds; do
  "$T" "$c" --help | awk '/^  -q, --quiet/{print; on=1; next} on && /^          /{print; next} {on=0}' | tr -s ' ' >"$tmp/quiet-$c"
  # check, likelihood and simulate add a line saying what their output is; the shared text comes first.
  head -n "$(wc -l <"$tmp/quiet-fit")" "$tmp/quiet-$c" | cmp -s - "$tmp/quiet-fit" ||
    bad "$c --help: the -q text differs from fit's: $(cat "$tmp/quiet-$c")"
  for q in -q --quiet; do
    "$T" "$c" $q --frobnicate >"$tmp/out" 2>"$tmp/err"
    grep -q "unknown option '--frobnicate'" "$tmp/err" && ! grep -q "unknown option '$q'\|invalid option" "$tmp/err" ||
      bad "$c does not take $q: $(cat "$tmp/err")"
  done
done

# The sampler group: every fitting command takes every option of it (refusing only what does not
# apply, never as an unknown option), and its help text is the same in each, padding aside.
sampler=(--chains 2 --warmup 40 --particles 30 --proposal bootstrap --correlated --standard
         --delayed-acceptance off --min-ess 100 --min-iterations 100 --max-iterations 200 --thin 2
         --kept-draws 50 --seed 3 --threads 1 --prior-file models/ricker.ini --prior x1_sd=1)
ml=(--ml-se 0.1 --draws 100 --model-weights ricker=2)
block() {  # the sampler options' help of command $1, blanks squeezed
  "$T" "$1" --help | awk '/^  --chains C/{on=1} last && !/^          /{exit} /^  --prior x1_mean/{last=1} on{print}' |
    tr -s ' '
}
block fit >"$tmp/block-fit"
[ "$(grep -c '^ --' "$tmp/block-fit")" -ge 16 ] || bad "fit --help: the sampler block is short: $(cat "$tmp/block-fit")"
for c in fit compare analyze forecast; do
  block "$c" | cmp -s - "$tmp/block-fit" || bad "$c --help: the sampler options' text differs from fit's"
  "$T" "$c" --help >"$tmp/h"
  for o in "${sampler[@]}" "${ml[@]}"; do
    case $o in --*) ;; *) continue ;; esac
    [ "$c" = fit ] && case $o in --ml-se|--draws|--model-weights) continue ;; esac
    grep -q -- "^ *$o\b" "$tmp/h" || bad "$c --help does not list $o"
  done
  extra=("${ml[@]}"); [ "$c" = fit ] && extra=()
  # No survey file: the options are all read, then the one error is the missing survey (or,
  # for forecast, the survey its --model needs); none of them is unknown.
  src=(); [ "$c" = forecast ] && src=(--average)
  [ "$c" = fit ] && src=(--model ricker)
  "$T" "$c" "${src[@]}" "${sampler[@]}" "${extra[@]}" >"$tmp/out" 2>"$tmp/err"; rc=$?
  [ $rc -eq 2 ] || bad "$c with every sampler option: exit $rc, want 2 (no survey): $(cat "$tmp/err")"
  grep -q "unknown option\|needs a value\|is not\|outside" "$tmp/err" && bad "$c refused a sampler option: $(cat "$tmp/err")"
done
# fit compares no models, so the comparison's options are not fit's.
for o in --draws --ml-se --model-weights; do
  "$T" fit "$o" 1 >"$tmp/out" 2>"$tmp/err"
  grep -q "unknown option '$o'" "$tmp/err" || bad "fit $o: $(cat "$tmp/err")"
done
# Priors the candidates cannot take are refused before any fit, as the one-model commands refuse
# theirs (compare.sh checks that the others reach their candidates).
for c in compare analyze; do
  "$T" "$c" surveys/heron-colony.csv --model gompertz --prior-file models/ricker.ini -o "$tmp/never" >"$tmp/out" 2>"$tmp/err"; rc=$?
  [ $rc -eq 3 ] || bad "$c --prior-file for no candidate: exit $rc, want 3"
  one_error "$tmp/err" "tallyfit $c" ".*ricker.ini: the priors file is for model 'ricker', which is not among the candidates" \
    "$c --prior-file for no candidate"
done
[ -e "$tmp/never" ] && bad "a refused --prior-file still wrote $tmp/never"

# Option names of earlier versions: one error whose hint names the new option.
for c in $cmds; do
  for old in "--models=ricker:use --model" "--set=r=1:use --parameter NAME=VALUE" "--fixed=r=1:use --parameter" \
             "--priors=x.ini:use --prior-file" "--populations=3:use --scheme N"; do
    arg=${old%%:*} hint=${old#*:} name=${arg%%=*}
    # Nothing is written in the source tree should an old name ever run.
    out=(); case $c in check|likelihood) ;; *) out=(-o "$tmp/old-$c") ;; esac
    "$T" "$c" surveys/heron-colony.csv "$arg" "${out[@]}" >"$tmp/out" 2>"$tmp/err"; rc=$?
    [ $rc -eq 2 ] || bad "$c $arg: exit $rc, want 2"
    one_error "$tmp/err" "tallyfit $c" "unknown option '$name'" "$c $arg"
    grep -q "^  hint: $hint" "$tmp/err" || bad "$c $arg: the hint does not say '$hint': $(cat "$tmp/err")"
  done
done

[ $fail -eq 0 ] && echo "cli.sh: help, --version, error format, exit statuses, -q and option names alike in every command"
exit $fail
