#!/bin/sh
# tests/clones/check_clones.sh - the vector clones change no result
# (src/vector_clones.h): the sample tiles analysed by this build, which
# takes the AVX2 versions of the cloned loops on a processor that has it,
# and by a build without the clones (-DLAM_NO_VECTOR_CLONES), compared
# byte for byte: every file of the run, with and without a setup (the
# fit of shared parameters, the wide oxide check), graphene on 285 and
# 90 nm, hBN (thin-film ladders) and MoS2, one and two threads.
# Usage: check_clones.sh LAMINA_WITH_CLONES LAMINA_WITHOUT
set -eu
[ $# -eq 2 ] || { echo "usage: $0 LAMINA_WITH_CLONES LAMINA_WITHOUT" >&2; exit 2; }
S=samples
D=$(mktemp -d)
trap 'rm -rf "$D"' EXIT
run() { # binary, folder
    b=$1; o=$2
    for t in 1 2; do
        "$b" analyze --quiet --threads $t --setup $S/bench3-setup.json --out "$o/t$t/h285" \
            $S/HT285-A07-tile12.png $S/HT285-C11-tile07.png $S/HT285-D04-tile21.jpg
        "$b" analyze --quiet --threads $t --out "$o/t$t/d04" $S/HT285-D04-tile21.jpg 2>/dev/null
        "$b" analyze --quiet --threads $t --setup $S/bench3-setup-90nm.json --out "$o/t$t/h90" \
            $S/HT090-B02-tile03.png
        "$b" analyze --quiet --threads $t --setup $S/bench3-setup-hbn.json \
            --target-thickness 10-30 --out "$o/t$t/hbn" $S/HT285-N05-tile04.png
        "$b" analyze --quiet --threads $t --setup $S/bench3-setup-mos2.json --out "$o/t$t/mos2" \
            $S/HT090-M02-tile01.png
    done
}
run "$1" "$D/with"
run "$2" "$D/without"
if diff -r "$D/with" "$D/without" >"$D/diff"; then
    echo "check_clones: $(find "$D/with" -type f | wc -l) files identical with and without the vector clones"
else
    head -20 "$D/diff"
    echo "check_clones: FAIL: the vector clones changed a result" >&2
    exit 1
fi
