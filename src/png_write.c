/* png_write.c - PNG files: 8-bit ones by the banded encoder (png_deflate.c),
 * 16-bit ones with libpng, all into atomic output files. */
#include "lamina/png.h"
#include "lamina/outfile.h"
#include "png_internal.h"

#include <png.h>
#include <setjmp.h>
#include <stdlib.h>
#include <string.h>

/* rows are written from 'pixels' with 'rowbytes' stride; bit_depth 8/16;
 * 16-bit samples are host uint16 and swapped by libpng. */
static lam_status save_png(const char *path, const void *pixels, size_t width,
                           size_t height, int colour_type, int bit_depth, size_t rowbytes,
                           lam_error *err)
{
    if (width == 0 || height == 0 || width > 0x7fffffff || height > 0x7fffffff)
        return lam_error_set(err, LAM_EINVAL, "cannot write a %zux%zu PNG", width, height);
    lam_outfile of;
    lam_status st = lam_outfile_open(&of, path, err);
    if (st)
        return st;
    lam__png_errctx ctx = {"", NULL};
    png_structp png = png_create_write_struct(PNG_LIBPNG_VER_STRING, &ctx, lam__png_on_error,
                                              lam__png_on_warning);
    png_infop info = png ? png_create_info_struct(png) : NULL;
    if (!png || !info) {
        png_destroy_write_struct(&png, &info);
        lam_outfile_abort(&of);
        return lam_error_set(err, LAM_ENOMEM, "cannot create a PNG encoder");
    }
    if (setjmp(png_jmpbuf(png))) {
        png_destroy_write_struct(&png, &info);
        lam_outfile_abort(&of);
        lam_error_set_file(err, path);
        return lam_error_set(err, LAM_EIO, "cannot write PNG %s: %s", path, ctx.msg);
    }
    png_init_io(png, of.fp);
    /* speed over size: these files are large and rewritten often; run-length
     * zlib with the Sub filter (16-bit files: the 8-bit ones go through the
     * banded encoder, png_deflate.c) */
    png_set_compression_level(png, 1);
    png_set_compression_strategy(png, 3 /* Z_RLE */);
    png_set_filter(png, 0, PNG_FILTER_SUB);
    png_set_IHDR(png, info, (png_uint_32)width, (png_uint_32)height, bit_depth, colour_type,
                 PNG_INTERLACE_NONE, PNG_COMPRESSION_TYPE_DEFAULT, PNG_FILTER_TYPE_DEFAULT);
    png_write_info(png, info);
    if (bit_depth == 16)
        png_set_swap(png);
    const unsigned char *base = pixels;
    for (size_t y = 0; y < height; y++)
        png_write_row(png, base + y * rowbytes);
    png_write_end(png, NULL);
    png_destroy_write_struct(&png, &info);
    return lam_outfile_commit(&of, err);
}

lam_status lam_png_save_rgb8(const char *path, const uint8_t *rgb, size_t width,
                             size_t height, int channels, lam_error *err)
{
    if (channels != 3 && channels != 4)
        return lam_error_set(err, LAM_EINVAL, "PNG RGB needs 3 or 4 channels, not %d",
                             channels);
    return lam__png_save_parallel(path, rgb, width, height, channels, err);
}

lam_status lam_png_save_grey8(const char *path, const uint8_t *grey, size_t width,
                              size_t height, lam_error *err)
{
    return lam__png_save_parallel(path, grey, width, height, 1, err);
}

lam_status lam_png_save_16(const char *path, const uint16_t *px, size_t width,
                           size_t height, int channels, lam_error *err)
{
    if (channels != 1 && channels != 3)
        return lam_error_set(err, LAM_EINVAL, "16-bit PNG needs 1 or 3 channels");
    return save_png(path, px, width, height,
                    channels == 3 ? PNG_COLOR_TYPE_RGB : PNG_COLOR_TYPE_GRAY, 16,
                    width * (size_t)channels * 2, err);
}
