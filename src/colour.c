/* colour.c - wavelength grids, illuminants, CIE 1931 observer fit, camera
 * channels and the channel weights used for integration. */
#include "lamina/colour.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

const lam_name lam_illuminant_kind_names[] = {
    {LAM_ILLUM_BLACKBODY, "blackbody", 0}, {LAM_ILLUM_CIE_A, "cie-a", 0},
    {LAM_ILLUM_LED_WHITE, "led-white", 0}, {LAM_ILLUM_FLAT, "flat", 0},
    {LAM_ILLUM_TABLE, "table", 0},         {0, NULL, 0}};

/* "mono" is the flat channel of monochromatic predictions, not a camera a
 * setup file can describe. */
const lam_name lam_camera_kind_names[] = {
    {LAM_CAMERA_SRGB_OBSERVER, "srgb-observer", 0}, {LAM_CAMERA_GAUSSIAN, "gaussian", 0},
    {LAM_CAMERA_TABLE, "table", 0},                 {LAM_CAMERA_MONO, "mono", 1},
    {0, NULL, 0}};

const char *lam_illuminant_kind_name(lam_illuminant_kind kind)
{
    return lam_name_of(lam_illuminant_kind_names, (int)kind);
}

const char *lam_camera_kind_name(lam_camera_kind kind)
{
    return lam_name_of(lam_camera_kind_names, (int)kind);
}

lam_status lam_grid_init(lam_grid *g, double lo_nm, double hi_nm, double step_nm,
                         lam_error *err)
{
    if (!(step_nm > 0) || !(hi_nm > lo_nm) || !(lo_nm > 0))
        return lam_error_set(err, LAM_EINVAL, "bad wavelength grid %g-%g nm step %g", lo_nm,
                             hi_nm, step_nm);
    double nf = floor((hi_nm - lo_nm) / step_nm + 1e-9) + 1;
    if (nf > LAM_MAX_GRID)
        return lam_error_set(err, LAM_ETOOBIG, "wavelength grid has more than %d points",
                             LAM_MAX_GRID);
    g->count = (size_t)nf;
    for (size_t i = 0; i < g->count; i++) {
        g->nm[i] = lo_nm + step_nm * (double)i;
        g->weight[i] = (i == 0 || i + 1 == g->count) ? step_nm / 2 : step_nm;
    }
    if (g->count == 1)
        g->weight[0] = 1.0;
    return LAM_OK;
}

void lam_grid_single(lam_grid *g, double nm)
{
    g->count = 1;
    g->nm[0] = nm;
    g->weight[0] = 1.0;
}

double lam_planck(double nm, double kelvin, double c2_m_k)
{
    double l = nm * 1e-9;
    return pow(l / 560e-9, -5.0) / expm1(c2_m_k / (l * kelvin));
}

/* White LED: an InGaN pump (Gaussian, 450 nm, FWHM 20 nm) plus a YAG:Ce
 * phosphor band (Gaussian, 560 nm, FWHM 120 nm) of the same peak height.
 * A generic model of a cool-white LED (own model, not a standard). */
static double led_white(double nm)
{
    double s1 = 20.0 / 2.3548, s2 = 120.0 / 2.3548;
    double a = (nm - 450.0) / s1, b = (nm - 560.0) / s2;
    return exp(-0.5 * a * a) + exp(-0.5 * b * b);
}

double lam_illuminant_eval(const lam_illuminant *il, double nm)
{
    switch (il->kind) {
    case LAM_ILLUM_BLACKBODY:
        return lam_planck(nm, il->kelvin, 1.438776877e-2);
    case LAM_ILLUM_CIE_A:
        /* CIE 015: S_A = 100 (560/l)^5 (e^(c2/(2848*560)) - 1)/(e^(c2/(2848 l)) - 1),
         * with c2 = 1.435e7 nm K; 1.0 at 560 nm here */
        return lam_planck(nm, 2848.0, 1.435e-2) / lam_planck(560.0, 2848.0, 1.435e-2);
    case LAM_ILLUM_LED_WHITE:
        return led_white(nm);
    case LAM_ILLUM_FLAT:
        return 1.0;
    case LAM_ILLUM_TABLE:
        return lam_table_spectrum_eval(&il->table, 0, nm);
    }
    return 1.0;
}

static double lobe(double x, double mu, double s1, double s2)
{
    double t = (x - mu) / (x < mu ? s1 : s2);
    return exp(-0.5 * t * t);
}

void lam_cie1931_eval(double nm, double xyz[3])
{
    /* Wyman, Sloan, Shirley (2013), multi-lobe piecewise Gaussian fit */
    xyz[0] = 1.056 * lobe(nm, 599.8, 37.9, 31.0) + 0.362 * lobe(nm, 442.0, 16.0, 26.7) -
             0.065 * lobe(nm, 501.1, 20.4, 26.2);
    xyz[1] = 0.821 * lobe(nm, 568.8, 46.9, 40.5) + 0.286 * lobe(nm, 530.9, 16.3, 31.1);
    xyz[2] = 1.217 * lobe(nm, 437.0, 11.8, 36.0) + 0.681 * lobe(nm, 459.0, 26.0, 13.8);
}

void lam_xyz_to_linear_srgb(const double xyz[3], double rgb[3])
{
    /* IEC 61966-2-1:1999, equation (F.7) */
    static const double m[3][3] = {{3.2406, -1.5372, -0.4986},
                                   {-0.9689, 1.8758, 0.0415},
                                   {0.0557, -0.2040, 1.0570}};
    for (int i = 0; i < 3; i++)
        rgb[i] = m[i][0] * xyz[0] + m[i][1] * xyz[1] + m[i][2] * xyz[2];
}

double lam_camera_eval(const lam_camera *cam, size_t channel, double nm)
{
    switch (cam->kind) {
    case LAM_CAMERA_SRGB_OBSERVER: {
        double xyz[3], rgb[3];
        lam_cie1931_eval(nm, xyz);
        lam_xyz_to_linear_srgb(xyz, rgb);
        return rgb[channel];
    }
    case LAM_CAMERA_GAUSSIAN: {
        double s = cam->fwhm_nm[channel] / 2.354820045, t = (nm - cam->centre_nm[channel]) / s;
        return exp(-0.5 * t * t);
    }
    case LAM_CAMERA_TABLE:
        return lam_table_spectrum_eval(&cam->table, channel, nm);
    case LAM_CAMERA_MONO:
        return 1.0;
    }
    return 0.0;
}

lam_status lam_spectrum_weights(const lam_grid *g, const lam_illuminant *il,
                                const lam_camera *cam, double (*w)[LAM_MAX_GRID],
                                lam_error *err)
{
    for (size_t c = 0; c < cam->channels; c++) {
        double sum = 0;
        for (size_t l = 0; l < g->count; l++) {
            w[c][l] = lam_camera_eval(cam, c, g->nm[l]) * lam_illuminant_eval(il, g->nm[l]) *
                      g->weight[l];
            sum += w[c][l];
        }
        if (!(sum > 0) || !isfinite(sum))
            return lam_error_set(err, LAM_ERANGE,
                                 "camera channel %zu sees no light from the illuminant over "
                                 "%.0f-%.0f nm",
                                 c + 1, g->nm[0], g->nm[g->count - 1]);
        for (size_t l = 0; l < g->count; l++)
            w[c][l] /= sum;
    }
    return LAM_OK;
}

void lam_table_spectrum_clear(lam_table_spectrum *t)
{
    if (!t)
        return;
    free(t->nm);
    free(t->value);
    t->nm = t->value = NULL;
    t->rows = 0;
}

double lam_table_spectrum_eval(const lam_table_spectrum *t, size_t column, double nm)
{
    if (t->rows == 0 || nm < t->nm[0] || nm > t->nm[t->rows - 1])
        return 0.0;
    size_t lo = 0, hi = t->rows - 1;
    while (hi - lo > 1) {
        size_t mid = (lo + hi) / 2;
        if (t->nm[mid] <= nm)
            lo = mid;
        else
            hi = mid;
    }
    if (hi == lo)
        return t->value[lo * t->columns + column];
    double f = (nm - t->nm[lo]) / (t->nm[hi] - t->nm[lo]);
    return (1 - f) * t->value[lo * t->columns + column] + f * t->value[hi * t->columns + column];
}

lam_status lam_table_spectrum_load(const char *path, size_t columns,
                                   lam_table_spectrum *out, lam_error *err)
{
    return lam_table_spectrum_load_ex(path, columns, 0, out, err);
}

/* The header line: must start with wavelength_nm; with columns == 0 it
 * sets the count of value columns from the names (a camera: 1 to 3). */
static lam_status table_header(const char *p, size_t lineno, size_t *columns, lam_error *err)
{
    if (strncasecmp(p, "wavelength_nm", 13))
        return lam_error_set(err, LAM_EFORMAT, "line %zu: expected a header starting "
                             "with wavelength_nm", lineno);
    if (*columns)
        return LAM_OK;
    for (const char *q = p; *q; q++)
        *columns += *q == ',';
    if (*columns < 1 || *columns > LAM_MAX_CHANNELS)
        return lam_error_set(err, LAM_EFORMAT, "line %zu: the header names %zu value "
                             "columns; a camera table has 1 to %d", lineno, *columns,
                             LAM_MAX_CHANNELS);
    return LAM_OK;
}

/* Room for one more row (doubling, at most 100000 rows). */
static lam_status table_grow(lam_table_spectrum *t, size_t *cap, lam_error *err)
{
    if (t->rows < *cap)
        return LAM_OK;
    *cap = *cap ? *cap * 2 : 128;
    if (*cap > 200000)
        return lam_error_set(err, LAM_ETOOBIG, "more than 100000 rows");
    double *nn = realloc(t->nm, *cap * sizeof *nn);
    if (nn)
        t->nm = nn;
    double *nv = realloc(t->value, *cap * t->columns * sizeof *nv);
    if (nv)
        t->value = nv;
    if (!nn || !nv)
        return lam_error_set(err, LAM_ENOMEM, "cannot grow a spectrum table");
    return LAM_OK;
}

/* One data row into row t->rows: the wavelength (> 0, increasing) and
 * t->columns values (>= 0 unless allow_negative), comma-separated. */
static lam_status table_row(char *p, size_t lineno, int allow_negative, lam_table_spectrum *t,
                            lam_error *err)
{
    size_t columns = t->columns;
    lam_status st = LAM_OK;
    char *end = p;
    for (size_t c = 0; c <= columns && !st; c++) {
        errno = 0;
        double v = strtod(end, &end);
        if (errno == ERANGE && fabs(v) < 1e-300) /* underflow: a value of ~0 is fine */
            errno = 0, v = 0;
        if (errno || !isfinite(v) || (c == 0 && v <= 0) || (c > 0 && v < 0 && !allow_negative))
            st = lam_error_set(err, LAM_EFORMAT, "line %zu, column %zu: need a finite number%s",
                               lineno, c + 1, c == 0 ? " > 0" : allow_negative ? "" : " >= 0");
        while (*end == ' ' || *end == '\t')
            end++;
        if (!st && c < columns && *end++ != ',')
            st = lam_error_set(err, LAM_EFORMAT, "line %zu: expected %zu columns", lineno,
                               columns + 1);
        if (!st) {
            if (c == 0)
                t->nm[t->rows] = v;
            else
                t->value[t->rows * columns + c - 1] = v;
        }
    }
    if (!st && t->rows && t->nm[t->rows] <= t->nm[t->rows - 1])
        st = lam_error_set(err, LAM_EFORMAT, "line %zu: wavelengths must increase", lineno);
    return st;
}

lam_status lam_table_spectrum_load_ex(const char *path, size_t columns, int allow_negative,
                                      lam_table_spectrum *out, lam_error *err)
{
    FILE *fp = fopen(path, "r");
    if (!fp) {
        lam_error_set(err, LAM_EIO, "cannot open spectrum table: %s", strerror(errno));
        lam_error_set_file(err, path);
        return LAM_EIO;
    }
    lam_table_spectrum t;
    memset(&t, 0, sizeof t);
    t.columns = columns;
    snprintf(t.file, sizeof t.file, "%s", path);
    size_t cap = 0, lineno = 0;
    int header = 0;
    char line[1024];
    lam_status st = LAM_OK;
    while (!st && fgets(line, sizeof line, fp)) {
        lineno++;
        char *p = line;
        while (*p == ' ' || *p == '\t')
            p++;
        if (*p == '#' || *p == '\n' || *p == '\r' || !*p)
            continue;
        if (!header) {
            header = 1;
            st = table_header(p, lineno, &t.columns, err);
            continue;
        }
        if (!(st = table_grow(&t, &cap, err)) && !(st = table_row(p, lineno, allow_negative, &t, err)))
            t.rows++;
    }
    fclose(fp);
    if (!st && t.rows < 2)
        st = lam_error_set(err, LAM_EFORMAT, "a spectrum table needs at least 2 rows");
    if (st) {
        lam_table_spectrum_clear(&t);
        lam_error_set_file(err, path);
        return st;
    }
    *out = t;
    return LAM_OK;
}
