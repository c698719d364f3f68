/* png_read.c - PNG decoding with libpng: 1-16 bit grey, grey+alpha, RGB,
 * RGBA and palette, interlaced or not; alpha is dropped. The sRGB, gAMA
 * and iCCP chunks choose the transfer curve (colourmeta.h). */
#include "imageio_internal.h"
#include "lamina/bigalloc.h"
#include "colourmeta.h"
#include "pixconv.h"
#include "png_internal.h"
#include "rowpipe.h"

#include <setjmp.h>
#include <stdlib.h>
#include <string.h>

/* Everything that must survive a longjmp lives here, on the heap: only the
 * pointer to it is a local of the function that calls setjmp. */
typedef struct png_job {
    lam__png_errctx ctx;
    png_structp png;
    png_infop info;
    lam_image *img;
    lam__pixconv pc;
    unsigned char *rows; /* whole image for interlaced files, else one row */
    size_t rowbytes;
    int passes;
    int stage;           /* 0 header, 1 pixels (for the message) */
} png_job;

static void png_job_free(png_job *job)
{
    png_destroy_read_struct(&job->png, &job->info, NULL);
    free(job->rows);
    lam__pixconv_clear(&job->pc);
    lam_image_free(job->img);
    free(job);
}

/* Expansions to 8/16-bit grey or RGB without alpha; returns the depth. */
static int set_transforms(png_job *job, int depth, int ctype)
{
    int grey = !(ctype & PNG_COLOR_MASK_COLOR) && ctype != PNG_COLOR_TYPE_PALETTE;
    if (ctype == PNG_COLOR_TYPE_PALETTE)
        png_set_palette_to_rgb(job->png);
    if (grey && depth < 8)
        png_set_expand_gray_1_2_4_to_8(job->png);
    /* transparency carries no optical information: drop alpha (including
     * the alpha that palette expansion makes from a tRNS chunk) */
    if ((ctype & PNG_COLOR_MASK_ALPHA) ||
        (ctype == PNG_COLOR_TYPE_PALETTE && png_get_valid(job->png, job->info, PNG_INFO_tRNS)))
        png_set_strip_alpha(job->png);
    if (depth == 16)
        png_set_swap(job->png); /* host little-endian uint16 */
    job->passes = png_set_interlace_handling(job->png);
    png_read_update_info(job->png, job->info);
    return depth == 16 ? 16 : 8;
}

/* iCCP, else sRGB, else gAMA (PNG specification, 11.3.3: a decoder that
 * uses iCCP or sRGB ignores gAMA and cHRM; cHRM is ignored here anyway,
 * since lamina does not change primaries). */
static lam__colour_meta colour_meta(png_job *job)
{
    lam__colour_meta m;
    memset(&m, 0, sizeof m);
    png_charp name;
    int comp, intent;
    png_bytep prof;
    png_uint_32 plen;
    png_fixed_point g;
    if (png_get_iCCP(job->png, job->info, &name, &comp, &prof, &plen) == PNG_INFO_iCCP) {
        m.kind = LAM__META_ICC;
        m.icc = prof;
        m.icc_len = plen;
    } else if (png_get_sRGB(job->png, job->info, &intent) == PNG_INFO_sRGB) {
        m.kind = LAM__META_SRGB;
    } else if (png_get_gAMA_fixed(job->png, job->info, &g) == PNG_INFO_gAMA && g > 0) {
        m.kind = LAM__META_GAMMA;
        m.file_gamma = g / 100000.0;
    }
    return m;
}

static lam_status read_header(png_job *job, FILE *fp, const lam_load_options *opt,
                              lam_error *err)
{
    size_t limit = opt->max_pixels ? opt->max_pixels : LAM_IMAGE_DEFAULT_MAX_PIXELS;
    /* libpng refuses larger headers itself before allocating anything */
    png_uint_32 dim_limit = limit > 0x7fffffffu ? 0x7fffffffu : (png_uint_32)limit;
    png_set_user_limits(job->png, dim_limit, dim_limit);
    png_set_chunk_malloc_max(job->png, 64u << 20);
    png_init_io(job->png, fp);
    png_read_info(job->png, job->info);
    png_uint_32 w, h;
    int depth, ctype, interlace;
    png_get_IHDR(job->png, job->info, &w, &h, &depth, &ctype, &interlace, NULL, NULL);
    lam_status st = lam_image_check_size(w, h, limit, "PNG image", err);
    if (st)
        return st;
    int out_depth = set_transforms(job, depth, ctype);
    int chans = png_get_channels(job->png, job->info);
    job->rowbytes = png_get_rowbytes(job->png, job->info);
    if ((chans != 1 && chans != 3) ||
        job->rowbytes != (size_t)w * (size_t)chans * (size_t)(out_depth / 8))
        return lam_error_set(err, LAM_EFORMAT, "unsupported PNG layout");
    if (opt->display8_only && out_depth != 8)
        return lam_error_set(err, LAM_EINVAL, "a 16-bit PNG has no 8-bit codes to decode alone");
    st = opt->display8_only
             ? lam_image_alloc_display8(w, h, opt->display8_xrgb_room, &job->img, err)
             : lam__image_alloc_unset(w, h, &job->img, err);
    if (st || (st = lam__pixconv_init(&job->pc, out_depth, chans, err)))
        return st;
    job->img->bit_depth = out_depth;
    job->img->source_channels = job->img->channels = chans;
    job->img->kind = LAM_FILE_PNG;
    lam__colour_meta meta = colour_meta(job);
    if (!opt->display8_only &&
        (st = lam__colour_apply(&meta, &opt->transfer, &job->pc, job->img, err)))
        return st;
    job->rows = malloc((job->passes > 1 ? h : 1) * job->rowbytes);
    if (!job->rows)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate PNG row buffers");
    if (opt->keep_display8 && out_depth == 8 && !job->img->display8 &&
        !(job->img->display8 = lam_big_malloc((size_t)w * h * 3)))
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the display copy");
    return LAM_OK;
}

/* An interlaced file, or only the 8-bit codes: on this thread. */
static void read_whole(png_job *job, int codes_only)
{
    size_t h = job->img->height;
    if (job->passes > 1) {
        png_bytep *ptrs = png_malloc(job->png, h * sizeof *ptrs);
        for (size_t y = 0; y < h; y++)
            ptrs[y] = job->rows + y * job->rowbytes;
        png_read_image(job->png, ptrs);
        png_free(job->png, ptrs);
    }
    for (size_t y = 0; y < h; y++) {
        unsigned char *row = job->rows + (job->passes > 1 ? y * job->rowbytes : 0);
        if (job->passes <= 1)
            png_read_row(job->png, row, NULL);
        if (codes_only)
            lam__pixconv_codes_row(job->img, y, row, job->pc.chans);
        else
            lam__pixconv_row(&job->pc, job->img, y, row, (size_t)job->pc.chans);
    }
}

/* Does a strip go straight into the kept 8-bit copy (8-bit RGB)? */
static int into_display8(const png_job *job)
{
    return job->img->display8 && job->pc.depth == 8 && job->pc.chans == 3;
}

/* Rows y0.. of the stream into buf, or into the kept 8-bit copy. A
 * damaged stream's error lands here, so that it does not jump past the
 * pipeline (rowpipe.h): NULL then. */
static const uint8_t *decode_strip(void *vjob, size_t y0, size_t rows, uint8_t *buf)
{
    png_job *job = vjob;
    uint8_t *out = into_display8(job) ? job->img->display8 + y0 * job->rowbytes : buf;
    jmp_buf here;
    if (setjmp(here)) {
        job->ctx.inner = NULL;
        return NULL;
    }
    job->ctx.inner = &here;
    for (size_t i = 0; i < rows; i++)
        png_read_row(job->png, out + i * job->rowbytes, NULL);
    job->ctx.inner = NULL;
    return out;
}

/* Decoded rows to the planes, the clip mask and the kept 8-bit copy. */
static size_t convert_strip(void *vjob, size_t y0, size_t rows, const uint8_t *codes)
{
    png_job *job = vjob;
    if (into_display8(job))
        return lam__pixconv_rgb8_strip(&job->pc, job->img, y0, rows, codes);
    return lam__pixconv_rows(&job->pc, job->img, y0, rows, codes, job->rowbytes,
                             (size_t)job->pc.chans);
}

/* Strips decoded here and converted on the other cores meanwhile. */
static lam_status read_pixels(png_job *job, int codes_only, lam_error *err)
{
    job->stage = 1;
    if (codes_only || job->passes > 1) {
        read_whole(job, codes_only);
    } else {
        lam__rowpipe_ops ops = {decode_strip, convert_strip, job};
        size_t clipped = 0;
        size_t h = job->img->height, rb = job->rowbytes;
        int r = lam__rowpipe_run(h, lam__rowpipe_strip_rows(rb), rb, lam__rowpipe_threads(h, rb),
                                 &ops, &clipped);
        if (r == -1)
            return lam_error_set(err, LAM_EFORMAT, "damaged PNG (in the pixel data): %s",
                                 job->ctx.msg);
        if (r)
            return lam_error_set(err, LAM_ENOMEM, "cannot allocate a strip of PNG rows");
        job->img->clipped_count += clipped;
    }
    png_read_end(job->png, NULL);
    return LAM_OK;
}

lam_status lam__png_load(FILE *fp, const char *path, const lam_load_options *opt,
                         lam_image **out, lam_error *err)
{
    (void)path;
    png_job *job = calloc(1, sizeof *job);
    if (!job)
        return lam_error_set(err, LAM_ENOMEM, "cannot create a PNG decoder");
    job->png = png_create_read_struct(PNG_LIBPNG_VER_STRING, &job->ctx, lam__png_on_error,
                                      lam__png_on_warning);
    job->info = job->png ? png_create_info_struct(job->png) : NULL;
    if (!job->info) {
        png_job_free(job);
        return lam_error_set(err, LAM_ENOMEM, "cannot create a PNG decoder");
    }
    if (setjmp(png_jmpbuf(job->png))) {
        lam_status st = lam_error_set(err, LAM_EFORMAT, "damaged PNG (%s): %s",
                                      job->stage ? "in the pixel data" : "in the header",
                                      job->ctx.msg);
        png_job_free(job);
        return st;
    }
    lam_status st = read_header(job, fp, opt, err);
    if (!st)
        st = read_pixels(job, opt->display8_only, err);
    if (!st) {
        *out = job->img;
        job->img = NULL;
    }
    png_job_free(job);
    return st;
}
