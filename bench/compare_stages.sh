#!/bin/sh
# bench/compare_stages.sh - two builds of lamina side by side on one image:
# RUNS alternating runs of each (old, new, old, new, ...), then the median
# of every stage's duration from `analyze --verbose` (load, substrate,
# contrast, segment, fit, regions, outputs = the rest of the process) and
# of the whole command, with the ratio new / old. This machine's speed
# drifts by 10-20 % within an hour, so only runs taken side by side like
# this compare two builds. Each build writes to its own folder under
# $TMPDIR, so the outputs can be compared with diff -r afterwards.
# Usage: compare_stages.sh OLD_BIN NEW_BIN RUNS THREADS IMAGE [analyze options]
# e.g. git worktree add /tmp/old REV && make -C /tmp/old build/lamina, then
#      sh bench/compare_stages.sh /tmp/old/build/lamina build/lamina 7 2 build/bench/big12mp.jpg
set -eu
. "$(dirname "$0")/common.sh"
[ $# -ge 5 ] || { echo "usage: $0 OLD_BIN NEW_BIN RUNS THREADS IMAGE [options]" >&2; exit 2; }
OLD=$1; NEW=$2; RUNS=$3; THREADS=$4; IMG=$5; shift 5
D=${TMPDIR:-/tmp}/lamina-compare.$$
mkdir -p "$D"
# one run: "load L substrate S ... wall W" (the stage end times as printed)
one() { # binary, tag, options...
    b=$1; tag=$2; shift 2
    s=$(now)
    line=$("$b" analyze --verbose --threads "$THREADS" --out "$D/out-$tag" "$@" "$IMG" 2>&1 >/dev/null |
        sed -n 's/.*stage end times (s): //p')
    e=$(now)
    echo "$line wall $(echo "$e - $s" | bc -l)"
}
i=0
while [ "$i" -lt "$RUNS" ]; do
    one "$OLD" old "$@" >> "$D/old"
    one "$NEW" new "$@" >> "$D/new"
    i=$((i + 1))
done
# per run: stage durations from the end times (a build that does not mark
# the model stage prints 0 there: the substrate then starts at 'display')
durations() {
    awk '{for (i = 1; i < NF; i += 2) t[$i] = $(i + 1)
          m = t["model"] > t["display"] ? t["model"] : t["display"]
          printf "%s %s %s %s %s %s %s %s\n", t["load"], t["substrate"] - m,
                 t["contrast"] - t["substrate"], t["segment"] - t["contrast"],
                 t["oxide"] - t["segment"], t["regions"] - t["oxide"],
                 t["wall"] - t["regions"], t["wall"]}' "$1"
}
durations "$D/old" > "$D/old.d"
durations "$D/new" > "$D/new.d"
col=1
for name in load substrate contrast segment fit regions outputs wall; do
    mo=$(median "$(cut -d' ' -f$col "$D/old.d")")
    mn=$(median "$(cut -d' ' -f$col "$D/new.d")")
    printf 'compare_stages: %-10s old %.3f s  new %.3f s  ratio %.3f\n' "$name" "$mo" "$mn" \
        "$(echo "if ($mo > 0) $mn / $mo else 0" | bc -l)"
    col=$((col + 1))
done
echo "compare_stages: outputs in $D/out-old and $D/out-new"
