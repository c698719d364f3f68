/* watch.c - live analysis of a folder the camera writes into
 * (lamina/watch.h). */
#include "lamina/watch.h"
#include "lamina/batch.h"
#include "lamina/catalog.h"
#include "lamina/inputs.h"
#include "lamina/pool.h"
#include "lamina/outfile.h"
#include "lamina/runreport.h"

#include <errno.h>
#include <poll.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include <sys/inotify.h>
#include <cjson/cJSON.h>

#define POLL_MS 250
#define REPORT_REFRESH_S 10

typedef struct session {
    const lam_watch_options *opt;
    lam_analysis_options aopt;
    lam_pool *pool;
    lam_shared_prior prior;         /* carried from image to image (set = 0: none yet) */
    lam_positions pos;
    int have_pos;
    lam_inputs paths;               /* images of this session, in the order seen */
    cJSON **results;                /* one per path */
    size_t analysed;
} session;

lam_watch_options lam_watch_options_default(void)
{
    lam_watch_options o;
    memset(&o, 0, sizeof o);
    o.analysis = lam_analysis_options_default();
    o.pool = 1;
    o.stage = lam_stage_default();
    return o;
}

static void emit(const session *w, const lam_watch_event *ev)
{
    if (w->opt->on_event)
        w->opt->on_event(ev, w->opt->user);
}

static int is_watched_name(const char *name)
{
    return name[0] != '.' && lam_inputs_is_image_name(name) && !lam_inputs_is_output_name(name);
}

/* Add an analysed image to the pool and refit: the next image starts from
 * the result, which is kept in pool.json. A failed fit keeps the prior as
 * it was (the image is analysed and written already). */
static void carry_prior(session *w, const lam_analysis *a)
{
    lam_error err;
    lam_error_clear(&err);
    lam_shared_prior next;
    if (lam_pool_add(w->pool, a, &err) || lam_pool_fit(w->pool, &next, &err) || !next.set)
        return;
    lam_watch_event ev = {LAM_WATCH_POOLED, a->file, NULL, NULL, &next, !w->prior.set, 0, -1};
    ev.moved = lam_batch_prior_shift(&w->prior, &next, &ev.which);
    if (ev.first || ev.moved > LAM_WATCH_PRIOR_MOVE)
        emit(w, &ev);
    w->prior = next;
    char path[4096];
    snprintf(path, sizeof path, "%s/pool.json", w->opt->out_dir);
    lam_batch_pool_write(path, &w->prior, w->opt->setup_hash, "watch", &err);
}

/* Keep the result of 'path' (replacing an older one of the same image). */
static lam_status remember(session *w, const char *path, cJSON *result, lam_error *err)
{
    for (size_t k = 0; k < w->paths.count; k++)
        if (!strcmp(w->paths.paths[k], path)) {
            cJSON_Delete(w->results[k]);
            w->results[k] = result;
            return LAM_OK;
        }
    cJSON **nr = realloc(w->results, (w->paths.count + 1) * sizeof *nr);
    if (!nr)
        return lam_error_set(err, LAM_ENOMEM, "cannot keep %zu results", w->paths.count + 1);
    w->results = nr;
    lam_status st = lam_inputs_add(&w->paths, path, err);
    if (!st)
        w->results[w->paths.count - 1] = result;
    return st;
}

/* The catalogue of every result of the session, its files and the report
 * (which reloads itself). */
static lam_status refresh_outputs(session *w, lam_error *err)
{
    const lam_positions *pos = w->have_pos ? &w->pos : NULL;
    lam_catalog cat;
    lam_catalog_init(&cat);
    lam_catalog_set_stage(&cat, pos, &w->opt->stage);
    snprintf(cat.results, sizeof cat.results, "%s", w->opt->out_dir);
    lam_status st = LAM_OK;
    for (size_t k = 0; k < w->paths.count && !st; k++) {
        const char *p = w->paths.paths[k];
        if ((st = lam_catalog_add(&cat, w->results[k], p, lam_positions_find(pos, p), err)))
            lam_error_set_file(err, p);
    }
    lam_run_report_options ro = {NULL, 0, REPORT_REFRESH_S};
    if (!st)
        st = lam_run_outputs_write(&cat, w->opt->out_dir, &ro, err);
    lam_catalog_clear(&cat);
    return st;
}

/* The positions file again: the stage software may have added tiles. */
static void reread_positions(session *w)
{
    lam_positions fresh;
    if (w->opt->positions && lam_positions_load(w->opt->positions, &fresh, NULL) == LAM_OK) {
        lam_positions_clear(&w->pos);
        w->pos = fresh;
    }
}

/* Analyse one image (or take its existing results) and refresh. */
static lam_status process(session *w, const char *name, lam_error *err)
{
    char path[4096], hash[LAM_BATCH_HASH_LEN], stem[512];
    snprintf(path, sizeof path, "%s/%s", w->opt->dir, name);
    if (lam_batch_hash_file(path, hash, NULL))
        return LAM_OK; /* gone again (a camera's temporary): nothing to do */
    lam_batch_stem(path, stem, sizeof stem);
    reread_positions(w);
    cJSON *result = lam_batch_existing(w->opt->out_dir, stem, hash, w->opt->setup_hash);
    lam_watch_event ev = {result ? LAM_WATCH_KEPT : LAM_WATCH_ANALYSED, path, NULL, NULL, NULL,
                          0, 0, -1};
    if (!result) {
        lam_analysis *a = NULL;
        lam_error ie;
        lam_error_clear(&ie);
        w->aopt.shared_prior = w->prior.set ? &w->prior : NULL;
        if (lam_batch_analyse_one(path, w->opt->setup, &w->aopt, w->opt->out_dir, hash,
                                  w->opt->setup_hash, &a, &result, &ie)) {
            ev.kind = LAM_WATCH_FAILED; /* a damaged file: say so, keep watching */
            ev.err = &ie;
            emit(w, &ev);
            return LAM_OK;
        }
        if (w->pool)
            carry_prior(w, a);
        lam_analysis_free(a);
        w->analysed++;
    }
    lam_status st = remember(w, path, result, err);
    if (st) {
        cJSON_Delete(result);
        return st;
    }
    ev.result = result;
    emit(w, &ev);
    return refresh_outputs(w, err);
}

static int more(const session *w)
{
    const lam_watch_options *o = w->opt;
    return !(o->stop && *o->stop) && (!o->max_images || w->analysed < o->max_images);
}

/* Images already in the folder, in name order. */
static lam_status process_existing(session *w, lam_error *err)
{
    lam_inputs names;
    lam_status st = lam_inputs_folder_names(w->opt->dir, is_watched_name, &names, err);
    for (size_t k = 0; k < names.count && !st && more(w); k++)
        st = process(w, names.paths[k], err);
    lam_inputs_free(&names);
    return st;
}

/* Wait for images; returns when stopped, idle or after max_images. */
static lam_status watch_loop(session *w, int fd, lam_error *err)
{
    char buf[16384] __attribute__((aligned(__alignof__(struct inotify_event))));
    double idle = 0;
    lam_status st = LAM_OK;
    while (!st && more(w)) {
        struct pollfd p = {fd, POLLIN, 0};
        int r = poll(&p, 1, POLL_MS);
        if (r < 0 && errno == EINTR)
            continue;
        if (r <= 0) {
            idle += POLL_MS / 1000.0;
            if (w->opt->idle_exit_s > 0 && idle >= w->opt->idle_exit_s)
                break;
            continue;
        }
        ssize_t len = read(fd, buf, sizeof buf);
        if (len <= 0)
            continue;
        idle = 0;
        for (char *q = buf; q < buf + len && !st;) {
            const struct inotify_event *ev = (const struct inotify_event *)(void *)q;
            if (ev->len && is_watched_name(ev->name) && more(w))
                st = process(w, ev->name, err);
            q += sizeof *ev + ev->len;
        }
    }
    return st;
}

/* Pool, positions, the prior of an earlier session, and the watch itself
 * (set before the folder is read: nothing falls in between). */
static lam_status start(session *w, int *fd, lam_error *err)
{
    const lam_watch_options *o = w->opt;
    lam_status st = o->pool ? lam_pool_alloc(o->setup, &w->aopt, &w->pool, err) : LAM_OK;
    if (!st && o->positions && !(st = lam_positions_load(o->positions, &w->pos, err)))
        w->have_pos = 1;
    if (st)
        return st;
    char path[4096], stored[LAM_BATCH_HASH_LEN];
    snprintf(path, sizeof path, "%s/pool.json", o->out_dir);
    if (w->pool && (lam_batch_pool_read(path, &w->prior, NULL, stored, NULL) ||
                    strcmp(stored, o->setup_hash ? o->setup_hash : "")))
        memset(&w->prior, 0, sizeof w->prior);
    if ((*fd = inotify_init1(IN_CLOEXEC)) < 0 ||
        inotify_add_watch(*fd, o->dir, IN_CLOSE_WRITE | IN_MOVED_TO) < 0) {
        lam_error_set(err, LAM_EIO, "cannot watch the folder: %s", strerror(errno));
        lam_error_set_file(err, o->dir);
        return LAM_EIO;
    }
    return LAM_OK;
}

lam_status lam_watch_run(const lam_watch_options *opt, size_t *analysed, lam_error *err)
{
    session w;
    memset(&w, 0, sizeof w);
    w.opt = opt;
    w.aopt = opt->analysis;
    int fd = -1;
    lam_status st = lam_outfile_make_dir(opt->out_dir, err);
    if (!st)
        st = start(&w, &fd, err);
    if (!st)
        st = process_existing(&w, err);
    if (!st)
        st = watch_loop(&w, fd, err);
    if (fd >= 0)
        close(fd);
    if (analysed)
        *analysed = w.analysed;
    for (size_t k = 0; k < w.paths.count; k++)
        cJSON_Delete(w.results[k]);
    free(w.results);
    lam_inputs_free(&w.paths);
    lam_positions_clear(&w.pos);
    lam_pool_free(w.pool);
    return st;
}
