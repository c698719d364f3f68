#!/bin/sh
# tests/report/make_scan.sh DIR BIN - render an invented ten-tile chip scan
# (5 x 2 tiles of 640 x 480 px at 0.2 um/px, 100 x 76 um apart, so tiles
# overlap) with its positions file DIR/positions.csv. Flakes are hexagons
# at chip coordinates; a tile draws every flake that falls on it.
set -eu
D=$1; BIN=$2
mkdir -p "$D"
# x y radius layers (chip um)
cat > "$D/flakes.txt" <<'FL'
60 40 14 1
160 50 9 2
290 60 12 1
430 45 8 3
95 110 7 1
250 100 10 2
350 120 6 1
480 110 11 1
200 30 5 2
380 80 9 1
FL
printf 'file,x_um,y_um\n' > "$D/positions.csv"
for ty in 0 1; do for tx in 0 1 2 3 4; do
    cx=$((64 + 100 * tx)); cy=$((48 + 76 * ty))
    awk -v cx="$cx" -v cy="$cy" -v seed=$((10 * ty + tx)) '
    BEGIN { printf "{\"schema\":\"lamina-scene/1\",\"setup\":{\"schema\":\"lamina-setup/1\",\"um_per_px\":0.2},"
            printf "\"width\":640,\"height\":480,\"oxide_nm\":287,\"vignetting\":0.15,\"blur_px\":0.8,"
            printf "\"full_well\":10000,\"seed\":%d,\"flakes\":[", seed; n = 0 }
    { printf "%s{\"layers\":%d,\"polygon\":[", (n++ ? "," : ""), $4
      for (k = 0; k < 6; k++) { a = k * 3.14159265 / 3 + 0.3 * NR
        printf "%s[%.1f,%.1f]", (k ? "," : ""), ($1 + $3 * cos(a) - cx) / 0.2 + 320, ($2 + $3 * sin(a) - cy) / 0.2 + 240 }
      printf "]}" }
    END { printf "]}\n" }' "$D/flakes.txt" > "$D/t$ty$tx.scene.json"
    "$BIN" render --quiet "$D/t$ty$tx.scene.json" -o "$D/t$ty$tx.png"
    rm -f "$D/t$ty$tx.scene.json" "$D/t$ty$tx.truth.png"
    printf 't%s%s.png,%s,%s\n' "$ty" "$tx" "$cx" "$cy" >> "$D/positions.csv"
done; done
