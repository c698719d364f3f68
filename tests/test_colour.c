/* test_colour.c - observer, illuminants and sRGB against the CIE tables in
 * Debian's colord-data (read at test time) and IEC 61966-2-1. */
#include "check.h"
#include "lamina/colour.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define CMF_FILE "/usr/share/colord/cmf/CIE1931-2deg-XYZ.cmf"
#define A_FILE "/usr/share/colord/illuminant/CIE-A.sp"
#define D65_FILE "/usr/share/colord/illuminant/CIE-D65.sp"

typedef struct cgats {
    double start, end;
    int bands, sets;
    double data[3][600];
} cgats;

/* Reader of the colord-data CIE files (Debian): keys, then BEGIN_DATA rows. */
static int read_cgats(const char *path, cgats *out)
{
    FILE *fp = fopen(path, "r");
    if (!fp)
        return -1;
    char line[16384];
    int in_data = 0, row = 0;
    memset(out, 0, sizeof *out);
    while (fgets(line, sizeof line, fp)) {
        if (!strncmp(line, "SPECTRAL_START_NM\t", 18))
            out->start = strtod(line + 18, NULL);
        else if (!strncmp(line, "SPECTRAL_END_NM\t", 16))
            out->end = strtod(line + 16, NULL);
        else if (!strncmp(line, "SPECTRAL_BANDS\t", 15))
            out->bands = atoi(line + 15);
        else if (!strncmp(line, "NUMBER_OF_SETS\t", 15))
            out->sets = atoi(line + 15);
        else if (!strncmp(line, "BEGIN_DATA", 10) && strncmp(line, "BEGIN_DATA_FORMAT", 17))
            in_data = 1;
        else if (!strncmp(line, "END_DATA", 8) && strncmp(line, "END_DATA_FORMAT", 15))
            in_data = 0;
        else if (in_data && row < 3) {
            char *p = line;
            for (int i = 0; i < out->bands && i < 600; i++)
                out->data[row][i] = strtod(p, &p);
            row++;
        }
    }
    fclose(fp);
    return row == out->sets && out->bands > 1 ? 0 : -1;
}

static double wl_of(const cgats *c, int i)
{
    return c->start + i * (c->end - c->start) / (c->bands - 1);
}

static cgats cmf, ill;

static void test_observer_fit(void)
{
    if (!check_true(read_cgats(CMF_FILE, &cmf) == 0, "read %s (Debian colord-data)", CMF_FILE))
        return;
    check_int(cmf.bands, 95, "CMF has 95 bands (CIE-IN-DEBIAN.md)");
    check_abs(cmf.data[0][0], 0.0001299, 1e-10, "x(360) = 0.0001299 confirms row order");
    double worst = 0;
    for (int i = 0; i < cmf.bands; i++) {
        double nm = wl_of(&cmf, i), xyz[3];
        if (nm < 380 || nm > 780)
            continue;
        lam_cie1931_eval(nm, xyz);
        for (int c = 0; c < 3; c++)
            worst = fmax(worst, fabs(xyz[c] - cmf.data[c][i]));
    }
    /* Wyman, Sloan, Shirley (2013) report the multi-lobe fit's error as
     * small against the CIE table; we hold it to 0.05 absolute (peak
     * values are 1.0-1.78) */
    check_abs(worst, 0, 0.05, "CIE 1931 analytic fit vs the colord-data table, 380-780 nm");
}

static void test_illuminants(void)
{
    if (!check_true(read_cgats(A_FILE, &ill) == 0, "read %s", A_FILE))
        return;
    lam_illuminant a = {LAM_ILLUM_CIE_A, 0, {0}};
    double worst = 0;
    for (int i = 0; i < ill.bands; i++) {
        double nm = wl_of(&ill, i);
        if (nm < 380 || nm > 780)
            continue;
        worst = fmax(worst, fabs(lam_illuminant_eval(&a, nm) / ill.data[0][i] - 1));
    }
    check_abs(worst, 0, 1e-4, "CIE A formula (CIE 015, Planck 2856 K) vs colord CIE-A.sp");
    /* blackbody at 2856 K with the modern c2 is the same curve within 1e-3 */
    lam_illuminant bb = {LAM_ILLUM_BLACKBODY, 2856, {0}};
    double r1 = lam_illuminant_eval(&bb, 450) / lam_illuminant_eval(&bb, 650);
    double r2 = lam_illuminant_eval(&a, 450) / lam_illuminant_eval(&a, 650);
    check_rel(r1, r2, 2e-3, "Planck 2856 K equals CIE A (CIE 015)");
}

static void test_white_points(void)
{
    if (!check_true(read_cgats(D65_FILE, &ill) == 0, "read %s", D65_FILE) || !cmf.bands)
        return;
    /* 5 nm sum on the CMF grid: D65 white = (95.047, 100, 108.897) from the
     * tables (CIE-IN-DEBIAN.md); our fit of the observer must give the D65
     * chromaticity within 0.003 */
    double X = 0, Y = 0, Z = 0, Xf = 0, Yf = 0, Zf = 0;
    for (int i = 0; i < cmf.bands; i++) {
        double nm = wl_of(&cmf, i);
        int j = (int)lround((nm - ill.start) / 5.0);
        double s = ill.data[0][j], xyz[3];
        X += s * cmf.data[0][i];
        Y += s * cmf.data[1][i];
        Z += s * cmf.data[2][i];
        lam_cie1931_eval(nm, xyz);
        Xf += s * xyz[0];
        Yf += s * xyz[1];
        Zf += s * xyz[2];
    }
    check_abs(100 * Z / Y, 108.897, 0.01, "D65 Z from the colord tables (reader check)");
    check_abs(Xf / (Xf + Yf + Zf), 0.3127, 0.003, "D65 x with the fitted observer");
    check_abs(Yf / (Xf + Yf + Zf), 0.3290, 0.003, "D65 y with the fitted observer");
    /* IEC 61966-2-1: the D65 white maps to linear sRGB (1, 1, 1) */
    double w[3] = {0.95047, 1.0, 1.08883}, rgb[3];
    lam_xyz_to_linear_srgb(w, rgb);
    for (int c = 0; c < 3; c++)
        check_abs(rgb[c], 1.0, 1e-3, "D65 white -> linear sRGB channel %d = 1", c);
}

static void test_channels(void)
{
    lam_camera cam = {LAM_CAMERA_GAUSSIAN, 3, {605, 535, 465}, {80, 75, 70}, {0}};
    check_abs(lam_camera_eval(&cam, 1, 535 + 37.5), 0.5, 1e-9, "Gaussian channel: half at FWHM/2");
    lam_grid g;
    check_int(lam_grid_init(&g, 380, 780, 2, NULL), LAM_OK, "grid 380-780/2");
    check_int((long long)g.count, 201, "201 wavelengths");
    static double w[LAM_MAX_CHANNELS][LAM_MAX_GRID];
    lam_illuminant il = {LAM_ILLUM_BLACKBODY, 3200, {0}};
    check_int(lam_spectrum_weights(&g, &il, &cam, w, NULL), LAM_OK, "channel weights");
    double sum = 0;
    for (size_t l = 0; l < g.count; l++)
        sum += w[1][l];
    check_abs(sum, 1.0, 1e-12, "weights normalised");
    lam_camera dark = {LAM_CAMERA_GAUSSIAN, 3, {900, 535, 465}, {5, 75, 70}, {0}};
    lam_error err;
    lam_error_clear(&err);
    check_int(lam_spectrum_weights(&g, &il, &dark, w, &err), LAM_ERANGE,
              "a channel outside the grid is an error");
    char path[512];
    check_path(path, sizeof path, check_tmpdir(), "cam.csv");
    FILE *fp = fopen(path, "w");
    fprintf(fp, "wavelength_nm,r,g,b\n400,0,0,1\n550,0,1,0\n700,1,0,0\n");
    fclose(fp);
    lam_table_spectrum t;
    check_int(lam_table_spectrum_load(path, 3, &t, NULL), LAM_OK, "load a camera table");
    check_abs(lam_table_spectrum_eval(&t, 1, 475), 0.5, 1e-12, "table interpolation");
    lam_table_spectrum_clear(&t);
}

int main(void)
{
    check_begin("test_colour");
    test_observer_fit();
    test_illuminants();
    test_white_points();
    test_channels();
    return check_summary();
}
