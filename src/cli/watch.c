/* cli/watch.c - `lamina watch DIR`: live analysis at the microscope
 * (lamina/watch.h). Parses the options, sets the Ctrl-C handler and prints
 * one line per image as the session reports it. */
#include "cli.h"
#include "run_opts.h"
#include "setup_opts.h"
#include "lamina/batch.h"
#include "lamina/outfile.h"
#include "lamina/parallel.h"
#include "lamina/summary.h"
#include "lamina/watch.h"

#include <getopt.h>
#include <math.h>
#include <signal.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>
#include <cjson/cJSON.h>

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

/* The session's events: a line per image on stdout, the rest on stderr. */
static void on_event(const lam_watch_event *ev, void *user)
{
    (void)user;
    char name[48];
    switch (ev->kind) {
    case LAM_WATCH_FAILED:
        cli_report(ev->err, ev->path);
        break;
    case LAM_WATCH_POOLED:
        if (cli_quiet)
            break;
        if (ev->first)
            fprintf(stderr, "lamina: response, NA and camera pooled from %zu image%s\n",
                    ev->prior->images, ev->prior->images == 1 ? "" : "s");
        else
            fprintf(stderr, "lamina: pooled response, NA and camera moved (%s by %.1f sigma), "
                            "from %zu images\n", lam_batch_nuisance_name(ev->which, name,
                                                                         sizeof name),
                    ev->moved, ev->prior->images);
        break;
    default: {
        char when[16], *text = NULL;
        time_t now = time(NULL);
        strftime(when, sizeof when, "%H:%M:%S", localtime(&now));
        if (!cli_quiet && !lam_summary_image_line(ev->path, ev->result,
                                                  ev->kind == LAM_WATCH_KEPT, &text, NULL))
            printf("%s  %s\n", when, text);
        free(text);
        fflush(stdout);
    }
    }
}

static int parse_watch_options(int argc, char **argv, lam_watch_options *w, cli_setup_opts *so,
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
                                 &w->analysis.oxide_tolerance_nm);
            break;
        case 'N': w->analysis.fit_oxide = 0; break;
        case 'O': *out = optarg; break;
        case 'j': r = cli_parse_long("watch", "--threads", optarg, 1, 256, &threads); break;
        case 'P': w->positions = optarg; break;
        case 'M': r = cli_parse_long("watch", "--max-images", optarg, 1, 100000000, &maxi); break;
        case 'I':
            r = cli_parse_double("watch", "--idle-exit", optarg, 0.1, 1e7, &w->idle_exit_s);
            break;
        case 'q': cli_quiet = 1; break;
        case 'n': w->pool = 0; break;
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
    w->analysis.max_layers = (size_t)K;
    w->analysis.threads = (size_t)threads;
    w->max_images = (size_t)maxi;
    if (area >= 0)
        w->analysis.min_area_um2 = w->analysis.min_area_px = area;
    return CLI_OK;
}

static int run_watch(int argc, char **argv)
{
    lam_watch_options w = lam_watch_options_default();
    cli_setup_opts so;
    cli_setup_opts_init(&so);
    const char *out = NULL;
    int rc = parse_watch_options(argc, argv, &w, &so, &out);
    char out_default[4096], setup_hash[LAM_BATCH_HASH_LEN];
    lam_setup s;
    if (rc || (rc = cli_setup_build("watch", &so, &s)))
        return rc;
    snprintf(out_default, sizeof out_default, "%s/lamina-out", w.dir);
    w.out_dir = out ? out : out_default;
    if (w.positions && !(s.um_per_px > 0))
        rc = cli_usage_error("watch", "--positions needs the pixel size: give --um-per-px or "
                                      "um_per_px in the setup");
    else if (cli_make_dir(w.out_dir))
        rc = CLI_EFILE;
    if (rc) {
        lam_setup_clear(&s);
        return rc;
    }
    cli_setup_hash(&so, &w.analysis, setup_hash, sizeof setup_hash);
    lam_parallel_set_default(w.analysis.threads);
    w.setup = &s;
    w.setup_hash = setup_hash;
    w.stop = &stop_requested;
    w.on_event = on_event;
    struct sigaction sa;
    memset(&sa, 0, sizeof sa);
    sa.sa_handler = on_stop; /* no SA_RESTART: poll returns at once */
    sigaction(SIGINT, &sa, NULL);
    sigaction(SIGTERM, &sa, NULL);
    if (!cli_quiet)
        fprintf(stderr, "lamina: watching %s (results in %s; Ctrl-C to stop)\n", w.dir, w.out_dir);
    size_t analysed = 0;
    lam_error err;
    lam_error_clear(&err);
    if (lam_watch_run(&w, &analysed, &err))
        rc = cli_report(&err, w.dir);
    if (!cli_quiet)
        fprintf(stderr, "lamina: %zu images analysed; results in %s\n", analysed, w.out_dir);
    lam_setup_clear(&s);
    return rc;
}

const cli_command cli_watch = {"watch", "analyse images as the camera writes them (live)",
                               run_watch, watch_help};
