#!/bin/sh
# tests/report/check_report.sh BUILD - the run report in a real browser:
# an invented ten-tile scan with stage positions is analysed, report.html is
# opened in Debian's headless Chromium, and the page must run its script
# without errors (the marker it sets) and show every candidate of the
# catalogue (goto.csv) and every monolayer of the chip; the chip map and the
# other SVGs must render with librsvg (rsvg-convert). Ends "N passed, N failed".
set -u
LC_ALL=C; export LC_ALL
B=${1:-build}; BIN=$B/lamina
T=$(mktemp -d "${TMPDIR:-/tmp}/lamina-report.XXXXXX")
trap 'rm -rf "$T"' EXIT
pass=0; fail=0
ok()  { pass=$((pass + 1)); return 0; }
bad() { fail=$((fail + 1)); echo "check_report FAIL: $1"; }
BROWSER=$(command -v chromium || command -v chromium-browser || true)
if [ -z "$BROWSER" ] || ! command -v rsvg-convert >/dev/null; then
    echo "check_report: needs chromium and librsvg2-bin (make check-report installs them)"
    echo "check_report: 0 passed, 1 failed"; exit 1
fi
sh tests/report/make_scan.sh "$T/tiles" "$BIN" || { echo "check_report: 0 passed, 1 failed"; exit 1; }
"$BIN" analyze --quiet --threads 2 --um-per-px 0.2 --positions "$T/tiles/positions.csv" \
    --stage-origin t00.png:0,0 --out "$T/out" "$T/tiles" && ok || bad "analyze the scan"
R=$T/out/report.html
[ -s "$R" ] && ok || bad "report.html written"
grep -Eq '(src|href)="(https?:|//|/)' "$R" && bad "absolute or external links in the page" || ok
grep -q '<link\|<script src' "$R" && bad "external resources" || ok
# the browser: DOM after the script ran, and the console
timeout 90 "$BROWSER" --headless --no-sandbox --disable-gpu --enable-logging=stderr --v=0 \
    --virtual-time-budget=5000 --dump-dom "file://$R" > "$T/dom.html" 2> "$T/console.txt"
grep -q 'data-ready="1"' "$T/dom.html" && ok || bad "the page's script did not run to its end"
grep -Ei 'Uncaught|SyntaxError|TypeError|ReferenceError' "$T/console.txt" && bad "script errors in the console" || ok
grep -q '[0-9][0-9]* candidates listed below, sortable</span>' "$T/dom.html" && ok || bad "the script's candidate count"
# every candidate of the catalogue is a row (image, region) of the table
n=0; missing=0
tail -n +2 "$T/out/goto.csv" | while IFS=, read -r rank image region rest; do
    stem=$(basename "$image"); stem=${stem%.*}
    grep -q "<tr id=\"c$rank\" data-image=\"$stem\" data-region=\"$region\"" "$T/dom.html" || echo "$rank $stem #$region"
done > "$T/missing.txt"
n=$(tail -n +2 "$T/out/goto.csv" | grep -c .)
[ "$n" -ge 8 ] && ok || bad "only $n candidates in goto.csv"
[ ! -s "$T/missing.txt" ] && ok || bad "candidates missing from the page: $(cat "$T/missing.txt")"
# every monolayer of the invented chip is shown, within 2 um of where it was drawn
while read -r x y r layers; do
    [ "$layers" = 1 ] || continue
    awk -F, -v x="$x" -v y="$y" 'NR > 1 && $4 == "1L" { dx = $7 - x; dy = $8 - y; if (dx * dx + dy * dy < 4) f = 1 } END { exit !f }' "$T/out/goto.csv" \
        && ok || bad "the monolayer at ($x, $y) um is not in goto.csv"
done < "$T/tiles/flakes.txt"
# crops exist for the rows and are linked relatively
grep -o 'src="crops/[^"]*"' "$T/dom.html" | sed 's/src="//; s/"$//' | while read -r c; do
    [ -s "$T/out/$c" ] || echo "$c"; done > "$T/nocrop.txt"
[ ! -s "$T/nocrop.txt" ] && grep -q 'src="crops/' "$T/dom.html" && ok || bad "crops missing: $(cat "$T/nocrop.txt")"
# the chip map (lamina map) and every SVG render with librsvg
"$BIN" map --quiet "$T/out" -o "$T/chip.svg" && ok || bad "lamina map"
"$BIN" plan --quiet -o "$T/plan.svg" && ok || bad "lamina plan"
for s in "$T/chip.svg" "$T/plan.svg" "$T"/out/*.contrast.svg; do
    rsvg-convert "$s" -o "$T/x.png" 2> "$T/rsvg.err" && [ -s "$T/x.png" ] && ok || bad "rsvg-convert $s: $(cat "$T/rsvg.err")"
done
# hBN, a crystal of continuous thickness: its contrast plot places each
# region at its thickness in its thickness band's colour (the 10-30 nm band
# is 0xff5a3c, lam_draw_thickness_colour), not on the layer ladder as
# "thick" (khaki 0xa0a080), which it did until 2026-12-05. cairo writes
# fills as rgb() percentages.
"$BIN" analyze --quiet --setup samples/bench3-setup-hbn.json --target-thickness 10-30 \
    --out "$T/hbn" samples/HT285-N05-tile04.png && ok || bad "analyze the hBN sample"
S=$T/hbn/HT285-N05-tile04.contrast.svg
rsvg-convert "$S" -o "$T/x.png" 2> "$T/rsvg.err" && [ -s "$T/x.png" ] && ok || bad "rsvg-convert $S"
grep -q 'fill:rgb(62.745098%,62.745098%,50.196078%)' "$S" && bad "hBN regions drawn as thick on the ladder" || ok
[ "$(grep -o 'fill:rgb(100%,35.294118%,23.529412%)' "$S" | wc -l)" -ge 6 ] && ok \
    || bad "hBN regions of 10-30 nm (#2, #3) not in their band's colour in all three panels"
# its order-ambiguous region (#8: 64 % at 31 nm, 36 % at 163 nm) shows its
# other order, dotted, in all three panels (and the legend says so)
[ "$(grep -o 'stroke-dasharray:2,3' "$S" | wc -l)" -ge 4 ] && ok \
    || bad "the hBN plot does not show region #8's other interference order"
# ... and its run report's candidates (#2 23 nm, #3 15 nm) carry the same
# band colour as swatches, not the thick colour (until 2026-12-05 they did)
H=$T/hbn/report.html
[ "$(grep -o 'class="sw" style="background:#ff5a3c"' "$H" | wc -l)" -ge 2 ] && ok \
    || bad "hBN candidates' swatches not in their thickness band's colour"
grep -q 'background:#a0a080' "$H" && bad "hBN candidates' swatches in the thick colour" || ok
# a screenshot for people (kept when KEEP_SCREENSHOT names a file)
if [ -n "${KEEP_SCREENSHOT:-}" ]; then
    timeout 90 "$BROWSER" --headless --no-sandbox --disable-gpu --screenshot="$KEEP_SCREENSHOT" \
        --window-size=1400,1800 "file://$R" > /dev/null 2>&1
fi
echo "check_report: $pass passed, $fail failed"
[ "$fail" -eq 0 ]
