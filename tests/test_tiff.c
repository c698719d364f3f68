/* test_tiff.c - TIFF loading. Files are written here with libtiff (Debian
 * libtiff-dev, the reference TIFF implementation) in every layout the
 * loader claims, and each must give exactly the pixels of the same data
 * written as PNG and read through libpng. Refusals, pages, raw mosaics,
 * resolution tags (TIFF 6.0, section 8: XResolution pixels per
 * ResolutionUnit), damaged files and quiet handling of libtiff's
 * messages are checked too. */
#include "check.h"
#include "lamina/parallel.h"
#include "lamina/image.h"
#include "lamina/png.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <tiffio.h>
#include <unistd.h>

static char path_buf[512];
static const char *tmp(const char *name)
{
    return check_path(path_buf, sizeof path_buf, check_tmpdir(), name);
}

/* What to write. Samples come from sample_at(); 'extra' adds an alpha
 * sample (ExtraSamples = unassociated alpha). */
typedef struct tspec {
    uint32_t w, h;
    uint16_t bps, colour, photometric, planar, compression, predictor, format;
    int extra;
    uint32_t tile;    /* tile edge (multiple of 16), 0 for strips */
    uint32_t rps;     /* rows per strip */
    const char *mode; /* "w", "w8" (BigTIFF), "wb" (big-endian) */
    int pages;        /* full-resolution pages (1 when 0) */
    int thumbnail;    /* a reduced-resolution subfile after the image */
    float xres;       /* written when > 0, with resunit */
    uint16_t resunit;
} tspec;

static tspec spec(uint32_t w, uint32_t h, uint16_t bps, uint16_t colour)
{
    tspec s;
    memset(&s, 0, sizeof s);
    s.w = w;
    s.h = h;
    s.bps = bps;
    s.colour = colour;
    s.photometric = colour == 3 ? PHOTOMETRIC_RGB : PHOTOMETRIC_MINISBLACK;
    s.planar = PLANARCONFIG_CONTIG;
    s.compression = COMPRESSION_NONE;
    s.format = SAMPLEFORMAT_UINT;
    s.rps = 5;
    s.mode = "w";
    return s;
}

/* A deterministic pattern that reaches both ends of the code range. */
static unsigned sample_at(uint32_t x, uint32_t y, unsigned s, unsigned bps)
{
    unsigned long v = (unsigned long)x * 2311ul + (unsigned long)y * 7919ul + s * 30011ul +
                      (unsigned long)(x * y % 7) * 977ul;
    if ((x + y) % 11 == 0)
        return (1u << bps) - 1; /* saturated pixels */
    return (unsigned)(bps == 8 ? (v >> 3) & 255u : v & 65535u);
}

static void fill_pixel(unsigned char *dst, const tspec *t, uint32_t x, uint32_t y, unsigned s0,
                       unsigned ns)
{
    for (unsigned k = 0; k < ns; k++) {
        unsigned s = s0 + k;
        unsigned v = s < t->colour ? sample_at(x, y, s, t->bps) : 200u + s;
        if (t->bps == 16)
            ((uint16_t *)(void *)dst)[k] = (uint16_t)v;
        else
            dst[k] = (unsigned char)v;
    }
}

static void set_tags(TIFF *tif, const tspec *t, uint32_t w, uint32_t h, uint32_t subfile)
{
    unsigned spp = t->colour + (unsigned)t->extra;
    TIFFSetField(tif, TIFFTAG_IMAGEWIDTH, w);
    TIFFSetField(tif, TIFFTAG_IMAGELENGTH, h);
    TIFFSetField(tif, TIFFTAG_BITSPERSAMPLE, t->bps);
    TIFFSetField(tif, TIFFTAG_SAMPLESPERPIXEL, (uint16_t)spp);
    TIFFSetField(tif, TIFFTAG_PHOTOMETRIC, t->photometric);
    TIFFSetField(tif, TIFFTAG_PLANARCONFIG, t->planar);
    TIFFSetField(tif, TIFFTAG_COMPRESSION, t->compression);
    TIFFSetField(tif, TIFFTAG_SAMPLEFORMAT, t->format);
    if (t->predictor)
        TIFFSetField(tif, TIFFTAG_PREDICTOR, t->predictor);
    if (t->extra) {
        uint16_t ex[1] = {EXTRASAMPLE_UNASSALPHA};
        TIFFSetField(tif, TIFFTAG_EXTRASAMPLES, 1, ex);
    }
    if (subfile)
        TIFFSetField(tif, TIFFTAG_SUBFILETYPE, subfile);
    if (t->xres > 0) {
        TIFFSetField(tif, TIFFTAG_XRESOLUTION, t->xres);
        TIFFSetField(tif, TIFFTAG_YRESOLUTION, t->xres);
        TIFFSetField(tif, TIFFTAG_RESOLUTIONUNIT, t->resunit);
    }
    if (t->tile) {
        TIFFSetField(tif, TIFFTAG_TILEWIDTH, t->tile);
        TIFFSetField(tif, TIFFTAG_TILELENGTH, t->tile);
    } else {
        TIFFSetField(tif, TIFFTAG_ROWSPERSTRIP, t->rps);
    }
}

static int write_strips(TIFF *tif, const tspec *t, uint32_t w, uint32_t h)
{
    unsigned spp = t->colour + (unsigned)t->extra, B = t->bps / 8u;
    int sep = t->planar == PLANARCONFIG_SEPARATE;
    unsigned char *row = malloc((size_t)w * spp * B);
    int ok = row != NULL;
    for (unsigned s = 0; ok && s < (sep ? spp : 1u); s++)
        for (uint32_t y = 0; ok && y < h; y++) {
            for (uint32_t x = 0; x < w; x++)
                fill_pixel(row + (size_t)x * (sep ? 1 : spp) * B, t, x, y, sep ? s : 0,
                           sep ? 1 : spp);
            ok = TIFFWriteScanline(tif, row, y, (uint16_t)s) == 1;
        }
    free(row);
    return ok;
}

static int write_tiles(TIFF *tif, const tspec *t, uint32_t w, uint32_t h)
{
    unsigned spp = t->colour + (unsigned)t->extra, B = t->bps / 8u, n = t->tile;
    int sep = t->planar == PLANARCONFIG_SEPARATE;
    unsigned pspp = sep ? 1 : spp;
    unsigned char *tile = calloc((size_t)n * n * pspp, B);
    int ok = tile != NULL;
    for (unsigned s = 0; ok && s < (sep ? spp : 1u); s++)
        for (uint32_t y0 = 0; ok && y0 < h; y0 += n)
            for (uint32_t x0 = 0; ok && x0 < w; x0 += n) {
                for (uint32_t y = 0; y < n; y++)
                    for (uint32_t x = 0; x < n; x++)
                        fill_pixel(tile + ((size_t)y * n + x) * pspp * B, t, x0 + x, y0 + y,
                                   sep ? s : 0, pspp);
                ok = TIFFWriteTile(tif, tile, x0, y0, 0, (uint16_t)s) > 0;
            }
    free(tile);
    return ok;
}

static int write_tiff(const char *path, const tspec *t)
{
    TIFF *tif = TIFFOpen(path, t->mode);
    if (!tif)
        return -1;
    int pages = t->pages ? t->pages : 1, ok = 1;
    for (int p = 0; ok && p < pages + t->thumbnail; p++) {
        int thumb = p >= pages;
        uint32_t w = thumb ? (t->w + 3) / 4 : t->w, h = thumb ? (t->h + 3) / 4 : t->h;
        set_tags(tif, t, w, h, thumb ? FILETYPE_REDUCEDIMAGE : (pages > 1 ? FILETYPE_PAGE : 0));
        ok = (t->tile ? write_tiles(tif, t, w, h) : write_strips(tif, t, w, h)) &&
             TIFFWriteDirectory(tif);
    }
    TIFFClose(tif);
    return ok ? 0 : -1;
}

/* The same samples (colour ones only) as a PNG written with libpng. */
static int write_png_twin(const char *path, const tspec *t)
{
    size_t n = (size_t)t->w * t->h * t->colour;
    lam_status st;
    lam_error err;
    if (t->bps == 16) {
        uint16_t *px = malloc(n * 2);
        for (uint32_t y = 0; y < t->h; y++)
            for (uint32_t x = 0; x < t->w; x++)
                for (unsigned s = 0; s < t->colour; s++)
                    px[((size_t)y * t->w + x) * t->colour + s] = (uint16_t)sample_at(x, y, s, 16);
        st = lam_png_save_16(path, px, t->w, t->h, t->colour, &err);
        free(px);
    } else {
        uint8_t *px = malloc(n);
        for (uint32_t y = 0; y < t->h; y++)
            for (uint32_t x = 0; x < t->w; x++)
                for (unsigned s = 0; s < t->colour; s++)
                    px[((size_t)y * t->w + x) * t->colour + s] = (uint8_t)sample_at(x, y, s, 8);
        st = t->colour == 3 ? lam_png_save_rgb8(path, px, t->w, t->h, 3, &err)
                            : lam_png_save_grey8(path, px, t->w, t->h, &err);
        free(px);
    }
    return st == LAM_OK ? 0 : -1;
}

static lam_status load(const char *path, const lam_load_options *opt, lam_image **img,
                       lam_error *err)
{
    *img = NULL;
    lam_error_clear(err);
    return lam_image_load(path, opt, img, err);
}

/* Planes, clip mask and metadata of two images identical? */
static int same_pixels(const lam_image *a, const lam_image *b)
{
    if (!a || !b || a->width != b->width || a->height != b->height ||
        a->clipped_count != b->clipped_count || a->bit_depth != b->bit_depth ||
        a->source_channels != b->source_channels || a->channels != b->channels)
        return 0;
    size_t n = a->width * a->height;
    for (int c = 0; c < 3; c++)
        if (memcmp(a->plane[c], b->plane[c], n * sizeof(float)))
            return 0;
    return a->clip_stride == b->clip_stride &&
           !memcmp(a->clip_bits, b->clip_bits, a->height * a->clip_stride);
}

static const char *comp_name(uint16_t c)
{
    switch (c) {
    case COMPRESSION_NONE: return "none";
    case COMPRESSION_LZW: return "LZW";
    case COMPRESSION_ADOBE_DEFLATE: return "deflate (Adobe)";
    case COMPRESSION_DEFLATE: return "deflate (old)";
    case COMPRESSION_PACKBITS: return "PackBits";
    }
    return "?";
}

/* One layout against its PNG twin (and, for 16-bit, the linear default
 * against the written codes), and on one thread against all (the strips
 * or rows of tiles are decoded on one thread and converted on the others
 * meanwhile: src/rowpipe.c). */
static void check_layout(const tspec *t, const char *what)
{
    char tp[512], pp[512];
    check_path(tp, sizeof tp, check_tmpdir(), "layout.tif");
    check_path(pp, sizeof pp, check_tmpdir(), "layout.png");
    if (!check_true(write_tiff(tp, t) == 0 && write_png_twin(pp, t) == 0, "write %s", what))
        return;
    lam_image *a = NULL, *b = NULL;
    lam_error err;
    lam_status st = load(tp, NULL, &a, &err);
    load(pp, NULL, &b, &err);
    check_true(st == LAM_OK && same_pixels(a, b), "%s equals the PNG path exactly (%s)", what,
               st ? err.message : "ok");
    lam_image *one = NULL;
    lam_parallel_set_default(1);
    load(tp, NULL, &one, &err);
    lam_parallel_set_default(0);
    check_true(same_pixels(a, one), "%s: the same on one thread", what);
    lam_image_free(one);
    if (a && t->bps == 16) {
        size_t bad = 0;
        for (uint32_t y = 0; y < t->h; y++)
            for (uint32_t x = 0; x < t->w; x++)
                bad += lround(a->plane[t->colour - 1][(size_t)y * t->w + x] * 65535.0) !=
                       sample_at(x, y, t->colour - 1u, 16);
        check_int((long long)bad, 0, "%s: 16-bit codes kept, linear by default", what);
    }
    lam_image_free(a);
    lam_image_free(b);
}

static void test_layouts(void)
{
    static const uint16_t comps[] = {COMPRESSION_NONE, COMPRESSION_LZW,
                                     COMPRESSION_ADOBE_DEFLATE, COMPRESSION_DEFLATE,
                                     COMPRESSION_PACKBITS};
    for (int bps = 8; bps <= 16; bps += 8)
        for (unsigned colour = 1; colour <= 3; colour += 2)
            for (int layout = 0; layout < 4; layout++) {
                tspec t = spec(37, 23, (uint16_t)bps, (uint16_t)colour);
                t.tile = layout & 1 ? 16 : 0;
                t.planar = layout & 2 ? PLANARCONFIG_SEPARATE : PLANARCONFIG_CONTIG;
                t.compression = comps[(bps / 8 + colour + (unsigned)layout) % 5];
                char what[160];
                snprintf(what, sizeof what, "%d-bit %s, %s, %s planes, %s", bps,
                         colour == 3 ? "RGB" : "grey", t.tile ? "16x16 tiles" : "5-row strips",
                         layout & 2 ? "separate" : "contiguous", comp_name(t.compression));
                check_layout(&t, what);
            }
    /* every compression on one layout; LZW and deflate with the horizontal predictor */
    for (size_t k = 0; k < sizeof comps / sizeof comps[0]; k++) {
        tspec t = spec(40, 9, 16, 3);
        t.compression = comps[k];
        t.predictor = comps[k] == COMPRESSION_LZW || comps[k] == COMPRESSION_ADOBE_DEFLATE ? 2 : 0;
        char what[160];
        snprintf(what, sizeof what, "16-bit RGB, %s%s", comp_name(comps[k]),
                 t.predictor ? " with predictor 2" : "");
        check_layout(&t, what);
    }
    tspec t = spec(33, 17, 8, 3);
    t.extra = 1;
    check_layout(&t, "8-bit RGB with an alpha sample (ignored)");
    t = spec(33, 17, 16, 1);
    t.extra = 1;
    t.planar = PLANARCONFIG_SEPARATE;
    check_layout(&t, "16-bit grey+alpha, separate planes");
    t = spec(31, 19, 16, 3);
    t.mode = "wb";
    check_layout(&t, "big-endian 16-bit RGB");
    t = spec(31, 19, 16, 1);
    t.mode = "w8";
    t.tile = 16;
    check_layout(&t, "BigTIFF 16-bit grey, tiled");
    t = spec(300, 7, 8, 3);
    t.rps = 1000; /* RowsPerStrip above the height: one strip */
    check_layout(&t, "one strip taller than the image");
}

/* Layouts above the size a load pipes (256 KiB decoded, src/rowpipe.c):
 * strips grouped into bands, rows of tiles, decoded beside their
 * conversion on the other cores. */
static void test_piped_layouts(void)
{
    static const struct {
        uint32_t w, h;
        uint16_t bps, colour, rps, tile, planar, compression;
        const char *what;
    } L[] = {
        {701, 190, 16, 3, 5, 0, PLANARCONFIG_CONTIG, COMPRESSION_LZW,
         "16-bit RGB 701x190, 5-row strips grouped, LZW"},
        {700, 400, 8, 1, 1, 0, PLANARCONFIG_CONTIG, COMPRESSION_NONE,
         "8-bit grey 700x400, one-row strips"},
        {700, 200, 8, 3, 5, 16, PLANARCONFIG_SEPARATE, COMPRESSION_NONE,
         "8-bit RGB 700x200, 16x16 tiles, separate planes"},
    };
    for (size_t i = 0; i < sizeof L / sizeof L[0]; i++) {
        tspec t = spec(L[i].w, L[i].h, L[i].bps, L[i].colour);
        t.rps = L[i].rps, t.tile = L[i].tile, t.planar = L[i].planar;
        t.compression = L[i].compression;
        check_layout(&t, L[i].what);
    }
}

static void test_kinds_and_pages(void)
{
    lam_image *img = NULL;
    lam_error err;
    tspec t = spec(20, 10, 16, 1);
    write_tiff(tmp("g16.tif"), &t);
    check_int(load(tmp("g16.tif"), NULL, &img, &err), LAM_OK, "16-bit grey TIFF loads");
    check_true(img && img->kind == LAM_FILE_TIFF && img->bit_depth == 16 &&
                   img->source_channels == 1 && img->channels == 1 &&
                   img->transfer.kind == LAM_TRANSFER_LINEAR,
               "kind TIFF, 16-bit, 1 channel, linear by default");
    check_str(img ? img->transfer_source : "", "none (assumed linear for 16-bit)",
              "transfer source says it was assumed");
    check_true(img && !memcmp(img->plane[0], img->plane[2], 200 * sizeof(float)),
               "grey data in plane[0], copied to plane[2]");
    lam_image_free(img);

    /* MinIsWhite: 0 is white, so code v reads as 65535 - v */
    t.photometric = PHOTOMETRIC_MINISWHITE;
    write_tiff(tmp("white.tif"), &t);
    check_int(load(tmp("white.tif"), NULL, &img, &err), LAM_OK, "MinIsWhite TIFF loads");
    check_int(img ? lround(img->plane[0][21] * 65535.0) : -1, 65535 - sample_at(1, 1, 0, 16),
              "MinIsWhite is inverted (TIFF 6.0, PhotometricInterpretation 0)");
    lam_image_free(img);

    /* the same file renamed .png: the content decides */
    t = spec(20, 10, 8, 3);
    write_tiff(tmp("tiff-named.png"), &t);
    check_int(load(tmp("tiff-named.png"), NULL, &img, &err), LAM_OK,
              "a TIFF named .png loads as TIFF");
    check_true(img && img->transfer.kind == LAM_TRANSFER_SRGB && img->display8 == NULL,
               "8-bit TIFF: sRGB by default; no 8-bit copy unless asked");
    lam_image_free(img);
    lam_load_options opt = lam_load_options_default();
    opt.keep_display8 = 1;
    check_int(load(tmp("tiff-named.png"), &opt, &img, &err), LAM_OK, "load with the 8-bit copy");
    check_true(img && img->display8 && img->display8[3 * 21 + 1] == sample_at(1, 1, 1, 8),
               "8-bit copy holds the file's codes");
    lam_image_free(img);
    img = NULL;
    opt.keep_display8 = 0;
    opt.display8_only = 1; /* implemented for JPEG and PNG: a caller falls back */
    check_int(load(tmp("tiff-named.png"), &opt, &img, &err), LAM_EINVAL,
              "the 8-bit codes alone: refused for TIFF (%s)", err.message);
    lam_image_free(img);

    t = spec(20, 10, 8, 3);
    t.pages = 3;
    write_tiff(tmp("pages.tif"), &t);
    check_int(load(tmp("pages.tif"), NULL, &img, &err), LAM_EFORMAT, "3-page TIFF refused");
    check_true(strstr(err.message, "TIFF with 3 pages: give one image per file") != NULL,
               "message counts the pages: %s", err.message);
    t.pages = 1;
    t.thumbnail = 1;
    write_tiff(tmp("thumb.tif"), &t);
    check_int(load(tmp("thumb.tif"), NULL, &img, &err), LAM_OK,
              "image + reduced-resolution subfile: the thumbnail is skipped");
    check_true(img && img->width == 20 && img->height == 10, "the full-resolution image is read");
    lam_image_free(img);
}

typedef struct refusal {
    uint16_t bps, colour, photometric, format;
    const char *words;
} refusal;

static void test_refusals(void)
{
    static const refusal r[] = {
        {32, 1, PHOTOMETRIC_MINISBLACK, SAMPLEFORMAT_IEEEFP, "32-bit float TIFF samples"},
        {16, 1, PHOTOMETRIC_MINISBLACK, SAMPLEFORMAT_INT, "signed 16-bit TIFF samples"},
        {32, 3, PHOTOMETRIC_RGB, SAMPLEFORMAT_UINT, "32-bit TIFF samples"},
        {8, 4, PHOTOMETRIC_SEPARATED, SAMPLEFORMAT_UINT, "CMYK TIFF"},
        {8, 1, PHOTOMETRIC_PALETTE, SAMPLEFORMAT_UINT, "palette"},
        {8, 3, PHOTOMETRIC_CIELAB, SAMPLEFORMAT_UINT, "L*a*b*"},
        {1, 1, PHOTOMETRIC_MINISBLACK, SAMPLEFORMAT_UINT, "1-bit TIFF samples"},
        {4, 1, PHOTOMETRIC_MINISBLACK, SAMPLEFORMAT_UINT, "4-bit TIFF samples"},
        {12, 1, PHOTOMETRIC_MINISBLACK, SAMPLEFORMAT_UINT, "12-bit packed"},
    };
    for (size_t i = 0; i < sizeof r / sizeof r[0]; i++) {
        char p[512];
        snprintf(p, sizeof p, "%s/refuse%zu.tif", check_tmpdir(), i);
        TIFF *tif = TIFFOpen(p, "w");
        uint32_t w = 16, h = 4;
        TIFFSetField(tif, TIFFTAG_IMAGEWIDTH, w);
        TIFFSetField(tif, TIFFTAG_IMAGELENGTH, h);
        TIFFSetField(tif, TIFFTAG_BITSPERSAMPLE, r[i].bps);
        TIFFSetField(tif, TIFFTAG_SAMPLESPERPIXEL, r[i].colour);
        TIFFSetField(tif, TIFFTAG_PHOTOMETRIC, r[i].photometric);
        TIFFSetField(tif, TIFFTAG_SAMPLEFORMAT, r[i].format);
        TIFFSetField(tif, TIFFTAG_PLANARCONFIG, PLANARCONFIG_CONTIG);
        TIFFSetField(tif, TIFFTAG_ROWSPERSTRIP, h);
        if (r[i].photometric == PHOTOMETRIC_PALETTE) {
            uint16_t map[256] = {0};
            TIFFSetField(tif, TIFFTAG_COLORMAP, map, map, map);
        }
        size_t bytes = (size_t)w * r[i].colour * r[i].bps / 8 * h;
        unsigned char *buf = calloc(bytes, 1);
        TIFFWriteEncodedStrip(tif, 0, buf, (tmsize_t)bytes);
        free(buf);
        TIFFClose(tif);
        lam_image *img = NULL;
        lam_error err;
        check_int(load(p, NULL, &img, &err), LAM_EFORMAT, "refused: %s", r[i].words);
        check_true(strstr(err.message, r[i].words) != NULL && !strcmp(err.file, p),
                   "message says \"%s\" and names the file: %s", r[i].words, err.message);
        lam_image_free(img);
    }
}

/* Raw mosaics: PhotometricInterpretation CFA (TIFF/EP), a DNGVersion tag,
 * and a mosaic kept in a SubIFD behind a thumbnail (as NEF does). */
static void test_camera_raw(void)
{
    const char *names[3] = {"cfa.tif", "dng.tif", "subifd.tif"};
    for (int k = 0; k < 3; k++) {
        TIFF *tif = TIFFOpen(tmp(names[k]), "w");
        uint64_t sub_off[1] = {0};
        for (int d = 0; d < (k == 2 ? 2 : 1); d++) {
            int mosaic = k != 2 || d == 1;
            TIFFSetField(tif, TIFFTAG_IMAGEWIDTH, 8u);
            TIFFSetField(tif, TIFFTAG_IMAGELENGTH, 8u);
            TIFFSetField(tif, TIFFTAG_BITSPERSAMPLE, 16);
            TIFFSetField(tif, TIFFTAG_SAMPLESPERPIXEL, 1);
            TIFFSetField(tif, TIFFTAG_ROWSPERSTRIP, 8u);
            TIFFSetField(tif, TIFFTAG_PHOTOMETRIC,
                         mosaic && k != 1 ? PHOTOMETRIC_CFA : PHOTOMETRIC_MINISBLACK);
            if (k == 1)
                TIFFSetField(tif, TIFFTAG_DNGVERSION, "\001\004\000\000");
            if (k == 2 && d == 0) {
                TIFFSetField(tif, TIFFTAG_SUBFILETYPE, FILETYPE_REDUCEDIMAGE);
                TIFFSetField(tif, TIFFTAG_SUBIFD, 1, sub_off);
            }
            uint16_t px[64] = {0};
            TIFFWriteEncodedStrip(tif, 0, px, sizeof px);
            TIFFWriteDirectory(tif);
        }
        TIFFClose(tif);
        lam_image *img = NULL;
        lam_error err;
        check_int(load(tmp(names[k]), NULL, &img, &err), LAM_EFORMAT, "camera raw refused (%s)",
                  names[k]);
        check_true(strstr(err.message, "camera raw file") &&
                       strstr(err.message, "convert it to a 16-bit TIFF first"),
                   "raw message (%s): %s", names[k], err.message);
        lam_image_free(img);
    }
}

static void test_resolution(void)
{
    static const struct {
        float xres;
        uint16_t unit;
        double um;
        const char *what;
    } r[] = {
        {254000.0f, RESUNIT_INCH, 0.1, "254000 px/inch = 0.1 um (25.4 mm per inch)"},
        {10000.0f, RESUNIT_CENTIMETER, 1.0, "10000 px/cm = 1 um"},
        {4000.0f, RESUNIT_NONE, 0.0, "unit none: no pixel size"},
        {72.0f, RESUNIT_INCH, 0.0, "72 dpi, a screen default (353 um): ignored"},
        {0.0f, RESUNIT_INCH, 0.0, "no resolution tags: 0"},
    };
    for (size_t i = 0; i < sizeof r / sizeof r[0]; i++) {
        tspec t = spec(8, 8, 8, 1);
        t.xres = r[i].xres;
        t.resunit = r[i].unit;
        write_tiff(tmp("res.tif"), &t);
        lam_image *img = NULL;
        lam_error err;
        load(tmp("res.tif"), NULL, &img, &err);
        check_abs(img ? img->um_per_px_file : -1, r[i].um, 1e-9, "%s", r[i].what);
        lam_image_free(img);
    }
}

/* A file inside a stream at an offset, read through fmemopen as the
 * fuzzer does: offsets are relative to where the stream stood. */
static void test_stream_offset(void)
{
    tspec t = spec(19, 11, 16, 3);
    t.compression = COMPRESSION_LZW;
    write_tiff(tmp("s.tif"), &t);
    FILE *fp = fopen(tmp("s.tif"), "rb");
    fseek(fp, 0, SEEK_END);
    long n = ftell(fp);
    rewind(fp);
    unsigned char *buf = malloc((size_t)n + 100);
    memset(buf, 'x', 100);
    size_t got = fread(buf + 100, 1, (size_t)n, fp);
    fclose(fp);
    FILE *mem = fmemopen(buf, got + 100, "rb");
    fseek(mem, 100, SEEK_SET);
    lam_image *a = NULL, *b = NULL;
    lam_error err;
    lam_error_clear(&err);
    check_int(lam_image_load_stream(mem, "mem", NULL, &a, &err), LAM_OK,
              "TIFF read from a memory stream at offset 100 (%s)", err.message);
    fclose(mem);
    load(tmp("s.tif"), NULL, &b, &err);
    check_true(same_pixels(a, b), "same pixels as from the file");
    lam_image_free(a);
    lam_image_free(b);
    free(buf);
}

/* Truncate and flip bytes; every outcome a status, nothing on stderr. */
static void test_damage(void)
{
    tspec t = spec(40, 30, 16, 3);
    t.compression = COMPRESSION_LZW;
    t.tile = 16;
    write_tiff(tmp("d.tif"), &t);
    FILE *fp = fopen(tmp("d.tif"), "rb");
    unsigned char buf[65536];
    size_t n = fread(buf, 1, sizeof buf, fp);
    fclose(fp);
    char cut[512], errlog[512];
    check_path(cut, sizeof cut, check_tmpdir(), "cut.tif");
    check_path(errlog, sizeof errlog, check_tmpdir(), "stderr.txt");
    fflush(stderr);
    int saved = dup(2);
    FILE *log = freopen(errlog, "w", stderr);
    int all_fail = 1, named = 1, statuses = 1;
    uint32_t lcg = 77;
    for (size_t len = 0; len < n; len += n / 101 + 1) {
        FILE *o = fopen(cut, "wb");
        fwrite(buf, 1, len, o);
        fclose(o);
        lam_image *img = NULL;
        lam_error err;
        lam_status st = load(cut, NULL, &img, &err);
        all_fail &= st != LAM_OK;
        named &= st == LAM_OK || (err.message[0] && !strcmp(err.file, cut));
        lam_image_free(img);
    }
    for (int k = 0; k < 300; k++) {
        unsigned char copy[65536];
        memcpy(copy, buf, n);
        for (int f = 0; f < 3; f++) {
            lcg = lcg * 1664525u + 1013904223u;
            copy[4 + (lcg >> 8) % (n - 4)] ^= (unsigned char)(1u + (lcg >> 3) % 255u);
        }
        FILE *o = fopen(cut, "wb");
        fwrite(copy, 1, n, o);
        fclose(o);
        lam_image *img = NULL;
        lam_error err;
        lam_status st = load(cut, NULL, &img, &err);
        statuses &= st == LAM_OK || st == LAM_EFORMAT || st == LAM_ETOOBIG;
        lam_image_free(img);
    }
    fflush(stderr);
    dup2(saved, 2);
    close(saved);
    (void)log;
    struct stat sb;
    long long logged = stat(errlog, &sb) == 0 ? (long long)sb.st_size : -1;
    check_true(all_fail, "TIFF truncated at ~100 offsets: every load fails");
    check_true(named, "truncated TIFF: every failure has a message naming the file");
    check_true(statuses, "TIFF with flipped bytes: OK or a format error, 300 variants");
    check_int(logged, 0, "libtiff printed nothing on stderr (bytes written there)");
}

/* Dimensions are checked before pixel buffers exist: a header claiming
 * 100000 x 100000 with no data behind it. */
static void test_limits(void)
{
    TIFF *tif = TIFFOpen(tmp("huge.tif"), "w");
    TIFFSetField(tif, TIFFTAG_IMAGEWIDTH, 100000u);
    TIFFSetField(tif, TIFFTAG_IMAGELENGTH, 100000u);
    TIFFSetField(tif, TIFFTAG_BITSPERSAMPLE, 8);
    TIFFSetField(tif, TIFFTAG_SAMPLESPERPIXEL, 1);
    TIFFSetField(tif, TIFFTAG_PHOTOMETRIC, PHOTOMETRIC_MINISBLACK);
    TIFFSetField(tif, TIFFTAG_ROWSPERSTRIP, 100000u);
    unsigned char px[16] = {0};
    TIFFWriteRawStrip(tif, 0, px, sizeof px);
    TIFFWriteDirectory(tif);
    TIFFClose(tif);
    lam_image *img = NULL;
    lam_error err;
    check_int(load(tmp("huge.tif"), NULL, &img, &err), LAM_ETOOBIG,
              "100000x100000 TIFF header refused by the size check");
    check_true(strstr(err.message, "100000x100000") != NULL, "message gives the size: %s",
               err.message);
    tspec t = spec(37, 23, 8, 3);
    write_tiff(tmp("small.tif"), &t);
    lam_load_options opt = lam_load_options_default();
    opt.max_pixels = 500;
    check_int(load(tmp("small.tif"), &opt, &img, &err), LAM_ETOOBIG,
              "37x23 TIFF refused under a 500-pixel limit");
}

/* 8-bit YCbCr with JPEG compression: libtiff converts it to RGB. */
static void test_ycbcr_jpeg(void)
{
    if (!TIFFIsCODECConfigured(COMPRESSION_JPEG)) {
        check_true(1, "libtiff without JPEG: YCbCr case not applicable");
        return;
    }
    const uint32_t w = 32, h = 16;
    TIFF *tif = TIFFOpen(tmp("ycc.tif"), "w");
    TIFFSetField(tif, TIFFTAG_IMAGEWIDTH, w);
    TIFFSetField(tif, TIFFTAG_IMAGELENGTH, h);
    TIFFSetField(tif, TIFFTAG_BITSPERSAMPLE, 8);
    TIFFSetField(tif, TIFFTAG_SAMPLESPERPIXEL, 3);
    TIFFSetField(tif, TIFFTAG_COMPRESSION, COMPRESSION_JPEG);
    TIFFSetField(tif, TIFFTAG_PHOTOMETRIC, PHOTOMETRIC_YCBCR);
    TIFFSetField(tif, TIFFTAG_JPEGCOLORMODE, JPEGCOLORMODE_RGB);
    TIFFSetField(tif, TIFFTAG_JPEGQUALITY, 95);
    TIFFSetField(tif, TIFFTAG_PLANARCONFIG, PLANARCONFIG_CONTIG);
    TIFFSetField(tif, TIFFTAG_ROWSPERSTRIP, 16u);
    unsigned char row[32 * 3];
    for (uint32_t y = 0; y < h; y++) {
        for (uint32_t x = 0; x < w; x++) {
            row[3 * x] = (unsigned char)(60 + 4 * x);
            row[3 * x + 1] = (unsigned char)(90 + 3 * y);
            row[3 * x + 2] = 140;
        }
        TIFFWriteScanline(tif, row, y, 0);
    }
    TIFFClose(tif);
    lam_load_options opt = lam_load_options_default();
    opt.transfer.kind = LAM_TRANSFER_LINEAR;
    lam_image *img = NULL;
    lam_error err;
    check_int(load(tmp("ycc.tif"), &opt, &img, &err), LAM_OK,
              "JPEG-compressed YCbCr TIFF loads (%s)", err.message);
    int worst = 0;
    for (uint32_t y = 0; img && y < h; y++)
        for (uint32_t x = 0; x < w; x++) {
            int d0 = abs((int)lroundf(img->plane[0][y * w + x] * 255.0f) - (int)(60 + 4 * x));
            int d1 = abs((int)lroundf(img->plane[1][y * w + x] * 255.0f) - (int)(90 + 3 * y));
            worst = d0 > worst ? d0 : worst;
            worst = d1 > worst ? d1 : worst;
        }
    check_true(img && worst <= 6, "YCbCr decoded to RGB in top-down order (worst %d levels, "
               "JPEG quality 95)", worst);
    lam_image_free(img);

    /* the same strip cut in half: libjpeg only warns and pads with grey,
     * lamina refuses (as for a truncated JPEG file) */
    TIFF *in = TIFFOpen(tmp("ycc.tif"), "r");
    TIFF *out = TIFFOpen(tmp("ycc-cut.tif"), "w");
    tmsize_t raw_n = TIFFRawStripSize(in, 0);
    unsigned char *raw = malloc((size_t)raw_n);
    raw_n = TIFFReadRawStrip(in, 0, raw, raw_n);
    uint32_t tn = 0;
    void *tables = NULL;
    TIFFGetField(in, TIFFTAG_JPEGTABLES, &tn, &tables);
    TIFFSetField(out, TIFFTAG_IMAGEWIDTH, w);
    TIFFSetField(out, TIFFTAG_IMAGELENGTH, h);
    TIFFSetField(out, TIFFTAG_BITSPERSAMPLE, 8);
    TIFFSetField(out, TIFFTAG_SAMPLESPERPIXEL, 3);
    TIFFSetField(out, TIFFTAG_COMPRESSION, COMPRESSION_JPEG);
    TIFFSetField(out, TIFFTAG_PHOTOMETRIC, PHOTOMETRIC_YCBCR);
    TIFFSetField(out, TIFFTAG_ROWSPERSTRIP, 16u);
    if (tn)
        TIFFSetField(out, TIFFTAG_JPEGTABLES, tn, tables);
    TIFFWriteRawStrip(out, 0, raw, raw_n / 2);
    TIFFClose(out);
    TIFFClose(in);
    free(raw);
    check_int(load(tmp("ycc-cut.tif"), &opt, &img, &err), LAM_EFORMAT,
              "JPEG strip cut in half: refused");
    check_true(strstr(err.message, "damaged TIFF (JPEG data)") != NULL, "says so: %s",
               err.message);
    lam_image_free(img);
}

int main(void)
{
    check_begin("test_tiff");
    TIFFSetWarningHandler(NULL); /* the writer's notes (legacy deflate id) are expected */
    test_layouts();
    test_piped_layouts();
    test_kinds_and_pages();
    test_refusals();
    test_camera_raw();
    test_resolution();
    test_stream_offset();
    test_damage();
    test_limits();
    test_ycbcr_jpeg();
    return check_summary();
}
