/* batch.c - the batch engine (lamina/batch.h): images on a pool of
 * threads, the pooled fit over a sample of them, pool.json, the catalogue
 * of a run. */
#include "batch_internal.h"
#include "lamina/draw.h"
#include "lamina/outfile.h"
#include "lamina/runreport.h"
#include "lamina/parallel.h"
#include "lamina/pool.h"

#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cjson/cJSON.h>

/* ---- a pool of threads over items, dynamically scheduled ---- */

typedef void (*item_fn)(void *ctx, size_t i);

typedef struct crew {
    pthread_mutex_t lock;
    size_t next, count;
    item_fn fn;
    void *ctx;
} crew;

static void *crew_worker(void *arg)
{
    crew *c = arg;
    for (;;) {
        pthread_mutex_lock(&c->lock);
        size_t i = c->next++;
        pthread_mutex_unlock(&c->lock);
        if (i >= c->count)
            return NULL;
        c->fn(c->ctx, i);
    }
}

/* fn(ctx, i) for i < count on up to 'threads' threads (at least the
 * calling one); 'lock' is the mutex fn may take for shared state. */
static void crew_run(size_t count, size_t threads, item_fn fn, void *ctx)
{
    crew c = {PTHREAD_MUTEX_INITIALIZER, 0, count, fn, ctx};
    size_t outer = threads < count ? threads : count, started = 0;
    pthread_t *tid = outer > 1 ? calloc(outer, sizeof *tid) : NULL;
    for (size_t t = 0; tid && t < outer; t++)
        if (!pthread_create(&tid[t], NULL, crew_worker, &c))
            started++;
    if (!started)
        crew_worker(&c);
    for (size_t t = 0; t < started; t++)
        pthread_join(tid[t], NULL);
    free(tid);
    pthread_mutex_destroy(&c.lock);
}

/* Threads inside each image when 'outer' images run at once. */
static size_t inner_threads(size_t threads, size_t count)
{
    size_t outer = threads < count ? threads : count;
    size_t inner = threads / (outer ? outer : 1);
    return inner ? inner : 1;
}

/* ---- the run ---- */

typedef struct run {
    lam_batch *b;
    const lam_batch_options *opt;
    lam_analysis_options aopt;      /* with threads and the prior */
    char setup_hash[LAM_BATCH_HASH_LEN];
    pthread_mutex_t lock;
    size_t done;
    /* the pooled fit */
    lam_pool *pool;
    size_t *sample, n_sample, next_add;
    lam_analysis **sampled;         /* finished sample analyses, added in order */
    int *sample_done;
} run;

static int hash_item(lam_batch_item *it)
{
    if (it->hash[0])
        return 0;
    if (lam_batch_hash_file(it->path, it->hash, &it->err)) {
        it->failed = 1;
        return -1;
    }
    return 0;
}

static void image_step(void *ctx, size_t i)
{
    run *r = ctx;
    lam_batch_item *it = &r->b->items[i];
    if (hash_item(it) == 0) {
        if (r->opt->resume &&
            (it->json = lam_batch_existing(r->opt->out_dir, it->stem, it->hash, r->setup_hash)))
            it->resumed = 1;
        else if (lam_batch_analyse_one(it->path, r->opt->setup, &r->aopt, r->opt->out_dir,
                                       it->hash, r->setup_hash, &it->a, &it->json, &it->err))
            it->failed = 1;
    }
    pthread_mutex_lock(&r->lock);
    r->done++;
    if (r->opt->on_image)
        r->opt->on_image(r->b, it, r->done, r->opt->user);
    pthread_mutex_unlock(&r->lock);
    lam_analysis_drop_pictures(it->a); /* summaries need only the results */
}

/* A sample analysis for the pooled fit: not written; added to the pool in
 * sample order (the fit does not depend on which thread finished first). */
static void sample_step(void *ctx, size_t k)
{
    run *r = ctx;
    lam_analysis *a = NULL;
    lam_error err;
    lam_error_clear(&err);
    if (lam_analyze(r->b->items[r->sample[k]].path, r->opt->setup, &r->aopt, &a, &err))
        a = NULL; /* reported when the image itself is analysed */
    lam_analysis_drop_pictures(a);
    pthread_mutex_lock(&r->lock);
    r->sampled[k] = a;
    r->sample_done[k] = 1;
    while (r->next_add < r->n_sample && r->sample_done[r->next_add]) {
        lam_analysis *s = r->sampled[r->next_add];
        if (s && lam_pool_add(r->pool, s, &err) == LAM_OK)
            r->b->pool_sampled++;
        lam_analysis_free(s);
        r->sampled[r->next_add++] = NULL;
    }
    pthread_mutex_unlock(&r->lock);
}

/* The key of a pooled fit: the setup and the sampled images' contents. */
static void pool_key(run *r, char key[LAM_BATCH_HASH_LEN])
{
    char text[LAM_POOL_SAMPLE * LAM_BATCH_HASH_LEN + 2 * LAM_BATCH_HASH_LEN];
    snprintf(text, sizeof text, "%s n=%zu", r->opt->setup_hash ? r->opt->setup_hash : "",
             r->b->count);
    for (size_t k = 0; k < r->n_sample; k++) {
        lam_batch_item *it = &r->b->items[r->sample[k]];
        if (hash_item(it)) { /* unreadable: the image reports it; keep it out of the key */
            lam_error_clear(&it->err);
            it->failed = 0;
            continue;
        }
        strncat(text, it->hash, sizeof text - strlen(text) - 1);
    }
    lam__batch_hash_text(text, key);
}

static lam_status fit_pool(run *r, lam_error *err)
{
    lam_status st = lam_pool_alloc(r->opt->setup, &r->aopt, &r->pool, err);
    if (!st)
        lam_pool_analyse_again(r->pool, 1); /* the sample is analysed again */
    r->sampled = calloc(r->n_sample, sizeof *r->sampled);
    r->sample_done = calloc(r->n_sample, sizeof *r->sample_done);
    if (!st && (!r->sampled || !r->sample_done))
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate the pooled fit");
    if (!st) {
        r->aopt.threads = inner_threads(r->opt->threads, r->n_sample);
        lam_parallel_set_default(r->aopt.threads);
        crew_run(r->n_sample, r->opt->threads, sample_step, r);
        st = lam_pool_fit(r->pool, &r->b->prior, err);
    }
    free(r->sampled);
    free(r->sample_done);
    lam_pool_free(r->pool);
    r->pool = NULL;
    return st;
}

/* The pooled prior: from pool_from, from a matching pool.json of a resumed
 * run, or fitted over the sample (and written to pool.json). */
static lam_status pooled_prior(run *r, lam_error *err)
{
    const lam_batch_options *o = r->opt;
    char stored_setup[LAM_BATCH_HASH_LEN], stored_key[LAM_BATCH_HASH_LEN], key[LAM_BATCH_HASH_LEN];
    const char *setup_hash = o->setup_hash ? o->setup_hash : "";
    lam_status st;
    if (o->pool_from) {
        if ((st = lam_batch_pool_read(o->pool_from, &r->b->prior, NULL, stored_setup, err)))
            return st;
        if (strcmp(stored_setup, setup_hash)) {
            lam_error_set(err, LAM_EINVAL, "made with another setup or other options "
                                           "(setup_hash %s, this run %s)", stored_setup, setup_hash);
            lam_error_set_file(err, o->pool_from);
            return LAM_EINVAL;
        }
        r->b->pool_reused = 1;
        return LAM_OK;
    }
    size_t idx[LAM_POOL_SAMPLE];
    r->sample = idx;
    r->n_sample = lam_pool_sample(r->b->count, LAM_POOL_SAMPLE, idx);
    pool_key(r, key);
    char path[4096];
    snprintf(path, sizeof path, "%s/pool.json", o->out_dir);
    lam_shared_prior kept;
    if (o->resume && lam_batch_pool_read(path, &kept, stored_key, stored_setup, NULL) == LAM_OK &&
        !strcmp(stored_key, key) && !strcmp(stored_setup, setup_hash)) {
        r->b->prior = kept;
        r->b->pool_reused = 1;
        r->sample = NULL;
        return LAM_OK;
    }
    st = fit_pool(r, err);
    r->sample = NULL;
    if (!st && (st = lam_batch_pool_write(path, &r->b->prior, setup_hash, key, err)))
        lam_error_set_file(err, path);
    return st;
}

lam_batch_options lam_batch_options_default(void)
{
    lam_batch_options o;
    memset(&o, 0, sizeof o);
    o.analysis = lam_analysis_options_default();
    o.threads = lam_cpu_count();
    o.pool = 1;
    return o;
}

static lam_status batch_alloc(lam_batch *b, const char *const *paths, size_t n, lam_error *err)
{
    memset(b, 0, sizeof *b);
    b->items = calloc(n ? n : 1, sizeof *b->items);
    if (!b->items)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a batch of %zu images", n);
    b->count = n;
    for (size_t i = 0; i < n; i++) {
        b->items[i].path = paths[i];
        lam_batch_stem(paths[i], b->items[i].stem, sizeof b->items[i].stem);
        lam_error_clear(&b->items[i].err);
    }
    return LAM_OK;
}

lam_status lam_batch_run(lam_batch *b, const char *const *paths, size_t n,
                         const lam_batch_options *opt, lam_error *err)
{
    lam_status st = lam_outfile_make_dir(opt->out_dir, err);
    if (st || (st = batch_alloc(b, paths, n, err)))
        return st;
    run r;
    memset(&r, 0, sizeof r);
    /* the pictures' text machinery loads while the first image is read */
    lam_draw_warm_up warm;
    r.b = b;
    r.opt = opt;
    r.aopt = opt->analysis;
    r.aopt.shared_prior = NULL;
    pthread_mutex_init(&r.lock, NULL);
    size_t threads = opt->threads ? opt->threads : 1;
    lam_batch_options o = *opt;
    o.threads = threads;
    r.opt = &o;
    if (opt->pool_from || (opt->pool && n >= 2))
        st = pooled_prior(&r, err);
    if (!st && !opt->pool_only) {
        lam_draw_warm_up_start(&warm);
        r.aopt.shared_prior = b->prior.set ? &b->prior : NULL;
        lam_batch_prior_hash(opt->setup_hash ? opt->setup_hash : "", r.aopt.shared_prior,
                             r.setup_hash);
        r.aopt.threads = inner_threads(threads, n);
        lam_parallel_set_default(r.aopt.threads); /* loading and PNG compression too */
        crew_run(n, threads, image_step, &r);
        lam_draw_warm_up_join(&warm);
    }
    lam_parallel_set_default(threads); /* what follows (the run's report) has them all */
    pthread_mutex_destroy(&r.lock);
    if (st)
        lam_batch_clear(b);
    return st;
}

void lam_batch_clear(lam_batch *b)
{
    if (!b)
        return;
    for (size_t i = 0; i < b->count; i++) {
        lam_analysis_free(b->items[i].a);
        cJSON_Delete(b->items[i].json);
    }
    free(b->items);
    memset(b, 0, sizeof *b);
}

lam_status lam_batch_catalog_add(const lam_batch *b, lam_catalog *cat, const lam_positions *pos,
                                 lam_error *err)
{
    for (size_t i = 0; i < b->count; i++) {
        const lam_batch_item *it = &b->items[i];
        if (it->failed || !it->json)
            continue;
        lam_status st = lam_catalog_add(cat, it->json, it->path, lam_positions_find(pos, it->path),
                                        err);
        if (st) {
            lam_error_set_file(err, it->path);
            return st;
        }
    }
    return LAM_OK;
}

lam_status lam_batch_write_outputs(const lam_batch *b, const lam_positions *pos,
                                   const lam_stage *stage, const double *target,
                                   const char *out_dir, lam_catalog *cat, lam_error *err)
{
    lam_catalog_init(cat);
    lam_catalog_set_stage(cat, pos, stage);
    if (target)
        lam_catalog_set_target(cat, target[0], target[1]);
    snprintf(cat->results, sizeof cat->results, "%s", out_dir);
    lam_status st = lam_batch_catalog_add(b, cat, pos, err);
    return st ? st : lam_run_outputs_write(cat, out_dir, NULL, err);
}

void lam_batch_item_warnings(const lam_batch_item *it, lam_warnings *out)
{
    if (it->a) {
        *out = it->a->warnings;
        return;
    }
    memset(out, 0, sizeof *out);
    const cJSON *w, *ws = cJSON_GetObjectItemCaseSensitive(it->json, "warnings");
    cJSON_ArrayForEach(w, ws) {
        const cJSON *c = cJSON_GetObjectItemCaseSensitive(w, "code");
        const cJSON *m = cJSON_GetObjectItemCaseSensitive(w, "message");
        if (cJSON_IsString(m) && out->count < LAM_MAX_WARNINGS) {
            lam_warning *x = &out->item[out->count++];
            snprintf(x->code, sizeof x->code, "%s", cJSON_IsString(c) ? c->valuestring : "");
            snprintf(x->message, sizeof x->message, "%s", m->valuestring);
        }
    }
}
