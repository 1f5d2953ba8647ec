#!/usr/bin/env bash
# SIGINT and SIGTERM during a long `tallyfit forecast`: the command stops within a second, exits
# with 130 (interrupted), says so, and leaves no files: no output folder, no temporaries.
set -uo pipefail
T=${TALLYFIT:?TALLYFIT must name the binary}
tmp=$(mktemp -d)
pid=""
trap '[ -n "$pid" ] && kill -KILL "$pid" 2>/dev/null; rm -rf "$tmp"' EXIT
fails=0
fail() { echo "signals.sh: $*" >&2; fails=$((fails + 1)); }

# A projection that takes far longer than the test waits: 300000 runs over 1000 years is about ten
# seconds of work (about 10 ms a year, a few times that under the sanitizers), and the command
# polls between years.
long=(forecast --parameter r=-0.01,sigma=0.1 --start 200 --runs 300000 --years 1000 -q)
# Under valgrind (some 50 times slower) a tenth of the runs still lasts far longer than the test
# waits and keeps a year short; the program needs a few seconds to start and its exit (the leak
# check) takes longer. The second is checked by the native run; here the limit is 5 s.
wait_s=1.5 limit_ms=1000
if [ -n "${TF_VALGRIND:-}" ]; then
  long=(forecast --parameter r=-0.01,sigma=0.1 --start 200 --runs 30000 --years 1000 -q)
  wait_s=6 limit_ms=5000
fi

# now_ms: milliseconds since the epoch (GNU date).
now_ms() { date +%s%3N; }

for sig in INT TERM; do
  out="$tmp/out-$sig"
  "$T" "${long[@]}" -o "$out/tables" >"$tmp/stdout" 2>"$tmp/stderr" &
  pid=$!
  # Let it get into the projection (options read, the handler installed, the work begun).
  sleep $wait_s
  if ! kill -0 "$pid" 2>/dev/null; then
    wait "$pid"
    fail "SIG$sig: forecast ended before the signal (exit $?); the test's run is too short"
    pid=""
    continue
  fi
  t0=$(now_ms)
  kill -s "$sig" "$pid"
  # Wait at most 1 s for it to end, then a little longer only to report how late it was.
  while kill -0 "$pid" 2>/dev/null && [ $(($(now_ms) - t0)) -lt $((limit_ms + 4000)) ]; do sleep 0.02; done
  dt=$(($(now_ms) - t0))
  if kill -0 "$pid" 2>/dev/null; then
    fail "SIG$sig: still running $(((limit_ms + 4000) / 1000)) s after the signal"
    kill -KILL "$pid" 2>/dev/null
  fi
  wait "$pid"
  rc=$?
  pid=""
  [ "$dt" -le $limit_ms ] || fail "SIG$sig: took $dt ms to stop, more than $limit_ms ms"
  [ $rc -eq 130 ] || fail "SIG$sig: exit $rc, expected 130 (interrupted)"
  grep -q "interrupted" "$tmp/stderr" || fail "SIG$sig: no message says it was interrupted: $(cat "$tmp/stderr")"
  [ -e "$out" ] && fail "SIG$sig: left output behind: $(find "$out")"
  left=$(find "$tmp" -name '.*.tmp-*')
  [ -z "$left" ] || fail "SIG$sig: temporaries left: $left"
  echo "signals.sh: SIG$sig stopped forecast in $dt ms, exit $rc"
done

[ $fails -eq 0 ]
