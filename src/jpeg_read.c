/* jpeg_read.c - JPEG decoding with libjpeg-turbo (grey and YCbCr/RGB;
 * CMYK/YCCK refused). A truncated stream, which libjpeg only warns about
 * and pads with grey, is treated as damage. */
#include "imageio_internal.h"

#include <jpeglib.h>
#include <setjmp.h>
#include <stdlib.h>
#include <string.h>

typedef struct jpeg_ctx {
    struct jpeg_error_mgr mgr;
    jmp_buf jump;
    char msg[JMSG_LENGTH_MAX];
} jpeg_ctx;

static void on_jpeg_error(j_common_ptr cinfo)
{
    jpeg_ctx *ctx = (jpeg_ctx *)cinfo->err;
    (*cinfo->err->format_message)(cinfo, ctx->msg);
    longjmp(ctx->jump, 1);
}

/* Warnings (msg_level -1) mean corrupt or truncated data: fail. */
static void on_jpeg_message(j_common_ptr cinfo, int level)
{
    if (level < 0)
        on_jpeg_error(cinfo);
}

typedef struct jpeg_job {
    struct jpeg_decompress_struct cinfo;
    lam_image *img;
    unsigned char *row;
} jpeg_job;

lam_status lam__jpeg_load(FILE *fp, const char *path, const lam_load_options *opt,
                          lam_image **out, lam_error *err)
{
    (void)path;
    static jpeg_job zero_job;
    jpeg_ctx ctx;
    jpeg_job *job = malloc(sizeof *job);
    if (!job)
        return lam_error_set(err, LAM_ENOMEM, "cannot create a JPEG decoder");
    *job = zero_job;
    memset(&ctx, 0, sizeof ctx);
    job->cinfo.err = jpeg_std_error(&ctx.mgr);
    ctx.mgr.error_exit = on_jpeg_error;
    ctx.mgr.emit_message = on_jpeg_message;
    if (setjmp(ctx.jump)) {
        jpeg_destroy_decompress(&job->cinfo);
        lam_image_free(job->img);
        free(job->row);
        free(job);
        return lam_error_set(err, LAM_EFORMAT, "damaged JPEG: %s", ctx.msg);
    }
    jpeg_create_decompress(&job->cinfo);
    jpeg_stdio_src(&job->cinfo, fp);
    jpeg_read_header(&job->cinfo, TRUE);

    lam_status st = LAM_OK;
    J_COLOR_SPACE cs = job->cinfo.jpeg_color_space;
    if (cs == JCS_CMYK || cs == JCS_YCCK) {
        st = lam_error_set(err, LAM_EFORMAT,
                           "CMYK JPEG is not supported (save the image as RGB)");
    } else {
        st = lam_image_check_size(job->cinfo.image_width, job->cinfo.image_height,
                                  opt->max_pixels, "JPEG image", err);
    }
    if (st) {
        jpeg_destroy_decompress(&job->cinfo);
        free(job);
        return st;
    }
    int grey = cs == JCS_GRAYSCALE;
    job->cinfo.out_color_space = grey ? JCS_GRAYSCALE : JCS_RGB;
    job->cinfo.dct_method = JDCT_ISLOW; /* the accurate default, as djpeg uses */
    jpeg_start_decompress(&job->cinfo);
    size_t w = job->cinfo.output_width, h = job->cinfo.output_height;
    size_t chans = (size_t)job->cinfo.output_components;
    st = lam_image_alloc(w, h, &job->img, err);
    if (!st) {
        job->row = malloc(w * chans);
        if (!job->row)
            st = lam_error_set(err, LAM_ENOMEM, "cannot allocate a JPEG row");
    }
    if (st) {
        jpeg_destroy_decompress(&job->cinfo);
        lam_image_free(job->img);
        free(job);
        return st;
    }
    lam_transfer tr = opt->transfer;
    if (tr.kind == LAM_TRANSFER_AUTO)
        tr.kind = LAM_TRANSFER_SRGB;
    float lut[256];
    lam__transfer_lut(&tr, lut, 256);
    lam_image *img = job->img;
    if (opt->keep_display8 && !(img->display8 = malloc(w * h * 3))) {
        jpeg_destroy_decompress(&job->cinfo);
        lam_image_free(job->img);
        free(job->row);
        free(job);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the display copy");
    }
    img->bit_depth = 8;
    img->source_channels = (int)chans;
    img->kind = LAM_FILE_JPEG;
    img->transfer = tr;
    if (img->display8 && !grey) {
        /* decode straight into the kept 8-bit copy, then convert the rows
         * to linear planes on all cores (decoding itself is sequential) */
        while (job->cinfo.output_scanline < h) {
            JSAMPROW rp = img->display8 + (size_t)job->cinfo.output_scanline * w * 3;
            jpeg_read_scanlines(&job->cinfo, &rp, 1);
        }
        lam__convert_rgb8(img, lut);
    } else {
        while (job->cinfo.output_scanline < h) {
            size_t y = job->cinfo.output_scanline;
            JSAMPROW rp = job->row;
            jpeg_read_scanlines(&job->cinfo, &rp, 1);
            size_t base = y * w;
            for (size_t x = 0; x < w; x++) {
                const unsigned char *p = job->row + x * chans;
                unsigned v0 = p[0], v1 = grey ? p[0] : p[1], v2 = grey ? p[0] : p[2];
                img->plane[0][base + x] = lut[v0];
                img->plane[1][base + x] = lut[v1];
                img->plane[2][base + x] = lut[v2];
                if (img->display8) {
                    uint8_t *d = img->display8 + (base + x) * 3;
                    d[0] = (uint8_t)v0, d[1] = (uint8_t)v1, d[2] = (uint8_t)v2;
                }
                int clip = v0 == 255 || v1 == 255 || v2 == 255;
                img->clipped[base + x] = (uint8_t)clip;
                img->clipped_count += (size_t)clip;
            }
        }
    }
    jpeg_finish_decompress(&job->cinfo);
    jpeg_destroy_decompress(&job->cinfo);
    free(job->row);
    *out = img;
    free(job);
    return LAM_OK;
}
