/* png_read.c - PNG decoding with libpng: 1-16 bit grey, grey+alpha, RGB,
 * RGBA and palette, interlaced or not; alpha is dropped. */
#include "imageio_internal.h"

#include <png.h>
#include <setjmp.h>
#include <stdlib.h>
#include <string.h>

typedef struct png_ctx {
    lam_error *err;
    char msg[200];
} png_ctx;

static void on_png_error(png_structp png, png_const_charp msg)
{
    png_ctx *ctx = png_get_error_ptr(png);
    snprintf(ctx->msg, sizeof ctx->msg, "%s", msg);
    png_longjmp(png, 1);
}

static void on_png_warning(png_structp png, png_const_charp msg)
{
    (void)png;
    (void)msg; /* benign warnings (e.g. unknown chunks) are not failures */
}

/* State that must survive longjmp lives in this struct (not in locals). */
typedef struct png_job {
    png_structp png;
    png_infop info;
    lam_image *img;
    unsigned char *rows; /* whole image for interlaced files, else one row */
    float *lut;
} png_job;

static void png_job_release(png_job *job, int keep_image)
{
    png_destroy_read_struct(&job->png, &job->info, NULL);
    free(job->rows);
    free(job->lut);
    if (!keep_image)
        lam_image_free(job->img);
}

lam_status lam__png_load(FILE *fp, const char *path, const lam_load_options *opt,
                         lam_image **out, lam_error *err)
{
    (void)path;
    png_ctx ctx = {err, ""};
    png_job job;
    memset(&job, 0, sizeof job);
    lam_status st = LAM_OK;
    volatile int stage = 0; /* 0 header, 1 pixels */

    job.png = png_create_read_struct(PNG_LIBPNG_VER_STRING, &ctx, on_png_error,
                                     on_png_warning);
    if (!job.png)
        return lam_error_set(err, LAM_ENOMEM, "cannot create a PNG decoder");
    job.info = png_create_info_struct(job.png);
    if (!job.info) {
        png_destroy_read_struct(&job.png, NULL, NULL);
        return lam_error_set(err, LAM_ENOMEM, "cannot create a PNG decoder");
    }
    if (setjmp(png_jmpbuf(job.png))) {
        png_job_release(&job, 0);
        return lam_error_set(err, LAM_EFORMAT, "damaged PNG (%s): %s",
                             stage ? "in the pixel data" : "in the header", ctx.msg);
    }
    size_t limit = opt->max_pixels ? opt->max_pixels : LAM_IMAGE_DEFAULT_MAX_PIXELS;
    /* libpng refuses larger headers itself before allocating anything */
    png_uint_32 dim_limit = limit > 0x7fffffffu ? 0x7fffffffu : (png_uint_32)limit;
    png_set_user_limits(job.png, dim_limit, dim_limit);
    png_set_chunk_malloc_max(job.png, 64u << 20);
    png_init_io(job.png, fp);
    png_read_info(job.png, job.info);

    png_uint_32 w, h;
    int depth, ctype, interlace;
    png_get_IHDR(job.png, job.info, &w, &h, &depth, &ctype, &interlace, NULL, NULL);
    st = lam_image_check_size(w, h, limit, "PNG image", err);
    if (st) {
        png_job_release(&job, 0);
        return st;
    }
    int grey = !(ctype & PNG_COLOR_MASK_COLOR) && ctype != PNG_COLOR_TYPE_PALETTE;
    if (ctype == PNG_COLOR_TYPE_PALETTE)
        png_set_palette_to_rgb(job.png);
    if (grey && depth < 8)
        png_set_expand_gray_1_2_4_to_8(job.png);
    /* transparency carries no optical information: drop alpha (including
     * the alpha that palette expansion makes from a tRNS chunk) */
    if ((ctype & PNG_COLOR_MASK_ALPHA) ||
        (ctype == PNG_COLOR_TYPE_PALETTE && png_get_valid(job.png, job.info, PNG_INFO_tRNS)))
        png_set_strip_alpha(job.png);
    if (depth == 16)
        png_set_swap(job.png); /* host little-endian uint16 */
    int passes = png_set_interlace_handling(job.png);
    png_read_update_info(job.png, job.info);

    int out_depth = depth == 16 ? 16 : 8;
    size_t chans = png_get_channels(job.png, job.info);
    size_t rowbytes = png_get_rowbytes(job.png, job.info);
    if ((chans != 1 && chans != 3) || rowbytes != (size_t)w * chans * (size_t)(out_depth / 8)) {
        png_job_release(&job, 0);
        return lam_error_set(err, LAM_EFORMAT, "unsupported PNG layout");
    }
    st = lam_image_alloc(w, h, &job.img, err);
    if (st) {
        png_job_release(&job, 0);
        return st;
    }
    size_t levels = out_depth == 16 ? 65536 : 256;
    lam_transfer tr = opt->transfer;
    if (tr.kind == LAM_TRANSFER_AUTO)
        tr.kind = out_depth == 16 ? LAM_TRANSFER_LINEAR : LAM_TRANSFER_SRGB;
    job.lut = malloc(levels * sizeof *job.lut);
    size_t nrows = passes > 1 ? h : 1;
    job.rows = malloc(nrows * rowbytes);
    if (!job.lut || !job.rows) {
        png_job_release(&job, 0);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate PNG row buffers");
    }
    lam__transfer_lut(&tr, job.lut, levels);
    if (opt->keep_display8 && out_depth == 8 && !(job.img->display8 = malloc((size_t)w * h * 3))) {
        png_job_release(&job, 0);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the display copy");
    }
    job.img->bit_depth = out_depth;
    job.img->source_channels = (int)chans;
    job.img->kind = LAM_FILE_PNG;
    job.img->transfer = tr;

    stage = 1;
    if (passes > 1) {
        png_bytep *ptrs = png_malloc(job.png, h * sizeof *ptrs);
        for (png_uint_32 y = 0; y < h; y++)
            ptrs[y] = job.rows + (size_t)y * rowbytes;
        png_read_image(job.png, ptrs);
        png_free(job.png, ptrs);
    }
    unsigned top = (unsigned)(levels - 1);
    for (png_uint_32 y = 0; y < h; y++) {
        unsigned char *row = job.rows + (passes > 1 ? (size_t)y * rowbytes : 0);
        if (passes <= 1)
            png_read_row(job.png, row, NULL);
        size_t base = (size_t)y * w;
        for (png_uint_32 x = 0; x < w; x++) {
            unsigned v[3];
            for (size_t c = 0; c < chans; c++) {
                size_t k = (size_t)x * chans + c;
                v[c] = out_depth == 16 ? ((const uint16_t *)(void *)row)[k] : row[k];
            }
            if (chans == 1)
                v[1] = v[2] = v[0];
            int clip = 0;
            for (int c = 0; c < 3; c++) {
                job.img->plane[c][base + x] = job.lut[v[c]];
                clip |= v[c] >= top;
            }
            job.img->clipped[base + x] = (uint8_t)clip;
            if (job.img->display8) {
                uint8_t *d = job.img->display8 + (base + x) * 3;
                d[0] = (uint8_t)v[0], d[1] = (uint8_t)v[1], d[2] = (uint8_t)v[2];
            }
            job.img->clipped_count += (size_t)clip;
        }
    }
    png_read_end(job.png, NULL);
    *out = job.img;
    png_job_release(&job, 1);
    return LAM_OK;
}
