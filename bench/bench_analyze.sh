#!/bin/sh
# bench/bench_analyze.sh - the per-image figures of the speed issue:
#  1. lamina analyze of a 12-megapixel JPEG (every output at full
#     resolution, 2 threads) against libjpeg-turbo's djpeg decoding the same
#     file, run alternately; the ratio of the medians (goal <= 5, aim 3);
#  2. peak resident memory per input pixel (/usr/bin/time; goal <= 16 B/px),
#     and apart from it the fixed part (a 0.19 MP image's peak: shared
#     libraries, fonts, caches) and the bytes per pixel above it;
#  3. seconds per megapixel at 3, 12 and 48 MP (the same field rendered at
#     three resolutions, bench/scene-*.json), alternately; goal: all within
#     15 % of each other;
#  4. the 12 MP analysis after an idle pause, as photos arrive at a
#     microscope, and beside it what first touching 12 bytes a pixel of
#     memory costs alone then (bench_fresh_pages): this machine's host
#     backs fresh memory slowly after a pause (1-2 ms a megabyte), and an
#     analysis holds that much at once, so that part of its time is a
#     floor no order of work removes. Not a goal; it shows what the
#     ratio above cannot go below on this machine.
# Usage: bench_analyze.sh BUILD_DIR [RUNS]   (RUNS: runs of the 3 and 12 MP
# images, default 5; the 48 MP image runs (RUNS + 1) / 2 times)
set -eu
. "$(dirname "$0")/common.sh"
B=${1:-build}; RUNS=${2:-5}
D="$B/bench"; mkdir -p "$D"
img() { # scene, file
    [ -s "$D/$2" ] || "$B/lamina" render --quiet "bench/$1" -o "$D/$2"
}
img scene-3mp.json big3mp.jpg
img big-scene.json big12mp.jpg
img scene-48mp.json big48mp.jpg
img scene-small.json small.jpg
# the analyses' warnings (no setup: the camera and NA are assumed) go to a
# log, so that only the figures are printed
run() { "$B/lamina" analyze --quiet --threads 2 --out "$D/out" "$1" 2>>"$D/warnings.log"; }
IMG="$D/big12mp.jpg"
ta=""; tb=""; t3=""; t48=""
i=0
while [ $i -lt "$RUNS" ]; do
    tb="$tb $(elapsed djpeg -outfile /dev/null "$IMG")"
    ta="$ta $(elapsed run "$IMG")"
    t3="$t3 $(elapsed run "$D/big3mp.jpg")"
    [ $((i % 2)) -eq 0 ] && t48="$t48 $(elapsed run "$D/big48mp.jpg")"
    i=$((i + 1))
done
ma=$(median "$ta"); mb=$(median "$tb"); m3=$(median "$t3"); m48=$(median "$t48")
printf 'bench_analyze: 12 MP JPEG: lamina analyze median %.3f s, djpeg median %.3f s, ratio %.2f (goal <= 5, aim 3)\n' \
    "$ma" "$mb" "$(echo "$ma / $mb" | bc -l)"
if [ -x /usr/bin/time ]; then
    peak() { # image: peak resident memory in KiB
        /usr/bin/time -f '%M' -o "$D/rss" "$B/lamina" analyze --quiet --threads 2 --out "$D/out" "$1" \
            2>>"$D/warnings.log"
        cat "$D/rss"
    }
    k0=$(peak "$D/small.jpg"); px0=187500
    for f in big3mp big12mp big48mp; do
        kb=$(peak "$D/$f.jpg")
        px=$(case $f in big3mp) echo 3000000;; big12mp) echo 12000000;; *) echo 48000000;; esac)
        printf 'bench_analyze: %s peak resident memory %d MiB = %.1f bytes per pixel (goal <= 16); above the fixed %d MiB: %.1f bytes per pixel\n' \
            "$f" $((kb / 1024)) "$(echo "$kb * 1024 / $px" | bc -l)" $((k0 / 1024)) \
            "$(echo "($kb - $k0) * 1024 / ($px - $px0)" | bc -l)"
    done
fi
s3=$(echo "$m3 / 3" | bc -l); s12=$(echo "$ma / 12" | bc -l); s48=$(echo "$m48 / 48" | bc -l)
lo=$(printf '%s\n' "$s3" "$s12" "$s48" | sort -n | head -1)
hi=$(printf '%s\n' "$s3" "$s12" "$s48" | sort -n | tail -1)
printf 'bench_analyze: seconds per megapixel: 3 MP %.4f, 12 MP %.4f, 48 MP %.4f; spread %.0f %% (goal <= 15 %%)\n' \
    "$s3" "$s12" "$s48" "$(echo "($hi / $lo - 1) * 100" | bc -l)"
# the same three medians as a line t = a + b MP (least squares): the fixed
# per-image cost (fits, model, start-up) apart from the cost per pixel
fit=$(printf '3 %s\n12 %s\n48 %s\n' "$m3" "$ma" "$m48" | awk '{x[NR]=$1; y[NR]=$2; sx+=$1; sy+=$2}
    END {mx=sx/3; my=sy/3; for (i=1;i<=3;i++) {sxy+=(x[i]-mx)*(y[i]-my); sxx+=(x[i]-mx)^2}
         b=sxy/sxx; printf "%.3f %.4f", my-b*mx, b}')
printf 'bench_analyze: as a line: %.3f s per image + %.4f s per megapixel (not a goal; shows what the spread above is made of)\n' $fit
if [ -x "$B/bench/bench_fresh_pages" ]; then
    tc=""; tf=""; i=0
    while [ $i -lt $(((RUNS + 1) / 2)) ]; do
        sleep 3; tc="$tc $(elapsed run "$IMG")"
        sleep 3; tf="$tf $("$B/bench/bench_fresh_pages" 137 2)"
        i=$((i + 1))
    done
    mc=$(median "$tc"); mf=$(median "$tf")
    printf 'bench_analyze: after 3 s idle: 12 MP analysis median %.3f s (%.1f x djpeg); first touch of 12 bytes a pixel alone (137 MiB, 2 threads) %.0f ms (%.1f x djpeg)\n' \
        "$mc" "$(echo "$mc / $mb" | bc -l)" "$mf" "$(echo "$mf / 1000 / $mb" | bc -l)"
fi
