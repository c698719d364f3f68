/* cli/watch.c - `lamina watch DIR`: live analysis at the microscope
 * (lamina/watch.h). Parses the options, sets the Ctrl-C handler and prints
 * one line per image as the session reports it. */
#include "cli.h"
#include "options.h"
#include "lamina/batch.h"
#include "lamina/outfile.h"
#include "lamina/parallel.h"
#include "lamina/summary.h"
#include "lamina/watch.h"

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

/* What the table fills besides lam_watch_options. */
typedef struct watch_args {
    lam_watch_options w;
    lam_setup_overrides so;
    const char *out;
} watch_args;

#define WATCH_OPTIONS(A)                                                                        \
    {                                                                                           \
        {"max-layers", 0, CLI_SIZE, &(A)->w.analysis.max_layers, 1, 20, NULL, "K",              \
         "layer counts modelled (6)"},                                                          \
        {"min-area", 0, CLI_CALL, &(A)->w.analysis, 0, 0, cli_parse_min_area, "A",              \
         "regions below A um^2 (or px) are 'small'"},                                           \
        {"no-oxide-fit", 0, CLI_UNSET, &(A)->w.analysis.fit_oxide, 0, 0, NULL, NULL,            \
         "keep the nominal oxide"},                                                             \
        {"oxide-tolerance", 0, CLI_NUMBER, &(A)->w.analysis.oxide_tolerance_nm, 0, 500, NULL,   \
         "NM", "pass/fail of the oxide check (default 10)"},                                   \
        {"positions", 0, CLI_TEXT, &(A)->w.positions, 0, 0, NULL, "FILE.csv",                   \
         "stage readings of the tiles (re-read for every image,\nso the stage software may "   \
         "append to it)"},                                                                      \
        {"out", 0, CLI_TEXT, &(A)->out, 0, 0, NULL, "DIR", "outputs (default DIR/lamina-out)"}, \
        {"threads", 0, CLI_SIZE, &(A)->w.analysis.threads, 1, 256, NULL, "N",                   \
         "worker threads per image (default: all cores)"},                                      \
        {"max-images", 0, CLI_SIZE, &(A)->w.max_images, 1, 1e8, NULL, "N",                      \
         "stop after N images analysed"},                                                       \
        {"idle-exit", 0, CLI_NUMBER, &(A)->w.idle_exit_s, 0.1, 1e7, NULL, "SEC",                \
         "stop when no image arrived for SEC seconds"},                                         \
        {"no-pool", 0, CLI_UNSET, &(A)->w.pool, 0, 0, NULL, NULL,                               \
         "analyse each image on its own (default: the response, NA\nand camera are pooled "    \
         "from image to image, pool.json)"},                                                    \
        {"quiet", 0, CLI_FLAG, &cli_quiet, 0, 0, NULL, NULL, "only errors"},                    \
        CLI_END                                                                                 \
    }

static void watch_help(FILE *out)
{
    watch_args A;
    cli_option t[] = WATCH_OPTIONS(&A);
    fputs("Usage: lamina watch [OPTIONS] DIR\n"
          "Analyse each image the camera writes into DIR as soon as it is complete (closed\n"
          "after writing, or moved into DIR), print one line per image, and keep\n"
          "catalog.json, catalog.csv, goto.csv and report.html in --out up to date.\n"
          "Images already in DIR are analysed first (skipped when their results exist for\n"
          "the same content and setup). Ctrl-C finishes the current image and stops.\n\n"
          CLI_SETUP_HELP, out);
    cli_options_help(out, t);
    fputs(CLI_STAGE_HELP, out);
}

/* The setup, the output folder and the setup hash; an exit code. */
static int prepare(int argc, char **argv, watch_args *A, lam_setup *s, char *out_default,
                   size_t n, char *setup_hash)
{
    cli_option t[] = WATCH_OPTIONS(A);
    cli_command_options co = {.command = "watch", .own = t, .setup = &A->so,
                              .stage = &A->w.stage, .min_args = 1, .max_args = 1,
                              .args_error = "expected one folder to watch"};
    int rc = cli_options_parse(&co, argc, argv, 1);
    if (rc || (rc = cli_setup_build("watch", &A->so, s)))
        return rc;
    lam_watch_options *w = &A->w;
    w->dir = argv[optind];
    snprintf(out_default, n, "%s/lamina-out", w->dir);
    w->out_dir = A->out ? A->out : out_default;
    if (!(rc = cli_positions_need_scale("watch", w->positions, s)) && cli_make_dir(w->out_dir))
        rc = CLI_EFILE;
    if (rc) {
        lam_setup_clear(s);
        return rc;
    }
    lam_batch_overrides_hash(&A->so, &w->analysis, setup_hash);
    lam_parallel_set_default(w->analysis.threads);
    w->setup = s;
    w->setup_hash = setup_hash;
    return CLI_OK;
}

static int run_watch(int argc, char **argv)
{
    watch_args A = {.w = lam_watch_options_default()};
    lam_setup_overrides_init(&A.so);
    char out_default[4096], setup_hash[LAM_BATCH_HASH_LEN];
    lam_setup s;
    int rc = prepare(argc, argv, &A, &s, out_default, sizeof out_default, setup_hash);
    if (rc)
        return rc;
    lam_watch_options *w = &A.w;
    w->stop = &stop_requested;
    w->on_event = on_event;
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

const cli_command cli_watch = {"watch", "analyse images as the camera writes them (live)",
                               run_watch, watch_help};
