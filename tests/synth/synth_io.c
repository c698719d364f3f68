/* synth_io.c - saving a rendered image in the formats cameras write:
 * quantisation, transfer curve, Bayer path, and the format names. */
#include "synth_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define BAYER_STREAM 0x4241594552212121ULL

static uint8_t *to8(const float *v, size_t n, int gamma22)
{
    uint8_t *out = malloc(n);
    for (size_t i = 0; out && i < n; i++) {
        double e = gamma22 ? synth_gamma_encode(v[i], 2.2) : synth_srgb_encode(v[i]);
        out[i] = (uint8_t)lround(255.0 * e);
    }
    return out;
}

static uint16_t *to16(const float *v, size_t n)
{
    uint16_t *out = malloc(n * sizeof *out);
    for (size_t i = 0; out && i < n; i++) {
        double c = v[i] < 0 ? 0 : v[i] > 1 ? 1 : v[i];
        out[i] = (uint16_t)lround(65535.0 * c);
    }
    return out;
}

/* The noise-free image sampled through an RGGB mosaic, noise added per
 * mosaic pixel, then demosaiced (all in linear light). */
static float *bayer_path(const synth_image *im)
{
    size_t n = (size_t)im->width * im->height;
    float *mosaic = malloc(n * sizeof *mosaic), *rgb = malloc(3 * n * sizeof *rgb);
    if (!mosaic || !rgb) {
        free(mosaic);
        free(rgb);
        return NULL;
    }
    synth_bayer_mosaic(im->clean, im->width, im->height, mosaic);
    synth_rng r;
    synth_rng_seed(&r, im->noise_seed ^ BAYER_STREAM);
    synth_add_noise(mosaic, n, im->full_well_e, im->read_noise_e, &r);
    synth_bayer_demosaic(mosaic, im->width, im->height, rgb);
    free(mosaic);
    return rgb;
}

static int save_8bit(const synth_image *im, const float *v, synth_format fmt, int quality,
                     int flags, const char *path)
{
    size_t n = (size_t)im->width * im->height * im->nc;
    uint8_t *b = to8(v, n, fmt == SYNTH_FMT_PNG_GAMMA22);
    if (!b)
        return synth_fail("%s: out of memory", path);
    int st;
    if (fmt == SYNTH_FMT_JPEG || fmt == SYNTH_FMT_BAYER_JPEG)
        st = synth_jpeg_write(path, b, im->width, im->height, im->nc, quality);
    else
        st = synth_png_write(path, b, im->width, im->height, im->nc, 8, flags & SYNTH_SAVE_TAG,
                             fmt != SYNTH_FMT_PNG_GAMMA22, 2.2, im->um_per_px);
    free(b);
    return st;
}

static int save_16bit(const synth_image *im, synth_format fmt, int flags, const char *path)
{
    uint16_t *b = to16(im->px, (size_t)im->width * im->height * im->nc);
    if (!b)
        return synth_fail("%s: out of memory", path);
    int st = fmt == SYNTH_FMT_TIFF16
                 ? synth_tiff_write(path, b, im->width, im->height, im->nc,
                                    flags & SYNTH_SAVE_TAG ? im->um_per_px : 0)
                 : synth_png_write(path, b, im->width, im->height, im->nc, 16,
                                   flags & SYNTH_SAVE_TAG, 0, 1.0, im->um_per_px);
    free(b);
    return st;
}

int synth_save_ex(const synth_image *im, synth_format fmt, int quality, int flags,
                  const char *path)
{
    int bayer = fmt == SYNTH_FMT_BAYER_PNG || fmt == SYNTH_FMT_BAYER_JPEG;
    if (bayer && im->nc != 3)
        return synth_fail("%s: a Bayer mosaic needs a colour image", path);
    if (fmt == SYNTH_FMT_PNG16 || fmt == SYNTH_FMT_TIFF16)
        return save_16bit(im, fmt, flags, path);
    if (!bayer)
        return save_8bit(im, im->px, fmt, quality, flags, path);
    float *rgb = bayer_path(im);
    if (!rgb)
        return synth_fail("%s: out of memory", path);
    int st = save_8bit(im, rgb, fmt == SYNTH_FMT_BAYER_JPEG ? SYNTH_FMT_JPEG : SYNTH_FMT_PNG,
                       quality, flags, path);
    free(rgb);
    return st;
}

int synth_save(const synth_image *im, synth_format fmt, int quality, const char *path)
{
    return synth_save_ex(im, fmt, quality, 0, path);
}

const char *synth_format_ext(synth_format fmt)
{
    return fmt == SYNTH_FMT_JPEG || fmt == SYNTH_FMT_BAYER_JPEG ? "jpg"
           : fmt == SYNTH_FMT_TIFF16                            ? "tif" : "png";
}

static int parse_quality(const char *s, int *quality)
{
    char *end;
    long q = *s ? strtol(s, &end, 10) : 90;
    if (*s && (*end || q < 1 || q > 100))
        return -1;
    *quality = (int)q;
    return 0;
}

int synth_format_parse(const char *name, synth_format *fmt, int *quality, int *channels)
{
    static const struct { const char *name; synth_format fmt; int channels; } t[] = {
        {"png", SYNTH_FMT_PNG, 0},      {"gamma22", SYNTH_FMT_PNG_GAMMA22, 0},
        {"bayer", SYNTH_FMT_BAYER_PNG, 3}, {"png16", SYNTH_FMT_PNG16, 0},
        {"grey8", SYNTH_FMT_PNG, 1},    {"grey16", SYNTH_FMT_PNG16, 1},
        {"tiff16", SYNTH_FMT_TIFF16, 0}};
    *quality = 90;
    for (size_t i = 0; i < sizeof t / sizeof t[0]; i++)
        if (!strcmp(name, t[i].name)) {
            *fmt = t[i].fmt;
            *channels = t[i].channels;
            return 0;
        }
    int bj = !strncmp(name, "bayer-jpeg", 10);
    if ((bj || !strncmp(name, "jpeg", 4)) && !parse_quality(name + (bj ? 10 : 4), quality)) {
        *fmt = bj ? SYNTH_FMT_BAYER_JPEG : SYNTH_FMT_JPEG;
        *channels = bj ? 3 : 0;
        return 0;
    }
    return synth_fail("unknown format '%s' (png, jpegQ, bayer, bayer-jpegQ, png16, gamma22, "
                      "grey8, grey16, tiff16)", name);
}
