/* rowpipe.c - a decoder's rows converted beside it (rowpipe.h). */
#include "rowpipe.h"
#include "lamina/parallel.h"

#include <pthread.h>
#include <stdlib.h>

#define RING_MAX 8 /* strips in flight at most */

typedef enum strip_state {
    STRIP_FREE,      /* the buffer holds nothing */
    STRIP_DECODING,  /* the calling thread decodes into it */
    STRIP_DECODED,   /* waiting for a converter */
    STRIP_CONVERTING /* some thread converts it */
} strip_state;

typedef struct strip {
    uint8_t *buf;
    const uint8_t *codes; /* where decode put the rows */
    size_t y0, rows, seq;
    strip_state state;
} strip;

typedef struct pipe {
    const lam__rowpipe_ops *ops;
    size_t height, strip_rows;
    strip ring[RING_MAX];
    size_t slots;
    pthread_mutex_t lock;
    pthread_cond_t changed; /* any strip's state, or the end of decoding */
    size_t clipped;
    int finished, failed;
} pipe;

/* A strip in the given state (for decoded ones: the oldest), or NULL. */
static strip *find(pipe *p, strip_state state)
{
    strip *best = NULL;
    for (size_t i = 0; i < p->slots; i++)
        if (p->ring[i].state == state && (!best || p->ring[i].seq < best->seq))
            best = &p->ring[i];
    return best;
}

/* Convert decoded strip s here, the lock released meanwhile (the lock is
 * held on entry and on return). After a failed decode nothing more is
 * converted: the image is discarded. */
static void convert(pipe *p, strip *s)
{
    int skip = p->failed;
    s->state = STRIP_CONVERTING;
    pthread_mutex_unlock(&p->lock);
    size_t clipped = skip ? 0 : p->ops->convert(p->ops->ctx, s->y0, s->rows, s->codes);
    pthread_mutex_lock(&p->lock);
    p->clipped += clipped;
    s->state = STRIP_FREE;
    pthread_cond_broadcast(&p->changed);
}

/* Convert decoded strips until none is left and decoding has ended. */
static void help(pipe *p)
{
    for (;;) {
        strip *s = find(p, STRIP_DECODED);
        if (s)
            convert(p, s);
        else if (p->finished)
            return;
        else
            pthread_cond_wait(&p->changed, &p->lock);
    }
}

/* A strip to decode into: a free one; else the oldest decoded one,
 * converted here first rather than waiting for a helper; else (all of
 * them being converted) the first a helper frees. */
static strip *strip_to_fill(pipe *p)
{
    for (;;) {
        strip *s = find(p, STRIP_FREE);
        if (s)
            return s;
        if ((s = find(p, STRIP_DECODED)))
            convert(p, s);
        else
            pthread_cond_wait(&p->changed, &p->lock);
    }
}

/* The calling thread: every strip decoded in order, then a helper's part. */
static void produce(pipe *p)
{
    size_t seq = 0;
    for (size_t y0 = 0; y0 < p->height; y0 += p->strip_rows) {
        strip *s = strip_to_fill(p);
        size_t rows = p->height - y0 < p->strip_rows ? p->height - y0 : p->strip_rows;
        s->state = STRIP_DECODING;
        pthread_mutex_unlock(&p->lock);
        const uint8_t *codes = p->ops->decode(p->ops->ctx, y0, rows, s->buf);
        pthread_mutex_lock(&p->lock);
        if (!codes) {
            s->state = STRIP_FREE;
            p->failed = 1;
            break;
        }
        *s = (strip){s->buf, codes, y0, rows, seq++, STRIP_DECODED};
        pthread_cond_broadcast(&p->changed);
    }
    p->finished = 1;
    pthread_cond_broadcast(&p->changed);
    help(p);
}

/* Worker 0 (the calling thread, lam_parallel_for) decodes; the others
 * convert. A worker that could not be started runs after worker 0, when
 * decoding has ended: it finds nothing left, so nothing waits on it. */
static void worker(size_t begin, size_t end, size_t slice, void *vp)
{
    (void)end;
    (void)slice;
    pipe *p = vp;
    pthread_mutex_lock(&p->lock);
    if (begin == 0)
        produce(p);
    else
        help(p);
    pthread_mutex_unlock(&p->lock);
}

#define STRIP_ROWS 32
#define STRIP_MIN_BYTES 65536

size_t lam__rowpipe_strip_rows(size_t row_bytes)
{
    size_t rows = row_bytes ? (STRIP_MIN_BYTES + row_bytes - 1) / row_bytes : STRIP_ROWS;
    return rows > STRIP_ROWS ? rows : STRIP_ROWS;
}

#define PIPE_MIN_BYTES ((size_t)256 << 10)

size_t lam__rowpipe_threads(size_t height, size_t row_bytes)
{
    int small = row_bytes && height < PIPE_MIN_BYTES / row_bytes;
    return small ? 1 : lam_parallel_default();
}

int lam__rowpipe_run(size_t height, size_t strip_rows, size_t row_bytes, size_t threads,
                     const lam__rowpipe_ops *ops, size_t *clipped)
{
    *clipped = 0;
    if (strip_rows < 1)
        strip_rows = 1;
    size_t strips = (height + strip_rows - 1) / strip_rows;
    size_t workers = lam_parallel_slices(strips, threads);
    pipe *p = calloc(1, sizeof *p);
    if (!p)
        return -2;
    *p = (pipe){.ops = ops, .height = height, .strip_rows = strip_rows};
    /* two strips in flight per worker; one thread alone needs one */
    size_t want = workers == 1 ? 1 : 2 * workers < RING_MAX ? 2 * workers : RING_MAX;
    if (want > strips) /* no more buffers than strips (a picture of one strip: one) */
        want = strips ? strips : 1;
    while (p->slots < want && (p->ring[p->slots].buf = malloc(strip_rows * row_bytes)))
        p->slots++;
    int status = p->slots ? 0 : -2;
    if (p->slots) {
        pthread_mutex_init(&p->lock, NULL);
        pthread_cond_init(&p->changed, NULL);
        lam_parallel_for(workers, workers, worker, p);
        pthread_cond_destroy(&p->changed);
        pthread_mutex_destroy(&p->lock);
        status = p->failed ? -1 : 0;
        *clipped = p->clipped;
    }
    for (size_t i = 0; i < p->slots; i++)
        free(p->ring[i].buf);
    free(p);
    return status;
}
