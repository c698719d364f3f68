/* jpeg_write.c - JPEG encoding with libjpeg-turbo into atomic output files. */
#include "lamina/jpeg.h"
#include "lamina/outfile.h"

#include <jpeglib.h>
#include <setjmp.h>
#include <stdlib.h>

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

lam_status lam_jpeg_save_rgb8(const char *path, const uint8_t *rgb, size_t width,
                              size_t height, int quality, lam_error *err)
{
    if (width == 0 || height == 0 || width > 65500 || height > 65500)
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
    c->image_width = (JDIMENSION)width;
    c->image_height = (JDIMENSION)height;
    c->input_components = 3;
    c->in_color_space = JCS_RGB;
    jpeg_set_defaults(c);
    jpeg_set_quality(c, quality < 1 ? 1 : (quality > 100 ? 100 : quality), TRUE);
    jpeg_start_compress(c, TRUE);
    while (c->next_scanline < c->image_height) {
        JSAMPROW row = (JSAMPROW)(rgb + (size_t)c->next_scanline * width * 3);
        jpeg_write_scanlines(c, &row, 1);
    }
    jpeg_finish_compress(c);
    jpeg_destroy_compress(c);
    free(c);
    free(ctx);
    return lam_outfile_commit(&of, err);
}
