/* bench_fresh_pages.c - what first touching memory costs on this machine:
 * MB megabytes from lam_big_malloc (huge-page advice, as the analysis'
 * planes) written one byte a page on THREADS threads, the milliseconds
 * printed. An analysis holds about 12 bytes a pixel at once (the float
 * planes, later the contrast map and the segmentation's maps in their
 * memory), so every run touches that much fresh memory; after an idle
 * pause this machine's host backs it slowly, and this is that cost alone,
 * the floor under a single image's time that no order of work removes.
 * Usage: bench_fresh_pages MB THREADS */
#include "lamina/bigalloc.h"
#include "lamina/clock.h"

#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>

typedef struct part {
    char *p;
    size_t n;
} part;

static void *touch(void *arg)
{
    part *t = arg;
    for (size_t i = 0; i < t->n; i += 4096)
        t->p[i] = 1;
    return NULL;
}

int main(int argc, char **argv)
{
    if (argc != 3 || atol(argv[1]) < 1 || atoi(argv[2]) < 1 || atoi(argv[2]) > 16) {
        fprintf(stderr, "usage: bench_fresh_pages MB THREADS (1-16)\n");
        return 2;
    }
    size_t n = (size_t)atol(argv[1]) << 20;
    int threads = atoi(argv[2]);
    char *p = lam_big_malloc(n);
    if (!p) {
        fprintf(stderr, "bench_fresh_pages: cannot allocate %s MB\n", argv[1]);
        return 1;
    }
    pthread_t tid[16];
    part parts[16];
    double t0 = lam_clock_seconds();
    int started[16] = {0};
    for (int i = 0; i < threads; i++) {
        parts[i] = (part){p + n / (size_t)threads * (size_t)i, n / (size_t)threads};
        started[i] = pthread_create(&tid[i], NULL, touch, &parts[i]) == 0;
        if (!started[i])
            touch(&parts[i]);
    }
    for (int i = 0; i < threads; i++)
        if (started[i])
            pthread_join(tid[i], NULL);
    printf("%.1f\n", (lam_clock_seconds() - t0) * 1e3);
    free(p);
    return 0;
}
