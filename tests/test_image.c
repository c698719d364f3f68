/* test_image.c - image loading in linear light, PNG writing, hostile files.
 * Outside references: the IEC 61966-2-1 sRGB formula, Little CMS 2
 * (Debian liblcms2-dev) as an independent sRGB decoder, and djpeg/cjpeg from
 * Debian's libjpeg-turbo-progs as an independent JPEG codec. */
#include "check.h"
#include "lamina/image.h"
#include "lamina/png.h"
#include "lamina/outfile.h"

#include <lcms2.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

static uint32_t crc_table[256];

static void crc_init(void)
{
    for (uint32_t n = 0; n < 256; n++) {
        uint32_t c = n;
        for (int k = 0; k < 8; k++)
            c = c & 1 ? 0xedb88320u ^ (c >> 1) : c >> 1;
        crc_table[n] = c;
    }
}

static uint32_t crc(const unsigned char *p, size_t n)
{
    uint32_t c = 0xffffffffu;
    for (size_t i = 0; i < n; i++)
        c = crc_table[(c ^ p[i]) & 0xff] ^ (c >> 8);
    return c ^ 0xffffffffu;
}

static void put32(unsigned char *p, uint32_t v)
{
    p[0] = (unsigned char)(v >> 24);
    p[1] = (unsigned char)(v >> 16);
    p[2] = (unsigned char)(v >> 8);
    p[3] = (unsigned char)v;
}

static unsigned char *read_all(const char *path, size_t *n)
{
    FILE *fp = fopen(path, "rb");
    if (!fp)
        return NULL;
    fseek(fp, 0, SEEK_END);
    long len = ftell(fp);
    rewind(fp);
    unsigned char *buf = malloc((size_t)len + 1);
    *n = fread(buf, 1, (size_t)len, fp);
    fclose(fp);
    return buf;
}

static void write_all(const char *path, const unsigned char *p, size_t n)
{
    FILE *fp = fopen(path, "wb");
    fwrite(p, 1, n, fp);
    fclose(fp);
}

/* Deterministic high-entropy test pattern (fixed LCG seed). */
static uint32_t lcg = 2385u;
static unsigned rnd(unsigned mod)
{
    lcg = lcg * 1664525u + 1013904223u;
    return (lcg >> 8) % mod;
}

static void test_srgb_formula(void)
{
    /* IEC 61966-2-1:1999 formula and the threshold continuity */
    lam_transfer t = {LAM_TRANSFER_SRGB, 0};
    check_abs(lam_transfer_decode(&t, 0.5), pow((0.5 + 0.055) / 1.055, 2.4), 1e-15,
              "sRGB decode 0.5 (IEC 61966-2-1 formula)");
    check_abs(lam_transfer_decode(&t, 0.04), 0.04 / 12.92, 1e-15,
              "sRGB decode in the linear toe (IEC 61966-2-1)");
    check_abs(lam_transfer_decode(&t, 1.0), 1.0, 1e-15, "sRGB decode of full scale");
    double worst = 0;
    for (int i = 0; i <= 1000; i++) {
        double v = i / 1000.0;
        worst = fmax(worst, fabs(lam_transfer_encode(&t, lam_transfer_decode(&t, v)) - v));
    }
    check_abs(worst, 0, 1e-12, "sRGB encode inverts decode");
    lam_transfer g;
    check_int(lam_transfer_parse("2.2", &g), 0, "parse gamma 2.2");
    check_abs(lam_transfer_decode(&g, 0.5), pow(0.5, 2.2), 1e-15, "gamma 2.2 decode");
    check_int(lam_transfer_parse("banana", &g), -1, "parse rejects a word");
}

static void test_srgb_against_lcms(void)
{
    /* Little CMS 2: built-in sRGB profile -> linear sRGB primaries (gamma 1) */
    cmsHPROFILE srgb = cmsCreate_sRGBProfile();
    cmsCIExyY d65;
    cmsWhitePointFromTemp(&d65, 6504);
    cmsCIExyYTRIPLE prim = {{0.64, 0.33, 1}, {0.30, 0.60, 1}, {0.15, 0.06, 1}};
    cmsToneCurve *lin = cmsBuildGamma(NULL, 1.0);
    cmsToneCurve *curves[3] = {lin, lin, lin};
    cmsHPROFILE linear = cmsCreateRGBProfile(&d65, &prim, curves);
    cmsHTRANSFORM xf = cmsCreateTransform(srgb, TYPE_RGB_DBL, linear, TYPE_RGB_DBL,
                                          INTENT_RELATIVE_COLORIMETRIC, cmsFLAGS_NOOPTIMIZE);
    double worst = 0;
    lam_transfer t = {LAM_TRANSFER_SRGB, 0};
    for (int v = 0; v <= 255; v += 5) {
        double in[3] = {v / 255.0, v / 255.0, v / 255.0}, out[3];
        cmsDoTransform(xf, in, out, 1);
        worst = fmax(worst, fabs(out[1] - lam_transfer_decode(&t, v / 255.0)));
    }
    check_abs(worst, 0, 2e-3, "sRGB decode agrees with Little CMS 2 on greys (0..255)");
    cmsDeleteTransform(xf);
    cmsCloseProfile(srgb);
    cmsCloseProfile(linear);
    cmsFreeToneCurve(lin);
}

static void test_png_round_trip(void)
{
    char path[512];
    const size_t w = 37, h = 23;
    uint8_t *rgb = malloc(w * h * 3);
    for (size_t i = 0; i < w * h * 3; i++)
        rgb[i] = (uint8_t)rnd(256);
    check_path(path, sizeof path, check_tmpdir(), "rt8.png");
    lam_error err;
    lam_error_clear(&err);
    check_int(lam_png_save_rgb8(path, rgb, w, h, 3, &err), LAM_OK, "save 8-bit RGB PNG");
    lam_load_options opt = lam_load_options_default();
    opt.transfer.kind = LAM_TRANSFER_LINEAR;
    lam_image *img = NULL;
    check_int(lam_image_load(path, &opt, &img, &err), LAM_OK, "load 8-bit RGB PNG");
    size_t mism = 0, clipped = 0, bits = 0;
    for (size_t i = 0; img && i < w * h; i++) {
        for (int c = 0; c < 3; c++)
            mism += lroundf(img->plane[c][i] * 255.0f) != rgb[i * 3 + (size_t)c];
        int top = rgb[i * 3] == 255 || rgb[i * 3 + 1] == 255 || rgb[i * 3 + 2] == 255;
        clipped += (size_t)top;
        bits += lam_image_clipped(img, i % w, i / w) != top;
    }
    check_int((long long)bits, 0, "clip mask bit set exactly at the saturated pixels "
              "(37 px rows: bits that cross bytes)");
    check_int((long long)mism, 0, "8-bit PNG round trip is exact");
    check_int(img ? (long long)img->clipped_count : -1, (long long)clipped,
              "clipped pixels counted (any channel at 255)");
    check_int(img ? img->bit_depth : 0, 8, "bit depth 8 recorded");
    lam_image_free(img);
    img = NULL;
    /* default transfer for 8-bit is sRGB */
    check_int(lam_image_load(path, NULL, &img, &err), LAM_OK, "load with defaults");
    lam_transfer s = {LAM_TRANSFER_SRGB, 0};
    check_abs(img ? img->plane[1][5] : -1, lam_transfer_decode(&s, rgb[5 * 3 + 1] / 255.0),
              1e-6, "8-bit default decodes sRGB");
    lam_image_free(img);
    img = NULL;

    uint16_t *g16 = malloc(w * h * 2);
    for (size_t i = 0; i < w * h; i++)
        g16[i] = (uint16_t)rnd(65536);
    check_path(path, sizeof path, check_tmpdir(), "rt16.png");
    check_int(lam_png_save_16(path, g16, w, h, 1, &err), LAM_OK, "save 16-bit grey PNG");
    check_int(lam_image_load(path, NULL, &img, &err), LAM_OK, "load 16-bit grey PNG");
    mism = 0;
    for (size_t i = 0; img && i < w * h; i++)
        for (int c = 0; c < 3; c++)
            mism += lround(img->plane[c][i] * 65535.0) != g16[i];
    check_int((long long)mism, 0, "16-bit PNG round trip exact (linear default, grey replicated)");
    check_int(img ? img->bit_depth : 0, 16, "bit depth 16 recorded");
    lam_image_free(img);
    img = NULL;

    uint16_t *rgb16 = malloc(w * h * 6);
    for (size_t i = 0; i < w * h * 3; i++)
        rgb16[i] = (uint16_t)rnd(65536);
    check_path(path, sizeof path, check_tmpdir(), "rt16rgb.png");
    check_int(lam_png_save_16(path, rgb16, w, h, 3, &err), LAM_OK, "save 16-bit RGB PNG");
    check_int(lam_image_load(path, NULL, &img, &err), LAM_OK, "load 16-bit RGB PNG");
    mism = 0;
    for (size_t i = 0; img && i < w * h; i++)
        for (int c = 0; c < 3; c++)
            mism += lround(img->plane[c][i] * 65535.0) != rgb16[i * 3 + (size_t)c];
    check_int((long long)mism, 0, "16-bit RGB PNG round trip exact");
    lam_image_free(img);
    free(rgb);
    free(g16);
    free(rgb16);
}

/* Pixel (x, y) of a test picture of height h. */
typedef void (*pixel_fn)(size_t x, size_t y, size_t h, unsigned char px[3]);

/* A w x h PPM of pixel() under the scratch folder as STEM.ppm, made into
 * STEM.jpg by cjpeg at 'quality' and decoded to STEM-djpeg.ppm by djpeg
 * (Debian libjpeg-turbo-progs, an independent codec); the three paths in
 * ppm, jpg and dec (512 bytes each). 1 when both tools ran. */
static int cjpeg_djpeg(const char *stem, size_t w, size_t h, pixel_fn pixel, int quality,
                       char *ppm, char *jpg, char *dec)
{
    char name[128], cmd[4096];
    snprintf(name, sizeof name, "%s.ppm", stem);
    check_path(ppm, 512, check_tmpdir(), name);
    snprintf(name, sizeof name, "%s.jpg", stem);
    check_path(jpg, 512, check_tmpdir(), name);
    snprintf(name, sizeof name, "%s-djpeg.ppm", stem);
    check_path(dec, 512, check_tmpdir(), name);
    FILE *fp = fopen(ppm, "wb");
    fprintf(fp, "P6\n%zu %zu\n255\n", w, h);
    for (size_t y = 0; y < h; y++)
        for (size_t x = 0; x < w; x++) {
            unsigned char px[3];
            pixel(x, y, h, px);
            fwrite(px, 1, 3, fp);
        }
    fclose(fp);
    snprintf(cmd, sizeof cmd, "cjpeg -quality %d %s > %s && djpeg -pnm %s > %s", quality, ppm,
             jpg, jpg, dec);
    return check_true(system(cmd) == 0, "cjpeg/djpeg available (Debian libjpeg-turbo-progs)");
}

static void ramp_pixel(size_t x, size_t y, size_t h, unsigned char px[3])
{
    (void)h;
    px[0] = (unsigned char)(x * 4), px[1] = (unsigned char)(y * 5);
    px[2] = (unsigned char)(128 + rnd(40));
}

/* Write a PPM, make a JPEG with cjpeg, decode it with djpeg and with lamina. */
static void test_jpeg_against_djpeg(void)
{
    char ppm[512], jpg[512], dec[512], cmd[4096];
    const size_t w = 64, h = 48;
    if (!cjpeg_djpeg("in", w, h, ramp_pixel, 90, ppm, jpg, dec))
        return;
    size_t n;
    unsigned char *ref = read_all(dec, &n);
    /* header "P6\n64 48\n255\n" */
    size_t hdr = n - w * h * 3;
    lam_load_options opt = lam_load_options_default();
    opt.transfer.kind = LAM_TRANSFER_LINEAR;
    lam_image *img = NULL;
    lam_error err;
    check_int(lam_image_load(jpg, &opt, &img, &err), LAM_OK, "load JPEG");
    int worst = 0;
    for (size_t i = 0; img && i < w * h; i++)
        for (int c = 0; c < 3; c++) {
            int d = abs((int)lroundf(img->plane[c][i] * 255.0f) - ref[hdr + i * 3 + (size_t)c]);
            worst = d > worst ? d : worst;
        }
    check_true(img && worst <= 1, "JPEG decode equals djpeg within 1 level (worst %d)", worst);
    check_int(img ? img->kind : 0, LAM_FILE_JPEG, "JPEG kind recorded");
    check_int(img ? (long long)img->transfer.kind : 0, LAM_TRANSFER_LINEAR,
              "explicit transfer overrides default");
    lam_image_free(img);
    free(ref);
    /* grey JPEG */
    snprintf(cmd, sizeof cmd, "cjpeg -grayscale -quality 90 %s > %s", ppm, jpg);
    if (system(cmd) == 0) {
        img = NULL;
        check_int(lam_image_load(jpg, NULL, &img, &err), LAM_OK, "load grey JPEG");
        check_true(img && img->source_channels == 1 && img->plane[0][77] == img->plane[2][77],
                   "grey JPEG replicated into RGB");
        lam_image_free(img);
    }
}

/* The same file as a progressive JPEG (scans buffered by libjpeg) and as
 * a grey one: strips equal the whole-copy decode, and the codes decoded
 * alone equal the kept copy (grey replicated into R, G and B). */
static void check_jpeg_variants(const char *ppm, const char *jpg)
{
    static const char *const flags[] = {"-progressive", "-grayscale"};
    for (int v = 0; v < 2; v++) {
        char cmd[2048];
        snprintf(cmd, sizeof cmd, "cjpeg %s -quality 90 %s > %s", flags[v], ppm, jpg);
        if (!check_true(system(cmd) == 0, "cjpeg %s", flags[v]))
            continue;
        lam_load_options strip = lam_load_options_default(), keep = strip, codes = strip;
        keep.keep_display8 = 1;
        codes.display8_only = 1;
        lam_image *a = NULL, *b = NULL, *c = NULL;
        lam_error err;
        int ok = lam_image_load(jpg, &strip, &a, &err) == LAM_OK &&
                 lam_image_load(jpg, &keep, &b, &err) == LAM_OK &&
                 lam_image_load(jpg, &codes, &c, &err) == LAM_OK;
        size_t n = ok ? a->width * a->height : 0;
        check_true(ok && !memcmp(a->plane[0], b->plane[0], 3 * n * sizeof(float)) &&
                       !memcmp(c->display8, b->display8, 3 * n),
                   "%s JPEG: strips, kept copy and codes alone agree", flags[v]);
        lam_image_free(a), lam_image_free(b), lam_image_free(c);
    }
}

/* A JPEG taller than the loader's strips (32 rows: eighteen whole strips
 * and a part), some pixels saturated: the planes decoded strip by strip agree
 * with djpeg (Debian libjpeg-turbo-progs, an independent decoder) in every
 * row, equal the planes decoded through a whole kept copy bit for bit, and
 * the 8-bit codes decoded alone (display8_only) are djpeg's exactly. The
 * same option on PNG files after it. */
static void tall_pixel(size_t x, size_t y, size_t h, unsigned char px[3])
{
    px[0] = (unsigned char)(y * 255 / h), px[1] = (unsigned char)(x + 60);
    px[2] = (unsigned char)(y > 400 && x < 40 ? 255 : 90 + rnd(30));
}

static void test_jpeg_strips_and_codes(void)
{
    char ppm[512], jpg[512], dec[512];
    const size_t w = 150, h = 600;
    if (!cjpeg_djpeg("tall", w, h, tall_pixel, 95, ppm, jpg, dec))
        return;
    size_t n;
    unsigned char *ref = read_all(dec, &n);
    const unsigned char *codes = ref + n - w * h * 3;
    lam_load_options opt = lam_load_options_default();
    opt.transfer.kind = LAM_TRANSFER_LINEAR;
    lam_image *strips = NULL, *whole = NULL, *only = NULL;
    lam_error err;
    check_int(lam_image_load(jpg, &opt, &strips, &err), LAM_OK, "tall JPEG loads in strips");
    opt.keep_display8 = 1;
    check_int(lam_image_load(jpg, &opt, &whole, &err), LAM_OK, "... and with a kept copy");
    opt.keep_display8 = 0;
    opt.display8_only = 1;
    check_int(lam_image_load(jpg, &opt, &only, &err), LAM_OK, "... and as 8-bit codes alone");
    if (!strips || !whole || !only) {
        lam_image_free(strips), lam_image_free(whole), lam_image_free(only), free(ref);
        return;
    }
    int worst = 0;
    for (size_t i = 0; i < w * h; i++)
        for (int c = 0; c < 3; c++) {
            int d = abs((int)lroundf(strips->plane[c][i] * 255.0f) - codes[i * 3 + (size_t)c]);
            worst = d > worst ? d : worst;
        }
    check_true(worst <= 1, "strip-decoded planes equal djpeg within 1 level in all %zu rows "
               "(worst %d)", h, worst);
    check_true(!memcmp(strips->plane[0], whole->plane[0], 3 * w * h * sizeof(float)) &&
                   !memcmp(strips->clip_bits, whole->clip_bits, h * whole->clip_stride),
               "strip-decoded planes and clip mask equal the whole-copy decode bit for bit");
    size_t wrong_bits = 0;
    for (size_t y = 0; y < h; y++)
        for (size_t x = 0; x < w; x++) {
            const unsigned char *q = codes + (y * w + x) * 3;
            wrong_bits += lam_image_clipped(strips, x, y) != (q[0] == 255 || q[1] == 255 || q[2] == 255);
        }
    check_true(wrong_bits == 0, "the clip mask's bit (x, y) is set exactly where djpeg gives a "
               "code of 255 (%zu wrong)", wrong_bits);
    check_true(strips->clipped_count == whole->clipped_count && strips->clipped_count > 0,
               "saturated pixels counted alike (%zu, %zu)", strips->clipped_count,
               whole->clipped_count);
    check_true(!only->plane[0] && !only->clip_bits && !memcmp(only->display8, codes, w * h * 3),
               "codes decoded alone: no planes, and djpeg's codes exactly");
    lam_image_free(strips), lam_image_free(whole), lam_image_free(only);
    free(ref);
    check_jpeg_variants(ppm, jpg);
    /* PNG: an 8-bit file's codes alone equal those kept by a full load; a
     * 16-bit file has none (refused, so that a caller falls back) */
    lam_image *png = NULL, *full = NULL;
    char p[512];
    check_path(p, sizeof p, check_tmpdir(), "rt8.png");
    check_int(lam_image_load(p, &opt, &png, &err), LAM_OK, "8-bit PNG: codes alone");
    lam_load_options keep = lam_load_options_default();
    keep.keep_display8 = 1;
    check_int(lam_image_load(p, &keep, &full, &err), LAM_OK, "8-bit PNG: full load");
    check_true(png && full && !png->plane[0] && png->width == full->width &&
                   !memcmp(png->display8, full->display8, 3 * full->width * full->height),
               "8-bit PNG: the codes alone equal the full load's kept copy");
    lam_image_free(png), lam_image_free(full);
    png = NULL;
    check_int(lam_image_load(check_path(p, sizeof p, check_tmpdir(), "rt16.png"), &opt, &png, &err),
              LAM_EINVAL, "16-bit PNG: no codes alone");
    check_true(strstr(err.message, "16-bit") != NULL, "... saying why: %s", err.message);
    lam_image_free(png);
}

/* Cut a valid file at many offsets and flip bytes: every result must be a
 * clean status, never a crash (run under ASan by make asan). */
static void test_truncated_and_flipped(const char *src, const char *what)
{
    size_t n;
    unsigned char *buf = read_all(src, &n);
    if (!check_true(buf != NULL, "read %s sample", what))
        return;
    char path[512];
    check_path(path, sizeof path, check_tmpdir(), "cut.bin");
    int all_fail = 1, any_crash_free = 1;
    for (size_t cut = 0; cut < n; cut += (n / 97) + 1) {
        write_all(path, buf, cut);
        lam_image *img = NULL;
        lam_error err;
        lam_error_clear(&err);
        lam_status st = lam_image_load(path, NULL, &img, &err);
        if (st == LAM_OK)
            all_fail = 0;
        if (st != LAM_OK && (!err.message[0] || strcmp(err.file, path)))
            any_crash_free = 0;
        lam_image_free(img);
    }
    check_true(all_fail, "%s truncated at ~100 offsets: every load fails", what);
    check_true(any_crash_free, "%s truncated: every failure names the file with a message", what);
    int statuses_ok = 1;
    for (int k = 0; k < 200; k++) {
        unsigned char *copy = malloc(n);
        memcpy(copy, buf, n);
        for (int f = 0; f < 3; f++)
            copy[8 + rnd((unsigned)(n - 8))] ^= (unsigned char)(1u + rnd(255));
        write_all(path, copy, n);
        lam_image *img = NULL;
        lam_error err;
        lam_error_clear(&err);
        lam_status st = lam_image_load(path, NULL, &img, &err);
        if (st != LAM_OK && st != LAM_EFORMAT && st != LAM_ETOOBIG)
            statuses_ok = 0;
        lam_image_free(img);
        free(copy);
    }
    check_true(statuses_ok, "%s with flipped bytes: OK or a format error, 200 variants", what);
    free(buf);
}

static void test_huge_header(void)
{
    crc_init();
    /* signature, IHDR, a (bogus) IDAT as real files have, IEND */
    unsigned char png[8 + 25 + 16 + 12];
    static const unsigned char sig[8] = {0x89, 'P', 'N', 'G', '\r', '\n', 0x1a, '\n'};
    memcpy(png, sig, 8);
    put32(png + 8, 13);
    memcpy(png + 12, "IHDR", 4);
    put32(png + 16, 100000);
    put32(png + 20, 100000);
    png[24] = 8;
    png[25] = 2;
    png[26] = png[27] = png[28] = 0;
    put32(png + 29, crc(png + 12, 17));
    put32(png + 33, 4);
    memcpy(png + 37, "IDAT", 4);
    memcpy(png + 41, "\x78\x9c\x03\x00", 4);
    put32(png + 45, crc(png + 37, 8));
    put32(png + 49, 0);
    memcpy(png + 53, "IEND", 4);
    put32(png + 57, crc(png + 53, 4));
    char path[512];
    check_path(path, sizeof path, check_tmpdir(), "huge.png");
    write_all(path, png, sizeof png);
    lam_image *img = NULL;
    lam_error err;
    lam_error_clear(&err);
    check_int(lam_image_load(path, NULL, &img, &err), LAM_ETOOBIG,
              "100000x100000 header refused by the size check, before pixel allocation");
    check_true(strstr(err.message, "100000x100000") != NULL, "message gives the size: %s",
               err.message);
    /* the limit is an option: a small real image above a small limit */
    lam_load_options opt = lam_load_options_default();
    opt.max_pixels = 500;
    check_path(path, sizeof path, check_tmpdir(), "rt8.png");
    lam_error_clear(&err);
    check_int(lam_image_load(path, &opt, &img, &err), LAM_ETOOBIG,
              "37x23 image refused under a 500-pixel limit");
}

static void test_bad_files(void)
{
    char path[512];
    lam_image *img = NULL;
    lam_error err;
    check_path(path, sizeof path, check_tmpdir(), "empty.png");
    write_all(path, (const unsigned char *)"", 0);
    check_int(lam_image_load(path, NULL, &img, &err), LAM_EFORMAT, "zero-byte file");
    check_path(path, sizeof path, check_tmpdir(), "text.png");
    write_all(path, (const unsigned char *)"hello world\n", 12);
    check_int(lam_image_load(path, NULL, &img, &err), LAM_EFORMAT, "text with .png name");
    lam_error_clear(&err);
    check_int(lam_image_load("/nonexistent/x.png", NULL, &img, &err), LAM_EIO,
              "missing file is an I/O error");
    check_str(err.file, "/nonexistent/x.png", "error names the file");
}

/* Large images go through the banded parallel encoder: libpng (the
 * independent decoder here) must read them back exactly. */
static void test_large_png(void)
{
    const size_t w = 1111, h = 1003;
    uint8_t *rgb = malloc(w * h * 3), *grey = malloc(w * h);
    for (size_t i = 0; i < w * h * 3; i++)
        rgb[i] = (uint8_t)(i % 7 == 0 ? rnd(256) : (i / 3000) & 255);
    for (size_t i = 0; i < w * h; i++)
        grey[i] = (uint8_t)((i / 911) % 5);
    char path[512];
    lam_error err;
    lam_error_clear(&err);
    lam_load_options opt = lam_load_options_default();
    opt.transfer.kind = LAM_TRANSFER_LINEAR;
    check_path(path, sizeof path, check_tmpdir(), "large-rgb.png");
    check_int(lam_png_save_rgb8(path, rgb, w, h, 3, &err), LAM_OK, "save a 1.1 MP RGB PNG (banded)");
    lam_image *img = NULL;
    check_int(lam_image_load(path, &opt, &img, &err), LAM_OK, "libpng reads it (%s)", err.message);
    size_t mism = 0;
    for (size_t k = 0; img && k < w * h; k++)
        for (int c = 0; c < 3; c++)
            mism += lroundf(img->plane[c][k] * 255.0f) != rgb[k * 3 + (size_t)c];
    check_int((long long)mism, 0, "banded RGB PNG round trip exact");
    lam_image_free(img);
    img = NULL;
    check_path(path, sizeof path, check_tmpdir(), "large-grey.png");
    check_int(lam_png_save_grey8(path, grey, w, h, &err), LAM_OK, "save a 1.1 MP grey PNG (banded)");
    check_int(lam_image_load(path, &opt, &img, &err), LAM_OK, "libpng reads the grey one");
    mism = 0;
    for (size_t k = 0; img && k < w * h; k++)
        mism += lroundf(img->plane[0][k] * 255.0f) != grey[k];
    check_int((long long)mism, 0, "banded grey PNG round trip exact");
    lam_image_free(img);
    free(rgb);
    free(grey);
}

static void test_atomic_write(void)
{
    lam_error err;
    lam_error_clear(&err);
    check_int(lam_outfile_write_buffer("/dev/full", "abc", 3, &err), LAM_EIO,
              "writing to /dev/full reports an I/O error");
    check_true(strstr(err.message, "/dev/full") != NULL, "message names /dev/full");
    char path[512];
    check_path(path, sizeof path, "/nonexistent-dir", "x.png");
    uint8_t px[3] = {1, 2, 3};
    check_int(lam_png_save_rgb8(path, px, 1, 1, 3, &err), LAM_EIO,
              "unwritable folder reports an I/O error");
    struct stat sb;
    check_true(stat(path, &sb) != 0, "no output file left behind");
}

/* Output folders: parents created, an existing folder accepted, a file or
 * an impossible path refused with the path named (POSIX mkdir semantics). */
static void test_make_dir(void)
{
    lam_error err;
    lam_error_clear(&err);
    char dir[512], file[600];
    check_path(dir, sizeof dir, check_tmpdir(), "made/a/b");
    check_int(lam_outfile_make_dir(dir, &err), LAM_OK, "folder and parents created");
    struct stat sb;
    check_true(stat(dir, &sb) == 0 && S_ISDIR(sb.st_mode), "the folder exists");
    check_int(lam_outfile_make_dir(dir, &err), LAM_OK, "an existing folder is fine");
    snprintf(file, sizeof file, "%s/f.bin", dir);
    check_int(lam_outfile_write_buffer(file, "x", 1, &err), LAM_OK, "a file in it");
    check_int(lam_outfile_make_dir(file, &err), LAM_EIO, "a file is not a folder");
    check_str(err.file, file, "the error names the file");
    lam_error_clear(&err);
    snprintf(file, sizeof file, "%s/f.bin/sub", dir);
    check_int(lam_outfile_make_dir(file, &err), LAM_EIO, "a folder below a file");
    check_true(strstr(err.message, "cannot create folder") != NULL, "says it cannot create it");
    lam_error_clear(&err);
    check_int(lam_outfile_make_dir("", &err), LAM_EIO, "an empty path");
}

int main(void)
{
    check_begin("test_image");
    test_srgb_formula();
    test_srgb_against_lcms();
    test_png_round_trip();
    test_jpeg_against_djpeg();
    test_jpeg_strips_and_codes();
    char p[512];
    test_truncated_and_flipped(check_path(p, sizeof p, check_tmpdir(), "rt8.png"), "PNG");
    test_truncated_and_flipped(check_path(p, sizeof p, check_tmpdir(), "in.jpg"), "JPEG");
    test_huge_header();
    test_bad_files();
    test_atomic_write();
    test_make_dir();
    test_large_png();
    return check_summary();
}
