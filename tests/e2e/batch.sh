#!/usr/bin/env bash
# End-to-end test of batch analysis (`tallyfit analyze --batch`) on an invented scheme from
# `tallyfit simulate --scheme`: the same CSV files byte for byte with 1 thread, 2 threads
# and 3 MPI processes; tables that concatenate under one header; a population with bad rows and
# one whose fits cannot be made reported while the others finish with their own numbers; a
# batch stopped by SIGTERM and run again ending with the files of an uninterrupted run; a
# folder of other settings refused, and taken over with --fresh; the summary workbook sortable.
set -u
cd "$(dirname "$0")/../.."
T=${TALLYFIT:?TALLYFIT must name the binary}
fail=0
bad() { echo "batch.sh: $*" >&2; fail=1; }
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
export SOURCE_DATE_EPOCH=1700000000
# Short runs: this test is about the queue and the files, not about convergence.
if [ -n "${TF_SANITIZE:-}${TF_VALGRIND:-}" ]; then
  N=3
  FAST=(--iterations 80 --warmup 40 --draws 100 --particles 30 --years 10 --runs 100 --model exponential,ricker)
else
  N=6
  FAST=(--iterations 160 --warmup 40 --draws 100 --particles 40 --years 20 --runs 200 --model exponential,ricker)
fi
"$T" simulate --scheme $N --seed 11 -o "$tmp/scheme.csv" || { bad "simulate --scheme failed"; exit 1; }

# Every CSV file under two batch folders, the same bytes; the timings (wall-clock seconds)
# are the one file that must differ.
same_files() {  # dir1 dir2 what
  local a=$1 b=$2 what=$3 n=0
  while IFS= read -r f; do
    n=$((n + 1))
    [ -f "$b/$f" ] || { bad "$what: $f missing"; continue; }
    cmp -s "$a/$f" "$b/$f" || bad "$what: $f differs"
  done < <(cd "$a" && find . -name '*.csv' ! -name timings.csv ! -path '*/.*' | sort)
  [ "$(cd "$b" && find . -name '*.csv' ! -name timings.csv | wc -l)" -eq "$n" ] || bad "$what: not the same files"
  [ "$n" -gt $((N * 5)) ] || bad "$what: only $n CSV files"
}
# The Status column of the summary, by population.
status_of() {  # summary.csv label
  /usr/bin/python3 - "$1" "$2" <<'PY'
import csv, sys
for r in csv.DictReader(open(sys.argv[1], newline="")):
    if r["population"] == sys.argv[2]:
        print(r["status"] + "|" + r["reason"])
PY
}

# ---- 1 thread, 2 threads ----
"$T" analyze "$tmp/scheme.csv" --batch -o "$tmp/t1" --threads 1 -q "${FAST[@]}" 2>"$tmp/err1"; rc=$?
[ $rc -eq 0 ] || { bad "1 thread: exit $rc"; cat "$tmp/err1" >&2; }
"$T" analyze "$tmp/scheme.csv" --batch -o "$tmp/t2" --threads 2 "${FAST[@]}" >"$tmp/out2" 2>"$tmp/err2"; rc=$?
[ $rc -eq 0 ] || { bad "2 threads: exit $rc"; cat "$tmp/err2" >&2; }
B1=$tmp/t1 B2=$tmp/t2
same_files "$B1" "$B2" "1 thread vs 2 threads"
grep -q "batch: $N populations: $N done, 0 failed" "$tmp/out2" || bad "stdout lacks the batch line: $(head -c 300 "$tmp/out2")"
[ "$(grep -c ': done in' "$tmp/err2")" -eq $N ] || bad "stderr has not one line per population"
[ -s "$tmp/t2/scheme.xlsx" ] || bad "no summary workbook"
[ -s "$B2/timings.csv" ] || bad "no timings.csv"
[ "$(($(wc -l <"$B2/populations.csv") - 1))" -eq $N ] || bad "populations.csv has not $N rows"
[ -s "$B2/summary.csv" ] || bad "no summary.csv"

# The tables concatenate: every population's row of the table of populations under the one
# header, in file order, is the batch's table; every table of a population has the header the
# same table has everywhere (docs/tables.md), with the population's label first in every row.
{ head -n 1 "$B2/populations.csv"; for d in "$B2"/*/; do tail -n +2 "$d/populations.csv"; done; } >"$tmp/cat.csv"
cmp -s "$tmp/cat.csv" "$B2/populations.csv" || bad "the population rows do not concatenate into populations.csv"
for t in abundance projection risk declines models change parameters diagnostics chains draws summary; do
  h=$(head -n 1 "$B2/site-0001/$t.csv")
  case "$h" in population,*) ;; *) bad "$t.csv does not start with a population column: $h" ;; esac
  for d in "$B2"/*/; do
    lab=$(basename "$d")
    [ "$(head -n 1 "$d/$t.csv")" = "$h" ] || bad "$lab: $t.csv has another header"
    # The first page's lines about the whole file (cautions, provenance) name no population.
    want=$lab
    [ "$t" = summary ] && want=$(printf '\n%s' "$lab")
    [ "$(tail -n +2 "$d/$t.csv" | cut -d, -f1 | sort -u)" = "$want" ] || bad "$lab: $t.csv rows not labelled $lab"
  done
done
for d in "$B2"/*/; do
  lab=$(basename "$d")
  [ -f "$d/finished.txt" ] || bad "$lab: no marker"
  [ -f "$d/$lab.xlsx" ] || bad "$lab: no workbook (the batch is below the limit)"
done
# The per-population workbooks leave the raw draws to draws.csv (no --workbook-draws), and the
# settings record says so, since the option changes what a resumed batch would write.
[ -s "$B2/site-0001/draws.csv" ] || bad "site-0001: no draws.csv"
/usr/bin/python3 -c 'import openpyxl, sys; n = openpyxl.load_workbook(sys.argv[1], read_only=True).sheetnames; sys.exit("Draws" in n or "Abundance" not in n)' \
  "$B2/site-0001/site-0001.xlsx" || bad "site-0001.xlsx: a Draws sheet without --workbook-draws, or no Abundance sheet"
grep -qx "workbook-draws no" "$B2/settings.txt" || bad "settings.txt lacks 'workbook-draws no'"

# The summary workbook: one row per population below the header and legend, numbers as
# numbers, sort and filter buttons over the columns (checked with openpyxl).
/usr/bin/python3 - "$tmp/t2/scheme.xlsx" $N <<'PY' || bad "summary workbook"
import sys, openpyxl
wb = openpyxl.load_workbook(sys.argv[1])
ws = wb["Populations"]
n = int(sys.argv[2])
rows = [r for r in ws.iter_rows(values_only=True)]
hdr = next(i for i, r in enumerate(rows) if r and r[0] == "Population")
data = [r for r in rows[hdr + 2:] if r and r[0]]
assert len(data) == n, (len(data), n)
assert ws.auto_filter.ref, "no autofilter"
col = rows[hdr].index("Abundance")
assert all(isinstance(r[col], (int, float)) for r in data), "abundance not numeric"
# The first page first, with the cautions, as in every workbook.
assert wb.sheetnames[0] == "Summary", wb.sheetnames
PY

# ---- 3 MPI processes (2 workers and the manager) ----
M=${TALLYFIT_MPI:-}
if [ -n "${TF_SANITIZE:-}${TF_VALGRIND:-}" ]; then
  echo "batch.sh: MPI part skipped under the sanitizers and valgrind (they run the plain binary only)"
elif [ -x "$M" ] && command -v mpirun >/dev/null; then
  # As root (CI, containers) Open MPI must be told that this is meant.
  [ "$(id -u)" -eq 0 ] && export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1
  mpirun --oversubscribe -n 3 "$M" analyze "$tmp/scheme.csv" -o "$tmp/m3" -q "${FAST[@]}" >"$tmp/outm" 2>"$tmp/errm"; rc=$?
  [ $rc -eq 0 ] || { bad "mpirun -n 3: exit $rc"; tail -20 "$tmp/errm" >&2; }
  same_files "$B1" "$tmp/m3" "1 thread vs 3 MPI processes"
  # A single process of the MPI build runs the threads as the plain build does.
  "$M" analyze "$tmp/scheme.csv" --batch -o "$tmp/m1" --threads 2 -q "${FAST[@]}" 2>"$tmp/errm1" ||
    bad "MPI build without mpirun: exit $?"
  same_files "$B1" "$tmp/m1" "plain vs MPI build without mpirun"
elif [ "${CI:-}" ]; then
  bad "CI must run the MPI part: no MPI build ($M) or no mpirun"
else
  echo "batch.sh: MPI part skipped: no mpicc/mpirun here (install openmpi-bin and libopenmpi-dev; make check then builds build/mpi/tallyfit)"
fi

# ---- a population with bad rows and one that no model suits ----
bad_line=$(grep -n '^site-0002,' "$tmp/scheme.csv" | sed -n 3p | cut -d: -f1)
awk -F, -v L="$bad_line" 'BEGIN{OFS=","} NR==L{$3="abc"} {print}' "$tmp/scheme.csv" >"$tmp/mixed.csv"
# Fractional amounts (with a zero): without --estimates a count that is not whole is bad data.
for y in 2001 2002 2003 2004 2005 2006; do echo "index-z,$y,$((y % 3)).5,1"; done >>"$tmp/mixed.csv"
sed -i 's/^index-z,2003,.*/index-z,2003,0,1/' "$tmp/mixed.csv"
"$T" analyze "$tmp/mixed.csv" --batch -o "$tmp/bad" --threads 2 --workbook-limit 0 "${FAST[@]}" >"$tmp/outb" 2>"$tmp/errb"; rc=$?
[ $rc -eq 1 ] || bad "bad data: exit $rc, want 1"
S=$tmp/bad/populations.csv
[ "$(($(wc -l <"$S") - 1))" -eq $((N + 1)) ] || bad "bad data: the summary has not every population"
case "$(status_of "$S" site-0002)" in
  "bad data|line $bad_line, field 3: count 'abc' is not a number"*) ;;
  *) bad "bad data: site-0002 is '$(status_of "$S" site-0002)'" ;;
esac
case "$(status_of "$S" index-z)" in
  "bad data|line "*", field 3: count 0.5 is not a whole number"*) ;;
  *) bad "index-z is '$(status_of "$S" index-z)'" ;;
esac
grep -q "site-0002: bad data: line $bad_line" "$tmp/outb" || bad "bad data: stdout does not list site-0002"
grep -q "could not be analysed" "$tmp/errb" || bad "bad data: stderr does not say that some failed"
ls "$tmp"/bad/*/*.xlsx >/dev/null 2>&1 && bad "--workbook-limit 0 wrote workbooks"
# The others are done, with the numbers they have in the clean batch.
for lab in $(cut -d, -f1 "$B1/populations.csv" | tail -n +2); do
  [ "$lab" = site-0002 ] && continue
  grep "^$lab," "$B1/populations.csv" >"$tmp/want"
  grep "^$lab," "$S" >"$tmp/got"
  cmp -s "$tmp/want" "$tmp/got" || bad "bad data: $lab's row differs from the clean batch"
done

# ---- SIGTERM mid-batch, then the same command again ----
"$T" analyze "$tmp/scheme.csv" --batch -o "$tmp/r" --threads 2 -q "${FAST[@]}" 2>"$tmp/errr" &
pid=$!
for _ in $(seq 1 600); do
  ls "$tmp"/r/*/finished.txt >/dev/null 2>&1 && break
  sleep 0.1
done
kill -TERM $pid
wait $pid; rc=$?
n_done=$(ls "$tmp"/r/*/finished.txt 2>/dev/null | wc -l)
if [ $rc -eq 0 ]; then
  echo "batch.sh: the batch finished before SIGTERM arrived; the resume part checks less"
else
  [ $rc -eq 130 ] || bad "SIGTERM: exit $rc, want 130"
  grep -q "the same command continues" "$tmp/errr" || bad "SIGTERM: stderr does not say how to go on"
  grep -q "not done" "$tmp/r/populations.csv" || bad "SIGTERM: the summary does not show what is left"
  [ "$n_done" -ge 1 ] && [ "$n_done" -lt $N ] || echo "batch.sh: $n_done of $N finished at SIGTERM"
fi
ls -a "$tmp"/r "$tmp"/r/*/ | grep -q '\.tmp-' && bad "SIGTERM: temporary files left behind"
"$T" analyze "$tmp/scheme.csv" --batch -o "$tmp/r" --threads 2 "${FAST[@]}" >/dev/null 2>"$tmp/errr2" ||
  bad "resume: exit $?"
[ $rc -eq 0 ] || grep -q "settled by an earlier run" "$tmp/errr2" || bad "resume: the earlier populations were redone"
[ "$(grep -c ': done in' "$tmp/errr2")" -eq $((N - n_done)) ] || bad "resume: not exactly the $((N - n_done)) unfinished populations were run"
same_files "$B1" "$tmp/r" "uninterrupted vs resumed"

# ---- other settings in the same folder ----
"$T" analyze "$tmp/scheme.csv" --batch -o "$tmp/t1" --seed 2 "${FAST[@]}" >"$tmp/outs" 2>"$tmp/errs"; rc=$?
[ $rc -eq 2 ] || bad "other seed: exit $rc, want 2"
grep -q "other settings: it has 'seed 1', this run has 'seed 2'" "$tmp/errs" || bad "other seed: $(head -c 300 "$tmp/errs")"
grep -q -- "--fresh" "$tmp/errs" || bad "other seed: the hint does not name --fresh"
cmp -s "$B1/populations.csv" "$B2/populations.csv" || bad "other seed: the refused run changed the folder"
# --fresh: a small batch of two populations takes over the folder of the mixed one.
head -n 2 "$tmp/scheme.csv" >"$tmp/two.csv"
grep -E '^site-000[12],' "$tmp/scheme.csv" >>"$tmp/two.csv"
cp "$tmp/two.csv" "$tmp/mixed.csv"
"$T" analyze "$tmp/mixed.csv" --batch -o "$tmp/bad" --threads 2 -q "${FAST[@]}" 2>/dev/null; rc=$?
[ $rc -eq 2 ] || bad "another survey in the folder: exit $rc, want 2"
"$T" analyze "$tmp/mixed.csv" --batch --fresh -o "$tmp/bad" --threads 2 -q "${FAST[@]}" 2>"$tmp/errf" ||
  { bad "--fresh: exit $?"; cat "$tmp/errf" >&2; }
folders() { find "$1" -mindepth 1 -maxdepth 1 -type d -printf '%f\n' | sort | tr '\n' ' '; }
[ "$(folders "$tmp/bad")" = "site-0001 site-0002 " ] ||
  bad "--fresh: the earlier populations' folders stay: $(folders "$tmp/bad")"
cmp -s <(grep '^site-0001,' "$B1/populations.csv") <(grep '^site-0001,' "$tmp/bad/populations.csv") ||
  bad "--fresh: site-0001 differs"

# ---- command line ----
"$T" analyze "$tmp/scheme.csv" --batch --population site-0001 -o "$tmp/u" >/dev/null 2>"$tmp/erru"; rc=$?
[ $rc -eq 2 ] && grep -q "not a batch" "$tmp/erru" || bad "--batch --population: exit $rc"
"$T" simulate --scheme 3 --model ricker >/dev/null 2>&1 && bad "simulate --scheme with --model accepted"
"$T" simulate --scheme 0 >/dev/null 2>&1 && bad "simulate --scheme 0 accepted"
cmp -s <("$T" simulate --scheme 3 --seed 11 | grep '^site-0003,') <(grep '^site-0003,' "$tmp/scheme.csv") ||
  bad "simulate: population 3 depends on the number of populations"

exit $fail
