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

/* The pixels as the encoder takes them: rows of 'stride' bytes laid out
 * as 'space' with 'components' bytes a pixel. */
typedef struct jw_source {
    const uint8_t *pixels;
    size_t stride;
    J_COLOR_SPACE space;
    int components;
    int full_chroma; /* 4:4:4: no chroma subsampling */
} jw_source;

static void compress_rows(struct jpeg_compress_struct *c, const jw_source *s, size_t width,
                          size_t height, int quality)
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
    jpeg_start_compress(c, TRUE);
    while (c->next_scanline < c->image_height) {
        JSAMPROW row = (JSAMPROW)(s->pixels + (size_t)c->next_scanline * s->stride);
        jpeg_write_scanlines(c, &row, 1);
    }
    jpeg_finish_compress(c);
}

static lam_status save(const char *path, const jw_source *s, size_t width, size_t height,
                       int quality, lam_error *err)
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
    compress_rows(c, s, width, height, quality);
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
    return save(path, &s, width, height, quality, err);
}
