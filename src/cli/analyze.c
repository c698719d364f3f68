/* cli/analyze.c - `lamina analyze IMAGE...`: regions, layer counts,
 * doping and oxide, with the report files; a catalogue for several images. */
#include "cli.h"
#include "setup_opts.h"
#include "lamina/analyze.h"
#include "lamina/outfile.h"
#include "lamina/report.h"

#include <getopt.h>
#include <math.h>
#include <pthread.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include <cjson/cJSON.h>

static void analyze_help(FILE *out)
{
    fputs("Usage: lamina analyze [OPTIONS] IMAGE...\n"
          "Find the flakes in each micrograph, count their layers with a probability,\n"
          "estimate the Fermi level where the colours constrain it and fit the oxide\n"
          "thickness. Writes STEM.json, STEM.layers.png, STEM.annotated.png and\n"
          "STEM.contrast.svg per image (and catalog.json/.csv for several images).\n\n"
          "  --setup FILE          setup profile (lamina-setup/1)\n"
          "  --oxide NM            nominal SiO2 thickness\n"
          "  --um-per-px X         pixel size at the sample\n"
          "  --max-layers K        layer counts modelled (default 6; thicker = \"thick\")\n"
          "  --min-area A          regions below A um^2 (or px without a pixel size) are 'small'\n"
          "  --substrate-roi X,Y,W,H  where the bare substrate is, if not found automatically\n"
          "  --oxide-tolerance NM  pass/fail of the oxide check (default 10)\n"
          "  --no-oxide-fit        keep the nominal oxide\n"
          "  --fermi EV            Fermi level of the ladder (default from the setup)\n"
          "  --encoding E          srgb, linear or a gamma value (default: from the file)\n"
          "  --out DIR             output folder (default lamina-out)\n"
          "  --threads N           images analysed in parallel (default: all cores)\n"
          "  --quiet, --verbose\n\n"
          "Layer counts are model estimates: confirm by Raman or AFM before fabrication.\n",
          out);
}

typedef struct job {
    const char *path;
    char stem[512];
    lam_analysis *a;
    lam_error err;
    int failed;
} job;

typedef struct pool {
    job *jobs;
    size_t count, next;
    pthread_mutex_t lock;
    const lam_setup *setup;
    const lam_analysis_options *opt;
    const char *out_dir;
} pool;

static void stem_of(const char *path, char *stem, size_t n)
{
    const char *base = strrchr(path, '/');
    base = base ? base + 1 : path;
    snprintf(stem, n, "%s", base);
    char *dot = strrchr(stem, '.');
    if (dot && dot != stem)
        *dot = '\0';
}

typedef struct annot_job {
    const lam_analysis *a;
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
 * while the layer map, plot and JSON are written. */
static lam_status write_reports(const job *j, const char *dir, lam_error *err)
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
    snprintf(p, sizeof p, "%s/%s.json", dir, j->stem);
    return lam_report_write_json(j->a, p, err);
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
        if (lam_analyze(j->path, P->setup, P->opt, &j->a, &j->err) ||
            write_reports(j, P->out_dir, &j->err)) {
            j->failed = 1;
            lam_error_set_file(&j->err, j->path);
        }
        if (!j->failed && cli_verbose) {
            static const char *names[LAM_T_COUNT] = {"load", "display", "substrate", "contrast",
                                                     "model", "segment", "oxide", "regions"};
            pthread_mutex_lock(&P->lock);
            fprintf(stderr, "lamina: %s: stage end times (s):", j->path);
            for (int k = 0; k < LAM_T_COUNT; k++)
                fprintf(stderr, " %s %.3f", names[k], j->a->seconds[k]);
            fputc('\n', stderr);
            pthread_mutex_unlock(&P->lock);
        }
        if (!j->failed && !cli_quiet) {
            pthread_mutex_lock(&P->lock);
            fprintf(stderr, "lamina: %s: %zu region(s), oxide %.1f nm%s\n", j->path, j->a->count,
                    j->a->oxide.estimate, j->a->oxide.fitted ? " (fitted)" : " (nominal)");
            pthread_mutex_unlock(&P->lock);
        }
        /* keep only what the catalogue needs: free the big buffers now */
        if (j->a) {
            free(j->a->display);
            j->a->display = NULL;
        }
    }
}

/* Candidates first: monolayers by usable area, then bilayers, ... */
typedef struct cat_row {
    size_t job, region;
    int rank_layers;
    double usable;
} cat_row;

static int cmp_rows(const void *x, const void *y)
{
    const cat_row *a = x, *b = y;
    if (a->rank_layers != b->rank_layers)
        return a->rank_layers - b->rank_layers;
    if (a->usable != b->usable)
        return a->usable < b->usable ? 1 : -1;
    if (a->job != b->job)
        return a->job < b->job ? -1 : 1;
    return a->region < b->region ? -1 : (a->region > b->region);
}

static int write_catalog(const pool *P, lam_error *err)
{
    size_t n = 0;
    for (size_t i = 0; i < P->count; i++)
        if (!P->jobs[i].failed)
            n += P->jobs[i].a->count;
    cat_row *rows = malloc((n ? n : 1) * sizeof *rows);
    if (!rows) {
        lam_error_set(err, LAM_ENOMEM, "cannot allocate the catalogue");
        return -1;
    }
    size_t k = 0;
    for (size_t i = 0; i < P->count; i++) {
        const job *j = &P->jobs[i];
        if (j->failed)
            continue;
        for (size_t r = 0; r < j->a->count; r++) {
            const lam_region_result *res = &j->a->results[r];
            rows[k].job = i;
            rows[k].region = r;
            rows[k].rank_layers = res->layers > 0 ? res->layers : (res->thick ? 100 : 101);
            rows[k].usable = (double)res->usable_px[0] * (double)res->usable_px[1];
            k++;
        }
    }
    qsort(rows, n, sizeof *rows, cmp_rows);
    char path[4096];
    snprintf(path, sizeof path, "%s/catalog.csv", P->out_dir);
    lam_outfile of;
    if (lam_outfile_open(&of, path, err)) {
        free(rows);
        return -1;
    }
    fprintf(of.fp, "image,region,label,layers,probability,area_px,area_um2,usable_w_um,usable_h_um,"
                   "centroid_x,centroid_y,flags\n");
    cJSON *root = cJSON_CreateObject();
    cJSON_AddStringToObject(root, "schema", "lamina-catalog/1");
    cJSON *arr = cJSON_AddArrayToObject(root, "regions");
    for (size_t i = 0; i < n; i++) {
        const job *j = &P->jobs[rows[i].job];
        const lam_region_result *r = &j->a->results[rows[i].region];
        const lam_region_stats *s = &j->a->seg->regions[rows[i].region];
        double u = j->a->um_per_px, prob = r->layers > 0 ? r->p[r->layers]
                                                          : r->p[j->a->max_layers + 1];
        char flags[128] = "";
        static const char *fn[] = {"ambiguous", "unmodelled", "saturated", "touches_border", "small"};
        for (int f = 0; f < 5; f++)
            if (r->flags & (1u << f)) {
                if (flags[0])
                    strcat(flags, ";");
                strcat(flags, fn[f]);
            }
        double cx = s->sx / (double)s->area, cy = s->sy / (double)s->area;
        fprintf(of.fp, "%s,%u,%s,%d,%.4f,%zu,", j->path, s->id, r->label, r->layers, prob, s->area);
        if (u > 0)
            fprintf(of.fp, "%.3f,%.3f,%.3f,", (double)s->area * u * u, r->usable_px[0] * u,
                    r->usable_px[1] * u);
        else
            fprintf(of.fp, ",,,");
        fprintf(of.fp, "%.1f,%.1f,%s\n", cx, cy, flags);
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "image", j->path);
        cJSON_AddNumberToObject(o, "region", s->id);
        cJSON_AddStringToObject(o, "label", r->label);
        cJSON_AddItemToObject(o, "layers", r->layers > 0 ? cJSON_CreateNumber(r->layers) : cJSON_CreateNull());
        cJSON_AddNumberToObject(o, "probability", round(prob * 1e4) / 1e4);
        cJSON_AddNumberToObject(o, "area_px", (double)s->area);
        double upx[2] = {(double)r->usable_px[0], (double)r->usable_px[1]};
        cJSON_AddItemToObject(o, "usable_rect_px", cJSON_CreateDoubleArray(upx, 2));
        double c2[2] = {cx, cy};
        cJSON_AddItemToObject(o, "centroid", cJSON_CreateDoubleArray(c2, 2));
        cJSON_AddStringToObject(o, "flags", flags);
        cJSON_AddItemToArray(arr, o);
    }
    free(rows);
    if (lam_outfile_commit(&of, err)) {
        cJSON_Delete(root);
        return -1;
    }
    char *text = cJSON_Print(root);
    cJSON_Delete(root);
    snprintf(path, sizeof path, "%s/catalog.json", P->out_dir);
    int rc = !text || lam_outfile_write_buffer(path, text, strlen(text), err) ? -1 : 0;
    free(text);
    return rc;
}

/* The short table on stdout: regions by layer count per image, then the
 * monolayer candidates with area, usable rectangle and position. */
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
    printf("\nmonolayer candidates (p >= 0.95, not small):\n");
    printf("%-28s %4s %7s %10s %16s %14s\n", "image", "id", "p(1L)", "area", "usable w x h",
           "centroid px");
    for (size_t i = 0; i < P->count; i++) {
        const job *j = &P->jobs[i];
        if (j->failed)
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
            printf("%-28.28s %4u %7.3f %10s %16s %6.0f,%-6.0f\n", j->stem, s->id, res->p[1], area,
                   rect, s->sx / (double)s->area, s->sy / (double)s->area);
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

static int run_analyze(int argc, char **argv)
{
    static const struct option longopts[] = {
        {"setup", required_argument, 0, 's'},    {"oxide", required_argument, 0, 'o'},
        {"um-per-px", required_argument, 0, 'u'}, {"max-layers", required_argument, 0, 'K'},
        {"min-area", required_argument, 0, 'a'},  {"substrate-roi", required_argument, 0, 'r'},
        {"oxide-tolerance", required_argument, 0, 't'}, {"no-oxide-fit", no_argument, 0, 'N'},
        {"fermi", required_argument, 0, 'f'},     {"encoding", required_argument, 0, 'e'},
        {"out", required_argument, 0, 'O'},       {"threads", required_argument, 0, 'j'},
        {"max-megapixels", required_argument, 0, 'm'}, {"quiet", no_argument, 0, 'q'},
        {"verbose", no_argument, 0, 'v'},         {"na", required_argument, 0, 'n'},
        {0, 0, 0, 0}};
    cli_setup_opts so;
    cli_setup_opts_init(&so);
    lam_analysis_options opt = lam_analysis_options_default();
    const char *out_dir = "lamina-out";
    long threads = sysconf(_SC_NPROCESSORS_ONLN), K = 6;
    double area = -1;
    int c;
    optind = 1;
    opterr = 0;
    while ((c = getopt_long(argc, argv, "", longopts, NULL)) != -1) {
        switch (c) {
        case 's': so.setup_file = optarg; break;
        case 'o': if (cli_parse_double("analyze", "--oxide", optarg, 0, 5000, &so.oxide_nm)) return CLI_EUSAGE; break;
        case 'u': if (cli_parse_double("analyze", "--um-per-px", optarg, 1e-4, 1000, &so.um_per_px)) return CLI_EUSAGE; break;
        case 'n': if (cli_parse_double("analyze", "--na", optarg, 0, 1.6, &so.na)) return CLI_EUSAGE; break;
        case 'K': if (cli_parse_long("analyze", "--max-layers", optarg, 1, 20, &K)) return CLI_EUSAGE; break;
        case 'a': if (cli_parse_double("analyze", "--min-area", optarg, 0, 1e9, &area)) return CLI_EUSAGE; break;
        case 'r':
            if (parse_roi(optarg, opt.substrate.roi))
                return cli_usage_error("analyze", "--substrate-roi: expected X,Y,W,H in pixels");
            opt.substrate.has_roi = 1;
            break;
        case 't': if (cli_parse_double("analyze", "--oxide-tolerance", optarg, 0, 500, &opt.oxide_tolerance_nm)) return CLI_EUSAGE; break;
        case 'N': opt.fit_oxide = 0; break;
        case 'f': if (cli_parse_double("analyze", "--fermi", optarg, -2, 2, &so.fermi_ev)) return CLI_EUSAGE; break;
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
        default: return cli_usage_error("analyze", "unknown or incomplete option '%s'", argv[optind - 1]);
        }
    }
    if (optind >= argc)
        return cli_usage_error("analyze", "no image given");
    opt.max_layers = (size_t)K;
    lam_setup s;
    int rc = cli_setup_build("analyze", &so, &s);
    if (rc)
        return rc;
    if (area >= 0) {
        opt.min_area_um2 = area;
        opt.min_area_px = area;
    }
    if (cli_make_dir(out_dir)) {
        lam_setup_clear(&s);
        return CLI_EFILE;
    }
    pool P;
    memset(&P, 0, sizeof P);
    P.count = (size_t)(argc - optind);
    P.jobs = calloc(P.count, sizeof *P.jobs);
    if (!P.jobs) {
        lam_setup_clear(&s);
        fprintf(stderr, "lamina: out of memory\n");
        return CLI_EFILE;
    }
    for (size_t i = 0; i < P.count; i++) {
        P.jobs[i].path = argv[optind + (int)i];
        stem_of(P.jobs[i].path, P.jobs[i].stem, sizeof P.jobs[i].stem);
    }
    /* threads go across images first, the rest inside each image */
    size_t outer = (size_t)threads < P.count ? (size_t)threads : P.count;
    opt.threads = (size_t)threads / (outer ? outer : 1);
    if (opt.threads < 1)
        opt.threads = 1;
    P.setup = &s;
    P.opt = &opt;
    P.out_dir = out_dir;
    pthread_mutex_init(&P.lock, NULL);
    size_t nt = (size_t)threads < P.count ? (size_t)threads : P.count;
    pthread_t *tid = calloc(nt, sizeof *tid);
    size_t started = 0;
    for (size_t t = 0; tid && t < nt; t++)
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
    if (P.count > 1) {
        lam_error err;
        lam_error_clear(&err);
        if (write_catalog(&P, &err))
            rc = cli_report(&err, out_dir);
    }
    for (size_t i = 0; i < P.count; i++)
        lam_analysis_free(P.jobs[i].a);
    free(P.jobs);
    pthread_mutex_destroy(&P.lock);
    lam_setup_clear(&s);
    if (failed)
        rc = CLI_EFILE;
    return rc;
}

const cli_command cli_analyze = {"analyze", "regions, layer counts, doping and oxide of micrographs",
                                 run_analyze, analyze_help};
