#!/bin/sh
# bench/bench_batch.sh - batch throughput with 1 and 2 threads on 20 tiles
# (the 285 nm samples, five copies each under new names), alternately.
# Goal (chip-scale issue): 2 threads >= 1.8x the throughput of 1.
set -eu
. "$(dirname "$0")/common.sh"
B=${1:-build}; RUNS=${2:-3}
D="$B/bench/batch"; mkdir -p "$D"
for k in 1 2 3 4 5; do
    for s in HT285-A07-tile12.png HT285-C11-tile07.png HT285-D04-tile21.jpg; do
        ext=${s##*.}; cp -f "samples/$s" "$D/${s%.*}-copy$k.$ext"
    done
    cp -f samples/HT285-A07-tile12.png "$D/extra-copy$k.png"
done
t1=""; t2=""; i=0
while [ $i -lt "$RUNS" ]; do
    t1="$t1 $(elapsed "$B/lamina" analyze --quiet --threads 1 --setup samples/bench3-setup.json --out "$D/out1" "$D")"
    t2="$t2 $(elapsed "$B/lamina" analyze --quiet --threads 2 --setup samples/bench3-setup.json --out "$D/out2" "$D")"
    i=$((i + 1))
done
m1=$(median "$t1"); m2=$(median "$t2")
printf 'bench_batch: 20 tiles: 1 thread %.2f s, 2 threads %.2f s, speed-up %.2f (goal >= 1.8)\n' \
    "$m1" "$m2" "$(echo "$m1 / $m2" | bc -l)"
