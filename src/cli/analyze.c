/* cli/analyze.c - `lamina analyze IMAGE|FOLDER...`: parses the options,
 * runs the batch engine (lamina/batch.h: threads, pooled fit, resume,
 * result files) and prints the summary; for several images the catalogue
 * and run report (run_opts.h). */
#include "cli.h"
#include "options.h"
#include "lamina/analyze.h"
#include "lamina/batch.h"
#include "lamina/catalog.h"
#include "lamina/clock.h"
#include "lamina/inputs.h"
#include "lamina/summary.h"

#include <math.h>
#include <cjson/cJSON.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

/* What run_analyze needs besides the analysis options. */
typedef struct analyze_args {
    lam_setup_overrides so;
    lam_batch_options bo;
    lam_stage stage;
    const char *out_dir, *list, *positions;
    size_t shard[2]; /* --shard I/N */
    int recursive;
    double t0;
} analyze_args;

/* An image's warnings, one line each: "lamina: FILE: warning: MESSAGE",
 * from the analysis or, for a kept result, from its JSON. Printed even
 * with --quiet: a doubtful answer must not pass silently. */
static void print_warnings(const lam_batch_item *it)
{
    if (it->a) {
        for (size_t i = 0; i < it->a->warnings.count; i++)
            fprintf(stderr, "lamina: %s: warning: %s\n", it->path,
                    it->a->warnings.item[i].message);
        return;
    }
    const cJSON *w, *ws = it->json ? cJSON_GetObjectItemCaseSensitive(it->json, "warnings") : NULL;
    cJSON_ArrayForEach(w, ws) {
        const cJSON *m = cJSON_GetObjectItemCaseSensitive(w, "message");
        if (cJSON_IsString(m))
            fprintf(stderr, "lamina: %s: warning: %s\n", it->path, m->valuestring);
    }
}

/* Per image, under the batch's lock: warnings, stage timings, progress. */
static void on_image(const lam_batch *b, const lam_batch_item *it, size_t done, void *user)
{
    const analyze_args *A = user;
    if (!it->failed)
        print_warnings(it);
    if (!it->failed && !it->resumed && cli_verbose) {
        static const char *names[LAM_T_COUNT] = {"load", "display", "substrate", "contrast",
                                                 "model", "segment", "oxide", "regions"};
        fprintf(stderr, "lamina: %s: stage end times (s):", it->path);
        for (int k = 0; k < LAM_T_COUNT; k++)
            fprintf(stderr, " %s %.3f", names[k], it->a->seconds[k]);
        fputc('\n', stderr);
    }
    if (cli_quiet || b->count < 2 || !isatty(STDERR_FILENO))
        return;
    double dt = lam_clock_seconds() - A->t0, rate = dt > 0 ? (double)done / dt : 0;
    double left = rate > 0 ? (double)(b->count - done) / rate : 0;
    fprintf(stderr, "\r%zu/%zu images, %.2f/s, %.0f s left   ", done, b->count, rate, left);
    if (done == b->count)
        fputc('\n', stderr);
    fflush(stderr);
}

/* The catalogue and run report (catalog.*, goto.csv, crops, report.html). */
static int catalog_outputs(const lam_batch *b, const lam_positions *pos, const lam_stage *stage,
                           const char *out_dir)
{
    lam_catalog cat;
    lam_catalog_init(&cat);
    lam_catalog_set_stage(&cat, pos, stage);
    snprintf(cat.results, sizeof cat.results, "%s", out_dir);
    lam_error err;
    lam_error_clear(&err);
    int rc = lam_batch_catalog_add(b, &cat, pos, &err) ? cli_report(&err, NULL) : CLI_OK;
    if (rc == CLI_OK)
        rc = cli_run_outputs(&cat, out_dir);
    lam_catalog_clear(&cat);
    return rc;
}

static int parse_roi(const char *command, const char *text, void *target)
{
    lam_substrate_options *so = target;
    long v[4];
    char *end;
    const char *p = text;
    for (int i = 0; i < 4; i++, p = end + 1) {
        v[i] = strtol(p, &end, 10);
        if (end == p || v[i] < 0 || (i < 3 && *end != ',') || (i == 3 && *end) ||
            (i >= 2 && v[i] < 1))
            return cli_usage_error(command, "--substrate-roi: expected X,Y,W,H in pixels"), -1;
    }
    for (int i = 0; i < 4; i++)
        so->roi[i] = (size_t)v[i];
    so->has_roi = 1;
    return 0;
}

static int parse_shard(const char *command, const char *text, void *target)
{
    size_t *ab = target; /* I, N */
    unsigned long a, b;
    char tail;
    if (sscanf(text, "%lu/%lu%c", &a, &b, &tail) != 2 || b < 1 || a < 1 || a > b || b > 100000)
        return cli_usage_error(command, "--shard: expected I/N with 1 <= I <= N"), -1;
    ab[0] = (size_t)a;
    ab[1] = (size_t)b;
    return 0;
}

/* analyze's own options (the physics and stage options are shared). */
#define ANALYZE_OPTIONS(A)                                                                      \
    {                                                                                           \
        {"max-layers", 0, CLI_SIZE, &(A)->bo.analysis.max_layers, 1, 20, NULL, "K",             \
         "layer counts modelled (default 6; thicker = \"thick\")"},                              \
        {"min-area", 0, CLI_CALL, &(A)->bo.analysis, 0, 0, cli_parse_min_area, "A",             \
         "regions below A um^2 (or px without a pixel size) are 'small'"},                     \
        {"substrate-roi", 0, CLI_CALL, &(A)->bo.analysis.substrate, 0, 0, parse_roi,            \
         "X,Y,W,H", "where the bare substrate is, if not found automatically"},                \
        {"oxide-tolerance", 0, CLI_NUMBER, &(A)->bo.analysis.oxide_tolerance_nm, 0, 500, NULL,  \
         "NM", "pass/fail of the oxide check (default 10)"},                                   \
        {"no-oxide-fit", 0, CLI_UNSET, &(A)->bo.analysis.fit_oxide, 0, 0, NULL, NULL,           \
         "keep the nominal oxide"},                                                             \
        {"encoding", 0, CLI_CALL, &(A)->bo.analysis.load.transfer, 0, 0, cli_parse_encoding,    \
         "E",                                                                                   \
         "srgb, linear or a gamma value (default: from the file)"},                            \
        {"max-megapixels", 0, CLI_CALL, &(A)->bo.analysis.load.max_pixels, 0, 0,                \
         cli_parse_megapixels, "MP", "refuse larger images"},                                  \
        {"list", 0, CLI_TEXT, &(A)->list, 0, 0, NULL, "FILE",                                   \
         "also analyse the images listed in FILE (one path a line)"},                          \
        {"recursive", 0, CLI_FLAG, &(A)->recursive, 0, 0, NULL, NULL,                           \
         "also search the subfolders of each FOLDER"},                                          \
        {"positions", 0, CLI_TEXT, &(A)->positions, 0, 0, NULL, "FILE.csv",                     \
         "file,x_um,y_um[,rotation_deg] (or x_mm,y_mm): the stage\nreading at each tile's "    \
         "centre"},                                                                             \
        {"resume", 0, CLI_FLAG, &(A)->bo.resume, 0, 0, NULL, NULL,                              \
         "skip images whose results exist for the same input and setup"},                      \
        {"no-pool", 0, CLI_UNSET, &(A)->bo.pool, 0, 0, NULL, NULL,                              \
         "analyse each image on its own (default for several images:\nthe response, NA and "  \
         "camera are pooled over a sample of\nthem first, pool.json)"},                        \
        {"pool-from", 0, CLI_TEXT, &(A)->bo.pool_from, 0, 0, NULL, "FILE",                      \
         "use this pool.json instead of fitting (shards of one scan)"},                         \
        {"pool-only", 0, CLI_FLAG, &(A)->bo.pool_only, 0, 0, NULL, NULL,                        \
         "write pool.json and stop (the prior for --pool-from)"},                               \
        {"shard", 0, CLI_CALL, (A)->shard, 0, 0, parse_shard, "I/N",                           \
         "analyse only the I-th of N deterministic parts of the inputs"},                       \
        {"out", 0, CLI_TEXT, &(A)->out_dir, 0, 0, NULL, "DIR",                                  \
         "output folder (default lamina-out)"},                                                 \
        {"threads", 0, CLI_SIZE, &(A)->bo.threads, 1, 256, NULL, "N",                           \
         "worker threads (default: all cores)"},                                                \
        {"quiet", 0, CLI_FLAG, &cli_quiet, 0, 0, NULL, NULL, "no summary, no progress"},        \
        {"verbose", 0, CLI_FLAG, &cli_verbose, 0, 0, NULL, NULL, "stage timings per image"},   \
        CLI_END                                                                                 \
    }

static void analyze_help(FILE *out)
{
    analyze_args A;
    cli_option t[] = ANALYZE_OPTIONS(&A);
    fputs("Usage: lamina analyze [OPTIONS] IMAGE|FOLDER...\n"
          "Find the flakes in each micrograph, count their layers with a probability,\n"
          "estimate the Fermi level where the colours constrain it and fit the oxide\n"
          "thickness. Writes STEM.json, STEM.layers.png, STEM.annotated.png and\n"
          "STEM.contrast.svg per image; for several images also catalog.json,\n"
          "catalog.csv, crops/, contact-sheet.png and report.html (the run report),\n"
          "and with positions goto.csv (the candidates' stage readings).\n\n"
          CLI_SETUP_HELP, out);
    cli_options_help(out, t);
    fputs(CLI_STAGE_HELP "\nLayer counts are model estimates: confirm by Raman or AFM before "
          "fabrication.\n", out);
}

/* The setup, positions and output folder; an exit code. */
static int prepare(analyze_args *A, lam_setup *s, lam_positions *pos)
{
    int rc;
    if ((rc = cli_setup_build("analyze", &A->so, s)) ||
        (rc = cli_positions_need_scale("analyze", A->positions, s)))
        return rc;
    lam_error err;
    lam_error_clear(&err);
    if (A->positions && lam_positions_load(A->positions, pos, &err))
        return cli_report(&err, A->positions);
    return cli_make_dir(A->out_dir) ? CLI_EFILE : CLI_OK;
}

/* Run the batch, print, write the catalogue; an exit code. */
static int analyze_batch(analyze_args *A, const lam_inputs *in, const lam_setup *s,
                         const lam_positions *pos)
{
    char setup_hash[LAM_BATCH_HASH_LEN];
    lam_batch_overrides_hash(&A->so, &A->bo.analysis, setup_hash);
    A->bo.setup = s;
    A->bo.out_dir = A->out_dir;
    A->bo.setup_hash = setup_hash;
    A->bo.on_image = on_image;
    A->bo.user = A;
    A->t0 = lam_clock_seconds();
    lam_batch b;
    lam_error err;
    lam_error_clear(&err);
    if (lam_batch_run(&b, (const char *const *)in->paths, in->count, &A->bo, &err))
        return cli_report(&err, NULL);
    int rc = CLI_OK, r;
    size_t failed = 0;
    for (size_t i = 0; i < b.count; i++)
        if (b.items[i].failed) {
            cli_report(&b.items[i].err, b.items[i].path);
            failed++;
        }
    if (!cli_quiet && b.prior.set)
        fprintf(stderr, "lamina: response, NA and camera pooled over %zu image%s%s (%s/pool.json)\n",
                b.prior.images, b.prior.images == 1 ? "" : "s",
                b.pool_reused ? ", as stored" : "", A->out_dir);
    char *text = NULL;
    if (!cli_quiet && !A->bo.pool_only &&
        !lam_summary_batch(&b, A->positions ? pos : NULL, &A->stage, &text, &err))
        fputs(text, stdout);
    free(text);
    if (!A->bo.pool_only && (b.count > 1 || A->positions) &&
        (r = catalog_outputs(&b, A->positions ? pos : NULL, &A->stage, A->out_dir)))
        rc = r;
    lam_batch_clear(&b);
    return failed ? CLI_EFILE : rc;
}

static int run_analyze(int argc, char **argv)
{
    analyze_args A = {.bo = lam_batch_options_default(), .stage = lam_stage_default(),
                      .out_dir = "lamina-out"};
    lam_setup_overrides_init(&A.so);
    cli_option t[] = ANALYZE_OPTIONS(&A);
    cli_command_options co = {.command = "analyze", .own = t, .setup = &A.so,
                              .stage = &A.stage, .max_args = -1};
    int rc = cli_options_parse(&co, argc, argv, 1);
    if (rc)
        return rc;
    lam_inputs in;
    lam_error err;
    lam_error_clear(&err);
    if (lam_inputs_collect(&in, (const char *const *)argv + optind, (size_t)(argc - optind),
                           A.list, A.recursive, &err))
        return cli_report(&err, NULL);
    if (A.shard[1])
        lam_inputs_shard(&in, A.shard[0], A.shard[1]);
    if (in.count == 0) {
        lam_inputs_free(&in);
        return A.shard[1] ? CLI_OK : cli_usage_error("analyze", "no image given");
    }
    lam_setup s;
    memset(&s, 0, sizeof s);
    lam_positions pos = {0};
    if (!(rc = prepare(&A, &s, &pos)))
        rc = analyze_batch(&A, &in, &s, &pos);
    lam_setup_clear(&s);
    lam_positions_clear(&pos);
    lam_inputs_free(&in);
    return rc;
}

const cli_command cli_analyze = {"analyze", "regions, layer counts, doping and oxide of micrographs",
                                 run_analyze, analyze_help};
