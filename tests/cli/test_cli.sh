#!/bin/sh
# tests/cli/test_cli.sh - the program as a user meets it: exit codes,
# messages naming the file, help, /dev/full. Usage: test_cli.sh BUILD/lamina
set -u
LC_ALL=C; export LC_ALL
BIN=${1:-build/lamina}
T=$(mktemp -d "${TMPDIR:-/tmp}/lamina-cli.XXXXXX")
trap 'rm -rf "$T"' EXIT
pass=0; fail=0
ok()  { pass=$((pass + 1)); [ "${LAM_TEST_VERBOSE:-0}" = 1 ] && echo "test_cli PASS: $1"; return 0; }
bad() { fail=$((fail + 1)); echo "test_cli FAIL: $1"; }
expect_rc() { # rc-expected description command...
    want=$1; what=$2; shift 2
    "$@" >"$T/out" 2>"$T/err"; rc=$?
    if [ "$rc" -eq "$want" ]; then ok "$what"; else bad "$what (exit $rc, want $want: $(head -c 200 "$T/err"))"; fi
}

expect_rc 0 "--version" "$BIN" --version
grep -q '^lamina [0-9]' "$T/out" && ok "version text" || bad "version text"
expect_rc 0 "help" "$BIN" help
expect_rc 0 "help predict" "$BIN" help predict
expect_rc 0 "predict --help" "$BIN" predict --help
expect_rc 2 "no command" "$BIN"
expect_rc 2 "unknown command" "$BIN" frobnicate
grep -q "Try 'lamina help'" "$T/err" && ok "unknown command hints at help" || bad "hint"
expect_rc 2 "unknown option" "$BIN" predict --bogus
expect_rc 2 "bad number" "$BIN" predict --oxide abc
expect_rc 2 "out-of-range number" "$BIN" predict --oxide -5
expect_rc 2 "NA at or above ambient index" "$BIN" predict --na 1.2
expect_rc 0 "predict json" "$BIN" predict --oxide 285 --wavelength 550 --na 0 --layers 1-3 --format json
grep -q '"schema":[[:space:]]*"lamina-predict/1"' "$T/out" && ok "predict json schema" || bad "predict json schema"
printf '{"stack":[{"material":"hBN","thickness_nm":20},{"material":"SiO2","thickness_nm":285}],"base":"Si"}' > "$T/stack.json"
expect_rc 0 "predict on a stack file (graphene on hBN on SiO2)" "$BIN" predict --stack "$T/stack.json" --format csv
"$BIN" predict --format csv > "$T/plain.csv"
cmp -s "$T/out" "$T/plain.csv" && bad "the hBN layer changes the prediction" || ok "the hBN layer changes the prediction"
printf '{"stack":[{"material":"SiO2","thickness_nm":-3}]}' > "$T/badstack.json"
expect_rc 1 "a stack with a negative thickness" "$BIN" predict --stack "$T/badstack.json"
grep -q "badstack.json" "$T/err" && grep -q "thickness_nm" "$T/err" && ok "stack error names file and key" || bad "stack error: $(cat "$T/err")"
expect_rc 2 "an unmodelled flake material" "$BIN" predict --material MoTe2
expect_rc 0 "graphene as --material" "$BIN" predict --material graphene
# other crystals (issue 14)
expect_rc 0 "hBN films by thickness" "$BIN" predict --material hBN --thickness 0.333,10,30 --format json
grep -q '"thickness_nm":[[:space:]]*30' "$T/out" && grep -q '"material":[[:space:]]*"hBN"' "$T/out" \
    && ok "predict json rows carry thickness_nm" || bad "thickness rows: $(head -c 300 "$T/out")"
expect_rc 2 "--thickness needs a continuous crystal" "$BIN" predict --thickness 10
grep -q "hBN" "$T/err" && ok "the message names hBN" || bad "thickness message: $(cat "$T/err")"
expect_rc 2 "--thickness must be numbers" "$BIN" predict --material hBN --thickness 10,x
expect_rc 0 "MoS2 layers" "$BIN" predict --material MoS2/Song --oxide 90 --layers 1-3 --format csv
[ "$(wc -l < "$T/out")" -eq 4 ] && ok "MoS2 csv: header and 3 rows" || bad "MoS2 csv rows"
printf '{"stack":[{"material":"Si3N4","thickness_nm":67}],"base":"Si"}' > "$T/ar.json"
expect_rc 0 "graphene on nearly anti-reflecting nitride" "$BIN" predict --stack "$T/ar.json" --format csv
grep -q "anti-reflecting" "$T/err" && head -1 "$T/out" | grep -q "dR_G,snr_G" \
    && ok "anti-reflection: a warning, dR and SNR columns" || bad "AR: $(cat "$T/err") $(head -1 "$T/out")"
expect_rc 1 "predict to /dev/full" sh -c "\"$BIN\" predict > /dev/full"

# images: make a valid PNG and JPEG with the test suite's helpers (cjpeg)
printf 'P6\n16 8\n255\n' > "$T/a.ppm"
i=0; while [ $i -lt 128 ]; do printf '\120\140\200'; i=$((i + 1)); done >> "$T/a.ppm"
cjpeg -quality 90 "$T/a.ppm" > "$T/a.jpg"
expect_rc 0 "inspect a JPEG" "$BIN" inspect "$T/a.jpg"
size=$(wc -c < "$T/a.jpg")
head -c $((size / 2)) "$T/a.jpg" > "$T/cut.jpg"
expect_rc 1 "truncated JPEG gives exit 1" "$BIN" inspect "$T/cut.jpg"
[ "$(wc -l < "$T/err")" -eq 1 ] && grep -q "cut.jpg" "$T/err" && ok "one-line message names the JPEG" || bad "JPEG message: $(cat "$T/err")"
# a PNG cut inside its header chunk, written by hand
printf '\211PNG\r\n\032\n\000\000\000\015IHDR\000\000\000\020\000\000\000\010\010\002\000\000\000' > "$T/cut.png"
expect_rc 1 "truncated PNG gives exit 1" "$BIN" inspect "$T/cut.png"
[ "$(wc -l < "$T/err")" -eq 1 ] && grep -q "cut.png" "$T/err" && ok "one-line message names the PNG" || bad "PNG message: $(cat "$T/err")"
expect_rc 1 "missing file" "$BIN" inspect "$T/nope.png"
expect_rc 1 "a setup file that does not exist" "$BIN" predict --setup "$T/nope.json"
printf '{"schema":"lamina-setup/1","objective":{"illumination_na":3}}' > "$T/bad.json"
expect_rc 1 "a setup with NA 3" "$BIN" predict --setup "$T/bad.json"
grep -q "bad.json" "$T/err" && grep -q "illumination_na" "$T/err" && ok "setup message names file and key" || bad "setup message: $(cat "$T/err")"

# strict files (issue 10): a misspelt key names the file, the key and the nearest known key
printf '{"schema":"lamina-setup/1","objective":{"illumination_NA":0.5}}' > "$T/typo.json"
expect_rc 1 "a setup with a misspelt key" "$BIN" predict --setup "$T/typo.json"
grep -q "typo.json: unknown key objective.illumination_NA; did you mean objective.illumination_na?" "$T/err" \
    && ok "misspelt key: file, key and suggestion" || bad "misspelt key message: $(cat "$T/err")"
printf '{"schema":"lamina-setup/1","um_per_pixel":0.1}' > "$T/typo2.json"
expect_rc 1 "um_per_pixel for um_per_px" "$BIN" predict --setup "$T/typo2.json"
grep -q "did you mean um_per_px" "$T/err" && ok "um_per_px suggested" || bad "um_per_px: $(cat "$T/err")"
printf '{"schema":"lamina-scene/1","width":32,"height":24,"flaks":[]}' > "$T/typo-scene.json"
expect_rc 1 "a scene with a misspelt key" "$BIN" render "$T/typo-scene.json" -o "$T/typo.png"
grep -q "typo-scene.json: unknown key flaks; did you mean flakes?" "$T/err" && [ ! -e "$T/typo.png" ] \
    && ok "scene key named, no output" || bad "scene key: $(cat "$T/err")"
# exit codes agree with cli.h: LAM_EINVAL (a bad argument) is a usage error
expect_rc 2 "render to an unsupported extension (invalid argument)" "$BIN" render samples/HT285-C11-tile07.scene.json -o "$T/x.gif"
expect_rc 2 "an out-of-range Fermi level" "$BIN" predict --fermi 3
expect_rc 1 "an unmodelled material inside a setup file is a file error" sh -c \
    "printf '{\"schema\":\"lamina-setup/1\",\"material\":\"MoTe2\"}' > \"$T/mote2.json\"; \"$BIN\" predict --setup \"$T/mote2.json\""
expect_rc 0 "plan writes an SVG" "$BIN" plan --layers 2 --out "$T/plan.svg"
grep -q "</svg>" "$T/plan.svg" && ok "plan SVG complete" || bad "plan SVG complete"
expect_rc 1 "plan into a missing folder" "$BIN" plan --out "$T/none/plan.svg"
[ ! -e "$T/none" ] && ok "no partial output" || bad "partial output left"
expect_rc 2 "plan refuses an unknown format" "$BIN" plan --out "$T/plan.gif"
expect_rc 0 "plan writes a PNG" "$BIN" plan --quiet -o "$T/plan.png"
"$BIN" inspect "$T/plan.png" > /dev/null 2>&1 && ok "plan PNG reads back" || bad "plan PNG reads back"
expect_rc 0 "plan writes a PDF" "$BIN" plan --quiet -o "$T/plan.pdf"
head -c 5 "$T/plan.pdf" | grep -q '%PDF-' && ok "plan PDF header" || bad "plan PDF header"

# analyze: outputs, contract bits, failures leave no output
expect_rc 0 "analyze a sample" "$BIN" analyze --quiet --setup samples/bench3-setup.json --out "$T/a" samples/HT285-A07-tile12.png
for f in HT285-A07-tile12.json HT285-A07-tile12.layers.png HT285-A07-tile12.annotated.png HT285-A07-tile12.contrast.svg; do
    [ -s "$T/a/$f" ] && ok "analyze wrote $f" || bad "analyze wrote $f"
done
grep -q '"schema":[[:space:]]*"lamina-analysis/1"' "$T/a/HT285-A07-tile12.json" && ok "analysis schema" || bad "analysis schema"
grep -q '"contrast_convention":[[:space:]]*"(substrate - flake) / substrate"' "$T/a/HT285-A07-tile12.json" && ok "convention in JSON" || bad "convention in JSON"
ls "$T/a" | grep -q tmp && bad "temporary files left" || ok "no temporary files left"
# a result file that cannot be written (a folder in its place): the image
# fails, and none of its other files stays
mkdir -p "$T/nowrite/HT285-A07-tile12.contrast.svg"
expect_rc 1 "analyze where the plot cannot be written" "$BIN" analyze --quiet --setup samples/bench3-setup.json --out "$T/nowrite" samples/HT285-A07-tile12.png
grep -q "HT285-A07-tile12" "$T/err" && ok "the failure names the image" || bad "failure message: $(cat "$T/err")"
left=$(ls "$T/nowrite" | grep -v '^HT285-A07-tile12.contrast.svg$' | tr '\n' ' ')
[ -z "$left" ] && ok "a failed image leaves none of its files" || bad "files left by a failed image: $left"
expect_rc 0 "analyze with --um-per-px, --na and --fermi" "$BIN" analyze --quiet --um-per-px 0.2 --na 0.5 --fermi 0.3 --out "$T/opt" samples/HT285-A07-tile12.png
du=$(tr -d '\n\t ' < "$T/opt/HT285-A07-tile12.json" | sed -n 's/.*"defaults_used":\(\[[^]]*\]\).*/\1/p')
case "$du" in
    *um_per_px*|*illumination_na*|*fermi_eV*) bad "options still listed as defaults: $du" ;;
    "") bad "no defaults_used in the analysis" ;;
    *) ok "options are not listed under defaults_used ($du)" ;;
esac
expect_rc 0 "analyze two images writes a catalogue" "$BIN" analyze --quiet --setup samples/bench3-setup.json --out "$T/b" samples/HT285-A07-tile12.png samples/HT285-D04-tile21.jpg
[ -s "$T/b/catalog.csv" ] && [ -s "$T/b/catalog.json" ] && ok "catalogue files" || bad "catalogue files"
head -2 "$T/b/catalog.csv" | tail -1 | grep -q ',1L,' && ok "catalogue starts with a monolayer" || bad "catalogue order: $(head -2 "$T/b/catalog.csv")"
# the annotated picture takes a JPEG input's format, a PNG input's stays
# PNG; the JSON names it and the run report links to it
[ "$(head -c 3 "$T/b/HT285-D04-tile21.annotated.jpg" | od -An -tx1 | tr -d ' ')" = ffd8ff ] \
    && ok "a JPEG input's annotated picture is a JPEG" || bad "no JPEG annotated picture: $(ls "$T/b")"
[ ! -e "$T/b/HT285-D04-tile21.annotated.png" ] && [ -s "$T/b/HT285-A07-tile12.annotated.png" ] \
    && ok "one annotated picture per image, a PNG input's a PNG" || bad "annotated pictures: $(ls "$T/b")"
grep -q '"annotated":[[:space:]]*"HT285-D04-tile21.annotated.jpg"' "$T/b/HT285-D04-tile21.json" \
    && ok "the JSON names the annotated picture" || bad "outputs in the JSON"
grep -q 'href="HT285-D04-tile21.annotated.jpg"' "$T/b/report.html" && ! grep -q 'D04-tile21.annotated.png' "$T/b/report.html" \
    && ok "the run report links to the JPEG picture" || bad "report links: $(grep -o 'href="[^"]*annotated[^"]*"' "$T/b/report.html" | sort -u)"
expect_rc 0 "analyze a JPEG with --annotated-format png" "$BIN" analyze --quiet --annotated-format png --setup samples/bench3-setup.json --out "$T/b2" samples/HT285-D04-tile21.jpg
[ -s "$T/b2/HT285-D04-tile21.annotated.png" ] && [ ! -e "$T/b2/HT285-D04-tile21.annotated.jpg" ] \
    && ok "--annotated-format png keeps a JPEG input's picture PNG" || bad "--annotated-format png: $(ls "$T/b2")"
expect_rc 2 "an unknown annotated format" "$BIN" analyze --annotated-format gif samples/HT285-D04-tile21.jpg
grep -q "annotated-format" "$T/err" && ok "message names --annotated-format" || bad "format message: $(cat "$T/err")"
# stage convention, positions, the chip map
expect_rc 2 "a stage axis that is not a direction" "$BIN" analyze --stage-axes sideways,up samples/HT285-A07-tile12.png
grep -q "stage-axes" "$T/err" && ok "message names --stage-axes" || bad "stage message: $(cat "$T/err")"
printf 'file,x_mm,y_mm\nHT285-A07-tile12.png,1.5,2.25\n' > "$T/pos.csv"
expect_rc 0 "analyze with positions in mm" "$BIN" analyze --setup samples/bench3-setup.json --out "$T/p" --positions "$T/pos.csv" samples/HT285-A07-tile12.png samples/HT285-D04-tile21.jpg
grep -q "HT285-D04-tile21.jpg: warning: not in the positions file" "$T/err" && ok "a tile missing from the positions is a warning naming it" || bad "missing tile: $(cat "$T/err")"
grep -q "stage x,y mm" "$T/out" && ok "terminal table shows stage readings" || bad "terminal table: $(grep -A2 monolayer "$T/out")"
head -1 "$T/p/goto.csv" | grep -q "stage_x_mm" && ok "goto.csv in the file's unit" || bad "goto.csv header: $(head -1 "$T/p/goto.csv")"
[ -s "$T/p/report.html" ] && ok "report.html with positions" || bad "report.html"
# the run report's candidate rows name their image's warnings by code (the
# messages sit in the Warnings box, the images table and a tooltip)
expect_rc 0 "analyze two images without a setup" "$BIN" analyze --quiet --out "$T/w" samples/HT285-A07-tile12.png samples/HT285-D04-tile21.jpg
codes=$(sed -n 's/.*class="wc" title="[^"]*">\([^<]*\)<\/span>.*/\1/p' "$T/w/report.html" | sort | uniq -c)
rows=$(grep -c 'class="wc"' "$T/w/report.html")
case "$codes" in
    *setup-defaults) [ "$rows" -ge 5 ] && [ "$(printf '%s\n' "$codes" | wc -l)" -eq 1 ] \
        && ok "candidate rows show the code setup-defaults ($rows rows)" || bad "candidate warnings: $codes" ;;
    *) bad "candidate rows without warning codes: $codes" ;;
esac
shown=$(sed 's/title="[^"]*"//g' "$T/w/report.html" | grep -o 'typical values were assumed' | wc -l)
[ "$shown" -eq 3 ] && ok "the message shown once in the Warnings box and per image in the images table, not per candidate" \
    || bad "the message is shown $shown times for 2 images"
grep -q '<li><b>setup-defaults</b>, 2 images; e.g. ' "$T/w/report.html" \
    && ok "the Warnings box groups the two images under their code" \
    || bad "Warnings box: $(grep -o '<div class="warn">.\{0,200\}' "$T/w/report.html")"
expect_rc 0 "chip map from the results folder" "$BIN" map "$T/p" -o "$T/chip.png"
"$BIN" inspect "$T/chip.png" > /dev/null 2>&1 && ok "chip map PNG reads back" || bad "chip map PNG"
expect_rc 2 "map of a folder without positions" "$BIN" map "$T/b" -o "$T/chip2.svg"
expect_rc 2 "watch without a folder" "$BIN" watch
expect_rc 1 "catalog merge of a missing folder" "$BIN" catalog merge --out "$T/m" "$T/none"
expect_rc 1 "analyze a truncated JPEG" "$BIN" analyze --quiet --out "$T/c" "$T/cut.jpg"
[ -z "$(ls "$T/c" 2>/dev/null)" ] && ok "no output for a bad image" || bad "output left for a bad image"
grep -q "cut.jpg" "$T/err" && ok "message names the image" || bad "message: $(cat "$T/err")"
expect_rc 1 "one bad image among good ones fails the batch at the end" "$BIN" analyze --quiet --out "$T/d" samples/HT285-A07-tile12.png "$T/cut.png"
[ -s "$T/d/HT285-A07-tile12.json" ] && ok "good image still analysed" || bad "good image not analysed"
expect_rc 2 "analyze without images" "$BIN" analyze
expect_rc 2 "analyze with a bad ROI" "$BIN" analyze --substrate-roi 1,2,3 samples/HT285-A07-tile12.png
expect_rc 1 "analyze into /dev/full" "$BIN" analyze --quiet --out /dev/full samples/HT285-A07-tile12.png
expect_rc 0 "render a scene" "$BIN" render --quiet samples/HT285-C11-tile07.scene.json -o "$T/r.png"
[ -s "$T/r.truth.png" ] && ok "render wrote the truth map" || bad "truth map"
cmp -s "$T/r.png" samples/HT285-C11-tile07.png && ok "render is deterministic (equals the committed sample)" || bad "render differs from samples/HT285-C11-tile07.png"
expect_rc 1 "render a missing scene" "$BIN" render "$T/none.json" -o "$T/x.png"

# oxide audit
expect_rc 0 "oxide audit of two images" "$BIN" oxide --quiet --setup samples/bench3-setup.json --out "$T/ox" samples/HT285-A07-tile12.png samples/HT285-C11-tile07.png
grep -q '"schema":[[:space:]]*"lamina-oxide/2"' "$T/ox/oxide.json" && ok "oxide.json schema" || bad "oxide.json schema"
# samples/README.md: A07 is 288 nm, C11 283 nm (two chips): the images must disagree
grep -q '"consistent":[[:space:]]*false' "$T/ox/oxide.json" && ok "chips of 288 and 283 nm found inconsistent" || bad "oxide consistency"
grep -q "</svg>" "$T/ox/oxide.svg" && ok "oxide.svg written" || bad "oxide.svg"
expect_rc 0 "oxide audit of one 288 nm chip" "$BIN" oxide --quiet --setup samples/bench3-setup.json --out "$T/ox1" samples/HT285-A07-tile12.png
grep -q '"verdict":[[:space:]]*"pass"' "$T/ox1/oxide.json" && ok "288 nm passes a 10 nm tolerance of 285 nm" || bad "oxide pass"
expect_rc 0 "oxide audit with a 0.5 % tolerance" "$BIN" oxide --quiet --tolerance 0.5% --setup samples/bench3-setup.json --out "$T/ox2" samples/HT285-A07-tile12.png
# one image of an uncalibrated setup cannot decide at 0.5 % (1.4 nm): its
# shared sigma alone is larger
grep -q '"verdict":[[:space:]]*"undecided"' "$T/ox2/oxide.json" && ok "288 nm is undecided at a 0.5 % tolerance of 285 nm" || bad "oxide tight tolerance"
grep -q '"advice":[[:space:]]*"a calibrated setup' "$T/ox2/oxide.json" && ok "undecided says what would decide it" || bad "oxide advice"
expect_rc 0 "oxide audit of a 90 nm chip against 285 nm" "$BIN" oxide --quiet --setup samples/bench3-setup.json --out "$T/ox90" samples/HT090-B02-tile03.png
grep -q '"verdict":[[:space:]]*"fail"' "$T/ox90/oxide.json" && ok "a 92 nm chip fails an audit against 285 nm" || bad "oxide 90 nm fail"
expect_rc 2 "oxide with a bad tolerance" "$BIN" oxide --tolerance abc samples/HT285-A07-tile12.png

# absolute oxide from the substrate colour against a bare-Si reference
printf '{"schema":"lamina-scene/1","width":320,"height":240,"oxide_nm":291,"absolute":true,"exposure":0.6,"vignetting":0.1,"full_well":10000,"seed":3,"flakes":[{"layers":1,"polygon":[[40,40],[160,30],[170,160],[50,170]]}]}' > "$T/absA.json"
printf '{"schema":"lamina-scene/1","width":320,"height":240,"oxide_nm":0,"absolute":true,"exposure":0.6,"vignetting":0.1,"full_well":10000,"seed":4}' > "$T/absR.json"
"$BIN" render --quiet "$T/absA.json" -o "$T/absA.png" && "$BIN" render --quiet "$T/absR.json" -o "$T/absR.png"
expect_rc 0 "oxide audit with a bare-Si reference" "$BIN" oxide --quiet --reference "$T/absR.png" --out "$T/oxr" "$T/absA.png"
est=$(sed -n '/"absolute"/,/}/p' "$T/oxr/oxide.json" | grep '"estimate_nm"' | sed 's/[^0-9.]//g')
awk -v e="${est:-0}" 'BEGIN { exit !(e > 288 && e < 294) }' \
    && ok "absolute method within 3 nm of the rendered 291 nm" || bad "absolute method: $(grep -A3 absolute "$T/oxr/oxide.json" | head -5)"

# calibrate: labels from a rendered truth map
expect_rc 0 "calibrate from a labelled sample" "$BIN" calibrate --quiet --known-na 0.5 --known-oxide 283 --setup samples/bench3-setup.json --labels samples/HT285-C11-tile07.truth.png -o "$T/cal.json" samples/HT285-C11-tile07.png
grep -q '"schema":[[:space:]]*"lamina-setup/1"' "$T/cal.json" && ok "calibrate writes a setup profile" || bad "calibrated profile"
expect_rc 0 "the calibrated profile is usable" "$BIN" predict --setup "$T/cal.json"
expect_rc 0 "calibrate from JSON labels (points and a polygon)" "$BIN" calibrate --quiet --known-na 0.5 --known-oxide 283 --setup samples/bench3-setup.json --labels samples/HT285-C11-tile07.labels.json -o "$T/cal2.json" samples/HT285-C11-tile07.png
# the sample's labels cover four of its six flakes: the other two join with latent counts
grep -q '"latent_regions":[[:space:]]*2' "$T/cal2.json" && ok "the unlabelled flakes join the calibration" || bad "latent regions: $(grep -A3 '"method"' "$T/cal2.json")"
expect_rc 0 "calibrate on the labelled regions alone" "$BIN" calibrate --quiet --labelled-only --known-na 0.5 --known-oxide 283 --setup samples/bench3-setup.json --labels samples/HT285-C11-tile07.labels.json -o "$T/cal3.json" samples/HT285-C11-tile07.png
grep -q '"latent_regions":[[:space:]]*0' "$T/cal3.json" && ok "--labelled-only leaves them out" || bad "labelled only: $(grep -A3 '"method"' "$T/cal3.json")"
expect_rc 2 "--labelled-only needs labels" "$BIN" calibrate --self --labelled-only samples/HT285-C11-tile07.png
# a second chip of measured oxide (A07, 288 nm) records the colour's change
expect_rc 0 "calibrate with a second chip" "$BIN" calibrate --quiet --known-na 0.5 --known-oxide 283 --setup samples/bench3-setup.json --labels samples/HT285-C11-tile07.labels.json --second-chip samples/HT285-A07-tile12.png --second-oxide 288 -o "$T/cal4.json" samples/HT285-C11-tile07.png
grep -q '"second":' "$T/cal4.json" && grep -q '"second_chip":' "$T/cal4.json" && ok "the profile records the second chip" || bad "second chip: $(grep -A4 '"substrate_colour"' "$T/cal4.json")"
expect_rc 0 "a profile with a second chip analyses" "$BIN" analyze --quiet --setup "$T/cal4.json" --out "$T/cal4out" samples/HT285-N05-tile04.png
expect_rc 1 "a second chip 191 nm away is refused" "$BIN" calibrate --quiet --known-na 0.5 --known-oxide 283 --setup samples/bench3-setup.json --labels samples/HT285-C11-tile07.labels.json --second-chip samples/HT090-B02-tile03.png --second-oxide 92 -o "$T/cal5.json" samples/HT285-C11-tile07.png
grep -q "HT090-B02-tile03.png" "$T/err" && grep -q "2 to 30 nm" "$T/err" && [ ! -e "$T/cal5.json" ] && ok "... naming the file and the range, no profile written" || bad "far second chip: $(cat "$T/err")"
expect_rc 2 "--second-chip needs --second-oxide" "$BIN" calibrate --self --second-chip samples/HT285-A07-tile12.png samples/HT285-C11-tile07.png
printf '{"schema":"lamina-labels/1","labels":[{"layers":1,"point":[5000,5]}]}' > "$T/badlab.json"
expect_rc 1 "a label point outside the image" "$BIN" calibrate --labels "$T/badlab.json" -o "$T/x.json" samples/HT285-C11-tile07.png
grep -q "badlab.json" "$T/err" && grep -q "outside" "$T/err" && ok "label error names file and problem" || bad "label error: $(cat "$T/err")"
expect_rc 2 "calibrate needs one label file per image" "$BIN" calibrate samples/HT285-C11-tile07.png
expect_rc 1 "calibrate with labels of the wrong size" "$BIN" calibrate --labels samples/HT285-D04-tile21.truth.png -o "$T/x.json" samples/HT285-C11-tile07.png

# folders: TIFF names join, subfolders only with --recursive, formats named
mkdir -p "$T/chip/row1/col2" "$T/empty"
cp samples/HT285-A07-tile12.png "$T/chip/row1/col2/tile12.tif"
expect_rc 2 "a folder of subfolders without --recursive" "$BIN" analyze --quiet --out "$T/f" "$T/chip"
grep -q "chip holds no image files (1 subfolder; add --recursive)" "$T/err" && ok "says to add --recursive" || bad "subfolder message: $(cat "$T/err")"
expect_rc 2 "an empty folder" "$BIN" analyze --quiet --out "$T/f" "$T/empty"
grep -q "empty holds no image files" "$T/err" && ok "empty folder named" || bad "empty folder message: $(cat "$T/err")"
expect_rc 0 "--recursive finds a .tif two levels down" "$BIN" analyze --quiet --recursive --setup samples/bench3-setup.json --out "$T/f" "$T/chip"
[ -s "$T/f/tile12.json" ] && ok "recursive input analysed" || bad "recursive input analysed"
printf 'BM\066\000\000\000\000\000\000\000\066\000\000\000' > "$T/scan.bmp"
expect_rc 1 "a BMP file" "$BIN" analyze --quiet --out "$T/g" "$T/scan.bmp"
grep -q "scan.bmp.*a BMP image: lamina reads PNG, JPEG and TIFF" "$T/err" && ok "BMP named as such" || bad "BMP message: $(cat "$T/err")"

# crystals: hBN thickness with a target window, bad windows, render of any material, transmission
expect_rc 0 "analyze hBN with --target-thickness" "$BIN" analyze --setup samples/bench3-setup-hbn.json --target-thickness 10-30 --out "$T/h" samples/HT285-N05-tile04.png
grep -q '"thickness_nm"' "$T/h/HT285-N05-tile04.json" && ok "hBN regions carry thickness_nm" || bad "hBN JSON without thickness_nm"
head -1 "$T/h/catalog.csv" | grep -q ',thickness_nm,thickness_interval_nm$' && ok "catalogue has the thickness columns" || bad "catalogue header: $(head -1 "$T/h/catalog.csv")"
sed -n 2p "$T/h/catalog.csv" | awk -F, '{ exit !($20 >= 10 && $20 <= 30 && $5 == "thickness") }' && ok "an in-target flake ranks first" || bad "first catalogue row: $(sed -n 2p "$T/h/catalog.csv")"
grep -q "in target" "$T/out" && ok "the table marks flakes in the target" || bad "no in-target mark in: $(cat "$T/out")"
grep -q "monolayer candidates" "$T/out" && bad "hBN run lists monolayer candidates" || ok "no monolayer list for hBN"
# the run report counts films, not layer counts (it once said "4 candidates: 1L 0, ..." for two films)
grep -q '<p>1 image, 2 candidates: 2 films inside the thickness target' "$T/h/report.html" && ! grep -q '4L and more' "$T/h/report.html" \
    && ok "the hBN report counts its films" || bad "hBN report head: $(grep -o '<p>[0-9][^<]*' "$T/h/report.html" | head -1)"
grep -q '<th data-t="n">thickness</th>' "$T/h/report.html" && ok "the hBN candidates' column says thickness" || bad "hBN report: no thickness column head"
expect_rc 2 "a reversed target window" "$BIN" analyze --target-thickness 30-10 samples/HT285-N05-tile04.png
expect_rc 2 "a target window that is not numbers" "$BIN" analyze --target-thickness thin samples/HT285-N05-tile04.png
expect_rc 2 "catalog merge with a bad target window" "$BIN" catalog merge --target-thickness 5 --out "$T/hm" "$T/h"
expect_rc 0 "catalog merge re-ranks by a target window" "$BIN" catalog merge --quiet --target-thickness 40-60 --out "$T/hm" "$T/h"
sed -n 2p "$T/hm/catalog.csv" | awk -F, '{ exit !($20 >= 40 && $20 <= 60) }' && ok "the merged catalogue puts the 40-60 nm flake first" || bad "merged first row: $(sed -n 2p "$T/hm/catalog.csv")"
printf '{"schema":"lamina-scene/1","width":160,"height":120,"oxide_nm":285,"seed":5,"flakes":[{"material":"hBN","thickness_nm":20,"polygon":[[20,20],[80,20],[80,80],[20,80]]},{"material":"graphite","thickness_nm":10,"polygon":[[100,30],[140,30],[140,90],[100,90]]}]}' > "$T/hbn-scene.json"
expect_rc 0 "render hBN and graphite flakes" "$BIN" render "$T/hbn-scene.json" -o "$T/hbn.png"
[ -s "$T/hbn.truth.png" ] && ok "render wrote the truth map" || bad "no truth map for the hBN scene"
printf '{"schema":"lamina-scene/1","width":32,"height":24,"flakes":[{"material":"hBN","polygon":[[2,2],[9,2],[9,9]]}]}' > "$T/hbn-bad.json"
expect_rc 1 "an hBN flake without thickness_nm" "$BIN" render "$T/hbn-bad.json" -o "$T/hbn-bad.png"
printf '{"schema":"lamina-setup/1","observation":"transmission","substrate":{"stack":[],"base":"PDMS"}}' > "$T/stamp.json"
expect_rc 0 "predict in transmission through a stamp" "$BIN" predict --setup "$T/stamp.json" --layers 1-2 --format json
grep -q '"observation":[[:space:]]*"transmission"' "$T/out" && ok "the JSON names the observation" || bad "transmission JSON: $(head -c 300 "$T/out")"
printf '{"schema":"lamina-setup/1","observation":"transmission","substrate":{"stack":[{"material":"SiO2","thickness_nm":285}],"base":"Si"}}' > "$T/opaque.json"
expect_rc 1 "transmission into silicon is refused" "$BIN" predict --setup "$T/opaque.json"

# a nearly anti-reflecting substrate in an analysis: warning code, dR and SNR per region
printf '{"schema":"lamina-setup/1","substrate":{"stack":[{"material":"Si3N4","thickness_nm":67}],"base":"Si"},"um_per_px":0.2}' > "$T/ar-setup.json"
printf '{"schema":"lamina-scene/1","setup":"ar-setup.json","width":320,"height":240,"exposure":0.5,"full_well":10000,"seed":7,"flakes":[{"layers":1,"polygon":[[40,40],[160,30],[170,160],[50,170]]}]}' > "$T/ar-scene.json"
expect_rc 0 "render graphene on nitride" "$BIN" render "$T/ar-scene.json" -o "$T/ar.png"
expect_rc 0 "analyze graphene on nitride" "$BIN" analyze --setup "$T/ar-setup.json" --out "$T/ar" "$T/ar.png"
grep -q '"code":[[:space:]]*"anti-reflection"' "$T/ar/ar.json" && grep -q '"delta_reflectance"' "$T/ar/ar.json" && grep -q '"snr"' "$T/ar/ar.json" \
    && ok "anti-reflection: warning code, dR and SNR in the JSON" || bad "AR analysis JSON: $(grep -c warning "$T/ar/ar.json")"
grep -q "warning: the substrate is nearly anti-reflecting" "$T/err" && ok "anti-reflection warning on stderr" || bad "AR stderr: $(cat "$T/err")"
grep -q "(-1)" "$T/out" && bad "a stack without SiO2 shows oxide (-1)" || ok "no oxide shown for a stack without SiO2"
grep -q '"code"' "$T/h/HT285-N05-tile04.json" && bad "the hBN sample has warnings: $(grep -A1 '"code"' "$T/h/HT285-N05-tile04.json")" || ok "the hBN sample analyses without warnings"

# A monochrome camera's render is a grey picture (R = G = B in 8 bits, one
# channel in 16), which a one-channel setup analyses and a colour setup
# refuses without writing anything.
sed 's/"setup": *"bench3-physics.json"/"setup": {"schema": "lamina-setup\/1", "camera": {"kind": "gaussian", "channels": [{"centre_nm": 540, "fwhm_nm": 25}]}}/' \
    samples/HT285-C11-tile07.scene.json > "$T/mono-scene.json"
printf '{"schema":"lamina-setup/1","camera":{"kind":"gaussian","channels":[{"centre_nm":540,"fwhm_nm":25}]},"um_per_px":0.1,"uncertainty":{"oxide_nm":2},"substrate":{"stack":[{"material":"SiO2","thickness_nm":283}]}}' > "$T/mono.json"
expect_rc 0 "render with a monochrome camera (16-bit)" "$BIN" render --quiet "$T/mono-scene.json" -o "$T/mono16.png" --linear16
expect_rc 0 "render with a monochrome camera (8-bit)" "$BIN" render --quiet "$T/mono-scene.json" -o "$T/mono8.png"
"$BIN" inspect "$T/mono16.png" | grep -q "16-bit grey" && ok "a 16-bit monochrome render is a grey PNG" || bad "16-bit monochrome render not grey"
expect_rc 0 "a grey 8-bit picture with a one-channel setup" "$BIN" analyze --quiet --setup "$T/mono.json" --out "$T/mono-out" "$T/mono8.png"
grep -q '"label":[[:space:]]*"1L"' "$T/mono-out/mono8.json" && ok "monolayers found in the grey picture" || bad "no monolayer in the grey picture"
expect_rc 1 "a grey picture with a colour setup is refused" "$BIN" analyze --quiet --setup samples/bench3-setup.json --out "$T/mono-bad" "$T/mono8.png"
grep -q "R = G = B" "$T/err" && ok "the refusal says the picture is grey" || bad "grey refusal message: $(cat "$T/err")"
[ -z "$(ls -A "$T/mono-bad" 2>/dev/null)" ] && ok "no output for the refused picture" || bad "output written for a refused picture: $(ls "$T/mono-bad")"

echo "test_cli: $pass passed, $fail failed"
[ "$fail" -eq 0 ]
