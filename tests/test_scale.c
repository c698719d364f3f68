/* test_scale.c - the pixel size (issue 10 items 2 and 7).
 *
 * A TIFF's resolution tags give the pixel size when the setup has none,
 * and the setup's wins over the file's. The same physical flake gets the
 * same answer when the image is rescaled by 0.75 and 1.5 (with the pixel
 * size corrected): the layer count, and whether it is too small for a
 * device. The rescaling is done here as an image editor would, on the
 * rendered light (box filter down, bilinear up), so the analysis sees
 * blur, noise and edges at another scale than it was rendered. The chip
 * is invented test data. */
#include "check.h"
#include "lamina/analyze.h"
#include "lamina/render.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <tiffio.h>

#define UM_PER_PX 0.2
#define MIN_AREA_UM2 10.0 /* --min-area: the 20 x 20 px flake (16 um^2) is not small */

typedef struct flake {
    int layers;
    double x, y, w, h; /* a rectangle, px at scale 1 */
} flake;

static const flake flakes[] = {
    {1, 60, 60, 150, 110},  {2, 300, 70, 140, 100}, {3, 560, 60, 120, 120},
    {1, 80, 330, 200, 90},  {2, 400, 350, 90, 90},  {1, 640, 380, 20, 20},
    {1, 700, 510, 12, 12} /* 5.8 um^2: below MIN_AREA_UM2, "small" */};
#define NF (sizeof flakes / sizeof flakes[0])

/* The scene: camera and NA given, the true oxide 3 nm off the nominal. */
static int render(lam_image **img)
{
    char json[4096];
    int n = snprintf(json, sizeof json,
                     "{\"schema\":\"lamina-scene/1\",\"setup\":{\"schema\":\"lamina-setup/1\","
                     "\"objective\":{\"illumination_na\":0.5},\"camera\":{\"kind\":\"gaussian\","
                     "\"channels\":[{\"centre_nm\":610,\"fwhm_nm\":80},{\"centre_nm\":540,"
                     "\"fwhm_nm\":75},{\"centre_nm\":465,\"fwhm_nm\":70}]},"
                     "\"substrate\":{\"stack\":[{\"material\":\"SiO2\",\"thickness_nm\":285}]}},"
                     "\"width\":800,\"height\":600,\"oxide_nm\":288,\"exposure\":0.55,"
                     "\"vignetting\":0.15,\"blur_px\":0.8,\"full_well\":10000,\"seed\":31,"
                     "\"flakes\":[");
    for (size_t i = 0; i < NF; i++) {
        const flake *f = &flakes[i];
        n += snprintf(json + n, sizeof json - (size_t)n,
                      "%s{\"layers\":%d,\"polygon\":[[%g,%g],[%g,%g],[%g,%g],[%g,%g]]}",
                      i ? "," : "", f->layers, f->x, f->y, f->x + f->w, f->y, f->x + f->w,
                      f->y + f->h, f->x, f->y + f->h);
    }
    snprintf(json + n, sizeof json - (size_t)n, "]}");
    lam_scene sc;
    lam_error err;
    lam_error_clear(&err);
    uint8_t *truth = NULL;
    int ok = !lam_scene_parse(json, ".", &sc, &err) && !lam_render(&sc, img, &truth, &err);
    if (!ok)
        fprintf(stderr, "test_scale: %s\n", err.message);
    free(truth);
    lam_scene_clear(&sc);
    return ok;
}

/* One line of n_in samples to n_out: the mean over each output pixel's
 * footprint when shrinking, linear interpolation between pixel centres
 * when enlarging. */
static void resample_line(const float *in, size_t n_in, size_t stride_in, float *out,
                          size_t n_out, size_t stride_out)
{
    double s = (double)n_in / (double)n_out; /* input pixels per output pixel */
    for (size_t o = 0; o < n_out; o++) {
        double v = 0;
        if (s > 1) {
            double a = (double)o * s, b = a + s, w = 0;
            for (size_t i = (size_t)a; i < n_in && (double)i < b; i++) {
                double f = fmin(b, (double)i + 1) - fmax(a, (double)i);
                v += f * in[i * stride_in], w += f;
            }
            v /= w;
        } else {
            double x = ((double)o + 0.5) * s - 0.5;
            x = fmin(fmax(x, 0), (double)n_in - 1);
            size_t i = (size_t)x;
            size_t j = i + 1 < n_in ? i + 1 : i;
            v = (1 - (x - (double)i)) * in[i * stride_in] + (x - (double)i) * in[j * stride_in];
        }
        out[o * stride_out] = (float)v;
    }
}

/* The image rescaled by 'scale' in linear light, rows then columns. */
static lam_image *rescale(const lam_image *src, double scale)
{
    size_t w = (size_t)lround((double)src->width * scale);
    size_t h = (size_t)lround((double)src->height * scale);
    lam_image *dst = NULL;
    lam_error err;
    float *tmp = malloc(w * src->height * sizeof *tmp);
    if (!tmp || lam_image_alloc(w, h, &dst, &err)) {
        free(tmp);
        return NULL;
    }
    for (int c = 0; c < 3; c++) {
        for (size_t y = 0; y < src->height; y++)
            resample_line(src->plane[c] + y * src->width, src->width, 1, tmp + y * w, w, 1);
        for (size_t x = 0; x < w; x++)
            resample_line(tmp + x, src->height, w, dst->plane[c] + x, h, w);
    }
    free(tmp);
    return dst;
}

static lam_setup scene_setup(double um_per_px)
{
    lam_setup s;
    lam_error err;
    lam_setup_default(&s);
    const char *json = "{\"schema\":\"lamina-setup/1\",\"objective\":{\"illumination_na\":0.5},"
                       "\"camera\":{\"kind\":\"gaussian\",\"channels\":[{\"centre_nm\":610,"
                       "\"fwhm_nm\":80},{\"centre_nm\":540,\"fwhm_nm\":75},{\"centre_nm\":465,"
                       "\"fwhm_nm\":70}]},\"substrate\":{\"stack\":[{\"material\":\"SiO2\","
                       "\"thickness_nm\":285}]}}";
    if (lam_setup_parse(json, ".", &s, &err))
        fprintf(stderr, "test_scale: %s\n", err.message);
    if (um_per_px > 0)
        lam_setup_set_um_per_px(&s, um_per_px, &err);
    return s;
}

/* The region under a flake's centre, at the image's scale. */
static const lam_region_result *at_flake(const lam_analysis *a, const flake *f, double scale)
{
    size_t x = (size_t)((f->x + f->w / 2) * scale), y = (size_t)((f->y + f->h / 2) * scale);
    uint32_t l = a->seg->label[y * a->width + x];
    return l ? &a->results[l - 1] : NULL;
}

static void test_rescaled(const lam_image *img)
{
    static const double scales[] = {1.0, 0.75, 1.5};
    int layers[3][NF], small[3][NF];
    for (size_t k = 0; k < 3; k++) {
        char path[512];
        snprintf(path, sizeof path, "%s/scaled-%zu.png", check_tmpdir(), k);
        lam_image *im = k ? rescale(img, scales[k]) : NULL;
        lam_error err;
        lam_error_clear(&err);
        lam_render_save(im ? im : img, path, 0, 92, &err);
        lam_image_free(im);
        lam_setup s = scene_setup(UM_PER_PX / scales[k]);
        lam_analysis_options opt = lam_analysis_options_default();
        opt.min_area_um2 = MIN_AREA_UM2;
        lam_analysis *a = NULL;
        check_int(lam_analyze(path, &s, &opt, &a, &err), LAM_OK, "scale %.2f analysed (%s)",
                  scales[k], err.message);
        for (size_t i = 0; i < NF; i++) {
            const lam_region_result *r = a ? at_flake(a, &flakes[i], scales[k]) : NULL;
            layers[k][i] = r ? r->layers : -1;
            small[k][i] = r ? !!(r->flags & LAM_FLAG_SMALL) : -1;
        }
        lam_analysis_free(a);
        lam_setup_clear(&s);
    }
    for (size_t i = 0; i < NF; i++)
        check_int(layers[0][i], flakes[i].layers, "flake %zu: %dL at the rendered scale", i,
                  flakes[i].layers);
    /* A flake too small for a device may fall apart into transition
     * pixels when shrunk (9 x 9 px at 0.75): it is then no region at all,
     * which is the same answer for a search (not a candidate). */
    for (size_t k = 1; k < 3; k++)
        for (size_t i = 0; i < NF; i++) {
            if (small[0][i] == 1 && layers[k][i] == -1 && scales[k] < 1) {
                check_true(1, "small flake %zu rescaled by %.2f: no region", i, scales[k]);
                continue;
            }
            check_int(layers[k][i], layers[0][i], "flake %zu rescaled by %.2f: same layer count",
                      i, scales[k]);
            check_int(small[k][i], small[0][i], "flake %zu rescaled by %.2f: same 'small' flag",
                      i, scales[k]);
        }
    check_int(small[0][NF - 1], 1, "the 5.8 um^2 flake is marked 'small' (< %g um^2)",
              MIN_AREA_UM2);
    check_int(small[0][NF - 2], 0, "the 16 um^2 flake is not");
}

/* A 16-bit linear RGB TIFF of the image with XResolution in px/cm. */
static int write_tiff16(const lam_image *img, const char *path, float px_per_cm)
{
    TIFF *t = TIFFOpen(path, "w");
    if (!t)
        return 0;
    TIFFSetField(t, TIFFTAG_IMAGEWIDTH, (uint32_t)img->width);
    TIFFSetField(t, TIFFTAG_IMAGELENGTH, (uint32_t)img->height);
    TIFFSetField(t, TIFFTAG_SAMPLESPERPIXEL, 3);
    TIFFSetField(t, TIFFTAG_BITSPERSAMPLE, 16);
    TIFFSetField(t, TIFFTAG_PHOTOMETRIC, PHOTOMETRIC_RGB);
    TIFFSetField(t, TIFFTAG_PLANARCONFIG, PLANARCONFIG_CONTIG);
    TIFFSetField(t, TIFFTAG_ROWSPERSTRIP, 1);
    TIFFSetField(t, TIFFTAG_XRESOLUTION, px_per_cm);
    TIFFSetField(t, TIFFTAG_YRESOLUTION, px_per_cm);
    TIFFSetField(t, TIFFTAG_RESOLUTIONUNIT, RESUNIT_CENTIMETER);
    uint16_t *row = malloc(img->width * 3 * sizeof *row);
    int ok = row != NULL;
    for (size_t y = 0; ok && y < img->height; y++) {
        for (size_t x = 0; x < img->width; x++)
            for (int c = 0; c < 3; c++) {
                double v = img->plane[c][y * img->width + x];
                row[3 * x + (size_t)c] = (uint16_t)lround(65535 * fmin(fmax(v, 0), 1));
            }
        ok = TIFFWriteScanline(t, row, (uint32_t)y, 0) == 1;
    }
    free(row);
    TIFFClose(t);
    return ok;
}

static void test_tiff_pixel_size(const lam_image *img)
{
    char path[512];
    snprintf(path, sizeof path, "%s/sized.tif", check_tmpdir());
    check_true(write_tiff16(img, path, 50000.0f), "TIFF written (50000 px/cm = 0.2 um)");
    for (int given = 0; given < 2; given++) {
        lam_setup s = scene_setup(given ? 0.5 : 0);
        lam_analysis *a = NULL;
        lam_error err;
        lam_error_clear(&err);
        check_int(lam_analyze(path, &s, NULL, &a, &err), LAM_OK, "TIFF analysed (%s)",
                  err.message);
        if (a) {
            check_abs(a->um_per_px, given ? 0.5 : UM_PER_PX, 1e-9,
                      given ? "the setup's pixel size wins over the file's"
                            : "no pixel size in the setup: the file's resolution tags");
            check_int(a->um_per_px_from_file, !given, "the source of the pixel size recorded");
            const lam_region_result *r = at_flake(a, &flakes[0], 1);
            check_int(r ? r->layers : -1, 1, "the monolayer read from the 16-bit TIFF");
        }
        lam_analysis_free(a);
        lam_setup_clear(&s);
    }
}

int main(void)
{
    check_begin("test_scale");
    lam_error_init_gsl();
    lam_image *img = NULL;
    if (check_true(render(&img), "scene rendered")) {
        test_tiff_pixel_size(img);
        test_rescaled(img);
    }
    lam_image_free(img);
    return check_summary();
}
