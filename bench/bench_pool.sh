#!/bin/sh
# bench/bench_pool.sh - a pooled batch's time against its number of tiles
# (issue 9: "a pooled batch scales linearly with the number of tiles").
# 10, 20 and 40 tiles (copies of the 285 nm samples under new names),
# analysed as one run (the shared parameters pooled over a sample of the
# tiles, lamina/pool.h), 2 threads; prints seconds per tile for each and
# the spread of those figures. Runs alternate between the sizes.
set -eu
. "$(dirname "$0")/common.sh"
B=${1:-build}; RUNS=${2:-3}
make_tiles() { # $1 folder, $2 number of tiles
    mkdir -p "$1"; rm -f "$1"/*
    k=0
    while [ $k -lt "$2" ]; do
        for s in HT285-A07-tile12.png HT285-C11-tile07.png HT285-D04-tile21.jpg; do
            [ $k -lt "$2" ] || break
            ext=${s##*.}; cp -f "samples/$s" "$1/t$k-${s%.*}.$ext"; k=$((k + 1))
        done
    done
}
for n in 10 20 40; do make_tiles "$B/bench/pool$n" $n; done
t10=""; t20=""; t40=""; i=0
while [ $i -lt "$RUNS" ]; do
    for n in 10 20 40; do
        t=$(elapsed "$B/lamina" analyze --quiet --threads 2 --setup samples/bench3-setup.json \
            --out "$B/bench/pool$n-out" "$B/bench/pool$n")
        eval "t$n=\"\$t$n $t\""
    done
    i=$((i + 1))
done
m10=$(median "$t10"); m20=$(median "$t20"); m40=$(median "$t40")
printf 'bench_pool: pooled batch, s per tile: 10 tiles %.3f, 20 tiles %.3f, 40 tiles %.3f (spread %.0f %%)\n' \
    "$(echo "$m10 / 10" | bc -l)" "$(echo "$m20 / 20" | bc -l)" "$(echo "$m40 / 40" | bc -l)" \
    "$(echo "a = $m10 / 10; b = $m20 / 20; c = $m40 / 40; hi = a; if (b > hi) hi = b; if (c > hi) hi = c; lo = a; if (b < lo) lo = b; if (c < lo) lo = c; 100 * (hi - lo) / lo" | bc -l)"
