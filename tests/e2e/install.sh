#!/usr/bin/env bash
# `make install PREFIX=...` puts the binary, the model files and the manual page in place, and the
# installed binary finds its model files from there (../share/tallyfit/models beside bin/).
set -euo pipefail
cd "$(dirname "$0")/../.."
[ -n "${TF_SANITIZE:-}${TF_VALGRIND:-}" ] && { echo "install.sh: skipped under sanitizers (nothing new to learn)"; exit 0; }
tmp=$(mktemp -d); trap 'rm -rf "$tmp"' EXIT
make -s --no-print-directory install PREFIX="$tmp/usr" >"$tmp/log" 2>&1 || { cat "$tmp/log"; exit 1; }
fail() { echo "install.sh: $*"; exit 1; }
[ -x "$tmp/usr/bin/tallyfit" ] || fail "no binary"
# A model file for every growth model of the installed program's table, and the observation file.
T=$tmp/usr/bin/tallyfit
. tests/e2e/lib/models.bash
growth=$(tf_model_list growth) || exit 1
for m in $growth observation; do
  [ -f "$tmp/usr/share/tallyfit/models/$m.ini" ] || fail "model file $m.ini missing"
done
page=$tmp/usr/share/man/man1/tallyfit.1
[ -s "$page" ] || fail "no manual page"
# Every command of `tallyfit --help` has its own section in the page.
for c in $("$tmp/usr/bin/tallyfit" --help | awk '/^commands:/{on=1; next} on && !NF {exit} on {print $1}'); do
  grep -q "^\.SS $c\$" "$page" || fail "manual page lacks command $c"
done
# The exit statuses the commands' help texts share, once, under EXIT STATUS: each code of cmd.h.
for code in $(sed -n 's/^ *TF_EXIT_[A-Z]* = \([0-9]*\),.*/\1/p' src/cmd/cmd.h); do
  awk '/^\.SH EXIT STATUS/{on=1; next} /^\.SH/{on=0} on' "$page" | grep -qE "^  $code +[a-z]" ||
    fail "manual page: exit status $code not under EXIT STATUS"
done
[ "$(grep -c '^exit status:' "$page")" -eq 0 ] || fail "manual page repeats the exit statuses per command"
if command -v groff >/dev/null; then
  warn=$(groff -man -Tutf8 -ww -z "$page" 2>&1) || fail "groff failed"
  [ -z "$warn" ] || fail "groff warnings: $warn"
fi
# The installed binary, run from elsewhere, finds the installed model files.
cp surveys/heron-colony.csv "$tmp/s.csv"
(cd "$tmp" && env -u TALLYFIT_MODELS "$tmp/usr/bin/tallyfit" fit s.csv --model exponential --iterations 200 --warmup 200 --chains 2 --quiet -o "$tmp/out" 2>/dev/null) \
  || fail "installed binary could not fit (model files not found?)"
echo "install.sh: binary, model files and manual page installed and usable"
