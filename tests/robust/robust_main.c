/* robust_main.c - build/tests/robust: the accuracy matrix of issue 9 on
 * the independent generator's images (`make accuracy`).
 *   robust [--scenes N] [--seed S] [--only informed|uninformed] [--log FILE]
 * prints one line per response x oxide x format x knowledge, and totals. */
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

int main(int argc, char **argv)
{
    lam_error_init_gsl();
    int scenes = 2, only = -1;
    unsigned long long seed = 1000;
    FILE *log = NULL;
    for (int i = 1; i < argc; i++) {
        if (!strcmp(argv[i], "--scenes") && i + 1 < argc)
            scenes = atoi(argv[++i]);
        else if (!strcmp(argv[i], "--seed") && i + 1 < argc)
            seed = strtoull(argv[++i], NULL, 10);
        else if (!strcmp(argv[i], "--only") && i + 1 < argc)
            only = !strcmp(argv[++i], "informed");
        else if (!strcmp(argv[i], "--log") && i + 1 < argc)
            log = fopen(argv[++i], "w");
    }
    const char *dir = "build/tests/robust-out";
    mkdir("build", 0755);
    mkdir("build/tests", 0755);
    mkdir(dir, 0755);
    robust_tally total[2], by_resp[2][5], by_ox[2][3], by_fmt[2][4];
    memset(total, 0, sizeof total);
    memset(by_resp, 0, sizeof by_resp);
    memset(by_ox, 0, sizeof by_ox);
    memset(by_fmt, 0, sizeof by_fmt);
    for (int inf = 1; inf >= 0; inf--) {
        if (only >= 0 && inf != only)
            continue;
        for (int r = 0; r < 5; r++)
            for (int o = 0; o < 3; o++)
                for (int f = 0; f < 4; f++) {
                    robust_case c;
                    synth_config_init(&c.cfg);
                    c.cfg.response = responses[r];
                    c.cfg.nominal_oxide_nm = oxides[o];
                    c.fmt = formats[f].fmt;
                    c.quality = formats[f].q;
                    c.informed = inf;
                    c.pooled_setup = NULL;
                    robust_tally t;
                    memset(&t, 0, sizeof t);
                    for (int k = 0; k < scenes; k++)
                        robust_run(&c, seed + (unsigned long long)(((r * 3 + o) * 4 + f) * 100 + k), dir,
                                   &t, log);
                    char label[96];
                    snprintf(label, sizeof label, "%s %s %.0f %s", inf ? "informed" : "uninformed",
                             synth_response_name(responses[r]), oxides[o], formats[f].name);
                    robust_print(stdout, label, &t);
                    fflush(stdout);
                    robust_add(&total[inf], &t);
                    robust_add(&by_resp[inf][r], &t);
                    robust_add(&by_ox[inf][o], &t);
                    robust_add(&by_fmt[inf][f], &t);
                }
        char label[96];
        for (int r = 0; r < 5; r++) {
            snprintf(label, sizeof label, "%s response %s", inf ? "informed" : "uninformed",
                     synth_response_name(responses[r]));
            robust_print(stdout, label, &by_resp[inf][r]);
        }
        for (int o = 0; o < 3; o++) {
            snprintf(label, sizeof label, "%s oxide %.0f", inf ? "informed" : "uninformed", oxides[o]);
            robust_print(stdout, label, &by_ox[inf][o]);
        }
        for (int f = 0; f < 4; f++) {
            snprintf(label, sizeof label, "%s format %s", inf ? "informed" : "uninformed", formats[f].name);
            robust_print(stdout, label, &by_fmt[inf][f]);
        }
        robust_print(stdout, inf ? "TOTAL informed" : "TOTAL uninformed", &total[inf]);
    }
    if (log)
        fclose(log);
    return 0;
}
