/* jpeg_write.c - JPEG encoding with libjpeg-turbo into atomic output files. */
#include "lamina/jpeg.h"
#include "lamina/outfile.h"
#include "lamina/parallel.h"

#include <stdio.h>
#include <jpeglib.h>
#include <jerror.h>
#include <setjmp.h>
#include <stdlib.h>
#include <string.h>

typedef struct jw_ctx {
    struct jpeg_error_mgr mgr;
    jmp_buf jump;
    char msg[JMSG_LENGTH_MAX];
} jw_ctx;

static void on_jw_error(j_common_ptr cinfo)
{
    jw_ctx *ctx = (jw_ctx *)cinfo->err;
    (*cinfo->err->format_message)(cinfo, ctx->msg);
    longjmp(ctx->jump, 1);
}

/* The pixels as the encoder takes them: rows of 'stride' bytes laid out
 * as 'space' with 'components' bytes a pixel. */
typedef struct jw_source {
    const uint8_t *pixels;
    size_t stride;
    J_COLOR_SPACE space;
    int components;
    int full_chroma; /* 4:4:4: no chroma subsampling */
} jw_source;

/* restart_rows: a restart marker after every row of MCUs (0: none). */
static void compress_rows(struct jpeg_compress_struct *c, const jw_source *s, size_t width,
                          size_t height, int quality, int restart_rows)
{
    c->image_width = (JDIMENSION)width;
    c->image_height = (JDIMENSION)height;
    c->input_components = s->components;
    c->in_color_space = s->space;
    jpeg_set_defaults(c);
    jpeg_set_quality(c, quality < 1 ? 1 : (quality > 100 ? 100 : quality), TRUE);
    if (s->full_chroma)
        for (int k = 0; k < c->num_components; k++)
            c->comp_info[k].h_samp_factor = c->comp_info[k].v_samp_factor = 1;
    c->restart_in_rows = restart_rows;
    jpeg_start_compress(c, TRUE);
    while (c->next_scanline < c->image_height) {
        JSAMPROW row = (JSAMPROW)(s->pixels + (size_t)c->next_scanline * s->stride);
        jpeg_write_scanlines(c, &row, 1);
    }
    jpeg_finish_compress(c);
}

/* A size a baseline JPEG's frame header can hold (16-bit, libjpeg's limit). */
static int size_ok(size_t width, size_t height)
{
    return width > 0 && height > 0 && width <= 65500 && height <= 65500;
}

static lam_status save(const char *path, const jw_source *s, size_t width, size_t height,
                       int quality, lam_error *err)
{
    if (!size_ok(width, height))
        return lam_error_set(err, LAM_EINVAL, "cannot write a %zux%zu JPEG", width, height);
    lam_outfile of;
    lam_status st = lam_outfile_open(&of, path, err);
    if (st)
        return st;
    struct jpeg_compress_struct *c = calloc(1, sizeof *c);
    jw_ctx *ctx = calloc(1, sizeof *ctx);
    if (!c || !ctx) {
        free(c);
        free(ctx);
        lam_outfile_abort(&of);
        return lam_error_set(err, LAM_ENOMEM, "cannot create a JPEG encoder");
    }
    c->err = jpeg_std_error(&ctx->mgr);
    ctx->mgr.error_exit = on_jw_error;
    if (setjmp(ctx->jump)) {
        jpeg_destroy_compress(c);
        lam_outfile_abort(&of);
        lam_error_set(err, LAM_EIO, "cannot write JPEG %s: %s", path, ctx->msg);
        free(c);
        free(ctx);
        return LAM_EIO;
    }
    jpeg_create_compress(c);
    jpeg_stdio_dest(c, of.fp);
    compress_rows(c, s, width, height, quality, 0);
    jpeg_destroy_compress(c);
    free(c);
    free(ctx);
    return lam_outfile_commit(&of, err);
}

lam_status lam_jpeg_save_rgb8(const char *path, const uint8_t *rgb, size_t width,
                              size_t height, int quality, lam_error *err)
{
    jw_source s = {rgb, width * 3, JCS_RGB, 3, 0};
    return save(path, &s, width, height, quality, err);
}

/* ---- bands coded side by side (4:4:4 only: a block row is 8 rows) ----
 * A picture of 4:4:4 JPEG is coded in bands of BAND_MCU_ROWS rows of 8 x 8
 * blocks on all cores, each band a JPEG of its own with a restart marker
 * after every row of blocks (so each row starts from fresh DC predictions
 * and ends on a byte boundary), then joined: band 0's headers with the
 * whole height, every band's coded rows and a restart marker between
 * bands (RST0..RST7 in turn through the file), one end marker. The blocks
 * are those of one pass over the picture (bands start on a block row), so
 * a decoder gives the same pixels; the bands do not depend on the thread
 * count, so neither does the file. */
#define BLOCK_ROWS 8         /* rows of one 8 x 8 block row at 4:4:4 */
#define BAND_MCU_ROWS 64     /* block rows a band: 512 pixel rows */

/* One band's coder, its output kept in memory it owns (a destination
 * manager of its own: libjpeg's memory destination frees a buffer it has
 * outgrown that its caller still points to when an error stops it). On
 * the heap, so that nothing setjmp returns to has changed. */
typedef struct band_code {
    struct jpeg_destination_mgr dest; /* first: the callbacks get its address */
    unsigned char *data;
    size_t cap, size;
    size_t scan, end;                 /* the coded rows: data[scan..end) */
    struct jpeg_compress_struct c;
    jw_ctx ctx;
    int failed;
    int no_memory;                    /* the failure was memory, not the coder */
} band_code;

typedef struct band_job {
    const jw_source *s;
    size_t width, height;
    int quality;
    band_code *b;
} band_job;

static void band_init(j_compress_ptr c)
{
    band_code *b = (band_code *)(void *)c->dest;
    b->dest.next_output_byte = b->data;
    b->dest.free_in_buffer = b->cap;
}

static boolean band_grow(j_compress_ptr c)
{
    band_code *b = (band_code *)(void *)c->dest;
    unsigned char *d = realloc(b->data, 2 * b->cap);
    if (!d)
        ERREXIT1(c, JERR_OUT_OF_MEMORY, 0);
    b->data = d;
    b->dest.next_output_byte = d + b->cap;
    b->dest.free_in_buffer = b->cap;
    b->cap *= 2;
    return TRUE;
}

static void band_term(j_compress_ptr c)
{
    band_code *b = (band_code *)(void *)c->dest;
    b->size = b->cap - b->dest.free_in_buffer;
}

/* The band's markers up to its scan: where the coded rows begin and end
 * (before the end marker); 0 when the layout is not libjpeg's. */
static int find_scan(band_code *b)
{
    size_t i = 2;
    while (i + 4 <= b->size && b->data[i] == 0xff) {
        size_t len = (size_t)b->data[i + 2] << 8 | b->data[i + 3];
        if (b->data[i + 1] == 0xda) {
            b->scan = i + 2 + len;
            b->end = b->size - 2;
            return b->size >= 2 && b->scan <= b->end && b->data[b->end] == 0xff &&
                   b->data[b->end + 1] == 0xd9;
        }
        i += 2 + len;
    }
    return 0;
}

static void code_band(size_t k, void *vjob)
{
    band_job *j = vjob;
    band_code *b = &j->b[k];
    size_t y0 = k * BAND_MCU_ROWS * BLOCK_ROWS, rows = BAND_MCU_ROWS * BLOCK_ROWS;
    rows = y0 + rows < j->height ? rows : j->height - y0;
    b->cap = 65536;
    if (!(b->data = malloc(b->cap))) {
        snprintf(b->ctx.msg, sizeof b->ctx.msg, "out of memory");
        b->failed = b->no_memory = 1;
        return;
    }
    b->c.err = jpeg_std_error(&b->ctx.mgr);
    b->ctx.mgr.error_exit = on_jw_error;
    if (setjmp(b->ctx.jump)) { /* a band's buffer that cannot grow, or libjpeg's own */
        b->failed = 1;
        b->no_memory = b->ctx.mgr.msg_code == JERR_OUT_OF_MEMORY;
        jpeg_destroy_compress(&b->c);
        return;
    }
    jpeg_create_compress(&b->c);
    b->dest.init_destination = band_init;
    b->dest.empty_output_buffer = band_grow;
    b->dest.term_destination = band_term;
    b->c.dest = &b->dest;
    jw_source band = *j->s;
    band.pixels += y0 * band.stride;
    compress_rows(&b->c, &band, j->width, rows, j->quality, 1);
    jpeg_destroy_compress(&b->c);
    if (!find_scan(b)) {
        snprintf(b->ctx.msg, sizeof b->ctx.msg, "unexpected JPEG layout");
        b->failed = 1;
    }
}

/* A band starts at a multiple of eight block rows, so its own restart
 * markers (RST0 after its first row, and on) are already the file's. */
_Static_assert(BAND_MCU_ROWS % 8 == 0, "bands begin where RST0 follows");

/* The band's coded rows, then, unless it is the last band, the restart
 * marker that ends its last row ('first': the block rows before it). */
static int put_band(FILE *fp, const band_code *b, size_t first, size_t block_rows, int last)
{
    size_t n = b->end - b->scan;
    unsigned char rst[2] = {0xff, (unsigned char)(0xd0 + (first + block_rows - 1) % 8)};
    return fwrite(b->data + b->scan, 1, n, fp) != n || (!last && fwrite(rst, 1, 2, fp) != 2);
}

/* Band 0's headers with the picture's whole height in its frame header. */
static int put_headers(FILE *fp, band_code *b, size_t height)
{
    for (size_t i = 2; i + 7 < b->scan && b->data[i] == 0xff;
         i += 2 + ((size_t)b->data[i + 2] << 8 | b->data[i + 3]))
        if (b->data[i + 1] == 0xc0 || b->data[i + 1] == 0xc2) {
            b->data[i + 5] = (unsigned char)(height >> 8);
            b->data[i + 6] = (unsigned char)height;
        }
    return fwrite(b->data, 1, b->scan, fp) != b->scan;
}

static lam_status save_bands(const char *path, const jw_source *s, size_t width, size_t height,
                             int quality, lam_error *err)
{
    if (!size_ok(width, height))
        return lam_error_set(err, LAM_EINVAL, "cannot write a %zux%zu JPEG", width, height);
    size_t band_rows = BAND_MCU_ROWS * BLOCK_ROWS, n = (height + band_rows - 1) / band_rows;
    band_job j = {s, width, height, quality, calloc(n, sizeof(band_code))};
    if (!j.b)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate JPEG bands");
    lam_parallel_each(n, lam_parallel_default(), code_band, &j);
    lam_status st = LAM_OK;
    for (size_t k = 0; k < n && !st; k++)
        if (j.b[k].failed)
            st = lam_error_set(err, j.b[k].no_memory ? LAM_ENOMEM : LAM_EIO,
                               "cannot write JPEG %s: %s", path, j.b[k].ctx.msg);
    lam_outfile of;
    if (!st && !(st = lam_outfile_open(&of, path, err))) {
        static const unsigned char eoi[2] = {0xff, 0xd9};
        int bad = put_headers(of.fp, &j.b[0], height);
        for (size_t k = 0; k < n && !bad; k++) {
            size_t rows = k + 1 < n ? band_rows : height - k * band_rows;
            bad = put_band(of.fp, &j.b[k], k * BAND_MCU_ROWS, (rows + BLOCK_ROWS - 1) / BLOCK_ROWS,
                           k + 1 == n);
        }
        if (bad || fwrite(eoi, 1, 2, of.fp) != 2) {
            lam_outfile_abort(&of);
            st = lam_error_set(err, LAM_EIO, "cannot write JPEG %s", path);
        } else {
            st = lam_outfile_commit(&of, err);
        }
    }
    for (size_t k = 0; k < n; k++)
        free(j.b[k].data);
    free(j.b);
    return st;
}

lam_status lam_jpeg_save_xrgb32(const char *path, const uint32_t *px, size_t width,
                                size_t height, int quality, lam_error *err)
{
    /* a word 0x00RRGGBB in memory: B, G, R, x little-endian, x, R, G, B big */
#if defined(__BYTE_ORDER__) && __BYTE_ORDER__ == __ORDER_BIG_ENDIAN__
    J_COLOR_SPACE space = JCS_EXT_XRGB;
#else
    J_COLOR_SPACE space = JCS_EXT_BGRX;
#endif
    jw_source s = {(const uint8_t *)px, width * 4, space, 4, 1};
    return save_bands(path, &s, width, height, quality, err);
}
