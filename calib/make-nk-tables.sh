#!/bin/sh
# calib/make-nk-tables.sh - writes src/material_tables.c, the n,k tables
# compiled into lamina, from the published files in tests/data/nk
# (refractiveindex.info database, CC0; sources in tests/data/nk/README.md).
#   sh calib/make-nk-tables.sh > src/material_tables.c
# Resampling (stated in each table's comment):
#   mean  - rows averaged over +-1 nm about each node of a 2 nm grid (the
#           0.22 nm micro-reflectance rows of Hsu et al. carry point noise);
#   every - every STEP-th nm of a 1 nm table, the rows themselves;
#   all   - every row inside the range, unchanged.
set -eu
D=${D:-tests/data/nk}

rows() { # file: the tabulated rows, "wl_um n k" (k = 0 for n-only tables)
    awk '/^  - type:/{t=$3} /data: \|/{d=1; next}
         d && /^        [0-9.]/ {print $1, $2, (NF > 2 ? $3 : 0); next}
         d && !/^        / {d=0}' "$1"
}

table() { # name file how lo_nm hi_nm step_nm
    name=$1 file=$2 how=$3 lo=$4 hi=$5 step=$6
    printf 'static const double %s[][3] = {\n' "$name"
    rows "$D/$file" | awk -v how="$how" -v lo="$lo" -v hi="$hi" -v step="$step" '
        { wl = $1 * 1000 }
        how == "all" && wl >= lo && wl <= hi { printf "    {%.2f, %s, %s},\n", wl, $2, $3 }
        how == "every" && wl >= lo - 1e-6 && wl <= hi + 1e-6 &&
            (int(wl + 0.5) - lo) % step == 0 && (wl - int(wl + 0.5))^2 < 1e-8 {
            printf "    {%d, %s, %s},\n", int(wl + 0.5), $2, $3 }
        how == "mean" {
            node = lo + step * int((wl - lo) / step + 0.5)
            if (node >= lo && node <= hi && (wl - node)^2 <= 1.0001) {
                sn[node] += $2; sk[node] += $3; cnt[node]++
                if (!(node in seen)) { seen[node] = 1; order[++nn] = node }
            }
        }
        END {
            for (i = 1; i <= nn; i++) { v = order[i]
                printf "    {%d, %.4f, %.4f},\n", v, sn[v] / cnt[v], sk[v] / cnt[v] }
        }'
    printf '};\n\n'
}

cat <<'HEAD'
/* material_tables.c - published n,k tables compiled into lamina (GENERATED
 * by calib/make-nk-tables.sh from tests/data/nk: do not edit by hand).
 * Rows: vacuum wavelength (nm), n, k; increasing wavelength. Every table is
 * from the refractiveindex.info database (M. N. Polyanskiy, Sci. Data 11,
 * 94 (2024); CC0 public domain); each comment names the paper, the file and
 * the resampling. */
#include "material_internal.h"

#include <stddef.h>
#include <strings.h>

HEAD

echo '/* MoS2 monolayer: C. Hsu et al., Adv. Opt. Mater. 7, 1900239 (2019); MoS2/nk/Hsu-1L.yml;'
echo ' * means over +-1 nm about each 2 nm node */'
table mos2_1l_hsu MoS2-1L-Hsu2019.yml mean 398 856 2
echo '/* MoS2 bilayer and trilayer: C. Hsu et al. (2019); MoS2/nk/Hsu-2L.yml and Hsu-3L.yml, the'
echo ' * published rows nearest each 2 nm node (398-800 nm) and every 10 nm to 850 nm, as transcribed'
echo ' * into tests/data/nk (every row kept) */'
table mos2_2l_hsu MoS2-2L-Hsu2019.yml all 390 860 1
table mos2_3l_hsu MoS2-3L-Hsu2019.yml all 390 860 1
echo '/* MoS2 monolayer (wafer-scale, on sapphire): B. Song et al., Adv. Opt. Mater. 7, 1801250'
echo ' * (2019); MoS2/nk/Song-1L.yml; every 2 nm row */'
table mos2_1l_song MoS2-1L-Song2019.yml every 380 900 2
echo '/* MoS2 bulk: B. Song et al., Adv. Opt. Mater. 7, 1801250 (2019); MoS2/nk/Song-bulk.yml;'
echo ' * every 2 nm row */'
table mos2_bulk_song MoS2-bulk-Song2019.yml every 380 900 2
echo '/* WS2 monolayer: C. Hsu et al. (2019); WS2/nk/Hsu-1L.yml; means over +-1 nm about each'
echo ' * 2 nm node */'
table ws2_1l_hsu WS2-1L-Hsu2019.yml mean 398 848 2
echo '/* WSe2 monolayer: C. Hsu et al. (2019); WSe2/nk/Hsu-1L.yml; means over +-1 nm about each'
echo ' * 2 nm node */'
table wse2_1l_hsu WSe2-1L-Hsu2019.yml mean 398 848 2
echo '/* WSe2 monolayer (centimetre-scale, on sapphire): H. Gu et al., Nanoscale 11, 22762 (2019);'
echo ' * WSe2/nk/Gu-1L.yml; every 2 nm row */'
table wse2_1l_gu WSe2-1L-Gu2019.yml every 380 900 2
echo '/* graphite, ordinary ray: A. B. Djurisic, E. H. Li, J. Appl. Phys. 85, 7404 (1999), a'
echo ' * Lorentz-Drude fit sampled by the data set; C/nk/Djurisic-o.yml; all rows 340-920 nm */'
table graphite_o_djurisic graphite-o-Djurisic1999.yml all 340 920 1
echo '/* PDMS (Sylgard 184, 10:1): V. Gupta et al., ACS Appl. Mater. Interfaces 11, 28189 (2019);'
echo ' * (C2H6OSi)n/nk/Gupta.yml; every 10 nm row */'
table pdms_gupta PDMS-Sylgard184-Gupta2019.yml every 350 900 10

cat <<'TAIL'
#define ROWS(t) (sizeof t / sizeof t[0])

/* min_nm below the first row: the table is held at its first row down to
 * min_nm (Hsu et al. start at 397 nm; the 380-397 nm end of the default
 * spectrum carries under 1 % of a typical blue channel's weight). */
static const lam__nk_table tables[] = {
    {"MoS2-1L", "Hsu et al., Adv. Opt. Mater. 7, 1900239 (2019), 1L", 380, 856,
     ROWS(mos2_1l_hsu), mos2_1l_hsu},
    {"MoS2-2L", "Hsu et al., Adv. Opt. Mater. 7, 1900239 (2019), 2L", 380, 850,
     ROWS(mos2_2l_hsu), mos2_2l_hsu},
    {"MoS2-3L", "Hsu et al., Adv. Opt. Mater. 7, 1900239 (2019), 3L", 380, 850,
     ROWS(mos2_3l_hsu), mos2_3l_hsu},
    {"MoS2-1L-Song", "Song et al., Adv. Opt. Mater. 7, 1801250 (2019), 1L", 380, 900,
     ROWS(mos2_1l_song), mos2_1l_song},
    {"MoS2-bulk", "Song et al., Adv. Opt. Mater. 7, 1801250 (2019), bulk", 380, 900,
     ROWS(mos2_bulk_song), mos2_bulk_song},
    {"WS2-1L", "Hsu et al., Adv. Opt. Mater. 7, 1900239 (2019), 1L", 380, 848,
     ROWS(ws2_1l_hsu), ws2_1l_hsu},
    {"WSe2-1L", "Hsu et al., Adv. Opt. Mater. 7, 1900239 (2019), 1L", 380, 848,
     ROWS(wse2_1l_hsu), wse2_1l_hsu},
    {"WSe2-1L-Gu", "Gu et al., Nanoscale 11, 22762 (2019), 1L", 380, 900, ROWS(wse2_1l_gu),
     wse2_1l_gu},
    {"graphite", "Djurisic and Li, J. Appl. Phys. 85, 7404 (1999), ordinary ray", 340, 920,
     ROWS(graphite_o_djurisic), graphite_o_djurisic},
    {"PDMS", "Gupta et al., ACS Appl. Mater. Interfaces 11, 28189 (2019), Sylgard 184", 350, 900,
     ROWS(pdms_gupta), pdms_gupta},
};

const lam__nk_table *lam__nk_table_find(const char *name)
{
    for (size_t i = 0; i < sizeof tables / sizeof tables[0]; i++)
        if (!strcasecmp(tables[i].name, name))
            return &tables[i];
    return NULL;
}

size_t lam__nk_table_count(void)
{
    return sizeof tables / sizeof tables[0];
}

const lam__nk_table *lam__nk_table_at(size_t i)
{
    return i < sizeof tables / sizeof tables[0] ? &tables[i] : NULL;
}
TAIL
