/* parallel.c - a fork-join loop over index slices with POSIX threads. */
#include "lamina/parallel.h"

#include <pthread.h>
#include <stdatomic.h>
#include <unistd.h>

typedef struct slice_job {
    size_t begin, end, slice;
    lam_slice_fn fn;
    void *ctx;
} slice_job;

static void *run_slice(void *arg)
{
    slice_job *j = arg;
    j->fn(j->begin, j->end, j->slice, j->ctx);
    return NULL;
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
    pthread_t tid[LAM_MAX_THREADS];
    int started[LAM_MAX_THREADS];
    for (size_t t = 0; t < threads; t++) {
        jobs[t] = (slice_job){count * t / threads, count * (t + 1) / threads, t, fn, ctx};
        started[t] = t > 0 && pthread_create(&tid[t], NULL, run_slice, &jobs[t]) == 0;
    }
    for (size_t t = 0; t < threads; t++)
        if (!started[t])
            run_slice(&jobs[t]);
    for (size_t t = 1; t < threads; t++)
        if (started[t])
            pthread_join(tid[t], NULL);
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
