/* model.c - channel- and cone-integrated reflectance and contrast of
 * N-layer graphene on a thin-film substrate. */
#include "lamina/model.h"
#include "lamina/tmm.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <gsl/gsl_integration.h>

#define HC_EV_NM 1239.841984
#define MAX_NODES 96

struct lam_model {
    size_t channels, max_layers, nwl, nodes, oxide_layer, layers;
    double n_ambient;
    double interlayer_nm;
    lam_sheet_params sheet;
    double cached_fermi;
    int have_sigma;
    double *wl;              /* nwl */
    double *weight;          /* channels x nwl */
    double complex *n_layer; /* layers x nwl */
    double complex *n_base;  /* nwl */
    double complex *y_sheet; /* nwl: Z0 sigma */
    double complex *n_film;  /* nwl: flake index when flakes are films, else NULL */
    double layer_nm[LAM_SETUP_MAX_LAYERS];
    double sin_t[MAX_NODES], w_t[MAX_NODES];
};

static lam_status fill_cone(lam_model *m, const lam_setup *s, lam_error *err)
{
    double na = s->illumination_na;
    if (!(na >= 0 && na < m->n_ambient))
        return lam_error_set(err, LAM_ERANGE,
                             "illumination NA %g must be >= 0 and below the ambient index %g",
                             na, m->n_ambient);
    if (na == 0 || s->cone_nodes <= 1) {
        m->nodes = 1;
        m->sin_t[0] = 0;
        m->w_t[0] = 1;
        return LAM_OK;
    }
    double tmax = asin(na / m->n_ambient);
    m->nodes = s->cone_nodes > MAX_NODES ? MAX_NODES : s->cone_nodes;
    gsl_integration_glfixed_table *t = gsl_integration_glfixed_table_alloc(m->nodes);
    if (!t)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate Gauss-Legendre nodes");
    double sum = 0;
    for (size_t i = 0; i < m->nodes; i++) {
        double x, w;
        gsl_integration_glfixed_point(0.0, tmax, i, &x, &w, t);
        double pw = s->pupil == LAM_PUPIL_SIN ? sin(x) : sin(x) * cos(x);
        m->sin_t[i] = sin(x);
        m->w_t[i] = w * pw;
        sum += m->w_t[i];
    }
    gsl_integration_glfixed_table_free(t);
    for (size_t i = 0; i < m->nodes; i++)
        m->w_t[i] /= sum;
    return LAM_OK;
}

void lam_model_free(lam_model *m)
{
    if (!m)
        return;
    free(m->wl);
    free(m->weight);
    free(m->n_layer);
    free(m->n_base);
    free(m->y_sheet);
    free(m->n_film);
    free(m);
}

size_t lam_model_channels(const lam_model *m)
{
    return m->channels;
}

lam_status lam_model_alloc(const lam_setup *s, size_t max_layers, double mono_nm,
                           lam_model **out, lam_error *err)
{
    if (max_layers < 1 || max_layers > LAM_MODEL_MAX_LAYERS)
        return lam_error_set(err, LAM_ERANGE, "layer range must be 1 to %d, not %zu",
                             LAM_MODEL_MAX_LAYERS, max_layers);
    lam_grid *grid = malloc(sizeof *grid);
    double (*w)[LAM_MAX_GRID] = malloc(sizeof(double[LAM_MAX_CHANNELS][LAM_MAX_GRID]));
    lam_model *m = calloc(1, sizeof *m);
    lam_status st = LAM_OK;
    if (!grid || !w || !m) {
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate a model");
        goto fail;
    }
    lam_camera cam = s->camera;
    if (mono_nm > 0) {
        lam_grid_single(grid, mono_nm);
        cam.kind = LAM_CAMERA_MONO;
        cam.channels = 1;
    } else if ((st = lam_grid_init(grid, s->grid_lo_nm, s->grid_hi_nm, s->grid_step_nm, err))) {
        goto fail;
    }
    if ((st = lam_spectrum_weights(grid, &s->illuminant, &cam, w, err)))
        goto fail;
    m->channels = cam.channels;
    m->max_layers = max_layers;
    m->nwl = grid->count;
    m->layers = s->layers;
    m->oxide_layer = lam_setup_oxide_layer(s);
    m->interlayer_nm = s->interlayer_nm;
    m->sheet = s->sheet;
    memcpy(m->layer_nm, s->layer_nm, sizeof m->layer_nm);
    m->n_ambient = creal(lam_material_index_eval(&s->ambient, 550));
    m->wl = malloc(m->nwl * sizeof *m->wl);
    m->weight = malloc(m->channels * m->nwl * sizeof *m->weight);
    m->n_layer = malloc((m->layers ? m->layers : 1) * m->nwl * sizeof *m->n_layer);
    m->n_base = malloc(m->nwl * sizeof *m->n_base);
    m->y_sheet = malloc(m->nwl * sizeof *m->y_sheet);
    if (!m->wl || !m->weight || !m->n_layer || !m->n_base || !m->y_sheet) {
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate a model");
        goto fail;
    }
    for (size_t l = 0; l < m->nwl; l++) {
        double nm = grid->nm[l];
        m->wl[l] = nm;
        for (size_t c = 0; c < m->channels; c++)
            m->weight[c * m->nwl + l] = w[c][l];
        for (size_t j = 0; j < m->layers; j++)
            if ((st = lam_material_index(&s->layer_material[j], nm, &m->n_layer[j * m->nwl + l],
                                         err)))
                goto fail;
        if ((st = lam_material_index(&s->base, nm, &m->n_base[l], err)))
            goto fail;
        double complex na;
        if ((st = lam_material_index(&s->ambient, nm, &na, err)))
            goto fail;
    }
    if (s->flake_as_film) {
        m->n_film = malloc(m->nwl * sizeof *m->n_film);
        if (!m->n_film) {
            st = lam_error_set(err, LAM_ENOMEM, "cannot allocate a model");
            goto fail;
        }
        for (size_t l = 0; l < m->nwl; l++)
            if ((st = lam_material_index(&s->flake_film, m->wl[l], &m->n_film[l], err)))
                goto fail;
    }
    if ((st = fill_cone(m, s, err)))
        goto fail;
    m->have_sigma = 0;
    free(grid);
    free(w);
    *out = m;
    return LAM_OK;
fail:
    free(grid);
    free(w);
    lam_model_free(m);
    return st;
}

static lam_status update_sigma(lam_model *m, double fermi_ev, lam_error *err)
{
    if (m->have_sigma && m->cached_fermi == fermi_ev)
        return LAM_OK;
    lam_sheet_params p = m->sheet;
    p.fermi_ev = fermi_ev;
    double z0s0 = lam_z0_sigma0();
    for (size_t l = 0; l < m->nwl; l++) {
        double complex s;
        lam_status st = lam_sheet_conductivity(&p, HC_EV_NM / m->wl[l], &s, err);
        if (st)
            return st;
        m->y_sheet[l] = z0s0 * s;
    }
    m->cached_fermi = fermi_ev;
    m->have_sigma = 1;
    return LAM_OK;
}

/* Reflectance of N = 0..K at one wavelength and angle, one polarisation,
 * added with weight wt into acc[N]. Built bottom-up: substrate, films, then
 * sheets separated by ambient gaps, so each extra layer costs one step. */
static void accumulate(const lam_model *m, size_t l, double oxide_nm, double sin_t, lam_pol pol,
                       double wt, double *acc)
{
    double kx = m->n_ambient * sin_t, k0 = 2.0 * M_PI / m->wl[l];
    double complex qb = lam_tmm_q(m->n_base[l], kx);
    double complex y = lam_tmm_eta(m->n_base[l], qb, pol);
    for (size_t j = m->layers; j-- > 0;) {
        double complex n = m->n_layer[j * m->nwl + l];
        double complex q = lam_tmm_q(n, kx);
        double d = j == m->oxide_layer ? oxide_nm : m->layer_nm[j];
        double complex ph = k0 * q * d;
        y = lam_tmm_through_film(y, lam_tmm_eta(n, q, pol), ccos(ph), csin(ph));
    }
    double complex q0 = lam_tmm_q(m->n_ambient, kx);
    double complex eta0 = lam_tmm_eta(m->n_ambient, q0, pol);
    double complex gap = k0 * q0 * m->interlayer_nm;
    double complex cg = ccos(gap), sg = csin(gap);
    if (m->n_film) {
        /* comparison model: N layers as one slab of N * interlayer_nm */
        double complex nf = m->n_film[l], qf = lam_tmm_q(nf, kx);
        double complex ef = lam_tmm_eta(nf, qf, pol);
        double complex ysub = y;
        for (size_t N = 0; N <= m->max_layers; N++) {
            double complex ph = k0 * qf * m->interlayer_nm * (double)N;
            double complex yn = N ? lam_tmm_through_film(ysub, ef, ccos(ph), csin(ph)) : ysub;
            double complex r = (eta0 - yn) / (eta0 + yn);
            acc[N] += wt * creal(r * conj(r));
        }
        return;
    }
    double complex ys = m->y_sheet[l];
    for (size_t N = 0; N <= m->max_layers; N++) {
        if (N > 0) {
            if (N > 1)
                y = lam_tmm_through_film(y, eta0, cg, sg);
            y += ys;
        }
        double complex r = (eta0 - y) / (eta0 + y);
        acc[N] += wt * creal(r * conj(r));
    }
}

lam_status lam_model_eval(lam_model *m, double oxide_nm, double fermi_ev,
                          lam_prediction *out, lam_error *err)
{
    if (!(oxide_nm >= 0 && oxide_nm <= 5000))
        return lam_error_set(err, LAM_ERANGE, "oxide thickness %g nm outside 0 to 5000 nm",
                             oxide_nm);
    lam_status st = update_sigma(m, fermi_ev, err);
    if (st)
        return st;
    double rl[LAM_MODEL_MAX_LAYERS + 1];
    double acc[LAM_MODEL_MAX_LAYERS + 1][LAM_MAX_CHANNELS];
    memset(acc, 0, sizeof acc);
    for (size_t l = 0; l < m->nwl; l++) {
        memset(rl, 0, sizeof rl);
        for (size_t t = 0; t < m->nodes; t++) {
            accumulate(m, l, oxide_nm, m->sin_t[t], LAM_POL_S, 0.5 * m->w_t[t], rl);
            if (m->sin_t[t] > 0)
                accumulate(m, l, oxide_nm, m->sin_t[t], LAM_POL_P, 0.5 * m->w_t[t], rl);
            else
                accumulate(m, l, oxide_nm, 0.0, LAM_POL_S, 0.5 * m->w_t[t], rl);
        }
        for (size_t c = 0; c < m->channels; c++) {
            double w = m->weight[c * m->nwl + l];
            for (size_t N = 0; N <= m->max_layers; N++)
                acc[N][c] += w * rl[N];
        }
    }
    memset(out, 0, sizeof *out);
    out->channels = m->channels;
    out->max_layers = m->max_layers;
    out->oxide_nm = oxide_nm;
    out->fermi_ev = fermi_ev;
    for (size_t c = 0; c < m->channels; c++) {
        out->substrate[c] = acc[0][c];
        for (size_t N = 0; N <= m->max_layers; N++) {
            out->reflectance[N][c] = acc[N][c];
            out->contrast[N][c] = (acc[0][c] - acc[N][c]) / acc[0][c];
        }
    }
    return LAM_OK;
}

lam_status lam_model_doxide(lam_model *m, double oxide_nm, double fermi_ev,
                            double (*dc)[LAM_MAX_CHANNELS], lam_error *err)
{
    const double h = 0.05;
    lam_prediction *a = malloc(2 * sizeof *a);
    if (!a)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate predictions");
    lam_status st = lam_model_eval(m, oxide_nm + h, fermi_ev, &a[0], err);
    if (!st)
        st = lam_model_eval(m, oxide_nm > h ? oxide_nm - h : 0, fermi_ev, &a[1], err);
    if (!st) {
        double span = oxide_nm > h ? 2 * h : oxide_nm + h;
        for (size_t N = 0; N <= m->max_layers; N++)
            for (size_t c = 0; c < m->channels; c++)
                dc[N][c] = (a[0].contrast[N][c] - a[1].contrast[N][c]) / span;
    }
    free(a);
    return st;
}

lam_status lam_model_alloc_fast(const lam_setup *setup, size_t max_layers, lam_model **out,
                                lam_error *err)
{
    lam_setup fs = *setup;
    fs.grid_step_nm = 5;
    fs.cone_nodes = 8;
    return lam_model_alloc(&fs, max_layers, 0, out, err);
}
