#!/bin/sh
# bench/bench_batch.sh - batch throughput with 1 and 2 threads on 20 tiles
# (the 285 nm samples, five copies each under new names), alternately.
# Goal (chip-scale issue): 2 threads >= 1.8x the throughput of 1.
# Beside it, the machine's own ceiling for this work: the same 20 tiles as
# two independent one-thread runs of 10 at once against one after the
# other (no shared memory, no pooled fit: what two cores give two
# processes).
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
mkdir -p "$D/half1" "$D/half2"
k=0
for f in "$D"/*.png "$D"/*.jpg; do
    k=$((k + 1)); cp -f "$f" "$D/half$((k % 2 + 1))/"
done
half() { "$B/lamina" analyze --quiet --threads 1 --no-pool --setup samples/bench3-setup.json --out "$D/out-$1" "$D/$1"; }
both() { half half1 & half half2 & wait; }
seq2() { half half1; half half2; }
t1=""; t2=""; c1=""; c2=""; i=0
while [ $i -lt "$RUNS" ]; do
    t1="$t1 $(elapsed "$B/lamina" analyze --quiet --threads 1 --setup samples/bench3-setup.json --out "$D/out1" "$D")"
    t2="$t2 $(elapsed "$B/lamina" analyze --quiet --threads 2 --setup samples/bench3-setup.json --out "$D/out2" "$D")"
    c1="$c1 $(elapsed seq2)"
    c2="$c2 $(elapsed both)"
    i=$((i + 1))
done
m1=$(median "$t1"); m2=$(median "$t2")
printf 'bench_batch: 20 tiles: 1 thread %.2f s, 2 threads %.2f s, speed-up %.2f (goal >= 1.8)\n' \
    "$m1" "$m2" "$(echo "$m1 / $m2" | bc -l)"
n1=$(median "$c1"); n2=$(median "$c2")
printf 'bench_batch: the machine: two independent 1-thread runs of 10 tiles, one after the other %.2f s, at once %.2f s, ratio %.2f (the ceiling for the line above)\n' \
    "$n1" "$n2" "$(echo "$n1 / $n2" | bc -l)"
