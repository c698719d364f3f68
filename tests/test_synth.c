/* test_synth.c - the independent synthetic-micrograph generator
 * (tests/synth/) held against the outside world: Nair et al. (2008), the
 * sheet-on-half-space closed form, the Airy formula, energy conservation,
 * the thin-film limit, Blake et al. and Abergel et al. (2007),
 * Falkovsky's closed form for the Kramers-Kronig transform, Weber et al.
 * (2010), IEC 61966-2-1 and Little CMS, CIE A from Debian's colord-data,
 * libjpeg, libpng and libtiff reading back what was written. Uses no
 * lamina function. */
#include "check.h"
#include "synth/synth_internal.h"

#include <jpeglib.h>
#include <lcms2.h>
#include <math.h>
#include <png.h>
#include <stdlib.h>
#include <string.h>
#include <tiffio.h>
#include <time.h>

#define PA (SYNTH_PI * SYNTH_ALPHA)

static synth_material si, ox;

static void test_free_sheet(void)
{
    /* Nair et al., Science 320, 1308 (2008): T = (1 + pi alpha / 2)^-2 */
    synth_layer sheet = {1, 0, 0, PA};
    synth_rt rt = synth_stack_solve(1.0, &sheet, 1, 1.0, 550, 0.0, SYNTH_S);
    check_abs(rt.T, 0.977463, 1e-6, "free sheet T = 0.977463 (Nair 2008)");
    check_abs(rt.R, 0.25 * PA * PA * rt.T, 1e-12, "free sheet R = (pi a / 2)^2 T (Nair 2008)");
    /* oblique: the same boundary condition gives T_s = |1 + y / 2cos t|^-2,
     * T_p = |1 + y cos t / 2|^-2 */
    double s = sin(0.6), c = cos(0.6);
    double ts = synth_stack_solve(1.0, &sheet, 1, 1.0, 550, s, SYNTH_S).T;
    double tp = synth_stack_solve(1.0, &sheet, 1, 1.0, 550, s, SYNTH_P).T;
    check_abs(ts, pow(1 + PA / (2 * c), -2), 1e-12, "free sheet at 34 deg, s (closed form)");
    check_abs(tp, pow(1 + PA * c / 2, -2), 1e-12, "free sheet at 34 deg, p (closed form)");
}

static void test_sheet_on_halfspace(void)
{
    /* r = (1 - n_s - y) / (1 + n_s + y) at normal incidence (Fresnel with
     * the sheet boundary condition; Stauber, Peres, Geim, PRB 78, 085432
     * (2008)) */
    const double complex ns[2] = {1.52, 3.9 + 0.02 * I};
    const double complex y[2] = {PA * (1.3 - 0.4 * I), 3 * PA * (0.9 + 0.2 * I)};
    for (int i = 0; i < 2; i++) {
        synth_layer sheet = {1, 0, 0, y[i]};
        synth_rt rt = synth_stack_solve(1.0, &sheet, 1, ns[i], 600, 0.0, SYNTH_P);
        double complex expect = (1 - ns[i] - y[i]) / (1 + ns[i] + y[i]);
        check_abs(cabs(rt.r - expect), 0, 1e-12, "sheet on n = %.2f%+.2fi: r closed form",
                  creal(ns[i]), cimag(ns[i]));
    }
}

/* Airy: r = (r01 + r12 e^{2ib}) / (1 + r01 r12 e^{2ib}), Fresnel r_s = (qi -
 * qj)/(qi + qj), r_p = (nj^2 qi - ni^2 qj)/(nj^2 qi + ni^2 qj) (Born and
 * Wolf, Principles of Optics, sec. 1.6.4). */
static double airy_R(double complex n1, double d, double complex n2, double wl, double s,
                     int p)
{
    double complex q0 = cos(asin(s)), q1 = csqrt(n1 * n1 - s * s), q2 = csqrt(n2 * n2 - s * s);
    if (cimag(q1) < 0)
        q1 = -q1;
    if (cimag(q2) < 0)
        q2 = -q2;
    double complex r01 = p ? (n1 * n1 * q0 - q1) / (n1 * n1 * q0 + q1) : (q0 - q1) / (q0 + q1);
    double complex r12 = p ? (n2 * n2 * q1 - n1 * n1 * q2) / (n2 * n2 * q1 + n1 * n1 * q2)
                           : (q1 - q2) / (q1 + q2);
    double complex ph = cexp(2 * I * 2 * SYNTH_PI / wl * q1 * d);
    double complex r = (r01 + r12 * ph) / (1 + r01 * r12 * ph);
    return creal(r * conj(r));
}

static void test_airy(void)
{
    const double complex films[2] = {1.46, 2.0 + 0.5 * I};
    for (int f = 0; f < 2; f++)
        for (int p = 0; p < 2; p++) {
            synth_layer film = {0, films[f], 285, 0};
            double s = sin(40 * SYNTH_PI / 180);
            double R = synth_stack_solve(1.0, &film, 1, 4.08 + 0.03 * I, 550, s,
                                         (synth_pol)p).R;
            check_abs(R, airy_R(films[f], 285, 4.08 + 0.03 * I, 550, s, p), 1e-12,
                      "film n = %.2f%+.2fi on Si-like, 40 deg, %c: Airy formula",
                      creal(films[f]), cimag(films[f]), p ? 'p' : 's');
        }
}

static void test_lossless(void)
{
    /* lossless media and a purely reactive sheet: R + T = 1 */
    synth_layer L[3] = {{1, 0, 0, 0.05 * I}, {0, 1.46, 200, 0}, {1, 0, 0, -0.02 * I}};
    for (int p = 0; p < 2; p++)
        for (int a = 0; a < 3; a++) {
            synth_rt rt = synth_stack_solve(1.0, L, 3, 1.52, 480, sin(a * 0.4), (synth_pol)p);
            check_abs(rt.R + rt.T, 1.0, 1e-12, "lossless stack, %c, sin t = %.2f: R + T = 1",
                      p ? 'p' : 's', sin(a * 0.4));
        }
}

static synth_rt on_oxide(const synth_layer *top, int n, double wl, double s, synth_pol pol)
{
    synth_layer L[16];
    for (int i = 0; i < n; i++)
        L[i] = top[i];
    L[n] = (synth_layer){0, synth_material_index(&ox, wl), 285, 0};
    return synth_stack_solve(1.0, L, n + 1, synth_material_index(&si, wl), wl, s, pol);
}

static void test_thin_film_limit(void)
{
    /* CHECKS: a slab of index N and thickness d -> 0 acts as a sheet of
     * Z0 sigma = -i k0 d (N^2 - 1) (plus an ambient layer of thickness d,
     * which changes only the phase of r): the error in R relative to the
     * sheet's effect shrinks as d */
    double complex N = 2.7 + 1.3 * I;
    double wl = 550, err[2];
    const double d[2] = {0.01, 0.001};
    for (int i = 0; i < 2; i++) {
        synth_layer film = {0, N, d[i], 0};
        synth_layer sheet = {1, 0, 0, PA * synth_sigma_of_film(N, d[i], wl)};
        double rf = on_oxide(&film, 1, wl, 0, SYNTH_S).R;
        double rs = on_oxide(&sheet, 1, wl, 0, SYNTH_S).R;
        double r0 = on_oxide(NULL, 0, wl, 0, SYNTH_S).R;
        err[i] = fabs(rf - rs) / fabs(rs - r0);
    }
    check_true(err[0] < 1e-3 && err[1] < err[0] / 5, "thin-film limit: film vs sheet "
               "%.2e (d = 0.01 nm), %.2e (0.001 nm)", err[0], err[1]);
    /* Weber et al., APL 97, 091904 (2010) n,k at 550 nm as a 0.335 nm sheet:
     * Im sigma / sigma0 about -0.78 (issue 9), Re about 1.1 */
    synth_graphene g;
    if (!check_true(synth_graphene_load(&g, SYNTH_RESP_WEBER) == 0, "load Weber: %s",
                    synth_error()))
        return;
    double complex s = synth_graphene_sigma(&g, synth_photon_ev(550));
    check_abs(creal(s), 1.11, 0.05, "Weber 2010 film as a sheet at 550 nm: Re sigma/sigma0");
    check_abs(cimag(s), -0.78, 0.05, "Weber 2010 film as a sheet at 550 nm: Im sigma/sigma0");
    synth_graphene_free(&g);
}

static double contrast_at(int layers, double wl)
{
    synth_layer L[16];
    int n = 0;
    for (int l = 0; l < layers; l++) {
        if (l)
            L[n++] = (synth_layer){0, 1.0, SYNTH_LAYER_NM, 0};
        L[n++] = (synth_layer){1, 0, 0, PA};
    }
    double r0 = on_oxide(NULL, 0, wl, 0, SYNTH_S).R, r1 = on_oxide(L, n, wl, 0, SYNTH_S).R;
    return (r0 - r1) / r0;
}

static void test_published_contrast(void)
{
    /* Blake et al., APL 91, 063124 (2007): ~10-12 % monolayer contrast in
     * green near 300 nm oxide (plausibility range) */
    double c1 = contrast_at(1, 550);
    printf("test_synth: sigma0 monolayer on 285 nm SiO2/Si, 550 nm, NA 0: C = %.4f\n", c1);
    check_true(c1 > 0.08 && c1 < 0.16, "1L contrast %.4f in 0.08-0.16 (Blake 2007)", c1);
    /* Abergel, Russell, Fal'ko, APL 91, 063125 (2007): bilayer about twice */
    double r = contrast_at(2, 550) / c1;
    check_true(r > 1.7 && r < 2.0, "2L/1L contrast ratio %.3f in 1.7-2.0 (Abergel 2007)", r);
}

static void test_kk(void)
{
    /* Falkovsky, J. Phys.: Conf. Ser. 129, 012004 (2008), T -> 0:
     * Im sigma_inter = -(1/pi) ln|(E + 2mu)/(E - 2mu)|, Re = step at 2mu */
    synth_graphene g;
    memset(&g, 0, sizeof g);
    g.kind = SYNTH_RESP_SIGMA0;
    double complex s[SYNTH_NL];
    double kT = 0.0004, mu = 0.5, worst = 0, worst_re = 0;
    synth_block_response(&g, mu, kT, s);
    for (int i = 0; i < SYNTH_NL; i++) {
        double e = synth_photon_ev(synth_wl(i));
        double complex inter = s[i] - synth_sigma_intraband(e, mu, kT);
        worst = fmax(worst, fabs(cimag(inter) + log((e + 2 * mu) / (e - 2 * mu)) / SYNTH_PI));
        worst_re = fmax(worst_re, fabs(creal(inter) - 1.0));
    }
    check_abs(worst, 0, 1e-3, "KK of the blocked part vs Falkovsky's closed form, mu 0.5 eV");
    check_abs(worst_re, 0, 1e-9, "blocked Re sigma = 1 above 2mu");
    /* mu = 1.05 eV at 295 K: blocked below 2mu (red), open above (blue) */
    synth_block_response(&g, 1.05, SYNTH_KB_EVK * 295, s);
    check_true(creal(s[SYNTH_NL - 1]) < 0.05 && creal(s[50]) > 0.95,
               "mu 1.05 eV: Re sigma %.3f at 780 nm, %.3f at 480 nm", creal(s[SYNTH_NL - 1]),
               creal(s[50]));
    /* f-sum: at mu = 0 the thermal intraband weight equals the removed part */
    synth_block_response(&g, 0.0, SYNTH_KB_EVK * 295, s);
    check_abs(cabs(s[85] - 1.0), 0, 5e-3, "mu 0 at 295 K: sigma = sigma0 at 550 nm (f-sum)");
}

static void test_weber_vs_default(void)
{
    /* issue 9: Weber 2010 gives Im sigma/sigma0 about -1.00/-0.78/-0.66 at
     * 450/550/650 nm; the default form is meant to match it */
    synth_graphene g;
    if (synth_graphene_load(&g, SYNTH_RESP_WEBER))
        return;
    const double wl[3] = {450, 550, 650};
    for (int i = 0; i < 3; i++) {
        double e = synth_photon_ev(wl[i]);
        double complex w = synth_graphene_sigma(&g, e);
        double complex d = synth_sigma_lamina_default(e, 0.2, SYNTH_KB_EVK * 295);
        check_true(cabs(w - d) < 0.2, "%g nm: lamina-default %.3f%+.3fi vs Weber %.3f%+.3fi",
                   wl[i], creal(d), cimag(d), creal(w), cimag(w));
    }
    synth_graphene_free(&g);
}

static void test_materials(void)
{
    /* check values of tests/data/nk/README.md (Malitson 1965 formula,
     * Green 2008 grid row, Beadie 2015 formula, Weber 2010 table) */
    synth_material b, w;
    check_abs(creal(synth_material_index(&ox, 550)), 1.45991, 1e-5, "Malitson n(550)");
    check_abs(creal(synth_material_index(&ox, 633)), 1.45701, 1e-5, "Malitson n(633)");
    double complex n = synth_material_index(&si, 550);
    check_true(fabs(creal(n) - 4.077) < 1e-9 && fabs(cimag(n) - 0.027968) < 1e-9,
               "Green 2008 at its 550 nm row (4.0770, 2.7968e-2): %.4f%+.6fi", creal(n),
               cimag(n));
    if (check_true(synth_material_load("PMMA-Beadie2015.yml", &b) == 0, "load Beadie"))
        check_abs(creal(synth_material_index(&b, 550)), 1.49428, 1e-5, "Beadie n(550)");
    if (check_true(synth_material_load("graphene-Weber2010.yml", &w) == 0, "load Weber")) {
        n = synth_material_index(&w, 550);
        check_true(fabs(creal(n) - 2.683) < 0.01 && fabs(cimag(n) - 1.245) < 0.01,
                   "Weber 550 nm: %.3f%+.3fi (table 2.683 + 1.245i)", creal(n), cimag(n));
    }
    synth_material_free(&b);
    synth_material_free(&w);
}

/* The CIE A table of Debian's colord-data (CGATS, one row of 531 values
 * from 300 nm in 1 nm steps, 1 at 560 nm). */
static void test_cie_a(void)
{
    FILE *fp = fopen("/usr/share/colord/illuminant/CIE-A.sp", "r");
    if (!check_true(fp != NULL, "open colord-data CIE-A.sp (Debian colord-data)"))
        return;
    static char line[20000];
    int in = 0, done = 0;
    double worst = 0;
    synth_lamp a = {SYNTH_LAMP_CIE_A, 2856, 0, 0, 0, 0, 0, 0};
    while (!done && fgets(line, sizeof line, fp)) {
        if (!strncmp(line, "BEGIN_DATA\n", 11) || !strncmp(line, "BEGIN_DATA\r", 11))
            in = 1;
        else if (in) {
            char *p = line;
            for (int i = 0; i < 531; i++) {
                double v = strtod(p, &p), nm = 300 + i;
                if (nm >= 380 && nm <= 780)
                    worst = fmax(worst, fabs(synth_lamp_spd(&a, nm) / v - 1));
            }
            done = 1;
        }
    }
    fclose(fp);
    check_true(done && worst < 1e-4, "CIE A vs colord-data CIE-A.sp, 380-780 nm: worst %.2e",
               worst);
}

static void test_srgb(void)
{
    /* IEC 61966-2-1: 12.92 v below 0.0031308, else 1.055 v^(1/2.4) - 0.055
     * (values of the standard's formula, computed separately) */
    const double v[5] = {0.001, 0.0031308, 0.18, 0.5, 0.9};
    const double e[5] = {0.0129200, 0.0404499, 0.4613561, 0.7353570, 0.9546872};
    for (int i = 0; i < 5; i++)
        check_abs(synth_srgb_encode(v[i]), e[i], 1e-7, "sRGB encode %g (IEC 61966-2-1)", v[i]);
    /* Little CMS (Debian liblcms2) as an independent sRGB encoder, on greys */
    cmsHPROFILE srgb = cmsCreate_sRGBProfile();
    cmsCIExyY d65;
    cmsWhitePointFromTemp(&d65, 6504);
    cmsCIExyYTRIPLE prim = {{0.64, 0.33, 1}, {0.30, 0.60, 1}, {0.15, 0.06, 1}};
    cmsToneCurve *lin = cmsBuildGamma(NULL, 1.0), *curves[3] = {lin, lin, lin};
    cmsHPROFILE linear = cmsCreateRGBProfile(&d65, &prim, curves);
    cmsHTRANSFORM xf = cmsCreateTransform(linear, TYPE_RGB_DBL, srgb, TYPE_RGB_DBL,
                                          INTENT_RELATIVE_COLORIMETRIC, cmsFLAGS_NOOPTIMIZE);
    double worst = 0;
    for (int i = 1; i <= 20; i++) {
        double in[3] = {i / 20.0, i / 20.0, i / 20.0}, out[3];
        cmsDoTransform(xf, in, out, 1);
        worst = fmax(worst, fabs(out[1] - synth_srgb_encode(in[1])));
    }
    check_abs(worst, 0, 2e-3, "sRGB encode vs Little CMS on greys");
    cmsDeleteTransform(xf);
    cmsCloseProfile(srgb);
    cmsCloseProfile(linear);
    cmsFreeToneCurve(lin);
}

static void test_bayer(void)
{
    const int w[2] = {16, 15}, h[2] = {12, 11};
    for (int t = 0; t < 2; t++) {
        size_t n = (size_t)w[t] * h[t];
        float *rgb = malloc(3 * n * sizeof *rgb), *m = malloc(n * sizeof *m);
        float *out = malloc(3 * n * sizeof *out);
        for (size_t i = 0; i < n; i++)
            rgb[3 * i] = 0.2f, rgb[3 * i + 1] = 0.5f, rgb[3 * i + 2] = 0.7f;
        synth_bayer_mosaic(rgb, w[t], h[t], m);
        synth_bayer_demosaic(m, w[t], h[t], out);
        double worst = 0;
        for (size_t i = 0; i < 3 * n; i++)
            worst = fmax(worst, fabs(out[i] - rgb[i]));
        check_abs(worst, 0, 1e-6, "demosaic of a uniform %d x %d field returns it", w[t], h[t]);
        free(rgb), free(m), free(out);
    }
}

static void tmp_path(char *buf, size_t n, const char *name)
{
    check_path(buf, n, check_tmpdir(), name);
}

static void test_jpeg_420(const synth_image *im)
{
    char path[512];
    tmp_path(path, sizeof path, "x.jpg");
    if (!check_true(synth_save(im, SYNTH_FMT_JPEG, 85, path) == 0, "save JPEG: %s",
                    synth_error()))
        return;
    struct jpeg_decompress_struct c;
    struct jpeg_error_mgr e;
    c.err = jpeg_std_error(&e);
    jpeg_create_decompress(&c);
    FILE *fp = fopen(path, "rb");
    jpeg_stdio_src(&c, fp);
    jpeg_read_header(&c, TRUE);
    int ok = c.num_components == 3 && c.comp_info[0].h_samp_factor == 2 &&
             c.comp_info[0].v_samp_factor == 2;
    for (int i = 1; i < c.num_components; i++)
        ok = ok && c.comp_info[i].h_samp_factor == 1 && c.comp_info[i].v_samp_factor == 1;
    check_true(ok, "JPEG reads back (libjpeg) with 4:2:0 sampling factors 2x2, 1x1, 1x1");
    jpeg_destroy_decompress(&c);
    fclose(fp);
}

/* Reads a PNG back with libpng's simplified API, 16-bit files as linear
 * 16-bit values, 8-bit files as stored; returns the bit depth. */
static int read_png(const char *path, int *w, int *h, int *nc, void **px)
{
    png_image img;
    memset(&img, 0, sizeof img);
    img.version = PNG_IMAGE_VERSION;
    if (!png_image_begin_read_from_file(&img, path))
        return -1;
    int bits = img.format & PNG_FORMAT_FLAG_LINEAR ? 16 : 8;
    *nc = img.format & PNG_FORMAT_FLAG_COLOR ? 3 : 1;
    img.format = *nc == 3 ? (bits == 16 ? PNG_FORMAT_LINEAR_RGB : PNG_FORMAT_RGB)
                          : (bits == 16 ? PNG_FORMAT_LINEAR_Y : PNG_FORMAT_GRAY);
    *w = (int)img.width, *h = (int)img.height;
    *px = malloc(PNG_IMAGE_SIZE(img));
    if (!*px || !png_image_finish_read(&img, NULL, *px, 0, NULL)) {
        png_image_free(&img);
        return -1;
    }
    return bits;
}

static void test_png16(const synth_image *im)
{
    char path[512];
    tmp_path(path, sizeof path, "x16.png");
    int w, h, nc;
    void *buf = NULL;
    if (!check_true(synth_save(im, SYNTH_FMT_PNG16, 0, path) == 0 &&
                    read_png(path, &w, &h, &nc, &buf) == 16, "16-bit PNG written and read"))
        return;
    const uint16_t *px = buf;
    double worst = 0;
    for (size_t i = 0; i < (size_t)w * h * nc; i += 97)
        worst = fmax(worst, fabs(px[i] / 65535.0 - im->px[i]));
    check_true(w == im->width && nc == im->nc && worst <= 0.5 / 65535 + 1e-7,
               "16-bit PNG is linear: worst %.2e", worst);
    free(buf);
}

static void test_tiff16(const synth_image *im)
{
    char path[512];
    tmp_path(path, sizeof path, "x.tif");
    if (!check_true(synth_save(im, SYNTH_FMT_TIFF16, 0, path) == 0, "TIFF written: %s",
                    synth_error()))
        return;
    TIFF *t = TIFFOpen(path, "r");
    uint16_t bits = 0, spp = 0, comp = 0;
    uint32_t w = 0;
    TIFFGetField(t, TIFFTAG_BITSPERSAMPLE, &bits);
    TIFFGetField(t, TIFFTAG_SAMPLESPERPIXEL, &spp);
    TIFFGetField(t, TIFFTAG_COMPRESSION, &comp);
    TIFFGetField(t, TIFFTAG_IMAGEWIDTH, &w);
    uint16_t *row = malloc(TIFFScanlineSize(t));
    for (uint32_t y = 0; y <= 7; y++)   /* strips are compressed: read in order */
        TIFFReadScanline(t, row, y, 0);
    double worst = 0;
    for (int x = 0; x < im->width * im->nc; x++)
        worst = fmax(worst, fabs(row[x] / 65535.0 - im->px[(size_t)7 * im->width * im->nc + x]));
    check_true(bits == 16 && spp == im->nc && comp == COMPRESSION_ADOBE_DEFLATE &&
               (int)w == im->width && worst <= 0.5 / 65535 + 1e-7,
               "TIFF reads back (libtiff): %u bits, %u channels, deflate, row 7 worst %.1e",
               bits, spp, worst);
    free(row);
    TIFFClose(t);
}

/* The scene's tabulated contrast against a direct, slow computation:
 * midpoint cone with sin t cos t, Planck lamp, Gaussian channels, white
 * balance, sigma0 sheets on the true oxide. */
static double direct_contrast(const synth_physics *p, int k)
{
    double sub = 0, flake = 0, h = asin(p->na) / p->cone_steps;
    synth_layer sheet = {1, 0, 0, PA};
    for (int i = 0; i < SYNTH_NL; i++) {
        double wl = synth_wl(i), sd = p->cam.fwhm_nm[k] / 2.3548200450309493;
        double x = wl * 1e-9, planck = pow(x, -5) / expm1(1.438777e-2 / (x * p->lamp.kelvin));
        double wgt = planck * exp(-0.5 * pow((wl - p->cam.centre_nm[k]) / sd, 2));
        synth_layer L[2] = {sheet, {0, synth_material_index(&ox, wl), p->oxide_nm, 0}};
        for (int a = 0; a < p->cone_steps; a++) {
            double t = (a + 0.5) * h, wa = sin(t) * cos(t) * wgt;
            for (int pol = 0; pol < 2; pol++) {
                double complex nsi = synth_material_index(&si, wl);
                sub += wa * synth_stack_solve(1, L + 1, 1, nsi, wl, sin(t), (synth_pol)pol).R;
                flake += wa * synth_stack_solve(1, L, 2, nsi, wl, sin(t), (synth_pol)pol).R;
            }
        }
    }
    return 1 - flake / sub;
}

static synth_config typical(synth_response r)
{
    synth_config c;
    synth_config_init(&c);
    c.response = r;
    c.nominal_oxide_nm = c.oxide_nm = 285;
    c.na = 0.55;
    c.pupil = SYNTH_PUPIL_SINCOS;
    c.cone_steps = 32;
    c.si = SYNTH_SI_GREEN;
    c.sio2 = SYNTH_SIO2_MALITSON;
    c.lamp = SYNTH_LAMP_BLACKBODY;
    c.lamp_kelvin = 3200;
    c.camera = SYNTH_CAM_GAUSS;
    const double centre[3] = {610, 540, 465}, fwhm[3] = {80, 75, 65};
    for (int k = 0; k < 3; k++)
        c.gauss_centre_nm[k] = centre[k], c.gauss_fwhm_nm[k] = fwhm[k];
    return c;
}

static int find_1l(const synth_scene *sc)
{
    for (int i = 0; i < sc->nobj; i++)
        if (sc->obj[i].kind == SYNTH_OBJ_FLAKE && sc->obj[i].layers == 1 && !sc->obj[i].doped)
            return i;
    return -1;
}

static void test_pipeline_vs_direct(void)
{
    synth_config c = typical(SYNTH_RESP_SIGMA0);
    synth_scene sc;
    if (!check_true(synth_scene_make(&c, 7, &sc) == 0, "scene: %s", synth_error()))
        return;
    int i = find_1l(&sc);
    for (int k = 0; i >= 0 && k < 3; k++)
        check_abs(1 - sc.obj[i].rel[k], direct_contrast(&sc.phys, k), 1e-9,
                  "tabulated 1L contrast, channel %d, = direct cone x spectrum sum", k);
    synth_scene_free(&sc);
}

static void test_issue_statement(void)
{
    /* issue 9 (the author's calculation, not a measurement): at 285 nm and
     * NA 0.55 the monolayer contrast across the published responses spans
     * roughly R 0.04-0.07, G 0.085-0.115, B 0.01-0.03 */
    const synth_response r[5] = {SYNTH_RESP_SIGMA0, SYNTH_RESP_WEBER, SYNTH_RESP_SONG,
                                 SYNTH_RESP_ELSAYED, SYNTH_RESP_LAMINA_DEFAULT};
    for (int j = 0; j < 5; j++) {
        synth_config c = typical(r[j]);
        synth_scene sc;
        if (synth_scene_make(&c, 11, &sc))
            continue;
        const double *v = sc.obj[find_1l(&sc)].rel;
        printf("test_synth: 1L contrast at 285 nm, NA 0.55, camera 610/540/465 nm, 3200 K, "
               "%-14s R %.4f G %.4f B %.4f\n", synth_response_name(r[j]), 1 - v[0], 1 - v[1],
               1 - v[2]);
        check_true(1 - v[0] > 0.02 && 1 - v[0] < 0.10 && 1 - v[1] > 0.06 && 1 - v[1] < 0.14 &&
                   1 - v[2] > -0.01 && 1 - v[2] < 0.06,
                   "%s: 1L contrast within loose ranges of issue 9", synth_response_name(r[j]));
        synth_scene_free(&sc);
    }
}

static int same_scene(const synth_scene *a, const synth_scene *b)
{
    size_t n = (size_t)a->width * a->height;
    return a->nobj == b->nobj && !memcmp(a->truth, b->truth, n) &&
           !memcmp(a->obj, b->obj, sizeof a->obj[0] * a->nobj);
}

static void check_layout(const synth_scene *sc, uint64_t seed)
{
    int has[4] = {0, 0, 0, 0}, flakes = 0;
    long hist[256] = {0}, counted = 0;
    for (size_t p = 0; p < (size_t)sc->width * sc->height; p++)
        hist[sc->truth[p]]++;
    for (int i = 0; i < sc->nobj; i++) {
        const synth_object *o = &sc->obj[i];
        counted += o->area_px;
        if (o->kind == SYNTH_OBJ_FLAKE && o->layers <= 3)
            has[o->layers] = 1;
        flakes += o->kind == SYNTH_OBJ_FLAKE;
    }
    const synth_physics *p = &sc->phys;
    check_true(has[1] && has[2] && has[3] && flakes >= 6 && flakes <= 14 &&
               counted == (long)sc->width * sc->height - hist[0] &&
               fabs(p->oxide_nm - p->nominal_oxide_nm) <= 12 && p->na >= 0.2 && p->na <= 0.8,
               "seed %llu: 1L, 2L, 3L present, %d flakes, areas add up, oxide and NA in range",
               (unsigned long long)seed, flakes);
}

static void test_scenes(void)
{
    synth_config c;
    synth_config_init(&c);
    for (uint64_t seed = 100; seed < 106; seed++) {
        synth_scene a, b;
        if (!check_true(synth_scene_make(&c, seed, &a) == 0, "scene %llu: %s",
                        (unsigned long long)seed, synth_error()))
            continue;
        check_layout(&a, seed);
        if (seed == 100 && synth_scene_make(&c, seed, &b) == 0) {
            check_true(same_scene(&a, &b), "the same seed gives the same scene");
            synth_scene_free(&b);
        }
        synth_scene_free(&a);
    }
}

static void test_doped(void)
{
    synth_config c = typical(SYNTH_RESP_WEBER);
    const double mu[4] = {0, 0.3, 0.9, 1.05};
    c.n_doped = 4;
    memcpy(c.doped_eV, mu, sizeof mu);
    synth_scene sc;
    if (!check_true(synth_scene_make(&c, 21, &sc) == 0, "doped scene: %s", synth_error()))
        return;
    const double *ref = sc.obj[find_1l(&sc)].rel;
    for (int i = 0; i < 4; i++) {
        const synth_object *o = &sc.obj[i];
        printf("test_synth: Weber 1L Pauli-blocked at %.2f eV: contrast R %.4f G %.4f B %.4f "
               "(undoped %.4f %.4f %.4f)\n", o->fermi_eV, 1 - o->rel[0], 1 - o->rel[1],
               1 - o->rel[2], 1 - ref[0], 1 - ref[1], 1 - ref[2]);
    }
    /* issue 9: blocking shows only where 2|E_F| >= the photon energy, i.e.
     * from about 0.9 eV for a red channel; 0 and 0.3 eV look undoped */
    for (int i = 0; i < 4; i++) {
        double d = 0;
        for (int k = 0; k < 3; k++)
            d = fmax(d, fabs(sc.obj[i].rel[k] - ref[k]));
        if (i < 2)
            check_true(sc.obj[i].doped && d < 0.002, "%.2f eV monolayer looks undoped "
                       "(largest change %.4f)", sc.obj[i].fermi_eV, d);
        else
            check_true(sc.obj[i].doped && d > 0.004, "%.2f eV monolayer shows blocking "
                       "(largest change %.4f)", sc.obj[i].fermi_eV, d);
    }
    synth_scene_free(&sc);
}

static int file_has(const char *path, const char *needle)
{
    FILE *fp = fopen(path, "r");
    static char buf[1 << 16];
    size_t n = fp ? fread(buf, 1, sizeof buf - 1, fp) : 0;
    if (fp)
        fclose(fp);
    buf[n] = '\0';
    return strstr(buf, needle) != NULL;
}

static void test_files(const synth_scene *sc)
{
    char stem[512], path[600], s[64];
    tmp_path(stem, sizeof stem, "scene");
    snprintf(path, sizeof path, "%s.setup.json", stem);
    check_true(synth_write_setup(sc, SYNTH_FMT_PNG16, 1, path) == 0, "setup written");
    snprintf(s, sizeof s, "\"thickness_nm\": %g}", sc->phys.nominal_oxide_nm);
    check_true(file_has(path, s) && file_has(path, "\"linear\"") &&
               file_has(path, "scene.camera.csv") && !file_has(path, "weber"),
               "informed setup: nominal oxide, encoding, camera table, no response");
    snprintf(path, sizeof path, "%s.camera.csv", stem);
    check_true(file_has(path, "wavelength_nm,r,g,b\n380,"), "camera table header");
    snprintf(path, sizeof path, "%s.uninformed.setup.json", stem);
    check_true(synth_write_setup(sc, SYNTH_FMT_PNG, 0, path) == 0 && !file_has(path, "camera")
               && file_has(path, "um_per_px"), "uninformed setup: no camera");
    check_true(synth_write_truth(sc, stem) == 0, "truth written");
    snprintf(path, sizeof path, "%s.truth.png", stem);
    int w, h, nc;
    void *px = NULL;
    if (check_true(read_png(path, &w, &h, &nc, &px) == 8 && nc == 1 && w == sc->width &&
                   h == sc->height, "truth PNG reads back, 8-bit grey"))
        check_true(!memcmp(px, sc->truth, (size_t)w * h), "truth PNG equals the scene's labels");
    free(px);
}

static void test_formats(void)
{
    synth_config c = typical(SYNTH_RESP_WEBER);
    synth_scene sc;
    synth_image im;
    if (!check_true(synth_scene_make(&c, 3, &sc) == 0 && synth_render(&sc, &im) == 0,
                    "render: %s", synth_error()))
        return;
    test_jpeg_420(&im);
    test_png16(&im);
    test_files(&sc);
    synth_image_free(&im);
    synth_scene_free(&sc);
    c.camera = SYNTH_CAM_MONO;
    if (!check_true(synth_scene_make(&c, 4, &sc) == 0 && synth_render(&sc, &im) == 0,
                    "mono render: %s", synth_error()))
        return;
    check_int(im.nc, 1, "mono camera: one channel");
    test_tiff16(&im);
    char path[512];
    tmp_path(path, sizeof path, "bayer.png");
    check_true(synth_save(&im, SYNTH_FMT_BAYER_PNG, 0, path) != 0, "Bayer of grey refused");
    synth_image_free(&im);
    synth_scene_free(&sc);
}

static void time_render(void)
{
    synth_config c;
    synth_config_init(&c);
    clock_t t0 = clock();
    for (uint64_t s = 0; s < 5; s++) {
        synth_scene sc;
        synth_image im;
        if (synth_scene_make(&c, 500 + s, &sc) == 0 && synth_render(&sc, &im) == 0)
            synth_image_free(&im);
        synth_scene_free(&sc);
    }
    printf("test_synth: 640 x 480 scene + render: %.0f ms each (CPU, 5 random scenes)\n",
           1000.0 * (double)(clock() - t0) / CLOCKS_PER_SEC / 5);
}

int main(void)
{
    check_begin("test_synth");
    if (synth_material_load("Si-Green2008.yml", &si) ||
        synth_material_load("SiO2-fused-Malitson1965.yml", &ox))
        check_skip(synth_error());
    test_free_sheet();
    test_sheet_on_halfspace();
    test_airy();
    test_lossless();
    test_thin_film_limit();
    test_published_contrast();
    test_kk();
    test_weber_vs_default();
    test_materials();
    test_cie_a();
    test_srgb();
    test_bayer();
    test_pipeline_vs_direct();
    test_issue_statement();
    test_scenes();
    test_doped();
    test_formats();
    time_render();
    synth_material_free(&si);
    synth_material_free(&ox);
    return check_summary();
}
