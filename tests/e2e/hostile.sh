#!/usr/bin/env bash
# Hostile input and hostile surroundings: junk, huge and degenerate survey files, unreadable
# paths, outputs that cannot be written (a file in the way, a read-only or full file system, the
# file size limit, a device). Every case must end with a clear message and its exit code, no
# crash (exit < 128), no hang (each run is wrapped in `timeout 20`, 300 under valgrind) and no
# partial output (no temporary left, no destination created, an existing destination unchanged).
# The big files are made here, in a temporary folder, not kept in the repository.
set -uo pipefail
cd "$(dirname "$0")/../.."
T=${TALLYFIT:?TALLYFIT must name the binary}
py=/usr/bin/python3
tmp=$(mktemp -d)
mounts=()
cleanup() {
  for m in "${mounts[@]}"; do umount -l "$m" 2>/dev/null; done
  chmod -R u+rwx "$tmp" 2>/dev/null
  rm -rf "$tmp"
}
trap cleanup EXIT
fails=0
fail() { echo "hostile.sh: $*" >&2; fails=$((fails + 1)); }
note() { echo "hostile.sh: $*"; }

# Under valgrind (some 50 times slower) the limit is 300 s; the native run checks the 20.
limit=20
[ -n "${TF_VALGRIND:-}" ] && limit=300
# expect NAME RC PHRASE CMD...: runs CMD under timeout $limit; the exit code must be RC and stderr
# must hold PHRASE (fixed string; "" = no check). Leaves stdout and stderr in $tmp/out, $tmp/err.
expect() {
  local name=$1 want=$2 phrase=$3
  shift 3
  timeout $limit "$@" >"$tmp/out" 2>"$tmp/err"
  local rc=$?
  if [ $rc -eq 124 ]; then fail "$name: still running after $limit s"; return; fi
  if [ $rc -ge 128 ] && [ $rc -ne 130 ]; then fail "$name: killed by signal $((rc - 128))"; return; fi
  [ $rc -eq "$want" ] || fail "$name: exit $rc, expected $want; stderr: $(head -c 400 "$tmp/err")"
  if [ -n "$phrase" ] && ! grep -qF -- "$phrase" "$tmp/err"; then
    fail "$name: stderr lacks '$phrase': $(head -c 400 "$tmp/err")"
  fi
  # A message quotes at most a short piece of a value, however long the value is.
  local longest
  longest=$(awk '{ if (length($0) > m) m = length($0) } END { print m + 0 }' "$tmp/err")
  [ "$longest" -le 400 ] || fail "$name: a message line of $longest characters"
}
# no_leftovers NAME DIR: no temporary of the atomic writer is left in DIR.
no_leftovers() {
  local left
  left=$(find "$2" -maxdepth 2 -name '.*.tmp-*' 2>/dev/null)
  [ -z "$left" ] || fail "$1: temporaries left behind: $left"
}

sim=(simulate --model exponential --parameter r=0.01,sigma=0.1 --start 200)
fc=(forecast --parameter r=-0.01,sigma=0.1 --start 200 --runs 200 -q)

# ---- survey files -------------------------------------------------------------------------------
d=$tmp/in
mkdir -p "$d"
"$py" - "$d" <<'PY'
import os, random, sys
d = sys.argv[1]
def put(name, text, mode="w"):
    with open(os.path.join(d, name), mode) as f:
        f.write(text)
rng = random.Random(8)
put("junk.csv", bytes(rng.randrange(256) for _ in range(65536)), "wb")
# Text-like junk: printable bytes, commas and line breaks, no header worth the name.
put("junk-text.csv", "".join(rng.choice("0123456789,;\"\n\r #.eE-+NA\t") for _ in range(200000)))
put("million.csv", "year,count\n" + "".join("%d,%d\n" % (1700 + i % 500, i % 7) for i in range(1000000)))
put("long-count.csv", "year,count\n2000," + "7" * (1 << 20) + "\n2001,5\n2002,5\n2003,5\n2004,5\n")
put("long-note.csv", "year,count,note\n2000,5," + "x" * (1 << 20) + "\n2001,6,\n2002,7,\n2003,8,\n2004,9,\n")
put("long-header.csv", "year,count," + ",".join("c%d" % i for i in range(150000)) + "\n2000,5\n")
put("nonfinite.csv", "year,count\n2000,NaN\n2001,Inf\n2002,1e308\n2003,-inf\n2004,nan\n2005,5\n")
put("negative-zero.csv", "year,count\n2000,-0\n2001,5\n2002,-0.0\n2003,6\n2004,7\n2005,8\n")
put("huge-year.csv", "year,count\n2000,5\n99999999,5\n2002,5\n2003,5\n2004,5\n")
put("pops.csv", "population,year,count\n" + "".join("p%05d,2000,5\n" % i for i in range(5000)))
put("one-year.csv", "year,count\n" + "2000,5\n" * 100000)
put("no-newline.csv", "year,count\n2000,5\n2001,6\n2002,7\n2003,8\n2004,9")
put("open-quote.csv", "year,count,note\n2000,5,\"" + "never closed\n" * 200000)
PY
# A file over the 32 MiB cap: sparse, so it costs no disk space.
truncate -s 40M "$d/huge.csv"

expect "binary junk" 3 "not valid UTF-8" "$T" check "$d/junk.csv"
expect "binary junk, likelihood" 3 "not valid UTF-8" "$T" likelihood "$d/junk.csv" --model exponential --parameter r=0,sigma=0.1
expect "binary junk on standard input" 3 "not valid UTF-8" \
  sh -c 'exec "$1" likelihood - --model exponential --parameter r=0,sigma=0.1 <"$2"' sh "$T" "$d/junk.csv"
expect "text junk" 3 "" "$T" check "$d/junk-text.csv"
[ -s "$tmp/err" ] || fail "text junk: no message"
expect "a million rows" 3 "more than 100000 data rows; reading stops here" "$T" check "$d/million.csv"
expect "a million rows, forecast" 3 "more than 100000 data rows" "$T" "${fc[@]}" "$d/million.csv" -o "$tmp/o-million"
[ -e "$tmp/o-million" ] && fail "a million rows, forecast: created its output folder"
expect "over 32 MiB" 3 "the file is larger than 32 MiB" "$T" check "$d/huge.csv"
# Standard input has no size to check first: it is cut off while reading, even when endless.
expect "over 32 MiB on standard input" 3 "the survey is larger than 32 MiB" \
  sh -c 'head -c 40M /dev/zero | exec "$1" likelihood - --model exponential --parameter r=0,sigma=0.1' sh "$T"
expect "an endless standard input" 3 "the survey is larger than 32 MiB" \
  sh -c 'yes 2000,5 | exec "$1" likelihood - --model exponential --parameter r=0,sigma=0.1' sh "$T"
expect "a 1 MiB count" 3 "is larger than 1e+09" "$T" check "$d/long-count.csv"
grep -qF "77777777777777777777777777777777777777..." "$tmp/err" || fail "a 1 MiB count: value not shortened"
# A 1 MiB note is free text in an ignored column: the survey is usable.
expect "a 1 MiB note" 0 "" "$T" check "$d/long-note.csv"
grep -qF "5 of 5 years" "$tmp/out" || fail "a 1 MiB note: years not all read"
expect "150000 header columns" 3 "" "$T" check "$d/long-header.csv"
expect "NaN, Inf, 1e308" 3 "count 'NaN' is not a number" "$T" check "$d/nonfinite.csv"
for phrase in "count 'Inf' is not a number" "count 1e308 is larger than 1e+09" "count '-inf' is not a number" \
              "count 'nan' is not a number"; do
  grep -qF "$phrase" "$tmp/err" || fail "NaN, Inf, 1e308: no '$phrase'"
done
# -0 is accepted as a zero count: it is how spreadsheets print a value rounded to zero from below,
# and it is not negative (IEEE 754 -0 == 0), so refusing it as "negative" would be wrong.
expect "negative zero" 0 "" "$T" check "$d/negative-zero.csv"
grep -qF "zero counts: 2" "$tmp/out" || fail "negative zero: not read as two zero counts"
expect "year 99999999" 3 "year 99999999 is outside 1700..2200" "$T" check "$d/huge-year.csv"
expect "5000 one-row populations" 3 "population 'p00000' has 1 surveyed year" "$T" check "$d/pops.csv"
grep -qF "(4980 more errors not shown)" "$tmp/err" || fail "5000 one-row populations: dropped messages not counted"
expect "100000 rows of one year" 3 "year 2000 appears twice (first on line 2)" "$T" check "$d/one-year.csv"
expect "a quote never closed" 3 "never closed" "$T" check "$d/open-quote.csv"
expect "no trailing newline" 0 "" "$T" check "$d/no-newline.csv"
grep -qF "5 of 5 years" "$tmp/out" || fail "no trailing newline: the last row was lost"

# Paths that are not readable survey files.
expect "a directory as survey" 3 "cannot read the survey file: Is a directory" "$T" check "$d"
expect "a directory as survey, forecast" 3 "Is a directory" "$T" "${fc[@]}" "$d" -o "$tmp/o-dir"
expect "a missing survey" 3 "cannot open the survey file: No such file or directory" "$T" check "$d/missing.csv"
# Permissions bind an ordinary user only: root (as CI runs) reads and writes through them, so as
# root these cases run as the user nobody (setpriv, util-linux) when the binary is reachable.
as_user=()
have_user=1
if [ "$(id -u)" -eq 0 ]; then
  chmod 755 "$tmp" "$d"
  as_user=(setpriv --reuid=65534 --regid=65534 --clear-groups)
  if ! command -v setpriv >/dev/null || ! "${as_user[@]}" "$T" --version >/dev/null 2>&1; then
    have_user=0
    note "running as root and cannot run the binary as the user nobody: the permission cases are skipped"
  fi
fi
cp "$d/no-newline.csv" "$d/locked.csv"
chmod 000 "$d/locked.csv"
if [ $have_user -eq 1 ]; then
  expect "an unreadable survey" 3 "cannot open the survey file: Permission denied" "${as_user[@]}" "$T" check "$d/locked.csv"
fi

# ---- outputs ------------------------------------------------------------------------------------
o=$tmp/out-cases
mkdir -p "$o"
echo "not a folder" >"$o/file"
expect "simulate into a path under a file" 1 "Not a directory" "$T" "${sim[@]}" --years 20 -o "$o/file/s.csv"
expect "simulate onto a directory" 1 "output file is a directory" "$T" "${sim[@]}" --years 20 -o "$o"
expect "simulate onto /dev/full" 1 "not a regular file" "$T" "${sim[@]}" --years 20 -o /dev/full
expect "simulate to a full standard output" 1 "cannot write to standard output" \
  sh -c 'exec "$@" >/dev/full' sh "$T" "${sim[@]}" --years 20
expect "forecast into a file" 1 "'$o/file' is a file, not a directory" "$T" "${fc[@]}" -o "$o/file"
expect "forecast below a file" 1 "is a file, not a directory" "$T" "${fc[@]}" -o "$o/file/sub"
[ "$(cat "$o/file")" = "not a folder" ] || fail "the file in the way was changed"
# A folder name longer than the command keeps is refused, not cut to another folder's name.
expect "forecast into a 6000-byte folder name" 2 "the output folder name is longer than" \
  "$T" "${fc[@]}" -o "$o/$(printf 'abc/%.0s' $(seq 1500))"
[ -e "$o/abc" ] && fail "a 6000-byte folder name: folders were made"
no_leftovers "outputs" "$o"

# The file size limit: the write fails (EFBIG, SIGXFSZ is ignored), nothing is left behind, and
# an earlier output stays as it was. ulimit -f counts 1024-byte blocks.
"$T" "${sim[@]}" --years 30 -o "$o/keep.csv" 2>/dev/null || fail "simulate: a plain run failed"
cp "$o/keep.csv" "$o/keep.ref"
expect "simulate past ulimit -f" 1 "File too large" \
  sh -c 'ulimit -f 1; exec "$@"' sh "$T" "${sim[@]}" --years 500 --first-year 1700 -o "$o/keep.csv"
cmp -s "$o/keep.csv" "$o/keep.ref" || fail "simulate past ulimit -f: the earlier file was changed"
expect "simulate past ulimit -f, new file" 1 "File too large" \
  sh -c 'ulimit -f 1; exec "$@"' sh "$T" "${sim[@]}" --years 500 --first-year 1700 -o "$o/new.csv"
[ -e "$o/new.csv" ] && fail "simulate past ulimit -f: a partial file was created"
"$T" "${fc[@]}" -o "$o/tables" >/dev/null 2>&1 || fail "forecast: a plain run failed"
cp -r "$o/tables" "$o/tables.ref"
expect "forecast past ulimit -f" 1 "File too large" \
  sh -c 'ulimit -f 4; exec "$@"' sh "$T" "${fc[@]}" --years 500 --threshold 1,2,3,4,5,6 -o "$o/tables"
diff -r "$o/tables" "$o/tables.ref" >/dev/null || fail "forecast past ulimit -f: earlier tables were changed"
expect "forecast past ulimit -f, new folder" 1 "File too large" \
  sh -c 'ulimit -f 4; exec "$@"' sh "$T" "${fc[@]}" --years 500 --threshold 1,2,3,4,5,6 -o "$o/new/tables"
[ -e "$o/new" ] && fail "forecast past ulimit -f: left the folders it made"
no_leftovers "ulimit -f" "$o"

# A folder that cannot be written: one without write permission (for an ordinary user), and,
# as root, a read-only file system (when this machine lets it mount one).
unwritable() {  # folder, phrase, command prefix...
  local dir=$1 phrase=$2
  shift 2
  expect "simulate into an unwritable folder ($phrase)" 1 "$phrase" "$@" "$T" "${sim[@]}" --years 20 -o "$dir/s.csv"
  expect "forecast into an unwritable folder ($phrase)" 1 "$phrase" "$@" "$T" "${fc[@]}" -o "$dir"
  expect "forecast below an unwritable folder ($phrase)" 1 "$phrase" "$@" "$T" "${fc[@]}" -o "$dir/sub"
  [ -z "$(ls -A "$dir")" ] || fail "unwritable folder ($phrase): something was written: $(ls -A "$dir")"
}
chmod 755 "$o"
mkdir -p "$o/locked"
chmod 555 "$o/locked"
[ $have_user -eq 1 ] && unwritable "$o/locked" "Permission denied" "${as_user[@]}"
if [ "$(id -u)" -eq 0 ]; then
  ro=$tmp/ro
  mkdir -p "$ro"
  if mount -t tmpfs -o ro,size=64k tmpfs "$ro" 2>/dev/null; then
    mounts+=("$ro")
    unwritable "$ro" "Read-only file system"
  else
    note "cannot mount a read-only file system here: that unwritable-folder case is skipped"
  fi
fi

# A full disk: a small tmpfs filled to the last block.
full=$tmp/full
mkdir -p "$full"
if [ "$(id -u)" -eq 0 ] && mount -t tmpfs -o size=256k tmpfs "$full" 2>/dev/null; then
  mounts+=("$full")
  mkdir "$full/old"
  "$T" "${fc[@]}" -o "$full/old" >/dev/null 2>&1 || fail "forecast on the small disk: a plain run failed"
  cp -r "$full/old" "$tmp/old.ref"
  dd if=/dev/zero of="$full/filler" bs=4k 2>/dev/null
  expect "simulate on a full disk" 1 "No space left on device" "$T" "${sim[@]}" --years 100 -o "$full/s.csv"
  [ -e "$full/s.csv" ] && fail "simulate on a full disk: created its output"
  expect "forecast on a full disk" 1 "No space left on device" "$T" "${fc[@]}" -o "$full/old"
  diff -r "$full/old" "$tmp/old.ref" >/dev/null || fail "forecast on a full disk: earlier tables were changed"
  # A new folder still fits (directories cost no data blocks on tmpfs), its tables do not.
  expect "forecast on a full disk, new folder" 1 "No space left on device" "$T" "${fc[@]}" -o "$full/new/deeper"
  [ -e "$full/new" ] && fail "forecast on a full disk: left the folders it made"
  no_leftovers "full disk" "$full"
else
  note "cannot mount a small tmpfs here (needs root): the full-disk case is skipped; ulimit -f covers write failures"
fi

[ $fails -eq 0 ] && echo "hostile.sh: all cases passed"
[ $fails -eq 0 ]
