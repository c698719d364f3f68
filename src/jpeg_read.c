/* jpeg_read.c - JPEG decoding with libjpeg-turbo (grey and YCbCr/RGB;
 * CMYK/YCCK refused). A truncated stream, which libjpeg only warns about
 * and pads with grey, is treated as damage. An ICC profile in APP2 markers
 * chooses the transfer curve (colourmeta.h). */
#include "imageio_internal.h"
#include "lamina/bigalloc.h"
#include "colourmeta.h"
#include "pixconv.h"
#include "rowpipe.h"

#include <jpeglib.h>
#include <setjmp.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

typedef struct jpeg_ctx {
    struct jpeg_error_mgr mgr;
    jmp_buf jump;
    jmp_buf *inner; /* while set, errors land there instead (decode_strip) */
    char msg[JMSG_LENGTH_MAX];
} jpeg_ctx;

static void on_jpeg_error(j_common_ptr cinfo)
{
    jpeg_ctx *ctx = (jpeg_ctx *)cinfo->err;
    (*cinfo->err->format_message)(cinfo, ctx->msg);
    longjmp(ctx->inner ? *ctx->inner : ctx->jump, 1);
}

/* Warnings (msg_level -1) mean corrupt or truncated data: fail. */
static void on_jpeg_message(j_common_ptr cinfo, int level)
{
    if (level < 0)
        on_jpeg_error(cinfo);
}

/* Everything that must survive a longjmp lives here, on the heap. */
typedef struct jpeg_job {
    jpeg_ctx ctx;
    struct jpeg_decompress_struct cinfo;
    int created;
    lam_image *img;
    lam__pixconv pc;
    unsigned char *row;
    JOCTET *icc;
} jpeg_job;

static void jpeg_job_free(jpeg_job *job)
{
    if (job->created)
        jpeg_destroy_decompress(&job->cinfo);
    lam_image_free(job->img);
    lam__pixconv_clear(&job->pc);
    free(job->row);
    free(job->icc);
    free(job);
}

static lam_status check_header(jpeg_job *job, const lam_load_options *opt, lam_error *err)
{
    J_COLOR_SPACE cs = job->cinfo.jpeg_color_space;
    if (cs == JCS_CMYK || cs == JCS_YCCK)
        return lam_error_set(err, LAM_EFORMAT,
                             "CMYK JPEG is not supported (save the image as RGB)");
    return lam_image_check_size(job->cinfo.image_width, job->cinfo.image_height,
                                opt->max_pixels, "JPEG image", err);
}

/* One quantisation step of each component's block mean (the DC
 * coefficient is 8 x the mean of its 8 x 8 block), carried into R, G and B
 * code values through the JFIF YCbCr -> RGB matrix. Flat areas (the
 * substrate, a large flake) are coded almost by DC alone, so their colour
 * moves in these steps from one block to the next; a channel moves by at
 * most the sum of one step in each component. */
static void dc_steps(const struct jpeg_decompress_struct *ci, lam_image *img)
{
    double q[3] = {0, 0, 0};
    for (int k = 0; k < ci->num_components && k < 3; k++) {
        const JQUANT_TBL *t = ci->quant_tbl_ptrs[ci->comp_info[k].quant_tbl_no];
        q[k] = t ? t->quantval[0] / 8.0 : 0;
    }
    if (ci->num_components < 3) {
        img->jpeg_dc_step[0] = img->jpeg_dc_step[1] = img->jpeg_dc_step[2] = q[0];
        return;
    }
    /* one step in every component at once: the largest move of a channel */
    img->jpeg_dc_step[0] = q[0] + 1.402 * q[2];
    img->jpeg_dc_step[1] = q[0] + 0.344 * q[1] + 0.714 * q[2];
    img->jpeg_dc_step[2] = q[0] + 1.772 * q[1];
}

/* Start decoding, allocate the image and choose its transfer curve (only
 * the 8-bit codes' buffer when that is all that is asked for). */
static lam_status start(jpeg_job *job, const lam_load_options *opt, lam_error *err)
{
    int grey = job->cinfo.jpeg_color_space == JCS_GRAYSCALE;
    lam__colour_meta meta;
    memset(&meta, 0, sizeof meta);
    unsigned int icc_len = 0;
    if (jpeg_read_icc_profile(&job->cinfo, &job->icc, &icc_len) && job->icc) {
        meta.kind = LAM__META_ICC;
        meta.icc = job->icc;
        meta.icc_len = icc_len;
    }
    job->cinfo.out_color_space = grey ? JCS_GRAYSCALE : JCS_RGB;
    job->cinfo.dct_method = JDCT_ISLOW; /* the accurate default, as djpeg uses */
    jpeg_start_decompress(&job->cinfo);
    size_t w = job->cinfo.output_width, h = job->cinfo.output_height;
    int chans = job->cinfo.output_components;
    lam_status st = opt->display8_only
                        ? lam_image_alloc_display8(w, h, opt->display8_xrgb_room, &job->img, err)
                        : lam__image_alloc_unset(w, h, &job->img, err);
    if (st || (st = lam__pixconv_init(&job->pc, 8, chans, err)))
        return st;
    lam_image *img = job->img;
    img->bit_depth = 8;
    img->source_channels = img->channels = chans;
    img->kind = LAM_FILE_JPEG;
    dc_steps(&job->cinfo, img);
    if (!opt->display8_only && (st = lam__colour_apply(&meta, &opt->transfer, &job->pc, img, err)))
        return st;
    if (!(job->row = malloc(w * (size_t)chans)))
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a JPEG row");
    if (opt->keep_display8 && !img->display8 && !(img->display8 = lam_big_malloc(w * h * 3)))
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the display copy");
    return LAM_OK;
}

/* Only the 8-bit codes: colour rows straight into display8, grey ones
 * replicated into R, G and B. */
static void read_codes(jpeg_job *job)
{
    lam_image *img = job->img;
    while (job->cinfo.output_scanline < img->height) {
        size_t y = job->cinfo.output_scanline;
        JSAMPROW rp = job->pc.chans == 3 ? img->display8 + y * img->width * 3 : job->row;
        jpeg_read_scanlines(&job->cinfo, &rp, 1);
        if (job->pc.chans != 3)
            lam__pixconv_codes_row(img, y, job->row, 1);
    }
}

/* Rows y0.. of the stream into buf, or (colour) straight into the kept
 * 8-bit copy when there is one. A damaged stream's error lands here, so
 * that it does not jump past the pipeline (rowpipe.h): NULL then. */
static const uint8_t *decode_strip(void *vjob, size_t y0, size_t rows, uint8_t *buf)
{
    jpeg_job *job = vjob;
    lam_image *img = job->img;
    size_t stride = img->width * (size_t)job->pc.chans;
    uint8_t *out = job->pc.chans == 3 && img->display8 ? img->display8 + y0 * stride : buf;
    jmp_buf here;
    if (setjmp(here)) {
        job->ctx.inner = NULL;
        return NULL;
    }
    job->ctx.inner = &here;
    for (size_t n = 0; n < rows;) {
        JSAMPROW rp = out + n * stride;
        n += jpeg_read_scanlines(&job->cinfo, &rp, 1);
    }
    job->ctx.inner = NULL;
    return out;
}

/* Decoded rows to the planes and clip mask (any thread). */
static size_t convert_strip(void *vjob, size_t y0, size_t rows, const uint8_t *codes)
{
    jpeg_job *job = vjob;
    if (job->pc.chans == 3)
        return lam__pixconv_rgb8_strip(&job->pc, job->img, y0, rows, codes);
    return lam__pixconv_rows(&job->pc, job->img, y0, rows, codes, job->img->width, 1);
}

/* Strips of rows decoded here and converted on the other cores meanwhile
 * (rowpipe.h). */
static lam_status read_pixels(jpeg_job *job, const lam_load_options *opt, lam_error *err)
{
    if (opt->display8_only) {
        read_codes(job);
        jpeg_finish_decompress(&job->cinfo);
        return LAM_OK;
    }
    lam__rowpipe_ops ops = {decode_strip, convert_strip, job};
    size_t clipped = 0, stride = job->img->width * (size_t)job->pc.chans;
    size_t h = job->img->height;
    int r = lam__rowpipe_run(h, lam__rowpipe_strip_rows(stride), stride,
                             lam__rowpipe_threads(h, stride), &ops, &clipped);
    if (r == -1)
        return lam_error_set(err, LAM_EFORMAT, "damaged JPEG: %s", job->ctx.msg);
    if (r)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a strip of JPEG rows");
    job->img->clipped_count += clipped;
    jpeg_finish_decompress(&job->cinfo);
    return LAM_OK;
}

lam_status lam__jpeg_load(FILE *fp, const char *path, const lam_load_options *opt,
                          lam_image **out, lam_error *err)
{
    (void)path;
    jpeg_job *job = calloc(1, sizeof *job);
    if (!job)
        return lam_error_set(err, LAM_ENOMEM, "cannot create a JPEG decoder");
    job->cinfo.err = jpeg_std_error(&job->ctx.mgr);
    job->ctx.mgr.error_exit = on_jpeg_error;
    job->ctx.mgr.emit_message = on_jpeg_message;
    if (setjmp(job->ctx.jump)) {
        lam_status st = lam_error_set(err, LAM_EFORMAT, "damaged JPEG: %s", job->ctx.msg);
        jpeg_job_free(job);
        return st;
    }
    jpeg_create_decompress(&job->cinfo);
    job->created = 1;
    jpeg_stdio_src(&job->cinfo, fp);
    jpeg_save_markers(&job->cinfo, JPEG_APP0 + 2, 0xffff); /* ICC profile chunks */
    jpeg_read_header(&job->cinfo, TRUE);
    lam_status st = check_header(job, opt, err);
    if (!st)
        st = start(job, opt, err);
    if (!st)
        st = read_pixels(job, opt, err);
    if (!st) {
        *out = job->img;
        job->img = NULL;
    }
    jpeg_job_free(job);
    return st;
}
