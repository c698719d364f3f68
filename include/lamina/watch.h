/*
 * lamina/watch.h - live analysis at the microscope: every image the camera
 * finishes writing into a folder is analysed once (inotify: closed after
 * writing, or renamed into the folder; hidden files, other files and
 * lamina's own outputs are ignored), and the catalogue, goto.csv and the
 * self-refreshing report.html of everything seen are rewritten after each
 * image. Images already in the folder go first, in name order; their
 * results are kept when they exist for the same content and setup
 * (lamina/batch.h).
 *
 * Pooling: the response, NA and camera are carried from image to image
 * (lamina/pool.h): each analysed image is added to a pool, the pool is
 * refitted and the next image starts from the result, which is also kept
 * in OUT/pool.json; a restarted session starts from that file when its
 * setup hash matches. Results kept from disk are not added to the pool.
 *
 * Stopping: after *stop becomes non-zero (a signal handler's flag; checked
 * between images and every 0.25 s while idle), after max_images analysed,
 * or after idle_exit_s without a new image. Every output is atomic, so the
 * folder is consistent at any moment.
 *
 * Events go to a callback (the caller prints): one per image (analysed,
 * kept, or failed - a damaged file is reported and watching goes on), and
 * one when the pooled prior is first set or moves by more than
 * LAM_WATCH_PRIOR_MOVE of its own sigmas.
 *
 * Errors (the return of lam_watch_run): the folder cannot be watched or
 * read (LAM_EIO), the outputs cannot be written, LAM_ENOMEM, a positions
 * file that cannot be read at the start.
 */
#ifndef LAMINA_WATCH_H
#define LAMINA_WATCH_H

#include <signal.h>
#include <stddef.h>
#include "lamina/analyze.h"
#include "lamina/error.h"
#include "lamina/setup.h"
#include "lamina/stage.h"

struct cJSON;

/* A pooled prior that moved by more than this many of its sigmas is news. */
#define LAM_WATCH_PRIOR_MOVE 1.0

typedef enum lam_watch_event_kind {
    LAM_WATCH_ANALYSED,   /* path, result */
    LAM_WATCH_KEPT,       /* path, result (from an earlier session) */
    LAM_WATCH_FAILED,     /* path, err */
    LAM_WATCH_POOLED      /* prior (first set, or moved: moved, which) */
} lam_watch_event_kind;

typedef struct lam_watch_event {
    lam_watch_event_kind kind;
    const char *path;
    const struct cJSON *result;     /* lamina-analysis/1 as written */
    const lam_error *err;
    const lam_shared_prior *prior;
    int first;                      /* POOLED: the first pooled prior of the session */
    double moved;                   /* POOLED: largest move, in sigmas of the old prior */
    int which;                      /* POOLED: the parameter (LAM_NU_*) that moved most */
} lam_watch_event;

typedef struct lam_watch_options {
    const lam_setup *setup;
    lam_analysis_options analysis;  /* copied; the session sets shared_prior */
    const char *dir, *out_dir;      /* out_dir is created when missing */
    const char *setup_hash;         /* lam_batch_setup_hash */
    int pool;                       /* carry the pooled fit (default 1) */
    const char *positions;          /* re-read before every image (may grow), or NULL */
    lam_stage stage;
    size_t max_images;              /* 0: no limit */
    double idle_exit_s;             /* 0: wait for ever */
    const volatile sig_atomic_t *stop; /* may be NULL */
    void (*on_event)(const lam_watch_event *ev, void *user); /* may be NULL */
    void *user;
} lam_watch_options;

/* Defaults: pool on, no limits, the default stage, nothing else set. */
lam_watch_options lam_watch_options_default(void);

/* Watch until stopped (see above); *analysed (may be NULL) receives the
 * number of images analysed (not kept). */
lam_status lam_watch_run(const lam_watch_options *opt, size_t *analysed, lam_error *err);

#endif
