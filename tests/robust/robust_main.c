/* robust_main.c - build/tests/robust: the accuracy matrix of issue 9 on
 * the independent generator's images (`make accuracy`).
 *   robust [--scenes N] [--batch T] [--seed S] [--only informed|uninformed]
 *          [--calibrate T [--no-colour] [--labelled-only] [--two-chips]] [--log FILE]
 * One line per response x oxide x format x knowledge, then totals by
 * response, oxide and format. --batch T: each scene is a chip scan of T
 * tiles sharing one microscope, response and oxide, scored once with each
 * tile analysed alone and once with the prior pooled over the scan.
 * --calibrate T: the same scans, the setup calibrated on the largest
 * monolayer of the first tile with that tile's oxide given (as from
 * ellipsometry); the other T-1 tiles (other days, every other one another
 * chip) scored with the setup as it was and as calibrated (the first
 * tile's other regions join the calibration with latent counts, as in
 * `calibrate --labels`; --labelled-only leaves them out); --no-colour
 * drops the calibration's substrate colour; --two-chips scores tiles 2..T-1
 * calibrated on tile 0 alone ("one chip") and with tile 1, another chip,
 * joining with its oxide given ("two chips"). */
#include "robust.h"
#include "../check.h"
#include "lamina/error.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

static const synth_response responses[] = {SYNTH_RESP_SIGMA0, SYNTH_RESP_WEBER, SYNTH_RESP_SONG,
                                           SYNTH_RESP_ELSAYED, SYNTH_RESP_LAMINA_DEFAULT};
static const double oxides[] = {90, 285, 300};
static const struct { synth_format fmt; int q; const char *name; } formats[] = {
    {SYNTH_FMT_PNG, 0, "png"}, {SYNTH_FMT_JPEG, 85, "jpeg85"}, {SYNTH_FMT_BAYER_PNG, 0, "bayer"},
    {SYNTH_FMT_PNG16, 0, "png16"}};
#define NR 5
#define NO 3
#define NF 4

typedef struct options {
    int scenes, batch, calibrate, only, no_colour, labelled_only, two_chips;
    unsigned long long seed;
    FILE *log;
} options;

/* Tallies per knowledge (0 uninformed, 1 informed) and mode (0 alone,
 * 1 pooled). */
typedef struct tallies {
    robust_tally total[2][2], resp[2][2][NR], ox[2][2][NO], fmt[2][2][NF];
} tallies;

static const char *label_of(const options *o, int inf, int mode)
{
    static const char *names[2][2] = {{"uninformed", "uninformed pooled"},
                                      {"informed", "informed pooled"}};
    static const char *calib[2][2] = {{"uninformed", "uninformed calibrated"},
                                      {"informed", "informed calibrated"}};
    static const char *chips[2][2] = {{"uninformed one chip", "uninformed two chips"},
                                      {"informed one chip", "informed two chips"}};
    if (o->calibrate && o->two_chips)
        return chips[inf][mode];
    if (o->calibrate)
        return calib[inf][mode];
    return o->batch ? names[inf][mode] : names[inf][0];
}

/* How many tallies a cell has: alone, and pooled or calibrated. */
static int modes(const options *o)
{
    return o->batch || o->calibrate ? 2 : 1;
}

static void run_cell(const options *o, int inf, int r, int x, int f, tallies *T)
{
    robust_case c;
    robust_case_init(&c);
    c.cfg.response = responses[r];
    c.cfg.nominal_oxide_nm = oxides[x];
    c.fmt = formats[f].fmt;
    c.quality = formats[f].q;
    c.informed = inf;
    c.pooled_setup = NULL;
    robust_tally t[2];
    memset(t, 0, sizeof t);
    unsigned long long base = o->seed + (unsigned long long)(((r * NO + x) * NF + f) * 100);
    for (int k = 0; k < o->scenes; k++) {
        if (o->calibrate && o->two_chips)
            robust_run_two_chips(&c, base + (unsigned long long)k, o->calibrate,
                                 "build/tests/robust-out", &t[0], &t[1], o->log);
        else if (o->calibrate)
            robust_run_calibrated(&c, base + (unsigned long long)k, o->calibrate,
                                  ROBUST_CAL_OXIDE | ROBUST_CAL_SESSIONS |
                                      (o->no_colour ? ROBUST_CAL_NO_COLOUR : 0) |
                                      (o->labelled_only ? ROBUST_CAL_LABELLED_ONLY : 0),
                                  "build/tests/robust-out", &t[0], &t[1], o->log);
        else if (o->batch)
            robust_run_batch(&c, base + (unsigned long long)k, o->batch, "build/tests/robust-out",
                             &t[0], &t[1], o->log);
        else
            robust_run(&c, base + (unsigned long long)k, "build/tests/robust-out", &t[0], o->log);
    }
    for (int m = 0; m < modes(o); m++) {
        char label[128];
        snprintf(label, sizeof label, "%s %s %.0f %s", label_of(o, inf, m),
                 synth_response_name(responses[r]), oxides[x], formats[f].name);
        robust_print(stdout, label, &t[m]);
        robust_add(&T->total[inf][m], &t[m]);
        robust_add(&T->resp[inf][m][r], &t[m]);
        robust_add(&T->ox[inf][m][x], &t[m]);
        robust_add(&T->fmt[inf][m][f], &t[m]);
    }
    fflush(stdout);
}

static void print_totals(const options *o, int inf, const tallies *T)
{
    char label[128];
    for (int m = 0; m < modes(o); m++) {
        const char *k = label_of(o, inf, m);
        for (int r = 0; r < NR; r++) {
            snprintf(label, sizeof label, "%s response %s", k, synth_response_name(responses[r]));
            robust_print(stdout, label, &T->resp[inf][m][r]);
        }
        for (int x = 0; x < NO; x++) {
            snprintf(label, sizeof label, "%s oxide %.0f", k, oxides[x]);
            robust_print(stdout, label, &T->ox[inf][m][x]);
        }
        for (int f = 0; f < NF; f++) {
            snprintf(label, sizeof label, "%s format %s", k, formats[f].name);
            robust_print(stdout, label, &T->fmt[inf][m][f]);
        }
    }
    for (int m = 0; m < modes(o); m++) {
        snprintf(label, sizeof label, "TOTAL %s", label_of(o, inf, m));
        robust_print(stdout, label, &T->total[inf][m]);
    }
}

int main(int argc, char **argv)
{
    lam_error_init_gsl();
    options o = {.scenes = 2, .only = -1, .seed = 1000};
    for (int i = 1; i < argc; i++) {
        if (!strcmp(argv[i], "--scenes") && i + 1 < argc)
            o.scenes = atoi(argv[++i]);
        else if (!strcmp(argv[i], "--batch") && i + 1 < argc)
            o.batch = atoi(argv[++i]);
        else if (!strcmp(argv[i], "--calibrate") && i + 1 < argc)
            o.calibrate = atoi(argv[++i]);
        else if (!strcmp(argv[i], "--seed") && i + 1 < argc)
            o.seed = strtoull(argv[++i], NULL, 10);
        else if (!strcmp(argv[i], "--only") && i + 1 < argc)
            o.only = !strcmp(argv[++i], "informed");
        else if (!strcmp(argv[i], "--no-colour"))
            o.no_colour = 1;
        else if (!strcmp(argv[i], "--two-chips"))
            o.two_chips = 1;
        else if (!strcmp(argv[i], "--labelled-only"))
            o.labelled_only = 1;
        else if (!strcmp(argv[i], "--log") && i + 1 < argc)
            o.log = fopen(argv[++i], "w");
        else {
            fprintf(stderr, "robust: unknown option %s\n", argv[i]);
            return 2;
        }
    }
    mkdir("build", 0755);
    mkdir("build/tests", 0755);
    if (robust_claim_dir("build/tests/robust-out"))
        return 1;
    tallies *T = calloc(1, sizeof *T);
    if (!T)
        return 1;
    for (int inf = 1; inf >= 0; inf--) {
        if (o.only >= 0 && inf != o.only)
            continue;
        for (int r = 0; r < NR; r++)
            for (int x = 0; x < NO; x++)
                for (int f = 0; f < NF; f++)
                    run_cell(&o, inf, r, x, f, T);
        print_totals(&o, inf, T);
    }
    free(T);
    if (o.log)
        fclose(o.log);
    return 0;
}
