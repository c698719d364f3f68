/* crystals_main.c - build/tests/robust/crystals: issue 14's figures on the
 * independent generator's images (`make accuracy-crystals`).
 *   crystals [--scenes N] [--seed S] [--only hbn|tmd] [--format png|jpeg90]
 *            [--uninformed] [--log FILE] [--flakes FILE.csv] [--mislabelled]
 * hBN: thickness within 10 % or order-ambiguous, per index source (Grudinin
 * 2023, Lee 2019, Rah 2019), oxide (90, 285 nm) and format; TMDs: 1-3L
 * counts per material, n,k source (MoS2 Hsu 2019 / Song 2019, WSe2 Hsu 2019
 * / Gu 2019), oxide and format. Informed setups (camera, lamp, NA given)
 * unless --uninformed. --mislabelled: instead, hBN (8-bit PNG) on chips of
 * another oxide than the setup's nominal: 90, 200 and 330 nm sold as 285,
 * 150 and 285 nm sold as 90, each per index source. */
#include "crystals.h"
#include "../check.h"
#include "lamina/error.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

static const double oxides[] = {90, 285};
static const struct { synth_format fmt; int q; const char *name; } formats[] = {
    {SYNTH_FMT_PNG, 0, "png"}, {SYNTH_FMT_JPEG, 90, "jpeg90"}};
static const char *const hbn_sources[3] = {"Grudinin2023", "Lee2019", "Rah2019"};

typedef struct run_opts {
    int scenes, informed, format; /* format: index into formats, -1 all */
    unsigned long long seed;
    FILE *log;
    const char *dir;
} run_opts;

static robust_case make_case(synth_crystal x, int source, double oxide, int f, int informed)
{
    robust_case c;
    robust_case_init(&c);
    c.cfg.crystal = x;
    c.cfg.nk_source = source;
    c.cfg.nominal_oxide_nm = oxide;
    c.fmt = formats[f].fmt;
    c.quality = formats[f].q;
    c.informed = informed;
    c.pooled_setup = NULL;
    return c;
}

static void run_hbn(const run_opts *o)
{
    hbn_tally total, by_src[3], by_ox[2], by_fmt[2];
    memset(&total, 0, sizeof total);
    memset(by_src, 0, sizeof by_src);
    memset(by_ox, 0, sizeof by_ox);
    memset(by_fmt, 0, sizeof by_fmt);
    for (int s = 0; s < 3; s++)
        for (int x = 0; x < 2; x++)
            for (int f = 0; f < 2; f++) {
                if (o->format >= 0 && f != o->format)
                    continue;
                robust_case c = make_case(SYNTH_XTAL_HBN, s, oxides[x], f, o->informed);
                hbn_tally t;
                memset(&t, 0, sizeof t);
                for (int k = 0; k < o->scenes; k++)
                    crystals_run_hbn(&c, o->seed + (unsigned long long)(((s * 2 + x) * 2 + f) *
                                                                        100 + k),
                                     o->dir, &t, o->log);
                char label[96];
                snprintf(label, sizeof label, "hBN %s %.0f nm %s", hbn_sources[s], oxides[x],
                         formats[f].name);
                crystals_print(stdout, label, &t);
                fflush(stdout);
                crystals_add(&total, &t);
                crystals_add(&by_src[s], &t);
                crystals_add(&by_ox[x], &t);
                crystals_add(&by_fmt[f], &t);
            }
    char label[96];
    for (int f = 0; f < 2; f++) {
        snprintf(label, sizeof label, "hBN format %s", formats[f].name);
        crystals_print(stdout, label, &by_fmt[f]);
    }
    for (int s = 0; s < 3; s++) {
        snprintf(label, sizeof label, "hBN index %s", hbn_sources[s]);
        crystals_print(stdout, label, &by_src[s]);
    }
    for (int x = 0; x < 2; x++) {
        snprintf(label, sizeof label, "hBN oxide %.0f nm", oxides[x]);
        crystals_print(stdout, label, &by_ox[x]);
    }
    crystals_print(stdout, "TOTAL hBN", &total);
}

/* hBN on chips whose oxide is not the setup's nominal by more than the
 * oxide profile's reach (a box of 90 nm chips sold as 285 nm): the true
 * oxide is drawn, the setup says the nominal. */
static void run_hbn_mislabelled(const run_opts *o)
{
    static const struct { double nominal, truth; } chips[] = {
        {285, 90}, {285, 200}, {285, 330}, {90, 150}, {90, 285}};
    hbn_tally total;
    memset(&total, 0, sizeof total);
    for (size_t m = 0; m < sizeof chips / sizeof chips[0]; m++)
        for (int s = 0; s < 3; s++) {
            robust_case c = make_case(SYNTH_XTAL_HBN, s, chips[m].nominal, 0, o->informed);
            c.cfg.oxide_nm = chips[m].truth;
            hbn_tally t;
            memset(&t, 0, sizeof t);
            for (int k = 0; k < o->scenes; k++)
                crystals_run_hbn(&c, o->seed + 9000 + (unsigned long long)((m * 3 + (size_t)s) *
                                                                           100 + (size_t)k),
                                 o->dir, &t, o->log);
            char label[96];
            snprintf(label, sizeof label, "hBN %s %.0f nm sold as %.0f", hbn_sources[s],
                     chips[m].truth, chips[m].nominal);
            crystals_print(stdout, label, &t);
            fflush(stdout);
            crystals_add(&total, &t);
        }
    crystals_print(stdout, "TOTAL hBN mislabelled", &total);
}

static void run_tmd(const run_opts *o)
{
    static const struct { synth_crystal x; int source; const char *name; } mats[] = {
        {SYNTH_XTAL_MOS2, 0, "MoS2 Hsu2019"}, {SYNTH_XTAL_MOS2, 1, "MoS2 Song2019"},
        {SYNTH_XTAL_WSE2, 0, "WSe2 Hsu2019"}, {SYNTH_XTAL_WSE2, 1, "WSe2 Gu2019"}};
    robust_tally total, by_mat[4], by_fmt[2];
    memset(&total, 0, sizeof total);
    memset(by_mat, 0, sizeof by_mat);
    memset(by_fmt, 0, sizeof by_fmt);
    for (int m = 0; m < 4; m++)
        for (int x = 0; x < 2; x++)
            for (int f = 0; f < 2; f++) {
                if (o->format >= 0 && f != o->format)
                    continue;
                robust_case c = make_case(mats[m].x, mats[m].source, oxides[x], f, o->informed);
                robust_tally t;
                memset(&t, 0, sizeof t);
                for (int k = 0; k < o->scenes; k++)
                    robust_run(&c, o->seed + 5000 + (unsigned long long)(((m * 2 + x) * 2 + f) *
                                                                         100 + k),
                               o->dir, &t, o->log);
                char label[96];
                snprintf(label, sizeof label, "%s %.0f nm %s", mats[m].name, oxides[x],
                         formats[f].name);
                robust_print(stdout, label, &t);
                fflush(stdout);
                robust_add(&total, &t);
                robust_add(&by_mat[m], &t);
                robust_add(&by_fmt[f], &t);
            }
    for (int m = 0; m < 4; m++)
        robust_print(stdout, mats[m].name, &by_mat[m]);
    for (int f = 0; f < 2; f++)
        robust_print(stdout, formats[f].name, &by_fmt[f]);
    robust_print(stdout, "TOTAL TMD", &total);
}

int main(int argc, char **argv)
{
    lam_error_init_gsl();
    run_opts o = {2, 1, -1, 3000, NULL, "build/tests/crystals-out"};
    int only = 0; /* 1 hbn, 2 tmd, 3 hBN on mislabelled chips */
    FILE *flakes = NULL;
    for (int i = 1; i < argc; i++) {
        if (!strcmp(argv[i], "--scenes") && i + 1 < argc)
            o.scenes = atoi(argv[++i]);
        else if (!strcmp(argv[i], "--seed") && i + 1 < argc)
            o.seed = strtoull(argv[++i], NULL, 10);
        else if (!strcmp(argv[i], "--only") && i + 1 < argc)
            only = !strcmp(argv[++i], "hbn") ? 1 : 2;
        else if (!strcmp(argv[i], "--format") && i + 1 < argc)
            o.format = !strcmp(argv[++i], "png") ? 0 : 1;
        else if (!strcmp(argv[i], "--uninformed"))
            o.informed = 0;
        else if (!strcmp(argv[i], "--flakes") && i + 1 < argc)
            crystals_flake_table(flakes = fopen(argv[++i], "w"));
        else if (!strcmp(argv[i], "--log") && i + 1 < argc)
            o.log = fopen(argv[++i], "w");
        else if (!strcmp(argv[i], "--mislabelled"))
            only = 3;
    }
    if (!o.informed) /* its setups must not replace the informed run's */
        o.dir = "build/tests/crystals-out-uninformed";
    mkdir("build", 0755);
    mkdir("build/tests", 0755);
    if (robust_claim_dir(o.dir))
        return 1;
    if (only == 3)
        run_hbn_mislabelled(&o);
    if (only == 0 || only == 1)
        run_hbn(&o);
    if (only == 0 || only == 2)
        run_tmd(&o);
    if (o.log)
        fclose(o.log);
    if (flakes)
        fclose(flakes);
    return 0;
}
