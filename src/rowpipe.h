/* rowpipe.h - a decoder's rows converted beside it (internal to the image
 * loaders).
 *
 * libjpeg, libpng and libtiff decode on one thread, in order of rows. Converting
 * the decoded codes to linear planes (pixconv.h) is the other half of a
 * load, and it is where the planes' memory is first touched: on this
 * project's machines, where fresh pages cost 1-2 ms a megabyte after an
 * idle pause, the larger half. Decoding a strip and then converting it,
 * in turn, left one core idle in both steps. Here the calling thread
 * decodes strips of rows into a small ring of buffers while helpers
 * convert the strips already decoded; when the ring is full the calling
 * thread converts the oldest strip itself rather than wait, and when the
 * stream ends it converts what is left beside them. So both cores convert
 * (and fault pages in) whenever converting is the slower half.
 *
 * Results do not depend on the thread count or the timing: every strip is
 * decoded once, in order, and converted once, by some thread; a strip's
 * conversion writes only its own rows (the clip mask's rows own whole
 * bytes), and the clipped pixels are whole numbers added in any order.
 *
 * Errors: decode returns NULL when the stream failed (the decoder keeps
 * its own message, and must not jump out of the callback: a longjmp past
 * lam__rowpipe_run would leave helpers converting into freed memory).
 * Then the strips decoded so far are not converted, every helper is done
 * when the call returns, and it returns -1. With memory for one strip
 * only, the calling thread decodes and converts strip by strip; without
 * it, nothing is decoded and the call returns -2. */
#ifndef LAMINA_ROWPIPE_H
#define LAMINA_ROWPIPE_H

#include <stddef.h>
#include <stdint.h>

typedef struct lam__rowpipe_ops {
    /* Rows y0 .. y0 + rows - 1 decoded into buf (rows * row_bytes bytes)
     * or into memory of the decoder's own; returns where they are, NULL
     * when the stream failed. Called on the calling thread, in order. */
    const uint8_t *(*decode)(void *ctx, size_t y0, size_t rows, uint8_t *buf);
    /* Rows y0 .. y0 + rows - 1 converted from the decoded rows at codes;
     * returns their clipped pixels. Any thread, strips at once. */
    size_t (*convert)(void *ctx, size_t y0, size_t rows, const uint8_t *codes);
    void *ctx;
} lam__rowpipe_ops;

/* The rows a strip should hold for rows of row_bytes bytes: 32 (a strip
 * of a 12 MP picture is then ~0.4 MB, so the ring stays in cache), or
 * more for narrow rows, so that a strip holds at least 64 KB: handing a
 * strip over costs microseconds, and a 24-pixel-wide picture in strips of
 * 32 rows (or a TIFF of one-row strips) was mostly handing over. */
size_t lam__rowpipe_strip_rows(size_t row_bytes);

/* The threads a loader gives the pipeline for a picture of 'height' rows
 * of row_bytes bytes: one below 256 KiB (a thread's handing over, tens of
 * microseconds, is then most of a load: the image fuzzer's small pictures
 * ran at a quarter of their rate), else lam_parallel_default(). */
size_t lam__rowpipe_threads(size_t height, size_t row_bytes);

/* Decode and convert 'height' rows of row_bytes bytes each, in strips of
 * strip_rows (>= 1), the conversion on up to 'threads' threads (the
 * calling one included). *clipped: the sum of convert's returns. 0; -1
 * when decode failed; -2 without memory for a strip. */
int lam__rowpipe_run(size_t height, size_t strip_rows, size_t row_bytes, size_t threads,
                     const lam__rowpipe_ops *ops, size_t *clipped);

#endif
