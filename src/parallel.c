/* parallel.c - a fork-join loop over index slices with POSIX threads,
 * kept between loops. */
#include "lamina/parallel.h"

#include <pthread.h>
#include <stdatomic.h>
#include <stdlib.h>
#include <unistd.h>

typedef struct slice_job {
    size_t begin, end, slice;
    lam_slice_fn fn;
    void *ctx;
} slice_job;

/* ---- helpers kept between loops ----
 * A helper thread, once started, waits for a slice, runs it and goes back
 * to the idle list: starting and joining a thread took ~55 us on the
 * project's machine, and one analysis runs ~70 loops. A loop takes idle
 * helpers and starts a new one only when none is idle, so loops on
 * several threads at once, or one inside another, never wait for a
 * helper; the helpers are as many as the most loops ever ran at once.
 * They stay, idle on their condition variable, until
 * lam_parallel_retire_helpers or the process's end, and so do their
 * thread-local data: conductivity.c's quadrature rules, which then serve
 * the next loop, and the Pango font map of a helper that drew text. */
typedef struct helper {
    pthread_t tid;
    pthread_mutex_t lock;
    pthread_cond_t wake;  /* a slice given, its end, or retirement */
    const slice_job *job; /* the slice given, until it has ended; NULL while idle */
    int retire;           /* end the thread */
    struct helper *next;  /* on the idle list */
} helper;

static pthread_mutex_t idle_lock = PTHREAD_MUTEX_INITIALIZER;
static helper *idle_helpers;

static void run_slice(const slice_job *j)
{
    j->fn(j->begin, j->end, j->slice, j->ctx);
}

static void *helper_main(void *arg)
{
    helper *h = arg;
    pthread_mutex_lock(&h->lock);
    for (;;) {
        while (!h->job && !h->retire)
            pthread_cond_wait(&h->wake, &h->lock);
        if (!h->job)
            break;
        const slice_job *j = h->job;
        pthread_mutex_unlock(&h->lock);
        run_slice(j);
        pthread_mutex_lock(&h->lock);
        h->job = NULL;
        pthread_cond_signal(&h->wake);
    }
    pthread_mutex_unlock(&h->lock);
    return NULL;
}

static void helper_free(helper *h)
{
    pthread_cond_destroy(&h->wake);
    pthread_mutex_destroy(&h->lock);
    free(h);
}

/* A new helper, started; NULL when it cannot be. */
static helper *helper_start(void)
{
    helper *h = calloc(1, sizeof *h);
    if (!h)
        return NULL;
    if (pthread_mutex_init(&h->lock, NULL) != 0) {
        free(h);
        return NULL;
    }
    if (pthread_cond_init(&h->wake, NULL) != 0) {
        pthread_mutex_destroy(&h->lock);
        free(h);
        return NULL;
    }
    if (pthread_create(&h->tid, NULL, helper_main, h) != 0) {
        helper_free(h);
        return NULL;
    }
    return h;
}

/* Tell helper h to run slice j, or with j NULL to end. */
static void helper_tell(helper *h, const slice_job *j)
{
    pthread_mutex_lock(&h->lock);
    if (j)
        h->job = j;
    else
        h->retire = 1;
    pthread_cond_signal(&h->wake);
    pthread_mutex_unlock(&h->lock);
}

/* An idle helper given slice j to run, or NULL (j is then run here). */
static helper *helper_run(const slice_job *j)
{
    pthread_mutex_lock(&idle_lock);
    helper *h = idle_helpers;
    if (h)
        idle_helpers = h->next;
    pthread_mutex_unlock(&idle_lock);
    if (!h && !(h = helper_start()))
        return NULL;
    helper_tell(h, j);
    return h;
}

/* The end of h's slice waited for; h back on the idle list. */
static void helper_wait(helper *h)
{
    pthread_mutex_lock(&h->lock);
    while (h->job)
        pthread_cond_wait(&h->wake, &h->lock);
    pthread_mutex_unlock(&h->lock);
    pthread_mutex_lock(&idle_lock);
    h->next = idle_helpers;
    idle_helpers = h;
    pthread_mutex_unlock(&idle_lock);
}

void lam_parallel_retire_helpers(void)
{
    pthread_mutex_lock(&idle_lock);
    helper *h = idle_helpers;
    idle_helpers = NULL;
    pthread_mutex_unlock(&idle_lock);
    while (h) {
        helper *next = h->next;
        helper_tell(h, NULL);
        pthread_join(h->tid, NULL);
        helper_free(h);
        h = next;
    }
}

size_t lam_parallel_slices(size_t count, size_t threads)
{
    if (threads > LAM_MAX_THREADS)
        threads = LAM_MAX_THREADS;
    if (threads > count)
        threads = count;
    return threads ? threads : 1;
}

void lam_parallel_for(size_t count, size_t threads, lam_slice_fn fn, void *ctx)
{
    threads = lam_parallel_slices(count, threads);
    if (threads <= 1) {
        if (count)
            fn(0, count, 0, ctx);
        return;
    }
    slice_job jobs[LAM_MAX_THREADS];
    helper *help[LAM_MAX_THREADS];
    for (size_t t = 0; t < threads; t++) {
        jobs[t] = (slice_job){count * t / threads, count * (t + 1) / threads, t, fn, ctx};
        help[t] = t > 0 ? helper_run(&jobs[t]) : NULL;
    }
    for (size_t t = 0; t < threads; t++)
        if (!help[t])
            run_slice(&jobs[t]);
    for (size_t t = 1; t < threads; t++)
        if (help[t])
            helper_wait(help[t]);
}

typedef struct each_job {
    atomic_size_t next; /* the next item not yet taken */
    size_t count;
    lam_item_fn fn;               /* one of these two */
    lam_worker_item_fn worker_fn;
    void *ctx;
} each_job;

static void each_worker(size_t begin, size_t end, size_t slice, void *vjob)
{
    (void)begin, (void)end;
    each_job *j = vjob;
    for (size_t i; (i = atomic_fetch_add(&j->next, 1)) < j->count;) {
        if (j->worker_fn)
            j->worker_fn(i, slice, j->ctx);
        else
            j->fn(i, j->ctx);
    }
}

/* Items handed out one at a time to lam_parallel_slices(count, threads)
 * workers (worker w runs as slice w of lam_parallel_for). */
static void run_each(each_job *j, size_t threads)
{
    atomic_init(&j->next, 0);
    threads = lam_parallel_slices(j->count, threads);
    lam_parallel_for(threads, threads, each_worker, j);
}

void lam_parallel_each(size_t count, size_t threads, lam_item_fn fn, void *ctx)
{
    each_job j = {.count = count, .fn = fn, .ctx = ctx};
    run_each(&j, threads);
}

void lam_parallel_each_worker(size_t count, size_t threads, lam_worker_item_fn fn, void *ctx)
{
    each_job j = {.count = count, .worker_fn = fn, .ctx = ctx};
    run_each(&j, threads);
}

size_t lam_cpu_count(void)
{
    long n = sysconf(_SC_NPROCESSORS_ONLN);
    return n > 0 ? (size_t)n : 1;
}

static size_t default_threads; /* 0: all cores; set before workers start */

void lam_parallel_set_default(size_t threads)
{
    default_threads = threads;
}

size_t lam_parallel_default(void)
{
    return default_threads ? default_threads : lam_cpu_count();
}
