#!/usr/bin/env bash
# Every list of models a reader sees names exactly the models of the program's table
# (src/model/registry.c), so that adding one leaves nothing stale (DEVELOPERS.md, "Adding a growth
# model"): README's lists (hand-written, so checked here) and the help texts and manual page
# (made from the table at run time, so checked to be complete). The lists come from the program
# (tests/e2e/lib/models.bash).
set -u
cd "$(dirname "$0")/../.."
T=${TALLYFIT:?TALLYFIT must name the binary}
fail=0
bad() { echo "model_lists.sh: $*" >&2; fail=1; }
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
. tests/e2e/lib/models.bash
growth=$(tf_model_list growth) || exit 1
obs=$(tf_model_list observation) || exit 1
glist=$(paste -sd, <<<"$growth" | sed 's/,/, /g')
olist=$(paste -sd, <<<"$obs" | sed 's/,/, /g')

# README.md: the sentences "Growth models: `a`, `b`, ..." and "Counting error: `c`, ..." list the
# names in the table's order (the words in parentheses are explanations, not names), and the
# opening paragraph names every growth model (in words or as named, in any case).
/usr/bin/python3 - README.md "$glist" "$olist" <<'PY' || fail=1
import re, sys
text = open(sys.argv[1], encoding="utf-8").read()
want = {"Growth models:": sys.argv[2].split(", "), "Counting error:": sys.argv[3].split(", ")}
ok = True

def sentence(start):
    """The text after start up to the end of its sentence, without parenthesised asides."""
    i = text.find(start)
    if i < 0:
        return None
    out, depth = [], 0
    for j in range(i + len(start), len(text)):
        c = text[j]
        if c == "(":
            depth += 1
        elif c == ")":
            depth -= 1
        elif depth == 0:
            if c == "." and (j + 1 == len(text) or text[j + 1].isspace()):
                break
            out.append(c)
    return "".join(out)

for start, names in want.items():
    s = sentence(start)
    if s is None:
        print(f"model_lists.sh: README.md has no sentence starting '{start}'")
        ok = False
        continue
    got = re.findall(r"`([^`]+)`", s)
    if got != names:
        print(f"model_lists.sh: README.md '{start}' lists {got}, the program has {names}")
        ok = False

# The opening paragraph is prose: a name may be written in words ("theta logistic") and in any case.
intro = " ".join(text.split("\n\n")[1].lower().split())
for name in want["Growth models:"]:
    if name not in intro and name.replace("-", " ") not in intro:
        print(f"model_lists.sh: README.md's opening paragraph does not name the growth model {name}")
        ok = False
sys.exit(0 if ok else 1)
PY

# Help texts: every command that takes model names lists them all, in the table's order.
for c in fit likelihood simulate compare analyze forecast; do
  "$T" "$c" --help >"$tmp/help" 2>&1 || { bad "$c --help failed"; continue; }
  # Lists may be wrapped: compare with the lines joined.
  tr '\n' ' ' <"$tmp/help" | tr -s ' ' >"$tmp/flat"
  grep -qF -- "$glist" "$tmp/flat" || bad "$c --help does not list the growth models $glist"
  grep -qF -- "$olist" "$tmp/flat" || bad "$c --help does not list the observation models $olist"
done

# The manual page is made from the help texts (tools/make-man): the lists reach it too.
if tools/make-man "$T" >"$tmp/page" 2>"$tmp/err"; then
  tr '\n' ' ' <"$tmp/page" | tr -s ' ' >"$tmp/flat"
  grep -qF -- "$glist" "$tmp/flat" || bad "the manual page does not list the growth models $glist"
  grep -qF -- "$olist" "$tmp/flat" || bad "the manual page does not list the observation models $olist"
else
  bad "tools/make-man failed: $(head -c 300 "$tmp/err")"
fi

# Each growth model has its prior file, which names it (models/<name>.ini; the unit test
# test_model_file checks its parameters).
for m in $growth; do
  grep -qE "^name *= *$m\$" "models/$m.ini" 2>/dev/null || bad "models/$m.ini is missing or does not name $m"
done

[ $fail -eq 0 ] && echo "model_lists.sh: README, help texts, manual page and model files list the models: $glist; $olist"
exit $fail
