/* cli/analyze.c - `lamina analyze IMAGE|FOLDER...`: parses the options,
 * runs the batch engine (lamina/batch.h: threads, pooled fit, resume,
 * result files) and prints the summary; for several images the catalogue
 * and run report (run_opts.h). */
#include "cli.h"
#include "run_opts.h"
#include "setup_opts.h"
#include "lamina/analyze.h"
#include "lamina/batch.h"
#include "lamina/catalog.h"
#include "lamina/clock.h"
#include "lamina/inputs.h"
#include "lamina/parallel.h"
#include "lamina/summary.h"

#include <getopt.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

static void analyze_help(FILE *out)
{
    fputs("Usage: lamina analyze [OPTIONS] IMAGE|FOLDER...\n"
          "Find the flakes in each micrograph, count their layers with a probability,\n"
          "estimate the Fermi level where the colours constrain it and fit the oxide\n"
          "thickness. Writes STEM.json, STEM.layers.png, STEM.annotated.png and\n"
          "STEM.contrast.svg per image; for several images also catalog.json,\n"
          "catalog.csv, crops/, contact-sheet.png and report.html (the run report),\n"
          "and with positions goto.csv (the candidates' stage readings).\n\n"
          "  --setup FILE          setup profile (lamina-setup/1)\n"
          "  --oxide NM            nominal SiO2 thickness\n"
          "  --stack FILE          substrate {\"stack\": [...], \"base\": ...}\n"
          "  --material NAME       flake material (graphene)\n"
          "  --um-per-px X         pixel size at the sample\n"
          "  --max-layers K        layer counts modelled (default 6; thicker = \"thick\")\n"
          "  --min-area A          regions below A um^2 (or px without a pixel size) are 'small'\n"
          "  --substrate-roi X,Y,W,H  where the bare substrate is, if not found automatically\n"
          "  --oxide-tolerance NM  pass/fail of the oxide check (default 10)\n"
          "  --no-oxide-fit        keep the nominal oxide\n"
          "  --fermi EV            Fermi level of the ladder (default from the setup)\n"
          "  --encoding E          srgb, linear or a gamma value (default: from the file)\n"
          "  --list FILE           also analyse the images listed in FILE (one path a line)\n"
          "  --recursive           also search the subfolders of each FOLDER\n"
          "  --positions FILE.csv  file,x_um,y_um[,rotation_deg] (or x_mm,y_mm): the stage\n"
          "                        reading at each tile's centre\n"
          CLI_STAGE_HELP
          "  --resume              skip images whose results exist for the same input and setup\n"
          "  --no-pool             analyse each image on its own (default for several images:\n"
          "                        the response, NA and camera are pooled over a sample of\n"
          "                        them first, pool.json)\n"
          "  --pool-from FILE      use this pool.json instead of fitting (shards of one scan)\n"
          "  --pool-only           write pool.json and stop (the prior for --pool-from)\n"
          "  --shard I/N           analyse only the I-th of N deterministic parts of the inputs\n"
          "  --out DIR             output folder (default lamina-out)\n"
          "  --threads N           worker threads (default: all cores)\n"
          "  --quiet, --verbose\n\n"
          "Layer counts are model estimates: confirm by Raman or AFM before fabrication.\n",
          out);
}


/* What run_analyze needs besides the analysis options. */
typedef struct analyze_args {
    cli_setup_opts so;
    lam_batch_options bo;
    lam_stage stage;
    const char *out_dir, *list, *positions;
    long threads, K;
    double area;
    size_t shard, shards;
    int recursive;
    double t0;
} analyze_args;

/* Per image, under the batch's lock: stage timings and progress. */
static void on_image(const lam_batch *b, const lam_batch_item *it, size_t done, void *user)
{
    const analyze_args *A = user;
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

static int parse_roi(const char *text, size_t roi[4])
{
    long v[4];
    char *end;
    const char *p = text;
    for (int i = 0; i < 4; i++) {
        v[i] = strtol(p, &end, 10);
        if (end == p || v[i] < 0 || (i < 3 && *end != ',') || (i == 3 && *end))
            return -1;
        p = end + 1;
    }
    if (v[2] < 1 || v[3] < 1)
        return -1;
    for (int i = 0; i < 4; i++)
        roi[i] = (size_t)v[i];
    return 0;
}

static int parse_shard(const char *text, size_t *index, size_t *of)
{
    unsigned long a, b;
    char tail;
    if (sscanf(text, "%lu/%lu%c", &a, &b, &tail) != 2 || b < 1 || a < 1 || a > b || b > 100000)
        return -1;
    *index = (size_t)a;
    *of = (size_t)b;
    return 0;
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
        rc = cli_run_outputs(&cat, out_dir, 0);
    lam_catalog_clear(&cat);
    return rc;
}

enum { OPT_NO_POOL = 1201, OPT_POOL_FROM, OPT_POOL_ONLY };

/* The options only analyze has; 1 if c was one, 0 if not, -1 on error. */
static int analyze_option(analyze_args *A, int c, const char *arg)
{
    lam_analysis_options *opt = &A->bo.analysis;
    switch (c) {
    case 'K': return cli_parse_long("analyze", "--max-layers", arg, 1, 20, &A->K) ? -1 : 1;
    case 'a': return cli_parse_double("analyze", "--min-area", arg, 0, 1e9, &A->area) ? -1 : 1;
    case 'r':
        if (parse_roi(arg, opt->substrate.roi)) {
            cli_usage_error("analyze", "--substrate-roi: expected X,Y,W,H in pixels");
            return -1;
        }
        opt->substrate.has_roi = 1;
        return 1;
    case 't':
        return cli_parse_double("analyze", "--oxide-tolerance", arg, 0, 500,
                                &opt->oxide_tolerance_nm) ? -1 : 1;
    case 'N': opt->fit_oxide = 0; return 1;
    case 'e':
        if (lam_transfer_parse(arg, &opt->load.transfer)) {
            cli_usage_error("analyze", "--encoding: expected srgb, linear or a gamma value");
            return -1;
        }
        return 1;
    case 'm': {
        double mp;
        if (cli_parse_double("analyze", "--max-megapixels", arg, 0.001, 10000, &mp))
            return -1;
        opt->load.max_pixels = (size_t)(mp * 1e6);
        return 1;
    }
    case 'S':
        if (parse_shard(arg, &A->shard, &A->shards)) {
            cli_usage_error("analyze", "--shard: expected I/N with 1 <= I <= N");
            return -1;
        }
        return 1;
    default: return 0;
    }
}

/* The run-level options; 1 if c was one, 0 if not, -1 on error. */
static int run_option(analyze_args *A, int c, const char *arg)
{
    switch (c) {
    case 'O': A->out_dir = arg; return 1;
    case 'j': return cli_parse_long("analyze", "--threads", arg, 1, 256, &A->threads) ? -1 : 1;
    case 'q': cli_quiet = 1; return 1;
    case 'v': cli_verbose = 1; return 1;
    case 'L': A->list = arg; return 1;
    case 'P': A->positions = arg; return 1;
    case 'R': A->bo.resume = 1; return 1;
    case 'D': A->recursive = 1; return 1;
    case OPT_NO_POOL: A->bo.pool = 0; return 1;
    case OPT_POOL_FROM: A->bo.pool_from = arg; return 1;
    case OPT_POOL_ONLY: A->bo.pool_only = 1; return 1;
    default: return 0;
    }
}

static int parse_analyze_options(int argc, char **argv, analyze_args *A)
{
    static const struct option longopts[] = {
        CLI_SETUP_LONGOPTS,
        {"max-layers", required_argument, 0, 'K'},      {"min-area", required_argument, 0, 'a'},
        {"substrate-roi", required_argument, 0, 'r'},   {"no-oxide-fit", no_argument, 0, 'N'},
        {"oxide-tolerance", required_argument, 0, 't'}, {"encoding", required_argument, 0, 'e'},
        {"out", required_argument, 0, 'O'},             {"threads", required_argument, 0, 'j'},
        {"max-megapixels", required_argument, 0, 'm'},  {"quiet", no_argument, 0, 'q'},
        {"verbose", no_argument, 0, 'v'},               {"list", required_argument, 0, 'L'},
        {"positions", required_argument, 0, 'P'},       {"resume", no_argument, 0, 'R'},
        {"shard", required_argument, 0, 'S'},           {"recursive", no_argument, 0, 'D'},
        {"no-pool", no_argument, 0, OPT_NO_POOL},
        {"pool-from", required_argument, 0, OPT_POOL_FROM},
        {"pool-only", no_argument, 0, OPT_POOL_ONLY},
        CLI_STAGE_LONGOPTS,                             {0, 0, 0, 0}};
    int c, r;
    optind = 1;
    opterr = 0;
    while ((c = getopt_long(argc, argv, "", longopts, NULL)) != -1) {
        if ((r = analyze_option(A, c, optarg)) == 0 && (r = run_option(A, c, optarg)) == 0 &&
            (r = cli_stage_option(&A->stage, "analyze", c, optarg)) == 0 &&
            (r = cli_setup_option(&A->so, "analyze", c, optarg)) == 0)
            return cli_usage_error("analyze", "unknown or incomplete option '%s'",
                                   argv[optind - 1]);
        if (r < 0)
            return CLI_EUSAGE;
    }
    return CLI_OK;
}

/* The setup, positions and output folder; an exit code. */
static int prepare(analyze_args *A, lam_setup *s, lam_positions *pos)
{
    int rc;
    if ((rc = cli_setup_build("analyze", &A->so, s)))
        return rc;
    lam_analysis_options *opt = &A->bo.analysis;
    opt->max_layers = (size_t)A->K;
    if (A->area >= 0)
        opt->min_area_um2 = opt->min_area_px = A->area;
    if (A->positions && !(s->um_per_px > 0))
        return cli_usage_error("analyze", "--positions needs the pixel size: give --um-per-px "
                                          "or um_per_px in the setup");
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
    cli_setup_hash(&A->so, &A->bo.analysis, setup_hash, sizeof setup_hash);
    A->bo.setup = s;
    A->bo.out_dir = A->out_dir;
    A->bo.setup_hash = setup_hash;
    A->bo.threads = (size_t)A->threads;
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
    analyze_args A;
    memset(&A, 0, sizeof A);
    cli_setup_opts_init(&A.so);
    A.bo = lam_batch_options_default();
    A.stage = lam_stage_default();
    A.out_dir = "lamina-out";
    A.threads = (long)lam_cpu_count();
    A.K = 6;
    A.area = -1;
    int rc = parse_analyze_options(argc, argv, &A);
    if (rc)
        return rc;
    lam_inputs in;
    lam_error err;
    lam_error_clear(&err);
    if (lam_inputs_collect(&in, (const char *const *)argv + optind, (size_t)(argc - optind),
                           A.list, A.recursive, &err))
        return cli_report(&err, NULL);
    if (A.shards)
        lam_inputs_shard(&in, A.shard, A.shards);
    if (in.count == 0) {
        lam_inputs_free(&in);
        return A.shards ? CLI_OK : cli_usage_error("analyze", "no image given");
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
