/* cli/watch.c - `lamina watch DIR`: live analysis at the microscope. Each
 * image the camera finishes writing into DIR (inotify: closed after
 * writing, or renamed into DIR) is analysed once, one line per image goes
 * to stdout, and the catalogue and run report are rewritten after every
 * image. The response, NA and camera are pooled from image to image
 * (lamina/pool.h): each new image is added and the pool refitted, and the
 * next image starts from the result. Ctrl-C (SIGINT, SIGTERM) lets the
 * current image finish and stops; every output is atomic, so the folder is
 * consistent at any moment. */
#include "cli.h"
#include "inputs.h"
#include "run_opts.h"
#include "setup_opts.h"
#include "lamina/analyze.h"
#include "lamina/batch.h"
#include "lamina/outfile.h"
#include "lamina/parallel.h"
#include "lamina/pool.h"

#include <dirent.h>
#include <errno.h>
#include <getopt.h>
#include <math.h>
#include <poll.h>
#include <signal.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <time.h>
#include <unistd.h>
#include <sys/inotify.h>
#include <cjson/cJSON.h>

/* A prior that moved by more than this many of its own sigmas is news. */
#define PRIOR_MOVE_SIGMAS 1.0

typedef struct watch_session {
    const lam_setup *setup;
    lam_analysis_options opt;
    const char *dir, *out_dir;
    char setup_hash[LAM_BATCH_HASH_LEN];
    lam_pool *pool;             /* the images of this session, for the pooled fit */
    lam_shared_prior prior;     /* carried from image to image (set = 0: none yet) */
    int pool_off;               /* --no-pool */
    const lam_positions *pos;   /* NULL without --positions */
    lam_positions pos_store;
    const char *pos_path;
    lam_stage stage;
    char **paths;               /* images of this session, in the order seen */
    cJSON **results;
    size_t n, cap;
    size_t analysed, max_images;
    double idle_exit_s;
} watch_session;

static volatile sig_atomic_t stop_requested;

static void on_stop(int sig)
{
    if (stop_requested) { /* a second Ctrl-C: leave now, without temporaries */
        lam_outfile_cleanup_all();
        signal(sig, SIG_DFL);
        raise(sig);
    }
    stop_requested = 1;
    static const char msg[] =
        "\nlamina: stopping after the current image (Ctrl-C again to quit now)\n";
    ssize_t w = write(STDERR_FILENO, msg, sizeof msg - 1);
    (void)w;
}

static void watch_help(FILE *out)
{
    fputs("Usage: lamina watch [OPTIONS] DIR\n"
          "Analyse each image the camera writes into DIR as soon as it is complete (closed\n"
          "after writing, or moved into DIR), print one line per image, and keep\n"
          "catalog.json, catalog.csv, goto.csv and report.html in --out up to date.\n"
          "Images already in DIR are analysed first (skipped when their results exist for\n"
          "the same content and setup). Ctrl-C finishes the current image and stops.\n\n"
          "  --setup FILE, --oxide NM, --stack FILE, --material NAME, --um-per-px X,\n"
          "  --na X, --fermi EV    the setup, as for analyze\n"
          "  --max-layers K, --min-area A, --no-oxide-fit, --oxide-tolerance NM\n"
          "  --positions FILE.csv  stage readings of the tiles (re-read for every image,\n"
          "                        so the stage software may append to it)\n"
          CLI_STAGE_HELP
          "  --out DIR             outputs (default DIR/lamina-out)\n"
          "  --threads N           worker threads per image (default: all cores)\n"
          "  --max-images N        stop after N images analysed\n"
          "  --idle-exit SEC       stop when no image arrived for SEC seconds\n"
          "  --no-pool             analyse each image on its own (default: the response, NA\n"
          "                        and camera are pooled from image to image, pool.json)\n"
          "  --quiet\n",
          out);
}

static int is_image_name(const char *name)
{
    static const char *const ext[] = {".png", ".jpg", ".jpeg", ".tif", ".tiff"};
    static const char *const ours[] = {".annotated.png", ".layers.png", ".truth.png",
                                       "contact-sheet.png"};
    size_t n = strlen(name);
    if (!n || name[0] == '.')
        return 0; /* hidden: editors' and cameras' temporaries */
    for (size_t k = 0; k < sizeof ours / sizeof ours[0]; k++) {
        size_t m = strlen(ours[k]);
        if (n >= m && !strcmp(name + n - m, ours[k]))
            return 0;
    }
    for (size_t k = 0; k < sizeof ext / sizeof ext[0]; k++) {
        size_t m = strlen(ext[k]);
        if (n > m && !strcasecmp(name + n - m, ext[k]))
            return 1;
    }
    return 0;
}

/* Add an analysed image to the pool and refit: the next image starts from
 * the result. Says so when the pooled values moved much; the prior is kept
 * in pool.json, which a restarted session starts from. */
static void carry_prior(watch_session *w, const lam_analysis *a)
{
    lam_error err;
    lam_error_clear(&err);
    lam_shared_prior next;
    if (lam_pool_add(w->pool, a, &err) || lam_pool_fit(w->pool, &next, &err)) {
        cli_report(&err, a->file); /* keep watching with the prior as it was */
        return;
    }
    if (!next.set)
        return;
    int k;
    double moved = lam_batch_prior_shift(&w->prior, &next, &k);
    if (!cli_quiet && (!w->prior.set || moved > PRIOR_MOVE_SIGMAS)) {
        char name[48];
        if (w->prior.set)
            fprintf(stderr, "lamina: pooled response, NA and camera moved (%s by %.1f sigma), "
                            "from %zu images\n", lam_batch_nuisance_name(k, name, sizeof name),
                    moved, next.images);
        else
            fprintf(stderr, "lamina: response, NA and camera pooled from %zu image%s\n",
                    next.images, next.images == 1 ? "" : "s");
    }
    w->prior = next;
    char path[4096];
    snprintf(path, sizeof path, "%s/pool.json", w->out_dir);
    if (lam_batch_pool_write(path, &w->prior, w->setup_hash, "watch", &err))
        cli_report(&err, path);
}

/* The per-image step: analyse with the carried prior, write the four result
 * files (the JSON last), then pool. */
static lam_status watch_analyse_image(watch_session *w, const char *path, const char *hash,
                                      cJSON **result, lam_error *err)
{
    lam_analysis *a = NULL;
    w->opt.shared_prior = w->prior.set ? &w->prior : NULL;
    lam_status st = lam_batch_analyse_one(path, w->setup, &w->opt, w->out_dir, hash,
                                          w->setup_hash, &a, result, err);
    if (!st && w->pool)
        carry_prior(w, a);
    lam_analysis_free(a);
    return st;
}

/* Keep the result of 'path' (replacing an older one of the same image). */
static int remember(watch_session *w, const char *path, cJSON *result)
{
    for (size_t k = 0; k < w->n; k++)
        if (!strcmp(w->paths[k], path)) {
            cJSON_Delete(w->results[k]);
            w->results[k] = result;
            return 0;
        }
    if (w->n == w->cap) {
        size_t nc = w->cap ? 2 * w->cap : 64;
        char **np = realloc(w->paths, nc * sizeof *np);
        if (np)
            w->paths = np;
        cJSON **nr = np ? realloc(w->results, nc * sizeof *nr) : NULL;
        if (!nr)
            return -1;
        w->results = nr;
        w->cap = nc;
    }
    if (!(w->paths[w->n] = strdup(path)))
        return -1;
    w->results[w->n++] = result;
    return 0;
}

/* Rebuild the catalogue from every result of the session and rewrite the
 * catalogue files and the report (which reloads itself every 10 s). */
static int refresh_outputs(watch_session *w)
{
    lam_catalog cat;
    lam_catalog_init(&cat);
    lam_catalog_set_stage(&cat, w->pos, &w->stage);
    snprintf(cat.results, sizeof cat.results, "%s", w->out_dir);
    lam_error err;
    lam_error_clear(&err);
    int rc = CLI_OK;
    for (size_t k = 0; k < w->n && rc == CLI_OK; k++)
        if (lam_catalog_add(&cat, w->results[k], w->paths[k],
                            lam_positions_find(w->pos, w->paths[k]), &err))
            rc = cli_report(&err, w->paths[k]);
    int quiet = cli_quiet;
    cli_quiet = 1; /* the image's line already said what is wrong with it */
    if (rc == CLI_OK)
        rc = cli_run_outputs(&cat, w->out_dir, 10);
    cli_quiet = quiet;
    lam_catalog_clear(&cat);
    return rc;
}

/* The line for one image: time, name, oxide, counts, the best candidate. */
static void print_line(const watch_session *w, const char *path, const cJSON *r, int resumed)
{
    char when[16];
    time_t now = time(NULL);
    strftime(when, sizeof when, "%H:%M:%S", localtime(&now));
    const cJSON *ox = cJSON_GetObjectItemCaseSensitive(
        cJSON_GetObjectItemCaseSensitive(r, "substrate"), "oxide_nm");
    const cJSON *est = cJSON_GetObjectItemCaseSensitive(ox, "estimate");
    const cJSON *regs = cJSON_GetObjectItemCaseSensitive(r, "regions"), *g;
    size_t by[5] = {0};
    const cJSON *best = NULL;
    double best_area = 0;
    cJSON_ArrayForEach(g, regs) {
        const cJSON *L = cJSON_GetObjectItemCaseSensitive(g, "layers"), *f;
        int small = 0;
        cJSON_ArrayForEach(f, cJSON_GetObjectItemCaseSensitive(g, "flags"))
            small |= cJSON_IsString(f) && !strcmp(f->valuestring, "small");
        if (!cJSON_IsNumber(L) || small)
            continue;
        by[L->valueint < 4 ? L->valueint : 4]++;
        double area = cJSON_GetNumberValue(cJSON_GetObjectItemCaseSensitive(g, "area_px"));
        if (L->valueint == 1 && (!best || area > best_area))
            best = g, best_area = area;
    }
    const char *base = strrchr(path, '/');
    printf("%s  %-28s SiO2 %5.1f nm  1L %zu  2L %zu  3L %zu  4L+ %zu%s", when,
           base ? base + 1 : path, cJSON_IsNumber(est) ? est->valuedouble : NAN, by[1], by[2],
           by[3], by[4], resumed ? "  (results kept)" : "");
    if (best) {
        const cJSON *a = cJSON_GetObjectItemCaseSensitive(best, "area_um2");
        printf("  largest 1L: #%d", cJSON_GetObjectItemCaseSensitive(best, "id")->valueint);
        if (cJSON_IsNumber(a))
            printf(" %.0f um2", a->valuedouble);
    }
    (void)w;
    putchar('\n');
    fflush(stdout);
}

/* Analyse one image (or take its existing results) and refresh. */
static int process(watch_session *w, const char *name)
{
    char path[4096], hash[32], stem[512];
    snprintf(path, sizeof path, "%s/%s", w->dir, name);
    lam_error err;
    lam_error_clear(&err);
    if (cli_hash_file(path, hash, sizeof hash))
        return CLI_OK; /* gone again (a camera's temporary): nothing to do */
    cli_stem_of(path, stem, sizeof stem);
    lam_positions fresh;
    if (w->pos_path && lam_positions_load(w->pos_path, &fresh, &err) == LAM_OK) {
        lam_positions_clear(&w->pos_store); /* the stage software may have added tiles */
        w->pos_store = fresh;
    }
    lam_error_clear(&err);
    cJSON *result = lam_batch_existing(w->out_dir, stem, hash, w->setup_hash);
    int resumed = result != NULL;
    if (!result && watch_analyse_image(w, path, hash, &result, &err)) {
        cli_report(&err, path); /* a damaged file: say so, keep watching */
        return CLI_OK;
    }
    if (remember(w, path, result)) {
        cJSON_Delete(result);
        fprintf(stderr, "lamina: out of memory\n");
        return CLI_EFILE;
    }
    w->analysed += !resumed;
    if (!cli_quiet)
        print_line(w, path, result, resumed);
    return refresh_outputs(w);
}

static int cmp_str(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

/* Images already in the folder, in name order. */
static int process_existing(watch_session *w)
{
    DIR *d = opendir(w->dir);
    if (!d) {
        fprintf(stderr, "lamina: %s: cannot read the folder: %s\n", w->dir, strerror(errno));
        return CLI_EFILE;
    }
    cli_inputs names = {0, 0, NULL};
    struct dirent *e;
    while ((e = readdir(d))) {
        if (!is_image_name(e->d_name))
            continue;
        if (names.count == names.cap) {
            size_t nc = names.cap ? 2 * names.cap : 64;
            char **np = realloc(names.paths, nc * sizeof *np);
            if (!np)
                break;
            names.paths = np, names.cap = nc;
        }
        if ((names.paths[names.count] = strdup(e->d_name)))
            names.count++;
    }
    closedir(d);
    if (names.count) /* qsort must not see a NULL array, even empty */
        qsort(names.paths, names.count, sizeof *names.paths, cmp_str);
    int rc = CLI_OK;
    for (size_t k = 0; k < names.count && rc == CLI_OK && !stop_requested; k++)
        if (!w->max_images || w->analysed < w->max_images)
            rc = process(w, names.paths[k]);
    cli_inputs_free(&names);
    return rc;
}

/* Wait for images; returns when stopped, idle or after --max-images. */
static int watch_loop(watch_session *w, int fd)
{
    char buf[16384] __attribute__((aligned(__alignof__(struct inotify_event))));
    double idle = 0;
    int rc = CLI_OK;
    while (rc == CLI_OK && !stop_requested && (!w->max_images || w->analysed < w->max_images)) {
        struct pollfd p = {fd, POLLIN, 0};
        int r = poll(&p, 1, 250);
        if (r < 0 && errno == EINTR)
            continue;
        if (r <= 0) {
            idle += 0.25;
            if (w->idle_exit_s > 0 && idle >= w->idle_exit_s)
                break;
            continue;
        }
        ssize_t len = read(fd, buf, sizeof buf);
        if (len <= 0)
            continue;
        idle = 0;
        for (char *q = buf; q < buf + len && rc == CLI_OK;) {
            const struct inotify_event *ev = (const struct inotify_event *)(void *)q;
            if (ev->len && is_image_name(ev->name) &&
                (!w->max_images || w->analysed < w->max_images))
                rc = process(w, ev->name);
            q += sizeof *ev + ev->len;
        }
    }
    return rc;
}

static int parse_watch_options(int argc, char **argv, watch_session *w, cli_setup_opts *so,
                               const char **out)
{
    static const struct option longopts[] = {
        CLI_SETUP_LONGOPTS, CLI_STAGE_LONGOPTS,
        {"max-layers", required_argument, 0, 'K'}, {"min-area", required_argument, 0, 'a'},
        {"oxide-tolerance", required_argument, 0, 't'}, {"no-oxide-fit", no_argument, 0, 'N'},
        {"out", required_argument, 0, 'O'},        {"threads", required_argument, 0, 'j'},
        {"positions", required_argument, 0, 'P'},  {"max-images", required_argument, 0, 'M'},
        {"idle-exit", required_argument, 0, 'I'},  {"quiet", no_argument, 0, 'q'},
        {"no-pool", no_argument, 0, 'n'},          {0, 0, 0, 0}};
    long K = 6, threads = (long)lam_cpu_count(), maxi = 0;
    double area = -1;
    int c, r;
    optind = 1;
    opterr = 0;
    while ((c = getopt_long(argc, argv, "", longopts, NULL)) != -1) {
        r = 0;
        switch (c) {
        case 'K': r = cli_parse_long("watch", "--max-layers", optarg, 1, 20, &K); break;
        case 'a': r = cli_parse_double("watch", "--min-area", optarg, 0, 1e9, &area); break;
        case 't':
            r = cli_parse_double("watch", "--oxide-tolerance", optarg, 0, 500,
                                 &w->opt.oxide_tolerance_nm);
            break;
        case 'N': w->opt.fit_oxide = 0; break;
        case 'O': *out = optarg; break;
        case 'j': r = cli_parse_long("watch", "--threads", optarg, 1, 256, &threads); break;
        case 'P': w->pos_path = optarg; break;
        case 'M': r = cli_parse_long("watch", "--max-images", optarg, 1, 100000000, &maxi); break;
        case 'I':
            r = cli_parse_double("watch", "--idle-exit", optarg, 0.1, 1e7, &w->idle_exit_s);
            break;
        case 'q': cli_quiet = 1; break;
        case 'n': w->pool_off = 1; break;
        default:
            r = cli_stage_option(&w->stage, "watch", c, optarg);
            if (r == 0)
                r = cli_setup_option(so, "watch", c, optarg);
            if (r == 0)
                return cli_usage_error("watch", "unknown or incomplete option '%s'",
                                       argv[optind - 1]);
            r = r < 0 ? -1 : 0;
        }
        if (r)
            return CLI_EUSAGE;
    }
    if (optind + 1 != argc)
        return cli_usage_error("watch", "expected one folder to watch");
    w->dir = argv[optind];
    w->opt.max_layers = (size_t)K;
    w->opt.threads = (size_t)threads;
    w->max_images = (size_t)maxi;
    if (area >= 0)
        w->opt.min_area_um2 = w->opt.min_area_px = area;
    return CLI_OK;
}

static int start_watch(watch_session *w, const cli_setup_opts *so, lam_setup *s, int *fd)
{
    int rc;
    if ((rc = cli_setup_build("watch", so, s)))
        return rc;
    w->setup = s;
    if (w->pos_path && !(s->um_per_px > 0))
        return cli_usage_error("watch", "--positions needs the pixel size: give --um-per-px or "
                                        "um_per_px in the setup");
    lam_error err;
    lam_error_clear(&err);
    if (w->pos_path && lam_positions_load(w->pos_path, &w->pos_store, &err))
        return cli_report(&err, w->pos_path);
    w->pos = w->pos_path ? &w->pos_store : NULL;
    if (cli_make_dir(w->out_dir))
        return CLI_EFILE;
    cli_setup_hash(so->setup_file, &w->opt, so, w->setup_hash, sizeof w->setup_hash);
    lam_parallel_set_default(w->opt.threads);
    if (!w->pool_off && lam_pool_alloc(s, &w->opt, &w->pool, &err))
        return cli_report(&err, NULL);
    /* a restarted session starts from the prior it had pooled */
    char pool_path[4096], stored[LAM_BATCH_HASH_LEN];
    snprintf(pool_path, sizeof pool_path, "%s/pool.json", w->out_dir);
    if (w->pool && (lam_batch_pool_read(pool_path, &w->prior, NULL, stored, NULL) ||
                    strcmp(stored, w->setup_hash)))
        memset(&w->prior, 0, sizeof w->prior);
    /* watch first, then look at what is there: nothing falls in between */
    if ((*fd = inotify_init1(IN_CLOEXEC)) < 0 ||
        inotify_add_watch(*fd, w->dir, IN_CLOSE_WRITE | IN_MOVED_TO) < 0) {
        fprintf(stderr, "lamina: %s: cannot watch the folder: %s\n", w->dir, strerror(errno));
        return CLI_EFILE;
    }
    return CLI_OK;
}

static int run_watch(int argc, char **argv)
{
    watch_session w;
    memset(&w, 0, sizeof w);
    w.opt = lam_analysis_options_default();
    w.stage = lam_stage_default();
    cli_setup_opts so;
    cli_setup_opts_init(&so);
    const char *out = NULL;
    int rc = parse_watch_options(argc, argv, &w, &so, &out), fd = -1;
    if (rc)
        return rc;
    char out_default[4096];
    snprintf(out_default, sizeof out_default, "%s/lamina-out", w.dir);
    w.out_dir = out ? out : out_default;
    lam_setup s;
    memset(&s, 0, sizeof s);
    struct sigaction sa;
    memset(&sa, 0, sizeof sa);
    sa.sa_handler = on_stop; /* no SA_RESTART: poll returns at once */
    sigaction(SIGINT, &sa, NULL);
    sigaction(SIGTERM, &sa, NULL);
    if (!(rc = start_watch(&w, &so, &s, &fd))) {
        if (!cli_quiet)
            fprintf(stderr, "lamina: watching %s (results in %s; Ctrl-C to stop)\n", w.dir,
                    w.out_dir);
        rc = process_existing(&w);
        if (rc == CLI_OK)
            rc = watch_loop(&w, fd);
        if (!cli_quiet)
            fprintf(stderr, "lamina: %zu images analysed; results in %s\n", w.analysed, w.out_dir);
    }
    if (fd >= 0)
        close(fd);
    for (size_t k = 0; k < w.n; k++) {
        free(w.paths[k]);
        cJSON_Delete(w.results[k]);
    }
    free(w.paths);
    free(w.results);
    lam_positions_clear(&w.pos_store);
    lam_pool_free(w.pool);
    lam_setup_clear(&s);
    return rc;
}

const cli_command cli_watch = {"watch", "analyse images as the camera writes them (live)",
                               run_watch, watch_help};
