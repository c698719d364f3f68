/* test_rowpipe.c - decoding beside converting (src/rowpipe.h): every strip
 * decoded once and in order, every row converted once, for any strip
 * size and thread count; a converter slower than the decoder makes the
 * calling thread convert too, a decoder slower than the converters leaves
 * the converting to the helpers; a failed decode stops it with every
 * helper done; no memory for a strip is an error before anything is
 * decoded. Then the loaders that use it: JPEG and PNG files (8-bit RGB,
 * grey, 16-bit) load to the same planes, clip mask and clipped count on
 * 1, 2 and 3 threads. */
#include "check.h"
#include "rowpipe.h"
#include "lamina/image.h"
#include "lamina/jpeg.h"
#include "lamina/parallel.h"
#include "lamina/png.h"

#include <pthread.h>
#include <stdatomic.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#define MAX_ROWS 1200

/* A fake decoder and converter over 'height' rows of ROW_BYTES bytes:
 * decode writes each row's number into its bytes; convert checks them and
 * counts the row. */
#define ROW_BYTES 8
typedef struct fake {
    size_t height, next_y0, fail_at; /* fail_at: decode fails at this strip start */
    int order_ok, own_memory;
    atomic_int content_ok;
    atomic_int converted[MAX_ROWS];
    atomic_int converting, on_caller, off_caller, after_failure;
    int failed;
    long decode_ns, convert_ns; /* time each call takes */
    pthread_t caller;
    uint8_t own[MAX_ROWS * ROW_BYTES]; /* the decoder's own memory */
} fake;

static void pause_ns(long ns)
{
    if (ns > 0) {
        struct timespec t = {0, ns};
        nanosleep(&t, NULL);
    }
}

static const uint8_t *fake_decode(void *ctx, size_t y0, size_t rows, uint8_t *buf)
{
    fake *f = ctx;
    f->order_ok &= y0 == f->next_y0 && !f->failed;
    f->next_y0 = y0 + rows;
    if (y0 == f->fail_at) {
        f->failed = 1;
        return NULL;
    }
    uint8_t *out = f->own_memory ? f->own + y0 * ROW_BYTES : buf;
    for (size_t i = 0; i < rows; i++)
        memset(out + i * ROW_BYTES, (int)((y0 + i) & 0xff), ROW_BYTES);
    pause_ns(f->decode_ns);
    return out;
}

static size_t fake_convert(void *ctx, size_t y0, size_t rows, const uint8_t *codes)
{
    fake *f = ctx;
    atomic_fetch_add(&f->converting, 1);
    if (pthread_equal(pthread_self(), f->caller))
        atomic_fetch_add(&f->on_caller, 1);
    else
        atomic_fetch_add(&f->off_caller, 1);
    int ok = !f->own_memory || codes == f->own + y0 * ROW_BYTES;
    for (size_t i = 0; i < rows; i++) {
        for (size_t b = 0; b < ROW_BYTES; b++)
            ok &= codes[i * ROW_BYTES + b] == (uint8_t)((y0 + i) & 0xff);
        atomic_fetch_add(&f->converted[y0 + i], 1);
    }
    if (!ok)
        atomic_store(&f->content_ok, 0);
    pause_ns(f->convert_ns);
    atomic_fetch_sub(&f->converting, 1);
    return rows;
}

static fake *fake_new(size_t height)
{
    fake *f = calloc(1, sizeof *f);
    f->height = height;
    f->fail_at = (size_t)-1;
    f->order_ok = 1;
    atomic_store(&f->content_ok, 1);
    f->caller = pthread_self();
    return f;
}

static int each_row_once(fake *f)
{
    int ok = 1;
    for (size_t y = 0; y < f->height; y++)
        ok &= atomic_load(&f->converted[y]) == 1;
    return ok;
}

static void every_shape(void)
{
    size_t heights[] = {0, 1, 31, 32, 33, 100, 1000};
    size_t strips[] = {1, 7, 32, 4000};
    size_t threads[] = {1, 2, 3, 8};
    int all = 1;
    for (size_t hi = 0; hi < sizeof heights / sizeof *heights; hi++)
        for (size_t si = 0; si < sizeof strips / sizeof *strips; si++)
            for (size_t ti = 0; ti < sizeof threads / sizeof *threads; ti++)
                for (int own = 0; own < 2; own++) {
                    fake *f = fake_new(heights[hi]);
                    f->own_memory = own;
                    lam__rowpipe_ops ops = {fake_decode, fake_convert, f};
                    size_t clipped = 99;
                    int r = lam__rowpipe_run(f->height, strips[si], ROW_BYTES, threads[ti], &ops,
                                             &clipped);
                    int ok = r == 0 && clipped == f->height && f->order_ok &&
                             atomic_load(&f->content_ok) && each_row_once(f) &&
                             f->next_y0 == f->height;
                    if (!ok)
                        check_true(0,
                                   "height %zu, strips of %zu, %zu threads, %s memory: "
                                   "status %d, clipped %zu, order %d, content %d",
                                   f->height, strips[si], threads[ti], own ? "own" : "ring", r,
                                   clipped, f->order_ok, atomic_load(&f->content_ok));
                    all &= ok;
                    free(f);
                }
    check_true(all, "every strip decoded once in order and every row converted once, for "
                    "heights 0-1000, strips of 1-4000 rows, 1-8 threads, ring or own memory");
}

/* Who converts depends on which half is slower. */
static void who_converts(void)
{
    fake *f = fake_new(400);
    f->convert_ns = 1000000; /* 1 ms a strip, decoding at once: the ring fills */
    lam__rowpipe_ops ops = {fake_decode, fake_convert, f};
    size_t clipped = 0;
    lam__rowpipe_run(f->height, 8, ROW_BYTES, 2, &ops, &clipped);
    check_true(each_row_once(f), "slow converter: every row converted once");
    check_true(atomic_load(&f->on_caller) > 0 && atomic_load(&f->off_caller) > 0,
               "slow converter: both threads convert (calling thread %d strips, helper %d)",
               atomic_load(&f->on_caller), atomic_load(&f->off_caller));
    free(f);
    f = fake_new(400);
    f->decode_ns = 1000000; /* 1 ms a strip of decoding, converting at once */
    ops.ctx = f;
    lam__rowpipe_run(f->height, 8, ROW_BYTES, 2, &ops, &clipped);
    check_true(atomic_load(&f->off_caller) > atomic_load(&f->on_caller),
               "slow decoder: the helper converts most strips (helper %d, calling thread %d)",
               atomic_load(&f->off_caller), atomic_load(&f->on_caller));
    free(f);
}

static void failure(void)
{
    for (size_t threads = 1; threads <= 3; threads++) {
        fake *f = fake_new(500);
        f->fail_at = 240; /* the 31st strip of 8 rows */
        f->convert_ns = 200000;
        lam__rowpipe_ops ops = {fake_decode, fake_convert, f};
        size_t clipped = 0;
        int r = lam__rowpipe_run(f->height, 8, ROW_BYTES, threads, &ops, &clipped);
        check_int(r, -1, "%zu threads: a failed decode is reported", threads);
        check_int(atomic_load(&f->converting), 0,
                  "%zu threads: no conversion runs after the "
                  "call returns",
                  threads);
        int later = 0, before = 0;
        for (size_t y = 0; y < f->height; y++) {
            later += y >= 240 && atomic_load(&f->converted[y]);
            before += y < 240 && atomic_load(&f->converted[y]) > 1;
        }
        check_true(f->order_ok && f->next_y0 == 248 && later == 0 && before == 0,
                   "%zu threads: nothing decoded after the failure, no row past it converted, "
                   "none twice",
                   threads);
        int snapshot = atomic_load(&f->on_caller) + atomic_load(&f->off_caller);
        pause_ns(20000000);
        check_int(atomic_load(&f->on_caller) + atomic_load(&f->off_caller), snapshot,
                  "%zu threads: every helper was done when the call returned", threads);
        free(f);
    }
}

/* Not under AddressSanitizer, which aborts on a request above its
 * maximum (1 TiB) instead of returning NULL. */
static void no_memory(void)
{
#ifdef __SANITIZE_ADDRESS__
    return;
#endif
    fake *f = fake_new(10);
    lam__rowpipe_ops ops = {fake_decode, fake_convert, f};
    size_t clipped = 0;
    int r = lam__rowpipe_run(f->height, 4, SIZE_MAX / 8, 2, &ops, &clipped);
    check_int(r, -2, "a strip larger than memory is refused");
    check_int((long long)f->next_y0, 0, "before anything is decoded");
    free(f);
}

/* ---- the loaders on 1, 2 and 3 threads ---- */

static int same_image(const lam_image *a, const lam_image *b)
{
    size_t n = a->width * a->height;
    int ok = a->width == b->width && a->height == b->height &&
             a->clipped_count == b->clipped_count && a->channels == b->channels;
    for (int c = 0; ok && c < 3; c++)
        ok = !memcmp(a->plane[c], b->plane[c], n * sizeof *a->plane[c]);
    ok = ok && !memcmp(a->clip_bits, b->clip_bits, a->clip_stride * a->height);
    ok = ok && (!a->display8) == (!b->display8) &&
         (!a->display8 || !memcmp(a->display8, b->display8, n * 3));
    return ok;
}

/* A picture with structure, noise and saturated pixels. */
static void draw(uint8_t *rgb, size_t w, size_t h, int chans)
{
    unsigned s = 12345;
    for (size_t y = 0; y < h; y++)
        for (size_t x = 0; x < w; x++)
            for (int c = 0; c < chans; c++) {
                s = s * 1103515245u + 12345u;
                int v = (int)((x * 3 + y * 2 + (size_t)c * 40) % 256) + (int)(s >> 28) - 8;
                if ((x / 16 + y / 16) % 7 == 0)
                    v = 255;
                rgb[(y * w + x) * (size_t)chans + (size_t)c] = (uint8_t)(v < 0     ? 0
                                                                         : v > 255 ? 255
                                                                                   : v);
            }
}

static void load_threads(const char *path, const char *what, int keep8)
{
    lam_image *ref = NULL;
    lam_load_options o = lam_load_options_default();
    o.keep_display8 = keep8;
    for (size_t t = 1; t <= 3; t++) {
        lam_error err;
        lam_error_clear(&err);
        lam_parallel_set_default(t);
        lam_image *img = NULL;
        if (check_int(lam_image_load(path, &o, &img, &err), LAM_OK, "%s loads on %zu threads: %s",
                      what, t, err.message) != 1)
            continue;
        if (!ref) {
            ref = img;
            check_true(ref->clipped_count > 0, "%s: %zu saturated pixels", what,
                       ref->clipped_count);
            continue;
        }
        check_true(same_image(ref, img),
                   "%s%s: planes, clip mask, count%s on %zu threads "
                   "equal to 1 thread's",
                   what, keep8 ? " (8-bit kept)" : "", keep8 ? ", 8-bit copy" : "", t);
        lam_image_free(img);
    }
    lam_parallel_set_default(0);
    lam_image_free(ref);
}

/* A grey JPEG, by cjpeg (Debian libjpeg-turbo-progs, as test_image uses):
 * lamina writes none. */
static void grey_jpeg(const uint8_t *grey, size_t w, size_t h)
{
    char pgm[512], jpg[512], cmd[1200];
    check_path(pgm, sizeof pgm, check_tmpdir(), "grey.pgm");
    check_path(jpg, sizeof jpg, check_tmpdir(), "grey.jpg");
    FILE *fp = fopen(pgm, "wb");
    if (fp) {
        fprintf(fp, "P5\n%zu %zu\n255\n", w, h);
        fwrite(grey, 1, w * h, fp);
        fclose(fp);
    }
    snprintf(cmd, sizeof cmd, "cjpeg -grayscale -quality 95 %s > %s", pgm, jpg);
    if (check_int(fp && system(cmd) == 0, 1, "cjpeg wrote a grey JPEG") == 1)
        load_threads(jpg, "grey JPEG", 0);
}

static void loaders(void)
{
    /* odd sizes (a last short strip, clip bytes part-filled), each file
     * above the size a load pipes (256 KiB decoded: lam__rowpipe_threads) */
    size_t w = 1201, h = 403;
    uint8_t *rgb = malloc(w * h * 3), *grey = malloc(w * h);
    uint16_t *px16 = malloc(w * h * 3 * sizeof *px16);
    draw(rgb, w, h, 3);
    draw(grey, w, h, 1);
    for (size_t i = 0; i < w * h * 3; i++)
        px16[i] = (uint16_t)(rgb[i] * 257u - (i % 5));
    char path[512];
    lam_error err;
    lam_error_clear(&err);
    const char *dir = check_tmpdir();
    check_int(lam_png_save_rgb8(check_path(path, sizeof path, dir, "rgb.png"), rgb, w, h, 3, &err),
              LAM_OK, "wrote an 8-bit RGB PNG");
    load_threads(path, "8-bit RGB PNG", 0);
    load_threads(path, "8-bit RGB PNG", 1);
    check_int(lam_png_save_grey8(check_path(path, sizeof path, dir, "grey.png"), grey, w, h, &err),
              LAM_OK, "wrote an 8-bit grey PNG");
    load_threads(path, "8-bit grey PNG", 1);
    check_int(lam_png_save_16(check_path(path, sizeof path, dir, "rgb16.png"), px16, w, h, 3, &err),
              LAM_OK, "wrote a 16-bit RGB PNG");
    load_threads(path, "16-bit RGB PNG", 0);
    check_int(
        lam_jpeg_save_rgb8(check_path(path, sizeof path, dir, "rgb.jpg"), rgb, w, h, 95, &err),
        LAM_OK, "wrote a JPEG");
    load_threads(path, "JPEG", 0);
    load_threads(path, "JPEG", 1);
    grey_jpeg(grey, w, h);
    free(rgb);
    free(grey);
    free(px16);
}

int main(void)
{
    check_begin("test_rowpipe");
    every_shape();
    who_converts();
    failure();
    no_memory();
    loaders();
    return check_summary();
}
