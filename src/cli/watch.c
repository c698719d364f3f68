/* cli/watch.c - `lamina watch DIR`: live analysis at the microscope
 * (lamina/watch.h). Parses the options, sets the Ctrl-C handler and prints
 * one line per image as the session reports it. */
#include "cli.h"
#include "lamina/batch.h"
#include "lamina/outfile.h"
#include "lamina/parallel.h"
#include "lamina/summary.h"
#include "lamina/watch.h"

#include <signal.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

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

/* The session's events: a line per image on stdout, the rest on stderr. */
static void on_event(const lam_watch_event *ev, void *user)
{
    (void)user;
    char *text = NULL;
    if (ev->kind == LAM_WATCH_FAILED)
        cli_report(ev->err, ev->path);
    else if (ev->kind == LAM_WATCH_POOLED && !cli_quiet &&
             !lam_summary_watch_event(ev, &text, NULL))
        fprintf(stderr, "lamina: %s\n", text);
    else if (!cli_quiet && !lam_summary_watch_event(ev, &text, NULL))
        printf("%s\n", text);
    free(text);
    fflush(stdout);
}

static struct {
    lam_watch_options w;
    lam_setup_overrides so;
    const char *out;
    char out_default[4096], setup_hash[LAM_BATCH_HASH_LEN];
} A;

static const cli_option watch_options[] = {
    CLI_ANALYSIS_OPTIONS(A.w.analysis),
    {"positions", 0, CLI_TEXT, &A.w.positions, 0, 0, NULL, "FILE.csv",
     "stage readings of the tiles (re-read for every image,\nso the stage software may append "
     "to it)"},
    {"out", 0, CLI_TEXT, &A.out, 0, 0, NULL, "DIR", "outputs (default DIR/lamina-out)"},
    {"threads", 0, CLI_SIZE, &A.w.analysis.threads, 1, 256, NULL, "N",
     "worker threads per image (default: all cores)"},
    {"max-images", 0, CLI_SIZE, &A.w.max_images, 1, 1e8, NULL, "N",
     "stop after N images analysed"},
    {"idle-exit", 0, CLI_NUMBER, &A.w.idle_exit_s, 0.1, 1e7, NULL, "SEC",
     "stop when no image arrived for SEC seconds"},
    {"no-pool", 0, CLI_UNSET, &A.w.pool, 0, 0, NULL, NULL,
     "analyse each image on its own (default: the response, NA\nand camera are pooled from "
     "image to image, pool.json)"},
    {"quiet", 0, CLI_FLAG, &cli_quiet, 0, 0, NULL, NULL, "only errors"},
    CLI_END};

/* The options, the setup, the output folder and the setup hash; an exit
 * code (0: *s is the caller's). */
static int prepare(int argc, char **argv, lam_setup *s)
{
    A.w = lam_watch_options_default();
    int rc = cli_options_parse(&cli_watch, argc, argv) ? CLI_EUSAGE : CLI_OK;
    if (rc || (rc = cli_setup_build("watch", &A.so, s)))
        return rc;
    lam_watch_options *w = &A.w;
    w->dir = argv[optind];
    snprintf(A.out_default, sizeof A.out_default, "%s/lamina-out", w->dir);
    w->out_dir = A.out ? A.out : A.out_default;
    lam_error err;
    lam_error_clear(&err);
    if (!(rc = cli_positions_need_scale("watch", w->positions, s)) &&
        lam_outfile_make_dir(w->out_dir, &err)) /* before saying where results go */
        rc = cli_report(&err, NULL);
    if (rc) {
        lam_setup_clear(s);
        return rc;
    }
    lam_batch_overrides_hash(&A.so, &w->analysis, A.setup_hash);
    lam_parallel_set_default(w->analysis.threads);
    w->setup = s;
    w->setup_hash = A.setup_hash;
    w->stop = &stop_requested;
    w->on_event = on_event;
    return CLI_OK;
}

static int run_watch(int argc, char **argv)
{
    lam_setup s;
    int rc = prepare(argc, argv, &s);
    if (rc)
        return rc;
    lam_watch_options *w = &A.w;
    struct sigaction sa;
    memset(&sa, 0, sizeof sa);
    sa.sa_handler = on_stop; /* no SA_RESTART: poll returns at once */
    sigaction(SIGINT, &sa, NULL);
    sigaction(SIGTERM, &sa, NULL);
    if (!cli_quiet)
        fprintf(stderr, "lamina: watching %s (results in %s; Ctrl-C to stop)\n", w->dir,
                w->out_dir);
    size_t analysed = 0;
    lam_error err;
    lam_error_clear(&err);
    if (lam_watch_run(w, &analysed, &err))
        rc = cli_report(&err, w->dir);
    if (!cli_quiet)
        fprintf(stderr, "lamina: %zu images analysed; results in %s\n", analysed, w->out_dir);
    lam_setup_clear(&s);
    return rc;
}

const cli_command cli_watch = {
    .name = "watch", .summary = "analyse images as the camera writes them (live)",
    .run = run_watch,
    .usage = "Usage: lamina watch [OPTIONS] DIR\n"
             "Analyse each image the camera writes into DIR as soon as it is complete (closed\n"
             "after writing, or moved into DIR), print one line per image, and keep\n"
             "catalog.json, catalog.csv, goto.csv and report.html in --out up to date.\n"
             "Images already in DIR are analysed first (skipped when their results exist for\n"
             "the same content and setup). Ctrl-C finishes the current image and stops.\n\n",
    .options = watch_options, .setup = &A.so, .stage = &A.w.stage, .min_args = 1, .max_args = 1,
    .args_error = "expected one folder to watch"};
