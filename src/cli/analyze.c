/* cli/analyze.c - `lamina analyze IMAGE|FOLDER...`: parses the options,
 * runs the batch engine (lamina/batch.h: threads, pooled fit, resume,
 * result files) and prints the summary; for several images the catalogue
 * and run report (lam_batch_write_outputs). */
#include "cli.h"
#include "lamina/analyze.h"
#include "lamina/batch.h"
#include "lamina/catalog.h"
#include "lamina/clock.h"
#include "lamina/inputs.h"
#include "lamina/summary.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

static struct {
    lam_setup_overrides so;
    lam_batch_options bo;
    lam_stage stage;
    const char *out_dir, *list, *positions;
    size_t shard[2]; /* --shard I/N */
    double target[2]; /* --target-thickness A-B, nm (NAN: none) */
    int recursive;
    double t0;
} A = {.out_dir = "lamina-out"};

/* An image's warnings, one line each: "lamina: FILE: warning: MESSAGE",
 * from the analysis or, for a kept result, from its JSON. Printed even
 * with --quiet: a doubtful answer must not pass silently. */
static void print_warnings(const lam_batch_item *it)
{
    lam_warnings w;
    lam_batch_item_warnings(it, &w);
    for (size_t i = 0; i < w.count; i++)
        fprintf(stderr, "lamina: %s: warning: %s\n", it->path, w.item[i].message);
}

/* Per image, under the batch's lock: warnings, stage timings, progress. */
static void on_image(const lam_batch *b, const lam_batch_item *it, size_t done, void *user)
{
    (void)user;
    if (!it->failed)
        print_warnings(it);
    char *times = NULL;
    if (!it->failed && !it->resumed && cli_verbose && !lam_summary_timings(it->a, &times, NULL))
        fprintf(stderr, "lamina: %s: stage end times (s): %s\n", it->path, times);
    free(times);
    if (cli_quiet || b->count < 2 || !isatty(STDERR_FILENO))
        return;
    double dt = lam_clock_seconds() - A.t0, rate = dt > 0 ? (double)done / dt : 0;
    double left = rate > 0 ? (double)(b->count - done) / rate : 0;
    fprintf(stderr, "\r%zu/%zu images, %.2f/s, %.0f s left   ", done, b->count, rate, left);
    if (done == b->count)
        fputc('\n', stderr);
    fflush(stderr);
}

/* The catalogue and run report (catalog.*, goto.csv, crops, report.html). */
static int catalog_outputs(const lam_batch *b, const lam_positions *pos)
{
    lam_catalog cat;
    lam_error err;
    lam_error_clear(&err);
    lam_status st = lam_batch_write_outputs(b, pos, &A.stage, A.target, A.out_dir, &cat, &err);
    return cli_catalog_done(&cat, st, &err);
}

static int parse_shard(const char *command, const char *text, void *target)
{
    size_t *ab = target, n = 0; /* I, N */
    double v[2];
    lam_error err;
    if (lam_parse_numbers(&err, "--shard", text, '/', 1, 100000, v, 2, &n) || n != 2 ||
        v[0] > v[1] || v[0] != floor(v[0]) || v[1] != floor(v[1]))
        return cli_usage_error(command, "--shard: expected I/N with 1 <= I <= N"), -1;
    ab[0] = (size_t)v[0], ab[1] = (size_t)v[1];
    return 0;
}

/* analyze's own options (the physics, stage and analysis options are shared). */
static const cli_option analyze_options[] = {
    CLI_ANALYSIS_OPTIONS(A.bo.analysis),
    {"list", 0, CLI_TEXT, &A.list, 0, 0, NULL, "FILE",
     "also analyse the images listed in FILE (one path a line)"},
    {"recursive", 0, CLI_FLAG, &A.recursive, 0, 0, NULL, NULL,
     "also search the subfolders of each FOLDER"},
    {"target-thickness", 0, CLI_RANGE, A.target, 0.1, 1000, NULL, "A-B",
     "rank hBN regions by closeness to A-B nm (e.g. 10-30)"},
    {"positions", 0, CLI_TEXT, &A.positions, 0, 0, NULL, "FILE.csv",
     "file,x_um,y_um[,rotation_deg] (or x_mm,y_mm): the stage\nreading at each tile's "
     "centre"},
    {"resume", 0, CLI_FLAG, &A.bo.resume, 0, 0, NULL, NULL,
     "skip images whose results exist for the same input and setup"},
    {"no-pool", 0, CLI_UNSET, &A.bo.pool, 0, 0, NULL, NULL,
     "analyse each image on its own (default for several images:\nthe response, NA and "
     "camera are pooled over a sample of\nthem first, pool.json)"},
    {"pool-from", 0, CLI_TEXT, &A.bo.pool_from, 0, 0, NULL, "FILE",
     "use this pool.json instead of fitting (shards of one scan)"},
    {"pool-only", 0, CLI_FLAG, &A.bo.pool_only, 0, 0, NULL, NULL,
     "write pool.json and stop (the prior for --pool-from)"},
    {"shard", 0, CLI_CALL, A.shard, 0, 0, parse_shard, "I/N",
     "analyse only the I-th of N deterministic parts of the inputs"},
    {"out", 0, CLI_TEXT, &A.out_dir, 0, 0, NULL, "DIR",
     "output folder (default lamina-out)"},
    {"threads", 0, CLI_SIZE, &A.bo.threads, 1, 256, NULL, "N",
     "worker threads (default: all cores)"},
    {"quiet", 0, CLI_FLAG, &cli_quiet, 0, 0, NULL, NULL, "no summary, no progress"},
    {"verbose", 0, CLI_FLAG, &cli_verbose, 0, 0, NULL, NULL, "stage timings per image"},
    CLI_END};

/* The setup and positions; an exit code. */
static int prepare(lam_setup *s, lam_positions *pos)
{
    int rc;
    if ((rc = cli_setup_build("analyze", &A.so, s)) ||
        (rc = cli_positions_need_scale("analyze", A.positions, s)))
        return rc;
    lam_error err;
    lam_error_clear(&err);
    if (A.positions && lam_positions_load(A.positions, pos, &err))
        return cli_report(&err, A.positions);
    return CLI_OK;
}

/* Run the batch, print, write the catalogue; an exit code. */
static int analyze_batch(const lam_inputs *in, const lam_setup *s, const lam_positions *pos)
{
    char setup_hash[LAM_BATCH_HASH_LEN];
    lam_batch_overrides_hash(&A.so, &A.bo.analysis, setup_hash);
    A.bo.setup = s;
    A.bo.out_dir = A.out_dir;
    A.bo.setup_hash = setup_hash;
    A.bo.on_image = on_image;
    A.t0 = lam_clock_seconds();
    if (in->count == 1)
        cli_one_malloc_arena();
    lam_batch b;
    lam_error err;
    lam_error_clear(&err);
    if (lam_batch_run(&b, (const char *const *)in->paths, in->count, &A.bo, &err))
        return cli_report(&err, NULL);
    int rc = CLI_OK, r;
    size_t failed = 0;
    for (size_t i = 0; i < b.count; i++)
        if (b.items[i].failed) {
            cli_report(&b.items[i].err, b.items[i].path);
            failed++;
        }
    if (!cli_quiet && b.prior.set)
        fprintf(stderr, "lamina: response, NA and camera pooled over %zu image%s%s "
                        "(%s/pool.json)\n", b.prior.images, b.prior.images == 1 ? "" : "s",
                b.pool_reused ? ", as stored" : "", A.out_dir);
    char *text = NULL;
    if (!cli_quiet && !A.bo.pool_only &&
        !lam_summary_batch_target(&b, pos, &A.stage, A.target, &text, &err))
        fputs(text, stdout);
    free(text);
    if (!A.bo.pool_only && (b.count > 1 || pos || isfinite(A.target[0])) &&
        (r = catalog_outputs(&b, pos)))
        rc = r;
    lam_batch_clear(&b);
    return failed ? CLI_EFILE : rc;
}

static int run_analyze(int argc, char **argv)
{
    A.bo = lam_batch_options_default();
    A.stage = lam_stage_default();
    A.target[0] = A.target[1] = NAN;
    if (cli_options_parse(&cli_analyze, argc, argv))
        return CLI_EUSAGE;
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
    int rc = prepare(&s, &pos);
    if (!rc)
        rc = analyze_batch(&in, &s, A.positions ? &pos : NULL);
    lam_setup_clear(&s);
    lam_positions_clear(&pos);
    lam_inputs_free(&in);
    return rc;
}

const cli_command cli_analyze = {
    .name = "analyze", .summary = "regions, layer counts, doping and oxide of micrographs",
    .run = run_analyze,
    .usage = "Usage: lamina analyze [OPTIONS] IMAGE|FOLDER...\n"
             "Find the flakes in each micrograph, count their layers with a probability\n"
             "(hBN: its thickness in nm with an interval and every order that fits),\n"
             "estimate the Fermi level where the colours constrain it and fit the oxide\n"
             "thickness. Writes STEM.json, STEM.layers.png, STEM.annotated.jpg (a\n"
             "JPEG input's; .png for others) and STEM.contrast.svg per image; for\n"
             "several images also catalog.json,\n"
             "catalog.csv, crops/, contact-sheet.png and report.html (the run report),\n"
             "and with positions goto.csv (the candidates' stage readings).\n\n",
    .options = analyze_options, .setup = &A.so, .stage = &A.stage, .max_args = -1,
    .footer = "\nLayer counts are model estimates: confirm by Raman or AFM before fabrication.\n"};
