/* cli/analyze.c - `lamina analyze IMAGE|FOLDER...`: regions, layer counts,
 * doping and oxide, with the report files; for several images a ranked
 * catalogue, a contact sheet, stage positions, resumable runs and shards. */
#include "cli.h"
#include "inputs.h"
#include "run_opts.h"
#include "setup_opts.h"
#include "lamina/analyze.h"
#include "lamina/catalog.h"
#include "lamina/clock.h"
#include "lamina/outfile.h"
#include "lamina/parallel.h"
#include "lamina/report.h"

#include <getopt.h>
#include <math.h>
#include <pthread.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>
#include <cjson/cJSON.h>

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
          "  --material NAME       flake material: graphene (default), hBN (a thickness per\n"
          "                        region), MoS2, WS2, WSe2 (layer counts)\n"
          "  --target-thickness A-B  rank hBN regions by closeness to A-B nm (e.g. 10-30)\n"
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
          "  --shard I/N           analyse only the I-th of N deterministic parts of the inputs\n"
          "  --out DIR             output folder (default lamina-out)\n"
          "  --threads N           worker threads (default: all cores)\n"
          "  --quiet, --verbose\n\n"
          "Layer counts are model estimates: confirm by Raman or AFM before fabrication.\n",
          out);
}

typedef struct job {
    const char *path;
    char stem[512];
    char hash[32];
    lam_analysis *a;
    cJSON *json;        /* the analysis as written (or as read back on --resume) */
    lam_error err;
    int failed, resumed;
} job;

typedef struct pool {
    job *jobs;
    size_t count, next, done;
    pthread_mutex_t lock;
    const lam_setup *setup;
    const lam_analysis_options *opt;
    const lam_positions *pos;  /* NULL without --positions */
    const lam_stage *stage;
    const char *out_dir;
    const char *setup_hash;
    int progress, resume;
    double t0;
    double target[2];          /* --target-thickness (NAN: none) */
} pool;


typedef struct annot_job {
    lam_analysis *a;
    char path[4096];
    lam_error err;
    lam_status st;
} annot_job;

static void *write_annotated_thread(void *arg)
{
    annot_job *aj = arg;
    aj->st = lam_report_write_annotated(aj->a, aj->path, &aj->err);
    return NULL;
}

/* The annotated image (the largest file) is encoded on a second thread
 * while the layer map, plot and JSON are written; the JSON goes last, so
 * its presence means the image's results are complete (--resume). */
static lam_status write_reports(job *j, const char *dir, lam_error *err)
{
    char p[4096];
    lam_status st;
    annot_job aj;
    aj.a = j->a;
    lam_error_clear(&aj.err);
    snprintf(aj.path, sizeof aj.path, "%s/%s.annotated.png", dir, j->stem);
    pthread_t t;
    int threaded = pthread_create(&t, NULL, write_annotated_thread, &aj) == 0;
    if (!threaded)
        write_annotated_thread(&aj);
    snprintf(p, sizeof p, "%s/%s.layers.png", dir, j->stem);
    st = lam_report_write_layers(j->a, p, err);
    if (threaded)
        pthread_join(t, NULL);
    if (st)
        return st;
    if (aj.st) {
        *err = aj.err;
        return aj.st;
    }
    snprintf(p, sizeof p, "%s/%s.contrast.svg", dir, j->stem);
    if ((st = lam_report_write_svg(j->a, p, err)))
        return st;
    if (!(j->json = lam_report_json(j->a)))
        return lam_error_set(err, LAM_ENOMEM, "cannot format the JSON report");
    snprintf(p, sizeof p, "%s/%s.json", dir, j->stem);
    return lam_report_save_json(j->json, p, err);
}

/* --resume: the existing JSON counts when both hashes match. */
static cJSON *existing_result(const pool *P, const job *j)
{
    char p[4096];
    snprintf(p, sizeof p, "%s/%s.json", P->out_dir, j->stem);
    cJSON *root = cli_read_json(p);
    if (!root)
        return NULL;
    const cJSON *img = cJSON_GetObjectItemCaseSensitive(root, "image");
    const cJSON *h = cJSON_GetObjectItemCaseSensitive(img, "content_hash");
    const cJSON *sh = cJSON_GetObjectItemCaseSensitive(root, "setup_hash");
    if (cJSON_IsString(h) && cJSON_IsString(sh) && !strcmp(h->valuestring, j->hash) &&
        !strcmp(sh->valuestring, P->setup_hash))
        return root;
    cJSON_Delete(root);
    return NULL;
}

static void progress(pool *P)
{
    if (!P->progress)
        return;
    double dt = lam_clock_seconds() - P->t0, rate = dt > 0 ? (double)P->done / dt : 0;
    double left = rate > 0 ? (double)(P->count - P->done) / rate : 0;
    fprintf(stderr, "\r%zu/%zu images, %.2f/s, %.0f s left   ", P->done, P->count, rate, left);
    if (P->done == P->count)
        fputc('\n', stderr);
    fflush(stderr);
}

static void *worker(void *arg)
{
    pool *P = arg;
    for (;;) {
        pthread_mutex_lock(&P->lock);
        size_t i = P->next++;
        pthread_mutex_unlock(&P->lock);
        if (i >= P->count)
            return NULL;
        job *j = &P->jobs[i];
        lam_error_clear(&j->err);
        if (cli_hash_file(j->path, j->hash, sizeof j->hash)) {
            j->failed = 1;
            lam_error_set(&j->err, LAM_EIO, "cannot read the file");
            lam_error_set_file(&j->err, j->path);
        } else if (P->resume && (j->json = existing_result(P, j))) {
            j->resumed = 1;
        } else if (lam_analyze(j->path, P->setup, P->opt, &j->a, &j->err)) {
            j->failed = 1;
        } else {
            snprintf(j->a->content_hash, sizeof j->a->content_hash, "%s", j->hash);
            snprintf(j->a->setup_hash, sizeof j->a->setup_hash, "%s", P->setup_hash);
            if (write_reports(j, P->out_dir, &j->err)) {
                j->failed = 1;
                lam_error_set_file(&j->err, j->path);
            }
        }
        pthread_mutex_lock(&P->lock);
        P->done++;
        if (!j->failed && !j->resumed && cli_verbose) {
            static const char *names[LAM_T_COUNT] = {"load", "display", "substrate", "contrast",
                                                     "model", "segment", "oxide", "regions"};
            fprintf(stderr, "lamina: %s: stage end times (s):", j->path);
            for (int k = 0; k < LAM_T_COUNT; k++)
                fprintf(stderr, " %s %.3f", names[k], j->a->seconds[k]);
            fputc('\n', stderr);
        }
        progress(P);
        pthread_mutex_unlock(&P->lock);
        /* keep only what the summary needs: the big buffers go now */
        if (j->a) {
            free(j->a->display);
            j->a->display = NULL;
        }
    }
}

/* hBN analyses: every region with a thickness (not small), marked when in
 * the target range. */
static void print_thickness(const pool *P)
{
    int any = 0;
    for (size_t i = 0; i < P->count; i++) {
        const job *j = &P->jobs[i];
        if (j->failed || j->resumed || !j->a->thickness)
            continue;
        for (size_t k = 0; k < j->a->count; k++) {
            const lam_thickness_result *t = &j->a->thickness[k];
            if (!t->evaluated || (j->a->results[k].flags & LAM_FLAG_SMALL))
                continue;
            if (!any++)
                printf("\nflakes by thickness (nm; 95 %% interval of the most probable order):\n"
                       "%-28s %4s %8s %17s %6s  %s\n", "image", "id", "estimate", "interval",
                       "p", "notes");
            int in = isfinite(P->target[0]) && t->estimate >= P->target[0] &&
                     t->estimate <= P->target[1] && !t->order_ambiguous;
            printf("%-28.28s %4u %8.1f %8.1f-%-8.1f %6.3f  %s%s\n", j->stem,
                   j->a->seg->regions[k].id, t->estimate, t->lo, t->hi, t->probability,
                   t->order_ambiguous ? "order-ambiguous " : "", in ? "in target" : "");
        }
    }
}

static void print_summary(const pool *P)
{
    printf("%-28s %5s %4s %4s %4s %5s %6s %5s\n", "image", "oxide", "1L", "2L", "3L", "4L+",
           "thick", "other");
    for (size_t i = 0; i < P->count; i++) {
        const job *j = &P->jobs[i];
        if (j->failed) {
            printf("%-28.28s failed\n", j->stem);
            continue;
        }
        if (j->resumed) {
            printf("%-28.28s (resumed: results kept)\n", j->stem);
            continue;
        }
        size_t by[5] = {0}, thick = 0, other = 0;
        for (size_t r = 0; r < j->a->count; r++) {
            const lam_region_result *res = &j->a->results[r];
            if (res->flags & LAM_FLAG_SMALL)
                continue;
            if (res->layers > 0)
                by[res->layers < 4 ? res->layers : 4]++;
            else if (res->thick && !(res->flags & LAM_FLAG_UNMODELLED))
                thick++;
            else
                other++;
        }
        printf("%-28.28s %5.1f %4zu %4zu %4zu %5zu %6zu %5zu\n", j->stem, j->a->oxide.estimate,
               by[1], by[2], by[3], by[4], thick, other);
    }
    print_thickness(P);
    int films = 0, counts = 0; /* hBN only: no layer counts to list */
    for (size_t i = 0; i < P->count; i++)
        if (!P->jobs[i].failed && !P->jobs[i].resumed)
            *(P->jobs[i].a->thickness ? &films : &counts) += 1;
    if (films && !counts) {
        printf("\nThicknesses are model estimates: confirm by AFM before committing a flake\n"
               "to fabrication.\n");
        return;
    }
    printf("\nmonolayer candidates (p >= 0.95, not small):\n");
    char where[48];
    snprintf(where, sizeof where, P->pos ? "stage x,y %s" : "centroid px",
             lam_stage_unit_name(P->stage, P->pos));
    printf("%-28s %4s %7s %10s %16s %18s\n", "image", "id", "p(1L)", "area", "usable w x h", where);
    for (size_t i = 0; i < P->count; i++) {
        const job *j = &P->jobs[i];
        if (j->failed || j->resumed)
            continue;
        double u = j->a->um_per_px;
        for (size_t r = 0; r < j->a->count; r++) {
            const lam_region_result *res = &j->a->results[r];
            const lam_region_stats *s = &j->a->seg->regions[r];
            if (res->layers != 1 || (res->flags & (LAM_FLAG_SMALL | LAM_FLAG_AMBIGUOUS)))
                continue;
            char area[32], rect[48];
            if (u > 0) {
                snprintf(area, sizeof area, "%.1f um2", (double)s->area * u * u);
                snprintf(rect, sizeof rect, "%.1f x %.1f um", res->usable_px[0] * u,
                         res->usable_px[1] * u);
            } else {
                snprintf(area, sizeof area, "%zu px", s->area);
                snprintf(rect, sizeof rect, "%zu x %zu px", res->usable_px[0], res->usable_px[1]);
            }
            double xy[2] = {s->sx / (double)s->area, s->sy / (double)s->area};
            const lam_position *ps = P->pos ? lam_positions_find(P->pos, j->path) : NULL;
            if (ps && u > 0) { /* the stage reading that centres the flake */
                double unit = lam_stage_unit_um(P->stage, P->pos);
                lam_stage_reading(P->stage, ps, (double)j->a->width, (double)j->a->height, u,
                                  xy[0], xy[1], xy);
                printf("%-28.28s %4u %7.3f %10s %16s %9.*f,%-9.*f\n", j->stem, s->id, res->p[1],
                       area, rect, unit > 1 ? 4 : 1, xy[0] / unit, unit > 1 ? 4 : 1, xy[1] / unit);
            } else {
                printf("%-28.28s %4u %7.3f %10s %16s %9.0f,%-9.0f\n", j->stem, s->id, res->p[1],
                       area, rect, xy[0], xy[1]);
            }
        }
    }
    printf("\nLayer counts are model estimates: confirm by Raman spectroscopy or AFM\n"
           "before committing a flake to fabrication.\n");
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
static int catalog_outputs(const pool *P)
{
    lam_catalog cat;
    lam_catalog_init(&cat);
    lam_catalog_set_stage(&cat, P->pos, P->stage);
    lam_catalog_set_target(&cat, P->target[0], P->target[1]);
    snprintf(cat.results, sizeof cat.results, "%s", P->out_dir);
    lam_error err;
    lam_error_clear(&err);
    int rc = CLI_OK;
    for (size_t i = 0; i < P->count && rc == CLI_OK; i++) {
        const job *j = &P->jobs[i];
        if (j->failed || !j->json)
            continue;
        if (lam_catalog_add(&cat, j->json, j->path, lam_positions_find(P->pos, j->path), &err))
            rc = cli_report(&err, j->path);
    }
    if (rc == CLI_OK)
        rc = cli_run_outputs(&cat, P->out_dir, 0);
    lam_catalog_clear(&cat);
    return rc;
}

static int run_analyze(int argc, char **argv)
{
    static const struct option longopts[] = {
        CLI_SETUP_LONGOPTS,
        {"max-layers", required_argument, 0, 'K'},
        {"min-area", required_argument, 0, 'a'},  {"substrate-roi", required_argument, 0, 'r'},
        {"oxide-tolerance", required_argument, 0, 't'}, {"no-oxide-fit", no_argument, 0, 'N'},
        {"encoding", required_argument, 0, 'e'},
        {"out", required_argument, 0, 'O'},       {"threads", required_argument, 0, 'j'},
        {"max-megapixels", required_argument, 0, 'm'}, {"quiet", no_argument, 0, 'q'},
        {"verbose", no_argument, 0, 'v'},         {"list", required_argument, 0, 'L'},      {"positions", required_argument, 0, 'P'},
        {"resume", no_argument, 0, 'R'},          {"shard", required_argument, 0, 'S'},
        {"recursive", no_argument, 0, 'D'},       {"target-thickness", required_argument, 0, 'T'},
        CLI_STAGE_LONGOPTS,                       {0, 0, 0, 0}};
    cli_setup_opts so;
    cli_setup_opts_init(&so);
    lam_analysis_options opt = lam_analysis_options_default();
    const char *out_dir = "lamina-out", *list = NULL, *positions = NULL;
    long threads = (long)lam_cpu_count(), K = 6;
    double area = -1;
    size_t shard = 0, shards = 0;
    int c, r, resume = 0, recursive = 0;
    lam_stage stage = lam_stage_default();
    double target[2] = {NAN, NAN};
    optind = 1;
    opterr = 0;
    while ((c = getopt_long(argc, argv, "", longopts, NULL)) != -1) {
        switch (c) {
        case 'K': if (cli_parse_long("analyze", "--max-layers", optarg, 1, 20, &K)) return CLI_EUSAGE; break;
        case 'a': if (cli_parse_double("analyze", "--min-area", optarg, 0, 1e9, &area)) return CLI_EUSAGE; break;
        case 'r':
            if (parse_roi(optarg, opt.substrate.roi))
                return cli_usage_error("analyze", "--substrate-roi: expected X,Y,W,H in pixels");
            opt.substrate.has_roi = 1;
            break;
        case 't': if (cli_parse_double("analyze", "--oxide-tolerance", optarg, 0, 500, &opt.oxide_tolerance_nm)) return CLI_EUSAGE; break;
        case 'N': opt.fit_oxide = 0; break;
        case 'e':
            if (lam_transfer_parse(optarg, &opt.load.transfer))
                return cli_usage_error("analyze", "--encoding: expected srgb, linear or a gamma value");
            break;
        case 'O': out_dir = optarg; break;
        case 'j': if (cli_parse_long("analyze", "--threads", optarg, 1, 256, &threads)) return CLI_EUSAGE; break;
        case 'm': {
            double mp;
            if (cli_parse_double("analyze", "--max-megapixels", optarg, 0.001, 10000, &mp)) return CLI_EUSAGE;
            opt.load.max_pixels = (size_t)(mp * 1e6);
            break;
        }
        case 'q': cli_quiet = 1; break;
        case 'v': cli_verbose = 1; break;
        case 'L': list = optarg; break;
        case 'P': positions = optarg; break;
        case 'R': resume = 1; break;
        case 'D': recursive = 1; break;
        case 'T': if ((r = cli_parse_target("analyze", optarg, target))) return r; break;
        case 'S':
            if (parse_shard(optarg, &shard, &shards))
                return cli_usage_error("analyze", "--shard: expected I/N with 1 <= I <= N");
            break;
        default:
            if ((r = cli_stage_option(&stage, "analyze", c, optarg)) > 0)
                break;
            if (r == 0 && (r = cli_setup_option(&so, "analyze", c, optarg)) > 0)
                break;
            if (r < 0)
                return CLI_EUSAGE;
            return cli_usage_error("analyze", "unknown or incomplete option '%s'", argv[optind - 1]);
        }
    }
    cli_inputs in;
    int rc = cli_inputs_collect(&in, argc - optind, argv + optind, list, recursive);
    if (rc)
        return rc;
    if (shards)
        cli_inputs_shard(&in, shard, shards);
    if (in.count == 0) {
        cli_inputs_free(&in);
        return shards ? CLI_OK : cli_usage_error("analyze", "no image given");
    }
    opt.max_layers = (size_t)K;
    lam_setup s;
    if ((rc = cli_setup_build("analyze", &so, &s))) {
        cli_inputs_free(&in);
        return rc;
    }
    if (area >= 0) {
        opt.min_area_um2 = area;
        opt.min_area_px = area;
    }
    lam_positions pos = {0};
    lam_error err;
    lam_error_clear(&err);
    if (positions && !(s.um_per_px > 0)) {
        lam_setup_clear(&s);
        cli_inputs_free(&in);
        return cli_usage_error("analyze", "--positions needs the pixel size: give --um-per-px or "
                                          "um_per_px in the setup");
    }
    if (positions && lam_positions_load(positions, &pos, &err)) {
        rc = cli_report(&err, positions);
        lam_setup_clear(&s);
        cli_inputs_free(&in);
        return rc;
    }
    if (cli_make_dir(out_dir)) {
        lam_setup_clear(&s);
        cli_inputs_free(&in);
        lam_positions_clear(&pos);
        return CLI_EFILE;
    }
    char setup_hash[32];
    cli_setup_hash(so.setup_file, &opt, &so, setup_hash, sizeof setup_hash);
    pool P;
    memset(&P, 0, sizeof P);
    P.count = in.count;
    P.jobs = calloc(P.count, sizeof *P.jobs);
    if (!P.jobs) {
        lam_setup_clear(&s);
        cli_inputs_free(&in);
        lam_positions_clear(&pos);
        fprintf(stderr, "lamina: out of memory\n");
        return CLI_EFILE;
    }
    for (size_t i = 0; i < P.count; i++) {
        P.jobs[i].path = in.paths[i];
        cli_stem_of(P.jobs[i].path, P.jobs[i].stem, sizeof P.jobs[i].stem);
    }
    /* threads go across images first, the rest inside each image */
    size_t outer = (size_t)threads < P.count ? (size_t)threads : P.count;
    opt.threads = (size_t)threads / (outer ? outer : 1);
    if (opt.threads < 1)
        opt.threads = 1;
    lam_parallel_set_default(opt.threads); /* loading and PNG compression too */
    P.setup = &s;
    P.opt = &opt;
    P.pos = positions ? &pos : NULL;
    P.stage = &stage;
    P.out_dir = out_dir;
    P.setup_hash = setup_hash;
    P.target[0] = target[0], P.target[1] = target[1];
    P.resume = resume;
    P.progress = !cli_quiet && P.count > 1 && isatty(STDERR_FILENO);
    P.t0 = lam_clock_seconds();
    pthread_mutex_init(&P.lock, NULL);
    pthread_t *tid = calloc(outer, sizeof *tid);
    size_t started = 0;
    for (size_t t = 0; tid && t < outer; t++)
        if (!pthread_create(&tid[t], NULL, worker, &P))
            started++;
    if (!started)
        worker(&P);
    for (size_t t = 0; t < started; t++)
        pthread_join(tid[t], NULL);
    free(tid);
    size_t failed = 0;
    for (size_t i = 0; i < P.count; i++)
        if (P.jobs[i].failed) {
            cli_report(&P.jobs[i].err, P.jobs[i].path);
            failed++;
        }
    if (!cli_quiet)
        print_summary(&P);
    if ((P.count > 1 || positions || isfinite(target[0])) && (r = catalog_outputs(&P)))
        rc = r;
    for (size_t i = 0; i < P.count; i++) {
        lam_analysis_free(P.jobs[i].a);
        cJSON_Delete(P.jobs[i].json);
    }
    free(P.jobs);
    pthread_mutex_destroy(&P.lock);
    lam_setup_clear(&s);
    lam_positions_clear(&pos);
    cli_inputs_free(&in);
    if (failed)
        rc = CLI_EFILE;
    return rc;
}

const cli_command cli_analyze = {"analyze", "regions, layer counts, doping and oxide of micrographs",
                                 run_analyze, analyze_help};
