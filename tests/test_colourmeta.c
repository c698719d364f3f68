/* test_colourmeta.c - colour metadata in PNG, JPEG and TIFF files turned
 * into linear light, and its precedence against the user's encoding.
 * Files are written here with libpng, libjpeg-turbo and libtiff (Debian);
 * ICC profiles are made and saved with Little CMS 2 (Debian liblcms2-dev).
 * Expected values come from the published curves, computed here:
 * IEC 61966-2-1:1999 (sRGB), the PNG specification (ISO/IEC 15948, gAMA:
 * sample = light^gamma) and Adobe RGB (1998) Color Image Encoding 2005-05
 * (gamma 563/256, primaries and D65 white of section 4.3). */
#include "check.h"
#include "lamina/image.h"

#include <jpeglib.h>
#include <lcms2.h>
#include <math.h>
#include <png.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <tiffio.h>

#define ADOBE_GAMMA (563.0 / 256.0) /* Adobe RGB (1998), section 4.3.1.2 */
#define W 32
#define H 8

static char path_buf[512];
static const char *tmp(const char *name)
{
    return check_path(path_buf, sizeof path_buf, check_tmpdir(), name);
}

/* IEC 61966-2-1:1999, section 5.2, written out here on purpose. */
static double iec_srgb(double v)
{
    return v <= 0.04045 ? v / 12.92 : pow((v + 0.055) / 1.055, 2.4);
}

/* Test pixel (x, y), channel c, 8-bit: covers 0..255 along x with an
 * offset per channel; the last column is pure red (unmixed check). */
static unsigned px8(int x, int y, int c)
{
    if (x == W - 1)
        return c == 0 ? 255u : 0u;
    return (unsigned)((x * 8 + y * 3 + c * 85) % 256);
}

/* ---- profiles ---- */

typedef struct blob {
    unsigned char *data;
    cmsUInt32Number len;
} blob;

static blob save_profile(cmsHPROFILE p, const char *desc)
{
    blob b = {NULL, 0};
    if (desc) {
        cmsMLU *mlu = cmsMLUalloc(NULL, 1);
        cmsMLUsetASCII(mlu, "en", "US", desc);
        cmsWriteTag(p, cmsSigProfileDescriptionTag, mlu);
        cmsMLUfree(mlu);
    }
    if (cmsSaveProfileToMem(p, NULL, &b.len) && (b.data = malloc(b.len)))
        cmsSaveProfileToMem(p, b.data, &b.len);
    cmsCloseProfile(p);
    return b;
}

/* A matrix/shaper RGB profile with Adobe RGB (1998) primaries and one
 * power law per channel. */
static blob rgb_profile(double gr, double gg, double gb, const char *desc)
{
    cmsCIExyY d65 = {0.3127, 0.3290, 1.0};
    cmsCIExyYTRIPLE prim = {{0.64, 0.33, 1.0}, {0.21, 0.71, 1.0}, {0.15, 0.06, 1.0}};
    cmsToneCurve *t[3] = {cmsBuildGamma(NULL, gr), cmsBuildGamma(NULL, gg),
                          cmsBuildGamma(NULL, gb)};
    blob b = save_profile(cmsCreateRGBProfile(&d65, &prim, t), desc);
    for (int i = 0; i < 3; i++)
        cmsFreeToneCurve(t[i]);
    return b;
}

static blob grey_profile(double g, const char *desc)
{
    cmsCIExyY d65 = {0.3127, 0.3290, 1.0};
    cmsToneCurve *t = cmsBuildGamma(NULL, g);
    blob b = save_profile(cmsCreateGrayProfile(&d65, t), desc);
    cmsFreeToneCurve(t);
    return b;
}

/* An RGB input profile that maps through a colour lookup table (A2B0)
 * and has no per-channel tone curves. */
static blob lut_profile(void)
{
    cmsHPROFILE p = cmsCreateProfilePlaceholder(NULL);
    cmsSetProfileVersion(p, 4.3);
    cmsSetDeviceClass(p, cmsSigInputClass);
    cmsSetColorSpace(p, cmsSigRgbData);
    cmsSetPCS(p, cmsSigLabData);
    cmsPipeline *pl = cmsPipelineAlloc(NULL, 3, 3);
    /* lutAtoBType needs A curves, the table and B curves (ICC.1:2010, 10.10) */
    cmsPipelineInsertStage(pl, cmsAT_END, cmsStageAllocToneCurves(NULL, 3, NULL));
    cmsPipelineInsertStage(pl, cmsAT_END, cmsStageAllocCLut16bit(NULL, 3, 3, 3, NULL));
    cmsPipelineInsertStage(pl, cmsAT_END, cmsStageAllocToneCurves(NULL, 3, NULL));
    cmsWriteTag(p, cmsSigAToB0Tag, pl);
    cmsWriteTag(p, cmsSigMediaWhitePointTag, cmsD50_XYZ());
    cmsPipelineFree(pl);
    return save_profile(p, "Bench 3 camera LUT");
}

/* ---- files ---- */

typedef struct meta {
    int srgb;
    double gama; /* PNG gAMA value, 0 for none */
    blob icc;
} meta;

static int write_png(const char *path, int depth, int grey, const meta *m)
{
    FILE *fp = fopen(path, "wb");
    png_structp png = png_create_write_struct(PNG_LIBPNG_VER_STRING, NULL, NULL, NULL);
    png_infop info = png_create_info_struct(png);
    if (!fp || setjmp(png_jmpbuf(png))) {
        png_destroy_write_struct(&png, &info);
        if (fp)
            fclose(fp);
        return -1;
    }
    png_init_io(png, fp);
    png_set_IHDR(png, info, W, H, depth, grey ? PNG_COLOR_TYPE_GRAY : PNG_COLOR_TYPE_RGB,
                 PNG_INTERLACE_NONE, PNG_COMPRESSION_TYPE_DEFAULT, PNG_FILTER_TYPE_DEFAULT);
    if (m->icc.data)
        png_set_iCCP(png, info, "test", 0, m->icc.data, m->icc.len);
    if (m->srgb)
        png_set_sRGB(png, info, PNG_sRGB_INTENT_PERCEPTUAL);
    if (m->gama > 0)
        png_set_gAMA(png, info, m->gama);
    png_write_info(png, info);
    int ch = grey ? 1 : 3, bytes = depth / 8;
    unsigned char row[W * 3 * 2];
    for (int y = 0; y < H; y++) {
        for (int x = 0; x < W; x++)
            for (int c = 0; c < ch; c++) {
                unsigned v = px8(x, y, c) * (depth == 16 ? 257u : 1u); /* big-endian on file */
                unsigned char *d = row + (x * ch + c) * bytes;
                if (depth == 16)
                    d[0] = (unsigned char)(v >> 8), d[1] = (unsigned char)v;
                else
                    d[0] = (unsigned char)v;
            }
        png_write_row(png, row);
    }
    png_write_end(png, NULL);
    png_destroy_write_struct(&png, &info);
    fclose(fp);
    return 0;
}

static int write_jpeg(const char *path, int grey, const blob *icc)
{
    FILE *fp = fopen(path, "wb");
    if (!fp)
        return -1;
    struct jpeg_compress_struct c;
    struct jpeg_error_mgr e;
    c.err = jpeg_std_error(&e);
    jpeg_create_compress(&c);
    jpeg_stdio_dest(&c, fp);
    c.image_width = W;
    c.image_height = H;
    c.input_components = grey ? 1 : 3;
    c.in_color_space = grey ? JCS_GRAYSCALE : JCS_RGB;
    jpeg_set_defaults(&c);
    jpeg_set_quality(&c, 95, TRUE);
    jpeg_start_compress(&c, TRUE);
    if (icc && icc->data)
        jpeg_write_icc_profile(&c, icc->data, icc->len);
    unsigned char row[W * 3];
    while (c.next_scanline < H) {
        for (int x = 0; x < W; x++)
            for (int k = 0; k < c.input_components; k++)
                row[x * c.input_components + k] = (unsigned char)px8(x, (int)c.next_scanline, k);
        JSAMPROW r = row;
        jpeg_write_scanlines(&c, &r, 1);
    }
    jpeg_finish_compress(&c);
    jpeg_destroy_compress(&c);
    fclose(fp);
    return 0;
}

static int write_tiff(const char *path, int depth, int grey, const blob *icc)
{
    TIFF *tif = TIFFOpen(path, "w");
    if (!tif)
        return -1;
    int ch = grey ? 1 : 3;
    TIFFSetField(tif, TIFFTAG_IMAGEWIDTH, (uint32_t)W);
    TIFFSetField(tif, TIFFTAG_IMAGELENGTH, (uint32_t)H);
    TIFFSetField(tif, TIFFTAG_BITSPERSAMPLE, depth);
    TIFFSetField(tif, TIFFTAG_SAMPLESPERPIXEL, ch);
    TIFFSetField(tif, TIFFTAG_PHOTOMETRIC, grey ? PHOTOMETRIC_MINISBLACK : PHOTOMETRIC_RGB);
    TIFFSetField(tif, TIFFTAG_PLANARCONFIG, PLANARCONFIG_CONTIG);
    TIFFSetField(tif, TIFFTAG_ROWSPERSTRIP, (uint32_t)H);
    if (icc && icc->data)
        TIFFSetField(tif, TIFFTAG_ICCPROFILE, icc->len, icc->data);
    uint16_t row[W * 3];
    for (int y = 0; y < H; y++) {
        for (int x = 0; x < W; x++)
            for (int c = 0; c < ch; c++) {
                unsigned v = px8(x, y, c) * (depth == 16 ? 257u : 1u);
                if (depth == 16)
                    row[x * ch + c] = (uint16_t)v;
                else
                    ((unsigned char *)row)[x * ch + c] = (unsigned char)v;
            }
        TIFFWriteScanline(tif, row, (uint32_t)y, 0);
    }
    TIFFClose(tif);
    return 0;
}

static lam_image *load(const char *path, const lam_transfer *user, lam_status *st, lam_error *err)
{
    lam_load_options opt = lam_load_options_default();
    if (user)
        opt.transfer = *user;
    lam_image *img = NULL;
    lam_error_clear(err);
    *st = lam_image_load(path, &opt, &img, err);
    return img;
}

/* Largest |plane - f(code)| over the image, f given per channel. */
static double worst_vs(const lam_image *img, double (*f)(double v, int c), int chans)
{
    if (!img)
        return 1e9;
    double worst = 0;
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++)
            for (int c = 0; c < 3; c++) {
                double v = px8(x, y, chans == 1 ? 0 : c) / 255.0;
                worst = fmax(worst, fabs(img->plane[c][y * W + x] - f(v, chans == 1 ? 0 : c)));
            }
    return worst;
}

static double f_gama(double v, int c)
{
    (void)c;
    return pow(v, 1.0 / 0.45455);
}

static double f_srgb(double v, int c)
{
    (void)c;
    return iec_srgb(v);
}

static double f_adobe(double v, int c)
{
    (void)c;
    return pow(v, ADOBE_GAMMA);
}

static double f_split(double v, int c)
{
    static const double g[3] = {1.8, 2.2, 2.6};
    return pow(v, g[c]);
}

static double f_linear(double v, int c)
{
    (void)c;
    return v;
}

static void test_png_chunks(void)
{
    lam_status st;
    lam_error err;
    meta m = {0, 0.45455, {NULL, 0}};
    write_png(tmp("gama.png"), 8, 0, &m);
    lam_image *img = load(tmp("gama.png"), NULL, &st, &err);
    check_abs(worst_vs(img, f_gama, 3), 0, 1e-6,
              "PNG gAMA 0.45455 decodes as light = V^(1/0.45455) (PNG specification, gAMA)");
    check_true(img && img->transfer.kind == LAM_TRANSFER_GAMMA &&
                   fabs(img->transfer.gamma - 2.2) < 1e-3 && img->transfer_from_file,
               "gAMA recorded as a 2.2 power law taken from the file");
    check_str(img ? img->file_colour : "", "gAMA 0.45455", "file colour names the chunk");
    lam_transfer user = {LAM_TRANSFER_SRGB, 0};
    check_int(lam_image_transfer_conflict(img, &user), 1,
              "user sRGB against a gAMA 2.2 file: a conflict (local exponents differ)");
    user = (lam_transfer){LAM_TRANSFER_GAMMA, 2.2};
    check_int(lam_image_transfer_conflict(img, &user), 0,
              "user gamma 2.2 against gAMA 0.45455: none");
    lam_image_free(img);

    /* the user's setting wins, and both are recorded */
    user = (lam_transfer){LAM_TRANSFER_LINEAR, 0};
    img = load(tmp("gama.png"), &user, &st, &err);
    check_abs(worst_vs(img, f_linear, 3), 0, 1e-6, "user-set linear overrides the gAMA chunk");
    check_true(img && !img->transfer_from_file && img->file_transfer.kind == LAM_TRANSFER_GAMMA,
               "file curve kept beside the user's");
    check_str(img ? img->transfer_source : "", "set by the user (linear)", "source: the user");
    check_int(lam_image_transfer_conflict(img, &user), 1, "user linear against gAMA: a conflict");
    lam_image_free(img);

    m = (meta){1, 0.45455, {NULL, 0}};
    write_png(tmp("srgb16.png"), 16, 0, &m);
    img = load(tmp("srgb16.png"), NULL, &st, &err);
    check_abs(worst_vs(img, f_srgb, 3), 0, 1e-6,
              "16-bit PNG with an sRGB chunk: sRGB (IEC 61966-2-1), "
              "metadata over the 16-bit default");
    check_str(img ? img->file_colour : "", "sRGB chunk",
              "sRGB chunk named (gAMA beside it ignored)");
    user = (lam_transfer){LAM_TRANSFER_SRGB, 0};
    check_int(lam_image_transfer_conflict(img, &user), 0, "user sRGB against an sRGB chunk: none");
    lam_image_free(img);

    m = (meta){0, 0, {NULL, 0}};
    write_png(tmp("plain16.png"), 16, 1, &m);
    img = load(tmp("plain16.png"), NULL, &st, &err);
    check_true(img && img->file_transfer.kind == LAM_TRANSFER_AUTO &&
                   img->transfer.kind == LAM_TRANSFER_LINEAR && !img->transfer_from_file,
               "no metadata: file says nothing, 16-bit assumed linear");
    check_str(img ? img->file_colour : "", "none", "file colour: none");
    check_int(lam_image_transfer_conflict(img, &user), 0, "nothing in the file: no conflict");
    check_true(img && img->channels == 1 && img->source_channels == 1, "grey PNG: 1 channel");
    lam_image_free(img);
}

static void test_icc(void)
{
    lam_status st;
    lam_error err;
    meta m = {0, 0, save_profile(cmsCreate_sRGBProfile(), NULL)};
    write_png(tmp("iccp-srgb.png"), 8, 0, &m);
    lam_image *img = load(tmp("iccp-srgb.png"), NULL, &st, &err);
    check_int(st, LAM_OK, "PNG with an iCCP sRGB profile (Little CMS) loads (%s)", err.message);
    check_abs(worst_vs(img, f_srgb, 3), 0, 1e-3,
              "iCCP sRGB profile decodes as the IEC 61966-2-1 curve within 1e-3");
    check_true(img && img->transfer.kind == LAM_TRANSFER_SRGB && img->transfer_from_file,
               "recorded as sRGB from the file");
    lam_image_free(img);
    free(m.icc.data);

    blob adobe = rgb_profile(ADOBE_GAMMA, ADOBE_GAMMA, ADOBE_GAMMA, "Adobe-RGB-like test");
    m = (meta){0, 0, adobe};
    write_png(tmp("iccp-adobe.png"), 8, 0, &m);
    write_tiff(tmp("icc-adobe.tif"), 8, 0, &adobe);
    const char *files[2] = {"iccp-adobe.png", "icc-adobe.tif"};
    for (int k = 0; k < 2; k++) {
        img = load(tmp(files[k]), NULL, &st, &err);
        check_abs(worst_vs(img, f_adobe, 3), 0, 1e-4,
                  "%s: gamma-2.2 matrix profile decodes as V^(563/256) per channel", files[k]);
        check_true(img && img->plane[0][W - 1] == 1.0f && img->plane[1][W - 1] == 0.0f &&
                       img->plane[2][W - 1] == 0.0f,
                   "%s: pure red stays pure red (no matrix mixing of channels)", files[k]);
        check_str(img ? img->file_colour : "", "ICC profile 'Adobe-RGB-like test'",
                  "%s: profile named by its description", files[k]);
        lam_transfer user = {LAM_TRANSFER_GAMMA, 2.2};
        check_int(lam_image_transfer_conflict(img, &user), 0,
                  "%s: user gamma 2.2 against a 563/256 profile: no conflict", files[k]);
        lam_image_free(img);
    }

    /* JPEG: the same profile in APP2 markers, against the same JPEG read as linear */
    write_jpeg(tmp("icc.jpg"), 0, &adobe);
    img = load(tmp("icc.jpg"), NULL, &st, &err);
    lam_transfer lin = {LAM_TRANSFER_LINEAR, 0};
    lam_image *raw = load(tmp("icc.jpg"), &lin, &st, &err);
    double worst = img && raw ? 0 : 1e9;
    for (size_t k = 0; img && raw && k < W * H; k++)
        for (int c = 0; c < 3; c++)
            worst = fmax(worst, fabs(img->plane[c][k] - pow(raw->plane[c][k], ADOBE_GAMMA)));
    check_abs(worst, 0, 1e-4, "JPEG with an ICC profile (jpeg_write_icc_profile) is honoured");
    check_true(img && img->transfer_from_file && strstr(img->file_colour, "Adobe-RGB-like"),
               "JPEG profile recorded");
    lam_image_free(img);
    lam_image_free(raw);
    free(adobe.data);

    /* one curve per channel, 16-bit TIFF */
    blob split = rgb_profile(1.8, 2.2, 2.6, "split curves");
    write_tiff(tmp("split.tif"), 16, 0, &split);
    img = load(tmp("split.tif"), NULL, &st, &err);
    check_abs(worst_vs(img, f_split, 3), 0, 1e-4,
              "16-bit TIFF, profile with gamma 1.8/2.2/2.6: each channel through its own curve");
    lam_image_free(img);
    free(split.data);

    /* a linear grey profile on an 8-bit grey JPEG: linear, not the 8-bit sRGB default */
    blob grey = grey_profile(1.0, "linear grey");
    write_jpeg(tmp("grey-icc.jpg"), 1, &grey);
    img = load(tmp("grey-icc.jpg"), &lin, &st, &err);
    lam_image *viaicc = load(tmp("grey-icc.jpg"), NULL, &st, &err);
    check_true(img && viaicc && !memcmp(img->plane[0], viaicc->plane[0], W * H * sizeof(float)) &&
                   viaicc->transfer.kind == LAM_TRANSFER_LINEAR,
               "grey JPEG with a linear grey profile decodes as linear");
    lam_image_free(img);
    lam_image_free(viaicc);
    free(grey.data);
}

static void test_unusable_profiles(void)
{
    lam_status st;
    lam_error err;
    blob lut = lut_profile();
    write_jpeg(tmp("lut.jpg"), 0, &lut);
    write_tiff(tmp("lut.tif"), 16, 0, &lut);
    const char *files[2] = {"lut.jpg", "lut.tif"};
    for (int k = 0; k < 2; k++) {
        lam_image *img = load(tmp(files[k]), NULL, &st, &err);
        check_int(st, LAM_EFORMAT, "%s: LUT-based profile refused", files[k]);
        check_true(strstr(err.message, "'Bench 3 camera LUT'") &&
                       strstr(err.message, "LUT-based") && strstr(err.message, "encoding"),
                   "%s: message names the profile and the way out: %s", files[k], err.message);
        lam_image_free(img);
        lam_transfer user = {LAM_TRANSFER_SRGB, 0};
        img = load(tmp(files[k]), &user, &st, &err);
        check_true(st == LAM_OK && img && strstr(img->file_colour, "not usable"),
                   "%s: with the encoding set by the user it loads (%s)", files[k],
                   img ? img->file_colour : err.message);
        lam_image_free(img);
    }
    free(lut.data);
    blob lab = save_profile(cmsCreateLab4Profile(NULL), "Lab test");
    write_tiff(tmp("lab.tif"), 8, 0, &lab);
    lam_image *img = load(tmp("lab.tif"), NULL, &st, &err);
    check_true(st == LAM_EFORMAT && strstr(err.message, "Lab profile"),
               "Lab profile refused: %s", err.message);
    lam_image_free(img);
    free(lab.data);
    blob junk = {malloc(300), 300};
    memset(junk.data, 0x5a, 300);
    write_tiff(tmp("junk.tif"), 8, 0, &junk);
    img = load(tmp("junk.tif"), NULL, &st, &err);
    check_true(st == LAM_EFORMAT && strstr(err.message, "is damaged"),
               "garbage ICC bytes refused as a damaged profile: %s", err.message);
    lam_image_free(img);
    free(junk.data);
}

int main(void)
{
    check_begin("test_colourmeta");
    test_png_chunks();
    test_icc();
    test_unusable_profiles();
    return check_summary();
}
