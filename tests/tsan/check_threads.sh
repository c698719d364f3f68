#!/bin/sh
# tests/tsan/check_threads.sh - data races under ThreadSanitizer: the
# runs whose threads share state, with a build made by make check-threads
# (-fsanitize=thread; without the vector clones, whose resolvers run
# before ThreadSanitizer starts). One image alone with two threads (the
# 90 nm tile without a setup: the wide oxide fit beside the nominal one,
# the outlines beside the display's decoding, the Fermi table and the
# grids on both threads), the JPEG tile alone (its annotated picture's
# bands coded on both threads beside the main thread's plot), a
# three-image batch on two threads (images side by side, the text warm-up
# thread), and the hBN tile with its setup (the oxide profile's points,
# the film tables' evaluations and the regions' posteriors on both
# threads). Any report fails the check.
# Usage: check_threads.sh LAMINA_TSAN_BINARY
set -eu
[ $# -eq 1 ] || { echo "usage: $0 LAMINA_TSAN_BINARY" >&2; exit 2; }
B=$1
S=samples
D=$(mktemp -d)
trap 'rm -rf "$D"' EXIT
export TSAN_OPTIONS="halt_on_error=1 exitcode=66 suppressions=$(pwd)/tests/tsan/suppressions.txt"
"$B" analyze --quiet --threads 2 --out "$D/alone" $S/HT090-B02-tile03.png 2>"$D/alone.err" ||
    { cat "$D/alone.err" >&2; echo "check_threads: the 90 nm tile alone failed" >&2; exit 1; }
"$B" analyze --quiet --threads 2 --out "$D/jpeg" $S/HT285-D04-tile21.jpg 2>"$D/jpeg.err" ||
    { cat "$D/jpeg.err" >&2; echo "check_threads: the JPEG tile alone failed" >&2; exit 1; }
"$B" analyze --quiet --threads 2 --out "$D/batch" $S/HT285-D04-tile21.jpg \
    $S/HT285-A07-tile12.png $S/HT090-B02-tile03.png 2>"$D/batch.err" ||
    { cat "$D/batch.err" >&2; echo "check_threads: the three-image batch failed" >&2; exit 1; }
"$B" analyze --quiet --threads 2 --setup $S/bench3-setup-hbn.json --out "$D/hbn" \
    $S/HT285-N05-tile04.png 2>"$D/hbn.err" ||
    { cat "$D/hbn.err" >&2; echo "check_threads: the hBN tile failed" >&2; exit 1; }
echo "check_threads: no data race reported (a PNG and a JPEG image on two threads, a batch of three, hBN)"
