#!/bin/sh
# tests/cli/test_watch.sh - `lamina watch` picks up images written into the
# watched folder while it runs (closed after writing, or renamed in), ignores
# temporaries and other files, keeps the catalogue and report up to date,
# stops cleanly on SIGINT and keeps earlier results when restarted.
# Usage: test_watch.sh BUILD/lamina. Bounded: every wait has a deadline.
set -u
LC_ALL=C; export LC_ALL
BIN=${1:-build/lamina}
T=$(mktemp -d "${TMPDIR:-/tmp}/lamina-watch.XXXXXX")
pid=""
trap '[ -n "$pid" ] && kill "$pid" 2>/dev/null; rm -rf "$T"' EXIT
pass=0; fail=0
ok()  { pass=$((pass + 1)); [ "${LAM_TEST_VERBOSE:-0}" = 1 ] && echo "test_watch PASS: $1"; return 0; }
bad() { fail=$((fail + 1)); echo "test_watch FAIL: $1"; }
# wait_for FILE TEXT SECONDS: until FILE contains TEXT
wait_for() {
    i=0; while [ $i -lt $(($3 * 10)) ]; do grep -q "$2" "$1" 2>/dev/null && return 0; sleep 0.1; i=$((i + 1)); done
    return 1
}
# wait_exit SECONDS: until the watcher has exited; sets rc
wait_exit() {
    i=0; while [ $i -lt $(($1 * 10)) ]; do kill -0 "$pid" 2>/dev/null || break; sleep 0.1; i=$((i + 1)); done
    if kill -0 "$pid" 2>/dev/null; then kill -9 "$pid"; wait "$pid" 2>/dev/null; rc=999; else wait "$pid"; rc=$?; fi
    pid=""
}
IN=$T/in; OUT=$T/out; mkdir -p "$IN"
A=HT285-A07-tile12.png; C=HT285-C11-tile07.png

"$BIN" watch --setup samples/bench3-setup.json --max-images 2 --idle-exit 60 --out "$OUT" "$IN" \
    > "$T/w.out" 2> "$T/w.err" & pid=$!
wait_for "$T/w.err" "watching" 10 && ok "the watcher starts" || bad "no start message: $(cat "$T/w.err")"
echo "notes" > "$IN/notes.txt"                               # not an image: ignored
cp "samples/$A" "$IN/.$A.part"; mv "$IN/.$A.part" "$IN/$A"   # renamed in (IN_MOVED_TO)
cp "samples/$C" "$IN/$C"                                     # written in place (IN_CLOSE_WRITE)
wait_exit 60
[ "$rc" -eq 0 ] && ok "stops by itself after --max-images 2" || bad "watch exit status $rc: $(cat "$T/w.err")"
[ "$(grep -c . "$T/w.out")" -eq 2 ] && ok "one line per image" || bad "lines: $(cat "$T/w.out")"
grep -q "HT285-A07-tile12.png" "$T/w.out" && grep -q "HT285-C11-tile07.png" "$T/w.out" \
    && ok "both images reported" || bad "images reported: $(cat "$T/w.out")"
for f in HT285-A07-tile12.json HT285-C11-tile07.json HT285-C11-tile07.annotated.png catalog.json catalog.csv report.html; do
    [ -s "$OUT/$f" ] && ok "watch wrote $f" || bad "watch wrote $f"
done
# the pool is carried: the second image starts from the first one's fit
grep -q "pooled from 1 image" "$T/w.err" && ok "the pooled fit is carried from image to image" \
    || bad "no pool line: $(cat "$T/w.err")"
grep -q '"schema":[[:space:]]*"lamina-pool/1"' "$OUT/pool.json" && ok "watch keeps pool.json" || bad "pool.json"
grep -q '"status":[[:space:]]*"fitted (prior pooled over the run)"' "$OUT/HT285-C11-tile07.json" "$OUT/HT285-A07-tile12.json" \
    && ok "the second image used the pooled prior" || bad "second image not pooled"
grep -q "HT285-A07-tile12" "$OUT/report.html" && grep -q "HT285-C11-tile07" "$OUT/report.html" \
    && ok "the report lists both images" || bad "report.html lacks an image"
grep -q '"path":[[:space:]]*".*notes' "$OUT"/*.json && bad "notes.txt analysed" || ok "other files ignored"
ls "$OUT" | grep -q 'tmp-' && bad "temporary files left" || ok "no temporary files"

# restarted: earlier results are kept, not recomputed; SIGINT stops it cleanly
"$BIN" watch --setup samples/bench3-setup.json --out "$OUT" "$IN" > "$T/w2.out" 2> "$T/w2.err" & pid=$!
wait_for "$T/w2.out" "HT285-C11-tile07.png" 20 && ok "restart goes through the folder" || bad "restart: $(cat "$T/w2.err")"
grep -q "results kept" "$T/w2.out" && ok "restart keeps earlier results" || bad "restart recomputed: $(cat "$T/w2.out")"
kill -INT "$pid"
wait_exit 20
[ "$rc" -eq 0 ] && ok "SIGINT stops the watcher cleanly" || bad "after SIGINT: status $rc"
ls "$OUT" | grep -q 'tmp-' && bad "temporary files after SIGINT" || ok "consistent after SIGINT"
echo "test_watch: $pass passed, $fail failed"
[ "$fail" -eq 0 ]
