/*
 * lamina/parallel.h - split a loop over rows (or any index range) across
 * threads. Each worker gets a contiguous [begin, end) slice; the call
 * returns when all are done. With threads <= 1, or when a thread cannot be
 * started, the slices run on the calling thread: results never depend on
 * the thread count (each slice writes only its own outputs).
 */
#ifndef LAMINA_PARALLEL_H
#define LAMINA_PARALLEL_H

#include <stddef.h>

#define LAM_MAX_THREADS 64

/* Work on indices [begin, end); 'slice' numbers the slice (0..threads-1)
 * for per-slice scratch space in ctx. */
typedef void (*lam_slice_fn)(size_t begin, size_t end, size_t slice, void *ctx);

/* How many slices lam_parallel_for makes of count items on 'threads'
 * threads: min(threads, count, LAM_MAX_THREADS), at least 1 (for sizing
 * per-slice scratch before the call). */
size_t lam_parallel_slices(size_t count, size_t threads);

/* Run fn over [0, count) in min(threads, count, LAM_MAX_THREADS) slices of
 * near-equal size (slice t: [count t / n, count (t + 1) / n) of n; the same
 * count and threads give the same slices, so two loops can share per-slice
 * state), slice 0 on the calling thread; returns when all are
 * done. No errors: a thread that cannot be started runs its slice here. */
void lam_parallel_for(size_t count, size_t threads, lam_slice_fn fn, void *ctx);

/* End the helper threads that lam_parallel_for keeps between loops (the
 * idle ones; a later loop starts new ones), so that their thread-local
 * data is released: a Pango font map, the quadrature rules. For an exit
 * under a leak checker, before the font caches are reset
 * (lam_draw_shutdown calls it). */
void lam_parallel_retire_helpers(void);

/* Work on one item 'item' of a list. */
typedef void (*lam_item_fn)(size_t item, void *ctx);

/* Run fn on every item of [0, count), handed out one at a time to
 * min(threads, count, LAM_MAX_THREADS) workers: for items of very unequal
 * cost (regions of a few pixels and of millions), which equal slices would
 * leave on one thread. Each item must write only its own outputs. */
void lam_parallel_each(size_t count, size_t threads, lam_item_fn fn, void *ctx);

/* Work on one item of a list on worker 'worker' (0..workers-1, where
 * workers = lam_parallel_slices(count, threads); worker 0 is the calling
 * thread): for state that each worker keeps from item to item. */
typedef void (*lam_worker_item_fn)(size_t item, size_t worker, void *ctx);

/* As lam_parallel_each, telling each call which worker runs it. Which
 * worker takes which item varies from run to run, so an item's result
 * must not depend on what its worker did before. */
void lam_parallel_each_worker(size_t count, size_t threads, lam_worker_item_fn fn, void *ctx);

/* Number of online processors (at least 1). */
size_t lam_cpu_count(void);

/* Threads for passes that take no explicit count (image conversion, PNG
 * compression): set once by the program (0 = all cores, the default). */
void lam_parallel_set_default(size_t threads);

/* The count set by lam_parallel_set_default, or lam_cpu_count() when 0. */
size_t lam_parallel_default(void);

#endif
