#!/bin/sh
# bench/bench_analyze.sh - lamina analyze on a 12-megapixel JPEG (all outputs
# at full resolution) against libjpeg-turbo's djpeg decoding the same file,
# run alternately in one session. Goal: ratio <= 5; peak memory <= 24 B/px.
# Usage: bench_analyze.sh BUILD_DIR [RUNS]
set -eu
. "$(dirname "$0")/common.sh"
B=${1:-build}; RUNS=${2:-5}
D="$B/bench"; mkdir -p "$D"
IMG="$D/big12mp.jpg"
[ -s "$IMG" ] || "$B/lamina" render --quiet bench/big-scene.json -o "$IMG"
ta=""; tb=""
i=0
while [ $i -lt "$RUNS" ]; do
    tb="$tb $(elapsed djpeg -outfile /dev/null "$IMG")"
    ta="$ta $(elapsed "$B/lamina" analyze --quiet --threads 2 --out "$D/out" "$IMG")"
    i=$((i + 1))
done
ma=$(median "$ta"); mb=$(median "$tb")
printf 'bench_analyze: 12 MP JPEG: lamina analyze median %.3f s, djpeg median %.3f s, ratio %.2f (goal <= 5)\n' \
    "$ma" "$mb" "$(echo "$ma / $mb" | bc -l)"
if [ -x /usr/bin/time ]; then
    /usr/bin/time -f '%M' -o "$D/rss" "$B/lamina" analyze --quiet --threads 2 --out "$D/out" "$IMG"
    kb=$(cat "$D/rss")
    printf 'bench_analyze: peak resident memory %d MiB = %.1f bytes per pixel (goal <= 24)\n' \
        $((kb / 1024)) "$(echo "$kb * 1024 / 12000000" | bc -l)"
fi
