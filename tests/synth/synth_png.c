/* synth_png.c - 8- or 16-bit grey or RGB PNG through libpng; optional
 * colour metadata (sRGB chunk, or gAMA for a power law or linear data)
 * and the pixel size (pHYs, pixels per metre). */
#include "synth_internal.h"

#include <math.h>
#include <png.h>
#include <setjmp.h>
#include <stdlib.h>

typedef struct png_job {
    const uint8_t *bytes;   /* rows of w * nc * bits/8 bytes, big-endian for 16 bits */
    int w, h, nc, bits, tag, srgb;
    double gamma, um_per_px;
} png_job;

static void set_tags(png_structp png, png_infop info, const png_job *j)
{
    if (!j->tag)
        return;
    if (j->srgb)
        png_set_sRGB_gAMA_and_cHRM(png, info, PNG_sRGB_INTENT_PERCEPTUAL);
    else if (j->gamma > 0)
        png_set_gAMA(png, info, 1.0 / j->gamma);
    if (j->um_per_px > 0) {
        png_uint_32 ppm = (png_uint_32)lround(1e6 / j->um_per_px);
        png_set_pHYs(png, info, ppm, ppm, PNG_RESOLUTION_METER);
    }
}

static int encode(FILE *fp, const png_job *j)
{
    png_structp png = png_create_write_struct(PNG_LIBPNG_VER_STRING, NULL, NULL, NULL);
    png_infop info = png ? png_create_info_struct(png) : NULL;
    if (!info) {
        png_destroy_write_struct(&png, NULL);
        return -1;
    }
    if (setjmp(png_jmpbuf(png))) {
        png_destroy_write_struct(&png, &info);
        return -1;
    }
    png_init_io(png, fp);
    /* noisy images hardly compress: favour speed (tests write many) */
    png_set_compression_level(png, 1);
    png_set_filter(png, PNG_FILTER_TYPE_BASE, PNG_FILTER_SUB);
    png_set_IHDR(png, info, (png_uint_32)j->w, (png_uint_32)j->h, j->bits,
                 j->nc == 3 ? PNG_COLOR_TYPE_RGB : PNG_COLOR_TYPE_GRAY, PNG_INTERLACE_NONE,
                 PNG_COMPRESSION_TYPE_DEFAULT, PNG_FILTER_TYPE_DEFAULT);
    set_tags(png, info, j);
    png_write_info(png, info);
    size_t stride = (size_t)j->w * j->nc * (size_t)(j->bits / 8);
    for (int y = 0; y < j->h; y++)
        png_write_row(png, j->bytes + (size_t)y * stride);
    png_write_end(png, info);
    png_destroy_write_struct(&png, &info);
    return 0;
}

int synth_png_write(const char *path, const void *px, int w, int h, int nc, int bits,
                    int tag, int srgb_tag, double gamma_tag, double um_per_px)
{
    png_job j = {NULL, w, h, nc, bits, tag, srgb_tag, gamma_tag, um_per_px};
    uint8_t *be = NULL;
    if (bits == 16) {   /* PNG stores 16-bit samples big-endian */
        size_t n = (size_t)w * h * nc;
        const uint16_t *v = px;
        be = malloc(2 * n);
        if (!be)
            return synth_fail("%s: out of memory", path);
        for (size_t i = 0; i < n; i++)
            be[2 * i] = (uint8_t)(v[i] >> 8), be[2 * i + 1] = (uint8_t)(v[i] & 0xff);
    }
    j.bytes = be ? be : px;
    synth_outfile of;
    int st = synth_outfile_open(&of, path);
    if (!st && encode(of.fp, &j)) {
        synth_outfile_abort(&of);
        st = synth_fail("%s: libpng could not write the image", path);
    } else if (!st) {
        st = synth_outfile_commit(&of);
    }
    free(be);
    return st;
}
