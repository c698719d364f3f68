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

typedef void (*lam_slice_fn)(size_t begin, size_t end, size_t slice, void *ctx);

void lam_parallel_for(size_t count, size_t threads, lam_slice_fn fn, void *ctx);

/* Number of online processors (at least 1). */
size_t lam_cpu_count(void);

/* Threads for passes that take no explicit count (image conversion, PNG
 * compression): set once by the program (0 = all cores, the default). */
void lam_parallel_set_default(size_t threads);
size_t lam_parallel_default(void);

#endif
