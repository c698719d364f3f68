/* test_parallel.c - the fork-join loops (lamina/parallel.h): every index
 * visited exactly once, slices contiguous and numbered below
 * lam_parallel_slices, and no worker running two items at once (its
 * scratch would be shared); loops inside loops; the helper threads kept
 * from one loop to the next, and ended by lam_parallel_retire_helpers. */
#include "check.h"
#include "lamina/parallel.h"

#include <stdatomic.h>
#include <stdlib.h>

#define ITEMS 5000

typedef struct visits {
    atomic_int seen[ITEMS];
    atomic_int busy[LAM_MAX_THREADS]; /* per worker: inside an item */
    atomic_int overlap, bad_worker;
    size_t workers;
} visits;

static void spin(size_t item)
{
    volatile double x = 0; /* unequal items, as the callers' are */
    for (size_t k = 0; k < (item % 7) * 200; k++)
        x += (double)k;
}

static void on_slice(size_t begin, size_t end, size_t slice, void *ctx)
{
    visits *v = ctx;
    if (slice >= v->workers)
        atomic_fetch_add(&v->bad_worker, 1);
    for (size_t i = begin; i < end; i++)
        atomic_fetch_add(&v->seen[i], 1);
}

static void on_item(size_t item, void *ctx)
{
    visits *v = ctx;
    spin(item);
    atomic_fetch_add(&v->seen[item], 1);
}

static void on_worker_item(size_t item, size_t worker, void *ctx)
{
    visits *v = ctx;
    if (worker >= v->workers) {
        atomic_fetch_add(&v->bad_worker, 1);
        return;
    }
    if (atomic_exchange(&v->busy[worker], 1))
        atomic_fetch_add(&v->overlap, 1);
    spin(item);
    atomic_fetch_add(&v->seen[item], 1);
    atomic_store(&v->busy[worker], 0);
}

/* How many of items 0..n-1 were seen other than once (and any beyond). */
static size_t miscounted(visits *v, size_t n)
{
    size_t bad = 0;
    for (size_t i = 0; i < ITEMS; i++)
        bad += (size_t)(atomic_load(&v->seen[i]) != (i < n ? 1 : 0));
    return bad;
}

static visits *fresh(size_t count, size_t threads)
{
    visits *v = calloc(1, sizeof *v);
    if (v)
        v->workers = lam_parallel_slices(count, threads);
    return v;
}

/* A loop inside each slice of a loop: every inner index once. */
static void on_outer_slice(size_t begin, size_t end, size_t slice, void *ctx)
{
    visits *v = ctx;
    (void)slice;
    for (size_t i = begin; i < end; i++) {
        visits *inner = fresh(50, 2);
        if (!inner) {
            atomic_fetch_add(&v->bad_worker, 1);
            continue;
        }
        lam_parallel_for(50, 2, on_slice, inner);
        if (!miscounted(inner, 50) && !inner->bad_worker)
            atomic_fetch_add(&v->seen[i], 1);
        free(inner);
    }
}

/* Slice 1 of a two-slice loop marks its thread; the mark it found (0:
 * a thread that had run no such slice before). */
static _Thread_local int thread_mark;
static void mark_slice(size_t begin, size_t end, size_t slice, void *ctx)
{
    (void)begin, (void)end;
    if (slice == 1) {
        *(int *)ctx = thread_mark;
        thread_mark = 1;
    }
}

static int found_mark(void)
{
    int found = -1;
    lam_parallel_for(2, 2, mark_slice, &found);
    return found;
}

static void helpers_kept(void)
{
    visits *v = fresh(40, 2);
    if (!check_true(v != NULL, "allocated"))
        return;
    lam_parallel_for(40, 2, on_outer_slice, v);
    check_true(!miscounted(v, 40) && !v->bad_worker,
               "a loop of two slices inside each slice of a loop: every index once");
    free(v);
    lam_parallel_retire_helpers();
    int first = found_mark(), second = found_mark();
    check_true(first == 0 && second == 1,
               "the second loop's slice runs on the helper the first one left (marks %d, %d)",
               first, second);
    lam_parallel_retire_helpers();
    int after = found_mark();
    check_true(after == 0, "after lam_parallel_retire_helpers a loop starts a new helper (%d)",
               after);
}

int main(void)
{
    check_begin("test_parallel");
    const size_t counts[] = {0, 1, 2, 3, 17, ITEMS}, threads[] = {1, 2, 3, 8};
    for (size_t a = 0; a < sizeof counts / sizeof *counts; a++)
        for (size_t b = 0; b < sizeof threads / sizeof *threads; b++) {
            size_t n = counts[a], t = threads[b];
            visits *v = fresh(n, t);
            if (!check_true(v != NULL, "allocated"))
                return check_summary();
            lam_parallel_for(n, t, on_slice, v);
            check_true(!miscounted(v, n) && !v->bad_worker,
                       "lam_parallel_for: %zu items on %zu threads, each once", n, t);
            free(v);
            v = fresh(n, t);
            lam_parallel_each(n, t, on_item, v);
            check_true(v && !miscounted(v, n), "lam_parallel_each: %zu items on %zu threads, each once",
                       n, t);
            free(v);
            v = fresh(n, t);
            lam_parallel_each_worker(n, t, on_worker_item, v);
            check_true(v && !miscounted(v, n) && !v->bad_worker && !v->overlap,
                       "lam_parallel_each_worker: %zu items on %zu threads, each once, workers "
                       "below %zu, none running two at once",
                       n, t, v ? v->workers : 0);
            free(v);
        }
    helpers_kept();
    return check_summary();
}
