/* model.c - channel- and cone-integrated reflectance and contrast of
 * N-layer graphene on a thin-film substrate, at any model point, with the
 * caches that make nearby points cheap (its derivatives: model_gradient.c;
 * the state both share: model_internal.h). */
#include "lamina/model.h"
#include "lamina/tmm.h"
#include "basis_cache_internal.h"
#include "model_internal.h"
#include "vector_clones.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <gsl/gsl_integration.h>

#define HC_EV_NM 1239.841984

/* ---- allocation ---- */

static void free_slots(lam_model *m)
{
    for (int i = 0; i < SUBSTRATE_SLOTS; i++) {
        free(m->slot[i].y);
        free(m->slot[i].eta0);
        free(m->slot[i].gap_cos);
        free(m->slot[i].gap_sin);
        free(m->slot[i].res_rbar);
        free(m->slot[i].tnorm);
    }
}

void lam_model_free(lam_model *m)
{
    if (!m)
        return;
    free(m->wl);
    free(m->trapezoid);
    free(m->lamp);
    free(m->weight);
    free(m->n_layer);
    free(m->n_base);
    free(m->n_film);
    free(m->n_film_layer);
    free(m->basis);
    free(m->y_sheet);
    free(m->rbar);
    free(m->n_residue);
    free(m->fph);
    for (int i = 0; i < FILM_TABLES; i++)
        free(m->ftab[i].d); /* one block with the phases */
    for (int i = 0; i < WAVE_SETS; i++)
        free(m->waves[i].gap_cos);
    free_slots(m);
    lam_table_spectrum_clear(&m->camera_table_copy);
    free(m);
}

size_t lam_model_channels(const lam_model *m)
{
    return m->channels;
}

size_t lam_model_max_layers(const lam_model *m)
{
    return m->max_layers;
}

size_t lam__films_of(const lam_model *m)
{
    return m->layers ? m->layers : 1;
}

/* A set's arrays for the largest cone. 0 when out of memory. */
static int waves_alloc(const lam_model *m, cone_waves *w)
{
    size_t per = m->nwl * m->cone_nodes_max, films = lam__films_of(m);
    double complex *a = malloc((6 * per + 5 * per * films) * sizeof *a);
    if (!a)
        return 0;
    w->gap_cos = a, w->gap_sin = a + per, w->eta0 = a + 2 * per, w->eta_base = a + 4 * per;
    a += 6 * per;
    w->k0q = a, w->cph = a + per * films, w->sph = a + 2 * per * films;
    w->eta = a + 3 * per * films;
    return 1;
}

static int alloc_arrays(lam_model *m)
{
    size_t n = m->nwl, nl = m->layers ? m->layers : 1;
    size_t per_slot = n * m->cone_nodes_max * 2;
    m->wl = malloc(n * sizeof *m->wl);
    m->trapezoid = malloc(n * sizeof *m->trapezoid);
    m->lamp = malloc(n * sizeof *m->lamp);
    m->weight = malloc(m->channels * n * sizeof *m->weight);
    m->n_layer = malloc(nl * n * sizeof *m->n_layer);
    m->n_base = malloc(n * sizeof *m->n_base);
    m->basis = malloc(4 * n * sizeof *m->basis);
    m->y_sheet = malloc(n * sizeof *m->y_sheet);
    m->rbar = malloc(n * (m->max_layers + 1) * sizeof *m->rbar);
    int ok = m->wl && m->trapezoid && m->lamp && m->weight && m->n_layer && m->n_base &&
             m->basis && m->y_sheet && m->rbar;
    for (int i = 0; i < SUBSTRATE_SLOTS && ok; i++) {
        substrate_slot *s = &m->slot[i];
        s->y = malloc(per_slot * sizeof *s->y);
        s->eta0 = malloc(per_slot * sizeof *s->eta0);
        s->gap_cos = malloc(per_slot / 2 * sizeof *s->gap_cos);
        s->gap_sin = malloc(per_slot / 2 * sizeof *s->gap_sin);
        ok = s->y && s->eta0 && s->gap_cos && s->gap_sin;
        if (ok && m->transmission)
            ok = (s->tnorm = malloc(per_slot * sizeof *s->tnorm)) != NULL;
    }
    for (int i = 0; i < WAVE_SETS && ok && !m->transmission; i++)
        ok = waves_alloc(m, &m->waves[i]);
    return ok;
}

/* Indices of the substrate films, the base and (for film flakes) the flake. */
static lam_status fill_materials(lam_model *m, const lam_setup *s, lam_error *err)
{
    lam_status st = LAM_OK;
    for (size_t l = 0; l < m->nwl && !st; l++) {
        double nm = m->wl[l];
        for (size_t j = 0; j < m->layers && !st; j++)
            st = lam_material_index(&s->layer_material[j], nm, &m->n_layer[j * m->nwl + l], err);
        if (!st)
            st = lam_material_index(&s->base, nm, &m->n_base[l], err);
        double complex na;
        if (!st)
            st = lam_material_index(&s->ambient, nm, &na, err);
    }
    if (st || !s->flake_as_film)
        return st;
    if (!(m->n_film = malloc(m->nwl * sizeof *m->n_film)))
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a model");
    for (size_t l = 0; l < m->nwl && !st; l++)
        st = lam_material_index(&s->flake_film, m->wl[l], &m->n_film[l], err);
    if (st || !s->flake_layer_films)
        return st;
    /* crystals: the n,k of the 1L.. films where published (lamina/crystal.h) */
    m->film_layers = s->flake_layer_films;
    if (!(m->n_film_layer = malloc(m->film_layers * m->nwl * sizeof *m->n_film_layer)))
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a model");
    for (size_t j = 0; j < m->film_layers && !st; j++)
        for (size_t l = 0; l < m->nwl && !st; l++)
            st = lam_material_index(&s->flake_layer_film[j], m->wl[l],
                                    &m->n_film_layer[j * m->nwl + l], err);
    return st;
}

/* The camera is kept by value; a table camera's spectrum is deep-copied so
 * the model does not depend on the setup after allocation. */
static lam_status copy_camera(lam_model *m, const lam_camera *cam, lam_error *err)
{
    m->camera = *cam;
    if (cam->kind != LAM_CAMERA_TABLE)
        return LAM_OK;
    const lam_table_spectrum *t = &cam->table;
    lam_table_spectrum *c = &m->camera_table_copy;
    *c = *t;
    c->nm = malloc(t->rows * sizeof *c->nm);
    c->value = malloc(t->rows * t->columns * sizeof *c->value);
    if (!c->nm || !c->value) {
        free(c->nm);
        free(c->value);
        c->nm = c->value = NULL;
        c->rows = 0;
        return lam_error_set(err, LAM_ENOMEM, "cannot copy the camera table");
    }
    memcpy(c->nm, t->nm, t->rows * sizeof *c->nm);
    memcpy(c->value, t->value, t->rows * t->columns * sizeof *c->value);
    m->camera.table = *c;
    return LAM_OK;
}

static lam_status init_spectrum(lam_model *m, const lam_setup *s, const lam_grid *g,
                                const lam_camera *cam, lam_error *err)
{
    double (*w)[LAM_MAX_GRID] = malloc(sizeof(double[LAM_MAX_CHANNELS][LAM_MAX_GRID]));
    if (!w)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a model");
    /* checks that every channel sees light; the weights are rebuilt per shift */
    lam_status st = lam_spectrum_weights(g, &s->illuminant, cam, w, err);
    for (size_t c = 0; c < m->channels && !st; c++) {
        double sw = 0, swl = 0;
        for (size_t l = 0; l < g->count; l++)
            sw += w[c][l], swl += w[c][l] * g->nm[l];
        m->centroid[c] = swl / sw;
    }
    free(w);
    for (size_t l = 0; l < m->nwl && !st; l++) {
        m->wl[l] = g->nm[l];
        m->trapezoid[l] = g->weight[l];
        m->lamp[l] = lam_illuminant_eval(&s->illuminant, g->nm[l]);
    }
    return st;
}

lam_status lam_model_alloc(const lam_setup *s, size_t max_layers, double mono_nm,
                           lam_model **out, lam_error *err)
{
    if (max_layers < 1 || max_layers > LAM_MODEL_MAX_LAYERS)
        return lam_error_set(err, LAM_ERANGE, "layer range must be 1 to %d, not %zu",
                             LAM_MODEL_MAX_LAYERS, max_layers);
    lam_grid *grid = malloc(sizeof *grid);
    lam_model *m = calloc(1, sizeof *m);
    lam_status st = LAM_OK;
    if (!grid || !m) {
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate a model");
        goto fail;
    }
    for (int i = 0; i < WAVE_SETS; i++)
        m->waves[i].na = NAN; /* no waves yet: 0 is an NA */
    lam_camera cam = s->camera;
    if (mono_nm > 0) {
        lam_grid_single(grid, mono_nm);
        cam.kind = LAM_CAMERA_MONO;
        cam.channels = 1;
    } else if ((st = lam_grid_init(grid, s->grid_lo_nm, s->grid_hi_nm, s->grid_step_nm, err))) {
        goto fail;
    }
    m->channels = cam.channels;
    m->max_layers = max_layers;
    m->nwl = grid->count;
    m->layers = s->layers;
    m->oxide_layer = lam_setup_oxide_layer(s);
    m->interlayer_nm = s->interlayer_nm;
    m->transmission = s->transmission;
    m->sheet = s->sheet;
    m->pupil = s->pupil;
    m->cone_nodes_max = s->cone_nodes < 1 ? 1 : (s->cone_nodes > MAX_NODES ? MAX_NODES : s->cone_nodes);
    memcpy(m->layer_nm, s->layer_nm, sizeof m->layer_nm);
    m->n_ambient = creal(lam_material_index_eval(&s->ambient, 550));
    if (!alloc_arrays(m)) {
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate a model");
        goto fail;
    }
    if ((st = copy_camera(m, &cam, err)) || (st = init_spectrum(m, s, grid, &cam, err)) ||
        (st = fill_materials(m, s, err)))
        goto fail;
    if (m->transmission && cimag(m->n_base[m->nwl / 2]) > 1e-3) {
        st = lam_error_set(err, LAM_EINVAL,
                           "transmission needs a transparent base (PDMS, glass), not %s",
                           s->base.name);
        goto fail;
    }
    lam_model_point *d = &m->defaults;
    d->v[LAM_MP_OXIDE] = lam_setup_oxide(s) >= 0 ? lam_setup_oxide(s) : 0;
    d->v[LAM_MP_NA] = s->illumination_na;
    d->v[LAM_MP_FERMI] = s->sheet.fermi_ev;
    d->v[LAM_MP_CONTINUUM] = s->sheet.continuum;
    d->v[LAM_MP_RESONANCE] = s->sheet.resonance;
    d->v[LAM_MP_BACKGROUND] = s->sheet.background;
    for (size_t c = 0; c < m->channels; c++) {
        d->v[LAM_MP_SHIFT + c] = mono_nm > 0 ? 0 : s->camera_shift_nm[c];
        d->v[LAM_MP_WIDTH + c] = mono_nm > 0 ? 0 : log(s->camera_width[c]);
    }
    m->cone_cache.na = -1;
    free(grid);
    *out = m;
    return LAM_OK;
fail:
    free(grid);
    lam_model_free(m);
    return st;
}

/* The fits' spectral step and cone nodes. Graphene's sheets in reflection
 * have no feature narrower than the oxide's fringes (and the Pauli edge,
 * thermally broadened, seen through a camera channel 65-85 nm wide), so
 * 10 nm and 6 nodes keep every 1-5L contrast within 6e-5 of the full
 * model (2 nm, 24 nodes) up to 500 nm of SiO2, within 1.5e-4 up to
 * 1000 nm (NA 0.3 and 0.9, E_F 0.2-1.0 eV, two cameras; test_model,
 * docs/performance.md "nineteenth stop"): ten times below the contrast
 * floor of a picture (1e-3 and more: the substrate's unevenness, an 8-bit
 * file's steps). A TMD's excitons are 15-20 nm wide: at 10 nm WSe2's
 * contrasts moved by up to 1.5e-3 (1.3e-4 at 5 nm), so other crystals,
 * and transmission (not measured), keep 5 nm. (WS2's sharper A exciton
 * costs up to 1.7e-3 at 2-5L even there, 2.8e-4 at 1L.) Six cone nodes
 * are within 1.5e-5 of 48 up to 285 nm of SiO2 at NA 0.3-0.9 (hBN's
 * 1-300 nm films 2.6e-5); at 400 nm and an illumination NA of 0.9, 1.3e-4
 * for the TMDs and hBN (graphene 1.1e-5), the size of the TMDs' spectral
 * error; four nodes were 8e-4 off at 285 nm. Transmission keeps 8 (not
 * measured). docs/performance.md, nineteenth stop. */
static void fast_grid(const lam_setup *setup, lam_setup *fs)
{
    int sheets = lam_setup_crystal_kind(setup) == LAM_CRYSTAL_SHEETS && !setup->transmission;
    fs->grid_step_nm = sheets ? 10 : 5;
    fs->cone_nodes = setup->transmission ? 8 : 6;
}

lam_status lam_model_alloc_fast(const lam_setup *setup, size_t max_layers, lam_model **out,
                                lam_error *err)
{
    lam_setup fs = *setup;
    fast_grid(setup, &fs);
    lam_status st = lam_model_alloc(&fs, max_layers, 0, out, err);
    if (st || lam_setup_crystal_kind(setup) != LAM_CRYSTAL_LAYERED || setup->transmission)
        return st;
    lam_material pmma;
    memset(&pmma, 0, sizeof pmma);
    if (!(st = lam_material_builtin("PMMA", &pmma, err)))
        st = lam_model_set_residue(*out, &pmma, err);
    lam_material_clear(&pmma);
    if (st) {
        lam_model_free(*out);
        *out = NULL;
    }
    return st;
}

/* Every substrate slot's residue reflectances (lam_model_set_residue);
 * 0 when out of memory. */
static int alloc_residue(lam_model *m)
{
    for (int i = 0; i < SUBSTRATE_SLOTS; i++) {
        substrate_slot *s = &m->slot[i];
        if (!s->res_rbar &&
            !(s->res_rbar = malloc(m->nwl * LAM_RESIDUE_FILMS * sizeof *s->res_rbar)))
            return 0;
        s->res_filled = 0;
    }
    return 1;
}

/* A copy of array 'src' of n elements of 'size' bytes into *dst (NULL
 * stays NULL); 0 when out of memory. */
static int copy_array(void **dst, const void *src, size_t n, size_t size)
{
    *dst = NULL;
    if (!src)
        return 1;
    if (!(*dst = malloc(n ? n * size : 1)))
        return 0;
    memcpy(*dst, src, n * size);
    return 1;
}

lam_status lam_model_clone(const lam_model *src, lam_model **out, lam_error *err)
{
    lam_model *m = calloc(1, sizeof *m);
    if (!m)
        return lam_error_set(err, LAM_ENOMEM, "cannot copy a model");
    *m = *src;
    /* the copy's own arrays; its caches start empty (they give the same
     * values when refilled: every key is compared exactly) */
    m->wl = m->trapezoid = m->lamp = m->weight = m->rbar = NULL;
    m->n_layer = m->n_base = m->n_film = m->n_film_layer = m->basis = m->y_sheet = NULL;
    m->n_residue = NULL;
    m->fph = NULL;
    m->fph_size = 0;
    m->fph_na = NAN;
    memset(m->ftab, 0, sizeof m->ftab);
    m->res_slot = NULL;
    memset(m->slot, 0, sizeof m->slot);
    memset(m->waves, 0, sizeof m->waves);
    for (int i = 0; i < WAVE_SETS; i++)
        m->waves[i].na = NAN;
    memset(&m->camera_table_copy, 0, sizeof m->camera_table_copy);
    m->have_weight = m->have_basis = m->have_rbar = 0;
    m->rbar_slot = NULL;
    m->clock = 0;
    m->cone_cache.na = -1;
    size_t n = m->nwl, nl = m->layers ? m->layers : 1;
    int ok = alloc_arrays(m);
    if (ok) {
        memcpy(m->wl, src->wl, n * sizeof *m->wl);
        memcpy(m->trapezoid, src->trapezoid, n * sizeof *m->trapezoid);
        memcpy(m->lamp, src->lamp, n * sizeof *m->lamp);
        memcpy(m->n_layer, src->n_layer, nl * n * sizeof *m->n_layer);
        memcpy(m->n_base, src->n_base, n * sizeof *m->n_base);
        ok = copy_array((void **)&m->n_film, src->n_film, n, sizeof *m->n_film) &&
             copy_array((void **)&m->n_film_layer, src->n_film_layer, src->film_layers * n,
                        sizeof *m->n_film_layer) &&
             copy_array((void **)&m->n_residue, src->n_residue, n, sizeof *m->n_residue) &&
             (!m->n_residue || alloc_residue(m));
    }
    lam_status st = ok ? copy_camera(m, &src->camera, err)
                       : lam_error_set(err, LAM_ENOMEM, "cannot copy a model");
    if (st) {
        lam_model_free(m);
        return st;
    }
    *out = m;
    return LAM_OK;
}

lam_status lam_model_clones(lam_model *m, size_t n, lam_model **out, lam_error *err)
{
    out[0] = m;
    for (size_t k = 1; k < n; k++)
        out[k] = NULL;
    lam_status st = LAM_OK;
    for (size_t k = 1; k < n && !st; k++)
        st = lam_model_clone(m, &out[k], err);
    if (st)
        lam_model_clones_free(out, n);
    return st;
}

void lam_model_clones_free(lam_model **out, size_t n)
{
    for (size_t k = 1; k < n; k++) {
        lam_model_free(out[k]);
        out[k] = NULL;
    }
}

lam_model_point lam_model_point_default(const lam_model *m)
{
    return m->defaults;
}

double lam_model_step(lam_model_param k)
{
    switch (k) {
    case LAM_MP_OXIDE: return 0.1;
    case LAM_MP_NA: return 0.01;
    case LAM_MP_FERMI: return 0.01;
    case LAM_MP_CONTINUUM: return 0.02;
    case LAM_MP_RESONANCE: return 0.1;
    case LAM_MP_BACKGROUND: return 1.0;
    default:
        return k >= LAM_MP_WIDTH ? 0.02 : 1.0; /* channel width (log), shift (nm) */
    }
}

/* ---- the pieces of one evaluation, each cached ---- */

/* Channel c's weights for a shift (nm) and a log width scale, into w
 * (nwl of them, normalised); LAM_ERANGE when the channel sees no light. */
lam_status lam__channel_weights(const lam_model *m, size_t c, double shift, double log_width,
                                double *w, lam_error *err)
{
    double sum = 0, inv = exp(-log_width), cen = m->centroid[c];
    for (size_t l = 0; l < m->nwl; l++) {
        double at = cen + (m->wl[l] - shift - cen) * inv;
        w[l] = lam_camera_eval(&m->camera, c, at) * m->lamp[l] * m->trapezoid[l];
        sum += w[l];
    }
    if (!(sum > 0) || !isfinite(sum))
        return lam_error_set(err, LAM_ERANGE,
                             "camera channel %zu (shifted %+.0f nm) sees no light", c + 1, shift);
    for (size_t l = 0; l < m->nwl; l++)
        w[l] /= sum;
    return LAM_OK;
}

/* Channel weights for the point's shifts and width scales. */
static lam_status ensure_weights(lam_model *m, const lam_model_point *p, lam_error *err)
{
    double cam[2 * LAM_MAX_CHANNELS];
    memcpy(cam, &p->v[LAM_MP_SHIFT], LAM_MAX_CHANNELS * sizeof *cam);
    memcpy(cam + LAM_MAX_CHANNELS, &p->v[LAM_MP_WIDTH], LAM_MAX_CHANNELS * sizeof *cam);
    if (m->have_weight && !memcmp(cam, m->weight_cam, sizeof cam))
        return LAM_OK;
    m->have_weight = 0; /* a channel that sees no light leaves the others changed */
    for (size_t c = 0; c < m->channels; c++) {
        lam_status st = lam__channel_weights(m, c, cam[c], cam[LAM_MAX_CHANNELS + c],
                                             m->weight + c * m->nwl, err);
        if (st)
            return st;
    }
    memcpy(m->weight_cam, cam, sizeof cam);
    m->have_weight = 1;
    m->weight_version++;
    return LAM_OK;
}

static lam_status ensure_basis(lam_model *m, double fermi, lam_error *err)
{
    if (m->have_basis && m->basis_fermi == fermi)
        return LAM_OK;
    lam_sheet_params p = m->sheet;
    p.fermi_ev = fermi;
    for (size_t l = 0; l < m->nwl; l++) {
        lam_status st =
            lam__sheet_basis_cached(&p, m->wl[l], HC_EV_NM / m->wl[l], m->basis + 4 * l, err);
        if (st)
            return st;
    }
    m->basis_fermi = fermi;
    m->have_basis = 1;
    return LAM_OK;
}

/* Z0 sigma per wavelength for the point's response parameters. */
static lam_status fill_sheet(lam_model *m, const lam_model_point *p, lam_error *err)
{
    lam_sheet_params sp = m->sheet;
    sp.continuum = p->v[LAM_MP_CONTINUUM];
    sp.resonance = p->v[LAM_MP_RESONANCE];
    sp.background = p->v[LAM_MP_BACKGROUND];
    if (sp.model == LAM_SHEET_KUBO && sp.exciton &&
        (!(sp.resonance >= 0) || !(sp.background >= 0) || !(sp.continuum > -1)))
        return lam_error_set(err, LAM_ERANGE,
                             "response outside the passive range (resonance %g, background %g, "
                             "continuum %g)",
                             sp.resonance, sp.background, sp.continuum);
    lam_status st = ensure_basis(m, p->v[LAM_MP_FERMI], err);
    if (st)
        return st;
    double z0s0 = lam_z0_sigma0();
    for (size_t l = 0; l < m->nwl; l++)
        m->y_sheet[l] = z0s0 * lam_sheet_combine(&sp, m->basis + 4 * l);
    return LAM_OK;
}

static lam_status ensure_cone(lam_model *m, double na, lam_error *err)
{
    cone *c = &m->cone_cache;
    if (c->na == na)
        return LAM_OK;
    if (!(na >= 0 && na < m->n_ambient))
        return lam_error_set(err, LAM_ERANGE,
                             "illumination NA %g must be >= 0 and below the ambient index %g",
                             na, m->n_ambient);
    c->na = na;
    if (na == 0 || m->cone_nodes_max <= 1) {
        c->nodes = 1;
        c->sin_t[0] = 0;
        c->w_t[0] = 1;
        return LAM_OK;
    }
    double tmax = asin(na / m->n_ambient), sum = 0;
    c->nodes = m->cone_nodes_max;
    gsl_integration_glfixed_table *t = gsl_integration_glfixed_table_alloc(c->nodes);
    if (!t)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate Gauss-Legendre nodes");
    for (size_t i = 0; i < c->nodes; i++) {
        double x, w;
        gsl_integration_glfixed_point(0.0, tmax, i, &x, &w, t);
        c->sin_t[i] = sin(x);
        c->w_t[i] = w * (m->pupil == LAM_PUPIL_SIN ? sin(x) : sin(x) * cos(x));
        sum += c->w_t[i];
    }
    gsl_integration_glfixed_table_free(t);
    for (size_t i = 0; i < c->nodes; i++)
        c->w_t[i] /= sum;
    return LAM_OK;
}

/* re + i im exactly (a complex is two doubles, C11 6.2.5; CMPLX is not
 * defined by every compiler's <complex.h>: clang's fuzzing build). */
static double complex complex_of(double re, double im)
{
    double parts[2] = {re, im};
    double complex z;
    memcpy(&z, parts, sizeof z);
    return z;
}

/* cos and sin of a complex phase x + iy: cos x cosh y - i sin x sinh y
 * and sin x cosh y + i cos x sinh y. ccos and csin each make the sine and
 * cosine of x and the hyperbolic functions of y; here they are made once,
 * the hyperbolic ones from one expm1 (with e = e^|y| = 1 + em,
 * cosh y = 1 + em^2 / 2e and sinh |y| = (em + em / e) / 2: no
 * cancellation for small y, where a film is thin). Beyond |y| = 700 e^|y|
 * overflows and the library's functions take over. */
void lam__complex_cos_sin(double complex ph, double complex *c, double complex *s)
{
    double x = creal(ph), y = cimag(ph), ay = fabs(y);
    if (!(ay <= 700)) {
        *c = ccos(ph), *s = csin(ph);
        return;
    }
    double sx = sin(x), cx = cos(x);
    double em = expm1(ay), e = 1 + em;
    double ch = 1 + 0.5 * em * (em / e), sh = 0.5 * (em + em / e);
    if (y < 0)
        sh = -sh;
    *c = complex_of(cx * ch, -sx * sh);
    *s = complex_of(sx * ch, cx * sh);
}

/* cos and sin of a phase; a real phase (a lossless film below its
 * critical angle, the ambient gap) takes the real functions. */
void lam__phase_cos_sin(double complex ph, double complex *c, double complex *s)
{
    if (cimag(ph) == 0) {
        *c = cos(creal(ph)), *s = sin(creal(ph));
    } else {
        lam__complex_cos_sin(ph, c, s);
    }
}

/* Transmission: the substrate's admittance and 4 Re(eta_base) / |B|^2,
 * carrying the unnormalised fields (B, C) up from a unit field in the base
 * (the thick base is the exit medium; its back face and the incoherent
 * light bouncing inside it change T_flake and T_substrate alike, to within
 * R_back x (R'_flake - R'_substrate) ~ 1e-4). */
static double complex substrate_transmission(const lam_model *m, size_t l, double oxide_nm,
                                             double kx, lam_pol pol, double *tnorm)
{
    double k0 = 2.0 * M_PI / m->wl[l];
    double complex qb = lam_tmm_q(m->n_base[l], kx), eb = lam_tmm_eta(m->n_base[l], qb, pol);
    double complex b = 1.0, c = eb;
    for (size_t j = m->layers; j-- > 0;) {
        double complex n = m->n_layer[j * m->nwl + l], q = lam_tmm_q(n, kx);
        double complex e = lam_tmm_eta(n, q, pol), ph = k0 * q *
                                                     (j == m->oxide_layer ? oxide_nm : m->layer_nm[j]);
        double complex cp = ccos(ph), sp = csin(ph), nb = cp * b - I * sp * c / e;
        c = -I * e * sp * b + cp * c;
        b = nb;
    }
    *tnorm = 4.0 * creal(eb) / creal(b * conj(b));
    return c / b;
}

/* T of the stack above a substrate with fields (b, cc) relative to those
 * at its top (lam_model: transmission). */
static double transmittance(double tnorm, double complex eta0, double complex b, double complex cc)
{
    double complex d = eta0 * b + cc;
    return tnorm * creal(eta0) / creal(d * conj(d));
}

/* The waves of the current cone into w (w->na its NA afterwards). */
static void fill_waves(const lam_model *m, cone_waves *w)
{
    const cone *c = &m->cone_cache;
    size_t films = lam__films_of(m);
    for (size_t l = 0; l < m->nwl; l++) {
        double k0 = 2.0 * M_PI / m->wl[l];
        for (size_t t = 0; t < c->nodes; t++) {
            double kx = m->n_ambient * c->sin_t[t];
            double complex q0 = lam_tmm_q(m->n_ambient, kx), qb = lam_tmm_q(m->n_base[l], kx);
            size_t k = l * c->nodes + t;
            lam__phase_cos_sin(k0 * q0 * m->interlayer_nm, &w->gap_cos[k], &w->gap_sin[k]);
            for (int pol = 0; pol < 2; pol++) {
                w->eta0[2 * k + (size_t)pol] = lam_tmm_eta(m->n_ambient, q0, (lam_pol)pol);
                w->eta_base[2 * k + (size_t)pol] = lam_tmm_eta(m->n_base[l], qb, (lam_pol)pol);
            }
            for (size_t j = 0; j < m->layers; j++) {
                double complex n = m->n_layer[j * m->nwl + l], q = lam_tmm_q(n, kx);
                size_t kj = k * films + j;
                w->k0q[kj] = k0 * q;
                for (int pol = 0; pol < 2; pol++)
                    w->eta[2 * kj + (size_t)pol] = lam_tmm_eta(n, q, (lam_pol)pol);
                if (j != m->oxide_layer)
                    lam__phase_cos_sin(w->k0q[kj] * m->layer_nm[j], &w->cph[kj], &w->sph[kj]);
            }
        }
    }
    w->na = c->na;
}

/* The reflection slot for oxide_nm from the cone's waves: the substrate's
 * admittance carried up from the base, film by film (lam_tmm_through_film). */
static void fill_slot_from_waves(const lam_model *m, const cone_waves *w, substrate_slot *s,
                                 double oxide_nm)
{
    size_t per = m->nwl * m->cone_cache.nodes, films = lam__films_of(m);
    memcpy(s->gap_cos, w->gap_cos, per * sizeof *s->gap_cos);
    memcpy(s->gap_sin, w->gap_sin, per * sizeof *s->gap_sin);
    memcpy(s->eta0, w->eta0, 2 * per * sizeof *s->eta0);
    for (size_t k = 0; k < per; k++) {
        double complex y[2] = {w->eta_base[2 * k], w->eta_base[2 * k + 1]};
        for (size_t j = m->layers; j-- > 0;) {
            size_t kj = k * films + j;
            double complex cph = w->cph[kj], sph = w->sph[kj];
            if (j == m->oxide_layer)
                lam__phase_cos_sin(w->k0q[kj] * oxide_nm, &cph, &sph);
            for (int pol = 0; pol < 2; pol++)
                y[pol] = lam_tmm_through_film(y[pol], w->eta[2 * kj + (size_t)pol], cph, sph);
        }
        s->y[2 * k] = y[0], s->y[2 * k + 1] = y[1];
    }
}

/* The waves of the current cone: kept, or filled into the least recently
 * used set. */
cone_waves *lam__waves_for(lam_model *m)
{
    cone_waves *lru = &m->waves[0];
    for (int i = 0; i < WAVE_SETS; i++) {
        cone_waves *w = &m->waves[i];
        if (w->na == m->cone_cache.na) {
            w->used = ++m->clock;
            return w;
        }
        if (w->used < lru->used)
            lru = w;
    }
    fill_waves(m, lru);
    lru->used = ++m->clock;
    return lru;
}

static void fill_slot(lam_model *m, substrate_slot *s, double oxide_nm)
{
    const cone *c = &m->cone_cache;
    s->oxide_nm = oxide_nm;
    s->na = c->na;
    s->valid = 1;
    if (!m->transmission) {
        fill_slot_from_waves(m, lam__waves_for(m), s, oxide_nm);
        return;
    }
    for (size_t l = 0; l < m->nwl; l++) {
        double k0 = 2.0 * M_PI / m->wl[l];
        for (size_t t = 0; t < c->nodes; t++) {
            double kx = m->n_ambient * c->sin_t[t];
            double complex q0 = lam_tmm_q(m->n_ambient, kx);
            size_t k = l * c->nodes + t;
            lam__phase_cos_sin(k0 * q0 * m->interlayer_nm, &s->gap_cos[k], &s->gap_sin[k]);
            for (int pol = 0; pol < 2; pol++)
                s->y[2 * k + (size_t)pol] = substrate_transmission(
                    m, l, oxide_nm, kx, (lam_pol)pol, &s->tnorm[2 * k + (size_t)pol]);
            for (int pol = 0; pol < 2; pol++)
                s->eta0[2 * k + (size_t)pol] = lam_tmm_eta(m->n_ambient, q0, (lam_pol)pol);
        }
    }
}

/* The slot for (oxide, the current cone's NA), computed into the least
 * recently used slot when absent. */
substrate_slot *lam__substrate_for(lam_model *m, double oxide_nm)
{
    substrate_slot *lru = &m->slot[0];
    for (int i = 0; i < SUBSTRATE_SLOTS; i++) {
        substrate_slot *s = &m->slot[i];
        if (s->valid && s->oxide_nm == oxide_nm && s->na == m->cone_cache.na) {
            s->used = ++m->clock;
            return s;
        }
        if (!s->valid || s->used < lru->used)
            lru = s;
    }
    fill_slot(m, lru, oxide_nm);
    lru->used = lru->filled = ++m->clock;
    return lru;
}

/* ---- stacking the sheets and integrating ---- */

/* |(eta0 - y) / (eta0 + y)|^2: the reflectance of a stack whose
 * admittance seen from the ambient (admittance eta0) is y. */
static double reflectance(double complex eta0, double complex y)
{
    double complex r = (eta0 - y) / (eta0 + y);
    return creal(r * conj(r));
}

/* Cone-averaged T(l, N) for N = 0..layers into m->rbar, for transmission
 * (stamps). The field pair (B, C) = (E, H) at the top of the stack is
 * carried up sheet by sheet (a sheet adds y B to C; an ambient gap is a
 * characteristic matrix). Reflection takes the vectorised path below. */
static void stack_sheets_transmission(lam_model *m, const substrate_slot *s, size_t layers)
{
    const cone *c = &m->cone_cache;
    size_t stride = m->max_layers + 1;
    for (size_t l = 0; l < m->nwl; l++) {
        double *acc = m->rbar + l * stride;
        memset(acc, 0, (layers + 1) * sizeof *acc);
        double complex ys = m->y_sheet[l];
        for (size_t t = 0; t < c->nodes; t++) {
            size_t k = l * c->nodes + t;
            double complex cg = s->gap_cos[k], sg = s->gap_sin[k];
            /* at normal incidence s and p coincide: count s twice */
            int npol = c->sin_t[t] > 0 ? 2 : 1;
            double wt = c->w_t[t] / (double)npol;
            for (int pol = 0; pol < npol; pol++) {
                double complex eta0 = s->eta0[2 * k + (size_t)pol];
                double complex b = 1.0, cc = s->y[2 * k + (size_t)pol];
                double complex isg_eta = I * sg / eta0, isg_eta0 = I * sg * eta0;
                double tn = s->tnorm[2 * k + (size_t)pol];
                acc[0] += wt * transmittance(tn, eta0, b, cc);
                for (size_t N = 1; N <= layers; N++) {
                    if (N > 1) {
                        double complex nb = cg * b - isg_eta * cc;
                        cc = cg * cc - isg_eta0 * b;
                        b = nb;
                    }
                    cc += ys * b;
                    acc[N] += wt * transmittance(tn, eta0, b, cc);
                }
            }
        }
    }
}

/* The items of wavelength l, each with the bare substrate's R in r2;
 * returns their weighted sum. */
double lam__load_items(const lam_model *m, const substrate_slot *s, size_t l, stack_items *it)
{
    const cone *c = &m->cone_cache;
    double r0 = 0;
    it->n = 0;
    for (size_t t = 0; t < c->nodes; t++) {
        size_t k = l * c->nodes + t;
        double complex cg = s->gap_cos[k], sg = s->gap_sin[k];
        int npol = c->sin_t[t] > 0 ? 2 : 1; /* at normal incidence s and p coincide */
        for (int pol = 0; pol < npol; pol++) {
            size_t i = it->n++;
            double complex eta0 = s->eta0[2 * k + (size_t)pol], y = s->y[2 * k + (size_t)pol];
            double complex g1 = I * sg / eta0, g2 = I * sg * eta0;
            it->br[i] = 1, it->bi[i] = 0, it->cr[i] = creal(y), it->ci[i] = cimag(y);
            it->gcr[i] = creal(cg), it->gci[i] = cimag(cg);
            it->g1r[i] = creal(g1), it->g1i[i] = cimag(g1);
            it->g2r[i] = creal(g2), it->g2i[i] = cimag(g2);
            it->er[i] = creal(eta0), it->ei[i] = cimag(eta0);
            it->wt[i] = c->w_t[t] / (double)npol;
            it->r2[i] = reflectance(eta0, y);
            r0 += it->wt[i] * it->r2[i];
        }
    }
    return r0;
}

/* One ambient gap (characteristic matrix) on every item's fields. */
LAM_VECTOR_CLONES
void lam__items_gap(stack_items *restrict it)
{
    for (size_t i = 0; i < it->n; i++) {
        double br = it->br[i], bi = it->bi[i], cr = it->cr[i], ci = it->ci[i];
        it->br[i] = (it->gcr[i] * br - it->gci[i] * bi) - (it->g1r[i] * cr - it->g1i[i] * ci);
        it->bi[i] = (it->gcr[i] * bi + it->gci[i] * br) - (it->g1r[i] * ci + it->g1i[i] * cr);
        it->cr[i] = (it->gcr[i] * cr - it->gci[i] * ci) - (it->g2r[i] * br - it->g2i[i] * bi);
        it->ci[i] = (it->gcr[i] * ci + it->gci[i] * cr) - (it->g2r[i] * bi + it->g2i[i] * br);
    }
}

/* One sheet (C += y B) and every item's reflectance
 * |eta0 B - C|^2 / |eta0 B + C|^2; returns their weighted sum, added in
 * item order. */
LAM_VECTOR_CLONES
double lam__items_sheet(stack_items *restrict it, double yr, double yi)
{
    for (size_t i = 0; i < it->n; i++) {
        double br = it->br[i], bi = it->bi[i];
        double cr = it->cr[i] + (yr * br - yi * bi), ci = it->ci[i] + (yr * bi + yi * br);
        it->cr[i] = cr, it->ci[i] = ci;
        double er = it->er[i] * br - it->ei[i] * bi, ei = it->er[i] * bi + it->ei[i] * br;
        double nr = er - cr, ni = ei - ci, dr = er + cr, di = ei + ci;
        it->r2[i] = (nr * nr + ni * ni) / (dr * dr + di * di);
    }
    double a = 0;
    for (size_t i = 0; i < it->n; i++)
        a += it->wt[i] * it->r2[i];
    return a;
}

static void stack_sheets(lam_model *m, const substrate_slot *s, size_t layers)
{
    if (m->transmission) {
        stack_sheets_transmission(m, s, layers);
        return;
    }
    size_t stride = m->max_layers + 1;
    stack_items it;
    for (size_t l = 0; l < m->nwl; l++) {
        double *acc = m->rbar + l * stride;
        double yr = creal(m->y_sheet[l]), yi = cimag(m->y_sheet[l]);
        acc[0] = lam__load_items(m, s, l, &it);
        for (size_t N = 1; N <= layers; N++) {
            if (N > 1)
                lam__items_gap(&it);
            acc[N] = lam__items_sheet(&it, yr, yi);
        }
    }
}

/* Comparison model: N layers as one film of N * interlayer_nm. */
static void film_phases_at(const lam_model *m, size_t l, double kx, size_t layers,
                           film_phases *f)
{
    double k0 = 2.0 * M_PI / m->wl[l];
    double complex qf = lam_tmm_q(m->n_film[l], kx);
    for (size_t N = 0; N <= layers; N++) {
        double complex qn = qf;
        if (N >= 1 && N <= m->film_layers) /* a crystal's N-layer film with its own n,k */
            qn = lam_tmm_q(m->n_film_layer[(N - 1) * m->nwl + l], kx);
        double complex ph = k0 * qn * m->interlayer_nm * (double)N;
        f->q[N] = qn;
        lam__complex_cos_sin(ph, &f->cp[N], &f->sp[N]);
    }
}

/* Fill the cache for the current cone and N = 0..layers. */
static int fill_film_phases(lam_model *m, size_t layers)
{
    const cone *c = &m->cone_cache;
    size_t per = layers + 1, size = m->nwl * c->nodes * per;
    if (size > m->fph_size) {
        free(m->fph);
        m->fph_size = 0;
        if (!(m->fph = malloc(3 * size * sizeof *m->fph)))
            return 0;
        m->fph_size = size;
    }
    double complex *q = m->fph, *cp = q + m->fph_size, *sp = cp + m->fph_size;
    film_phases f;
    for (size_t l = 0; l < m->nwl; l++)
        for (size_t t = 0; t < c->nodes; t++) {
            size_t at = (l * c->nodes + t) * per;
            film_phases_at(m, l, m->n_ambient * c->sin_t[t], layers, &f);
            memcpy(q + at, f.q, per * sizeof *q);
            memcpy(cp + at, f.cp, per * sizeof *cp);
            memcpy(sp + at, f.sp, per * sizeof *sp);
        }
    m->fph_na = c->na;
    m->fph_nodes = c->nodes;
    m->fph_layers = layers;
    return 1;
}

int lam__film_phases(lam_model *m, size_t l, size_t t, size_t layers, film_phases *f)
{
    const cone *c = &m->cone_cache;
    if (!(m->fph && m->fph_na == c->na && m->fph_nodes == c->nodes && m->fph_layers >= layers) &&
        !fill_film_phases(m, layers))
        return 0;
    size_t per = m->fph_layers + 1, at = (l * c->nodes + t) * per;
    const double complex *q = m->fph, *cp = q + m->fph_size, *sp = cp + m->fph_size;
    memcpy(f->q, q + at, (layers + 1) * sizeof *q);
    memcpy(f->cp, cp + at, (layers + 1) * sizeof *cp);
    memcpy(f->sp, sp + at, (layers + 1) * sizeof *sp);
    return 1;
}

/* 0 when out of memory (the film phases' cache). */
static int stack_film(lam_model *m, const substrate_slot *s, size_t layers)
{
    const cone *c = &m->cone_cache;
    size_t stride = m->max_layers + 1;
    film_phases f;
    for (size_t l = 0; l < m->nwl; l++) {
        double *acc = m->rbar + l * stride;
        memset(acc, 0, (layers + 1) * sizeof *acc);
        for (size_t t = 0; t < c->nodes; t++) {
            size_t k = l * c->nodes + t;
            int npol = c->sin_t[t] > 0 ? 2 : 1;
            double wt = c->w_t[t] / (double)npol;
            if (!lam__film_phases(m, l, t, layers, &f))
                return 0;
            for (int pol = 0; pol < npol; pol++) {
                double complex ysub = s->y[2 * k + (size_t)pol], eta0 = s->eta0[2 * k + (size_t)pol];
                double complex ef = lam_tmm_eta(m->n_film[l], f.q[0], (lam_pol)pol);
                double tn = m->transmission ? s->tnorm[2 * k + (size_t)pol] : 0;
                for (size_t N = 0; N <= layers; N++) {
                    double complex en = ef, cp = f.cp[N], sp = f.sp[N];
                    if (N >= 1 && N <= m->film_layers)
                        en = lam_tmm_eta(m->n_film_layer[(N - 1) * m->nwl + l], f.q[N],
                                         (lam_pol)pol);
                    if (tn > 0) {
                        acc[N] += wt * transmittance(tn, eta0, cp - I * sp * ysub / en,
                                                     -I * en * sp + cp * ysub);
                        continue;
                    }
                    double complex y = N ? lam_tmm_through_film(ysub, en, cp, sp) : ysub;
                    acc[N] += wt * reflectance(eta0, y);
                }
            }
        }
    }
    return 1;
}

/* ---- residue films (lam_model_set_residue) ---- */

/* Add wt |r|^2 of a film (admittance ef) between the ambient (eta0) and a
 * substrate of admittance y to acc[j] for each phase factor
 * z_j = rho_j (cs_j + i sn_j) = exp(2 i k0 q d_j):
 * r = (r01 + r12 z) / (1 + r01 r12 z), and in real arithmetic
 * |r|^2 = (|r01|^2 + |r12|^2 rho^2 + 2 rho Re(conj(r01) r12 e^(i phi)))
 *         / (1 + |r01 r12|^2 rho^2 + 2 rho Re(r01 r12 e^(i phi))),
 * the films side by side on vector units. */
static void add_film_r2(double complex eta0, double complex y, double complex ef, double wt,
                        const double *cs, const double *sn, const double *rho, size_t count,
                        double *acc)
{
    double complex r01 = (eta0 - ef) / (eta0 + ef), r12 = (ef - y) / (ef + y);
    double complex A = conj(r01) * r12, B = r01 * r12;
    double ar = creal(A), ai = cimag(A), br = creal(B), bi = cimag(B);
    double n0 = creal(r01 * conj(r01)), n1 = creal(r12 * conj(r12)), d1 = creal(B * conj(B));
    for (size_t j = 0; j < count; j++) {
        double p = rho[j], ra = ar * cs[j] - ai * sn[j], rb = br * cs[j] - bi * sn[j];
        acc[j] += wt * (n0 + p * (n1 * p + 2 * ra)) / (1 + p * (d1 * p + 2 * rb));
    }
}

/* One cone node of wavelength l for a film of index n: its slot index k,
 * polarisations, weight per polarisation, the film's wave vector and the
 * phase and decay per nm of a round trip, 2 k0 q. */
typedef struct film_node {
    size_t k;
    int npol;
    double wt, phase, decay;
    double complex q;
} film_node;

static film_node film_node_at(const lam_model *m, size_t l, size_t t, double complex n)
{
    const cone *c = &m->cone_cache;
    film_node f;
    double k0 = 2.0 * M_PI / m->wl[l];
    f.k = l * c->nodes + t;
    f.npol = c->sin_t[t] > 0 ? 2 : 1;
    f.wt = c->w_t[t] / (double)f.npol;
    f.q = lam_tmm_q(n, m->n_ambient * c->sin_t[t]);
    f.phase = 2 * k0 * creal(f.q), f.decay = -2 * k0 * cimag(f.q);
    return f;
}

/* Cone-averaged R of every residue film per wavelength for a substrate
 * slot (add_film_r2); the films' phases follow from the first by a
 * rotation (even steps in d). */
static void residue_rbar(const lam_model *m, substrate_slot *s)
{
    const cone *c = &m->cone_cache;
    double cs[LAM_RESIDUE_FILMS], sn[LAM_RESIDUE_FILMS], rho[LAM_RESIDUE_FILMS];
    memset(s->res_rbar, 0, m->nwl * LAM_RESIDUE_FILMS * sizeof *s->res_rbar);
    for (size_t l = 0; l < m->nwl; l++) {
        double *acc = s->res_rbar + l * LAM_RESIDUE_FILMS;
        double complex nf = m->n_residue[l];
        for (size_t t = 0; t < c->nodes; t++) {
            film_node f = film_node_at(m, l, t, nf);
            double complex u = cexp(I * f.phase * LAM_RESIDUE_FIRST_NM);
            double complex du = cexp(I * f.phase * LAM_RESIDUE_STEP_NM);
            double r = exp(f.decay * LAM_RESIDUE_FIRST_NM), dr = exp(f.decay * LAM_RESIDUE_STEP_NM);
            for (size_t j = 0; j < LAM_RESIDUE_FILMS; j++, u *= du, r *= dr)
                cs[j] = creal(u), sn[j] = cimag(u), rho[j] = r;
            for (int pol = 0; pol < f.npol; pol++)
                add_film_r2(s->eta0[2 * f.k + (size_t)pol], s->y[2 * f.k + (size_t)pol],
                            lam_tmm_eta(nf, f.q, (lam_pol)pol), f.wt, cs, sn, rho,
                            LAM_RESIDUE_FILMS, acc);
        }
    }
    s->res_filled = s->filled;
}

/* The residue films' contrasts in the channels (after integrate), kept
 * for the next call with the same slot and channel weights. */
static void integrate_residue(lam_model *m, const substrate_slot *s, lam_prediction *out)
{
    out->residues = LAM_RESIDUE_FILMS;
    if (m->res_slot == s && m->res_slot_filled == s->filled &&
        m->res_weight_version == m->weight_version) {
        memcpy(out->residue, m->res_contrast, sizeof out->residue);
        return;
    }
    for (size_t c = 0; c < m->channels; c++) {
        const double *w = m->weight + c * m->nwl;
        for (size_t j = 0; j < LAM_RESIDUE_FILMS; j++) {
            double a = 0;
            for (size_t l = 0; l < m->nwl; l++)
                a += w[l] * s->res_rbar[l * LAM_RESIDUE_FILMS + j];
            out->residue[j][c] = (out->substrate[c] - a) / out->substrate[c];
        }
    }
    memcpy(m->res_contrast, out->residue, sizeof m->res_contrast);
    m->res_slot = s;
    m->res_slot_filled = s->filled;
    m->res_weight_version = m->weight_version;
}

lam_status lam_model_set_residue(lam_model *m, const lam_material *film, lam_error *err)
{
    if (!m->n_residue)
        m->n_residue = malloc(m->nwl * sizeof *m->n_residue);
    if (!m->n_residue || !alloc_residue(m))
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a residue film");
    lam_status st = LAM_OK;
    for (size_t l = 0; l < m->nwl && !st; l++)
        st = lam_material_index(film, m->wl[l], &m->n_residue[l], err);
    for (int i = 0; i < SUBSTRATE_SLOTS; i++)
        m->slot[i].res_filled = 0;
    return st;
}

/* Is rbar already that of this substrate slot, response and layer count? */
static int rbar_current(const lam_model *m, const substrate_slot *s, const lam_model_point *p,
                        size_t layers)
{
    return m->have_rbar && m->rbar_slot == s && m->rbar_slot_used == s->filled &&
           m->rbar_layers >= layers && m->rbar_fermi == p->v[LAM_MP_FERMI] &&
           !memcmp(m->rbar_response, &p->v[LAM_MP_CONTINUUM], sizeof m->rbar_response);
}

static void remember_rbar(lam_model *m, const substrate_slot *s, const lam_model_point *p,
                          size_t layers)
{
    m->have_rbar = 1;
    m->rbar_slot = s;
    m->rbar_slot_used = s->filled;
    m->rbar_layers = layers;
    m->rbar_fermi = p->v[LAM_MP_FERMI];
    memcpy(m->rbar_response, &p->v[LAM_MP_CONTINUUM], sizeof m->rbar_response);
}

/* Channel c's reflectances and contrasts from rbar with weights w. */
void lam__integrate_channel(const lam_model *m, const double *w, size_t c, size_t layers,
                              lam_prediction *out)
{
    size_t stride = m->max_layers + 1;
    for (size_t N = 0; N <= layers; N++) {
        double a = 0;
        for (size_t l = 0; l < m->nwl; l++)
            a += w[l] * m->rbar[l * stride + N];
        out->reflectance[N][c] = a;
    }
    out->substrate[c] = out->reflectance[0][c];
    for (size_t N = 0; N <= layers; N++)
        out->contrast[N][c] = (out->substrate[c] - out->reflectance[N][c]) / out->substrate[c];
}

static void integrate(const lam_model *m, size_t layers, lam_prediction *out)
{
    for (size_t c = 0; c < m->channels; c++)
        lam__integrate_channel(m, m->weight + c * m->nwl, c, layers, out);
}

lam_status lam_model_eval_point(lam_model *m, const lam_model_point *p, size_t layers,
                                lam_prediction *out, lam_error *err)
{
    double oxide = p->v[LAM_MP_OXIDE];
    if (!(oxide >= 0 && oxide <= 5000))
        return lam_error_set(err, LAM_ERANGE, "oxide thickness %g nm outside 0 to 5000 nm",
                             oxide);
    if (layers == 0 || layers > m->max_layers)
        layers = m->max_layers;
    lam_status st;
    if ((st = ensure_cone(m, p->v[LAM_MP_NA], err)) ||
        (st = ensure_weights(m, p, err)) ||
        (!m->n_film && (st = fill_sheet(m, p, err))))
        return st;
    substrate_slot *s = lam__substrate_for(m, oxide);
    if (!rbar_current(m, s, p, layers)) {
        if (m->n_film && !stack_film(m, s, layers))
            return lam_error_set(err, LAM_ENOMEM, "cannot allocate the film phases");
        if (!m->n_film)
            stack_sheets(m, s, layers);
        remember_rbar(m, s, p, layers);
    }
    memset(out, 0, sizeof *out);
    out->channels = m->channels;
    out->max_layers = layers;
    out->oxide_nm = oxide;
    out->fermi_ev = p->v[LAM_MP_FERMI];
    integrate(m, layers, out);
    if (m->n_residue && !m->transmission) {
        if (s->res_filled != s->filled)
            residue_rbar(m, s);
        integrate_residue(m, s, out);
    }
    return LAM_OK;
}

lam_status lam_model_eval(lam_model *m, double oxide_nm, double fermi_ev,
                          lam_prediction *out, lam_error *err)
{
    lam_model_point p = m->defaults;
    p.v[LAM_MP_OXIDE] = oxide_nm;
    p.v[LAM_MP_FERMI] = fermi_ev;
    return lam_model_eval_point(m, &p, 0, out, err);
}

/* ---- films of any thickness (continuous-thickness crystals) ---- */

/* Transmission: the cone- and channel-weighted transmittance of the film of
 * each thickness at one wavelength, added to acc[k][c] (and the bare
 * substrate's to sub[c]), the film's characteristic matrix on the
 * substrate's fields. */
static void films_transmit_at(const lam_model *m, const substrate_slot *s, size_t l,
                              double complex nf, const double *d, size_t count,
                              double (*acc)[LAM_MAX_CHANNELS], double *sub)
{
    const cone *c = &m->cone_cache;
    double k0 = 2.0 * M_PI / m->wl[l], w[LAM_MAX_CHANNELS];
    for (size_t ch = 0; ch < m->channels; ch++)
        w[ch] = m->weight[ch * m->nwl + l];
    for (size_t t = 0; t < c->nodes; t++) {
        size_t k = l * c->nodes + t;
        int npol = c->sin_t[t] > 0 ? 2 : 1;
        double wt = c->w_t[t] / (double)npol, kx = m->n_ambient * c->sin_t[t];
        double complex qf = lam_tmm_q(nf, kx), twice = 2.0 * I * k0 * qf;
        for (int pol = 0; pol < npol; pol++) {
            double complex eta0 = s->eta0[2 * k + (size_t)pol], y = s->y[2 * k + (size_t)pol];
            double complex ef = lam_tmm_eta(nf, qf, (lam_pol)pol);
            double tn = s->tnorm[2 * k + (size_t)pol], rs = transmittance(tn, eta0, 1.0, y);
            for (size_t ch = 0; ch < m->channels; ch++)
                sub[ch] += wt * w[ch] * rs;
            for (size_t j = 0; j < count; j++) {
                double complex e = cexp(0.5 * twice * d[j]), cp = creal(e), sp = cimag(e);
                if (cimag(qf) != 0)
                    cp = ccos(-0.5 * I * twice * d[j]), sp = csin(-0.5 * I * twice * d[j]);
                double R = wt * transmittance(tn, eta0, cp - I * sp * y / ef, -I * ef * sp + cp * y);
                for (size_t ch = 0; ch < m->channels; ch++)
                    acc[j][ch] += w[ch] * R;
            }
        }
    }
}

/* The index of the film at wavelength l with its real part's excess
 * over 1 scaled by 'scale' (the crystal's index uncertainty). */
static double complex film_index(const lam_model *m, size_t l, double scale)
{
    return 1 + scale * (creal(m->n_film[l]) - 1) + I * cimag(m->n_film[l]);
}

/* cos and sin of the phase, and the decay factor, of each thickness d[j]
 * at one cone node (f). */
static void film_phases_of(const film_node *f, const double *restrict d, size_t count,
                           double *restrict cs, double *restrict sn, double *restrict rho)
{
    double phase = f->phase, decay = f->decay;
    for (size_t j = 0; j < count; j++) {
        double x = phase * d[j]; /* one argument: cos and sin become one sincos */
        cs[j] = cos(x), sn[j] = sin(x);
        rho[j] = decay == 0 ? 1.0 : exp(decay * d[j]);
    }
}

/* The phases of thicknesses d (count) at index scale 'scale' for the
 * current cone (film_table): kept from an earlier call, or made into the
 * least recently used table. NULL when the table would be larger than
 * FILM_TABLE_MAX or memory is short: the caller then makes each node's
 * phases itself (the same numbers). */
static const film_table *film_table_for(lam_model *m, double scale, const double *d,
                                        size_t count)
{
    const cone *c = &m->cone_cache;
    size_t size = m->nwl * c->nodes * count;
    if (!count || size > FILM_TABLE_MAX)
        return NULL;
    film_table *lru = &m->ftab[0];
    for (int i = 0; i < FILM_TABLES; i++) {
        film_table *x = &m->ftab[i];
        if (x->d && x->scale == scale && x->na == c->na && x->nodes == c->nodes &&
            x->count == count && !memcmp(x->d, d, count * sizeof *d)) {
            x->used = ++m->clock;
            return x;
        }
        lru = x->used < lru->used ? x : lru; /* an empty table has used 0 */
    }
    /* the table's block is reused when large enough: a profile whose
     * scales outnumber the tables would otherwise allocate afresh at
     * every call */
    size_t need = count + 3 * size, cap = lru->cap;
    double *block = lru->d;
    if (need > cap) {
        free(block);
        cap = need;
        block = malloc(cap * sizeof *block);
    }
    if (!block) {
        memset(lru, 0, sizeof *lru); /* empty, nothing allocated */
        return NULL;
    }
    *lru = (film_table){scale, c->na, count, c->nodes, block, block + count,
                        block + count + size, block + count + 2 * size, ++m->clock, cap};
    memcpy(lru->d, d, count * sizeof *d);
    for (size_t l = 0; l < m->nwl; l++)
        for (size_t t = 0; t < c->nodes; t++) {
            film_node f = film_node_at(m, l, t, film_index(m, l, scale));
            size_t at = (l * c->nodes + t) * count;
            film_phases_of(&f, d, count, lru->cs + at, lru->sn + at, lru->rho + at);
        }
    return lru;
}

/* Reflection: the cone- and channel-weighted reflectance of the film of
 * each thickness at one wavelength on each of the ns substrates s[o],
 * added to acc[o * count + k][c] (and the bare substrate's to sub[o][c])
 * by add_film_r2: one cos/sin per node and thickness shared by both
 * polarisations and every substrate (the phases are the film's alone),
 * the cone summed before the channels. The phases come from 'ft'
 * (film_table_for), or when it is NULL are made here into 'buf'
 * ((3 + ns) x count doubles, of which the last ns x count always hold the
 * sums). Each substrate's sums are added in the order one substrate's
 * alone would be: the same numbers as ns calls. */
static void films_reflect_at(const lam_model *m, const substrate_slot *const *s, size_t ns,
                             size_t l, double complex nf, const double *d, size_t count,
                             const film_table *ft, double (*acc)[LAM_MAX_CHANNELS],
                             double (*sub)[LAM_MAX_CHANNELS], double *buf)
{
    double rsub[SUBSTRATE_SLOTS] = {0};
    double *rsum = buf + 3 * count;
    memset(rsum, 0, ns * count * sizeof *rsum);
    for (size_t t = 0; t < m->cone_cache.nodes; t++) {
        film_node f = film_node_at(m, l, t, nf);
        const double *cs = buf, *sn = buf + count, *rho = buf + 2 * count;
        if (ft) {
            size_t at = (l * m->cone_cache.nodes + t) * count;
            cs = ft->cs + at, sn = ft->sn + at, rho = ft->rho + at;
        } else {
            film_phases_of(&f, d, count, buf, buf + count, buf + 2 * count);
        }
        for (size_t o = 0; o < ns; o++)
            for (int pol = 0; pol < f.npol; pol++) {
                double complex eta0 = s[o]->eta0[2 * f.k + (size_t)pol];
                double complex y = s[o]->y[2 * f.k + (size_t)pol];
                rsub[o] += f.wt * reflectance(eta0, y);
                add_film_r2(eta0, y, lam_tmm_eta(nf, f.q, (lam_pol)pol), f.wt, cs, sn, rho,
                            count, rsum + o * count);
            }
    }
    for (size_t o = 0; o < ns; o++)
        for (size_t ch = 0; ch < m->channels; ch++) {
            double w = m->weight[ch * m->nwl + l];
            sub[o][ch] += w * rsub[o];
            for (size_t j = 0; j < count; j++)
                acc[o * count + j][ch] += w * rsum[o * count + j];
        }
}

/* The films on the substrates of oxides ox[0..ns) (ns <= SUBSTRATE_SLOTS,
 * each checked by the caller) into contrast[o * count + k]: the slots are
 * fetched first, so that each is the most recently used while the next is
 * found and none of them is refilled before the wavelengths are done. */
static lam_status films_on(lam_model *m, const double *ox, size_t ns, double index_scale,
                           const double *d, size_t count, double (*contrast)[LAM_MAX_CHANNELS],
                           lam_error *err)
{
    const substrate_slot *s[SUBSTRATE_SLOTS];
    double sub[SUBSTRATE_SLOTS][LAM_MAX_CHANNELS];
    memset(sub, 0, sizeof sub);
    for (size_t o = 0; o < ns; o++)
        s[o] = lam__substrate_for(m, ox[o]);
    double *buf = NULL;
    if (!m->transmission && !(buf = malloc((3 + ns) * (count ? count : 1) * sizeof *buf)))
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a film evaluation");
    memset(contrast, 0, ns * count * sizeof *contrast);
    const film_table *ft = m->transmission ? NULL : film_table_for(m, index_scale, d, count);
    for (size_t l = 0; l < m->nwl; l++) {
        double complex nf = film_index(m, l, index_scale);
        if (m->transmission)
            for (size_t o = 0; o < ns; o++)
                films_transmit_at(m, s[o], l, nf, d, count, contrast + o * count, sub[o]);
        else
            films_reflect_at(m, s, ns, l, nf, d, count, ft, contrast, sub, buf);
    }
    free(buf);
    for (size_t o = 0; o < ns; o++)
        for (size_t j = 0; j < count; j++)
            for (size_t ch = 0; ch < m->channels; ch++)
                contrast[o * count + j][ch] =
                    (sub[o][ch] - contrast[o * count + j][ch]) / sub[o][ch];
    return LAM_OK;
}

lam_status lam_model_eval_films_oxides(lam_model *m, const lam_model_point *p,
                                       const double *oxide_nm, size_t n_oxide,
                                       double index_scale, const double *thickness_nm,
                                       size_t count, double (*contrast)[LAM_MAX_CHANNELS],
                                       lam_error *err)
{
    if (!m->n_film)
        return lam_error_set(err, LAM_EINVAL, "the model's flakes are not films");
    for (size_t o = 0; o < n_oxide; o++)
        if (!(oxide_nm[o] >= 0 && oxide_nm[o] <= 5000))
            return lam_error_set(err, LAM_ERANGE, "oxide %g nm out of range", oxide_nm[o]);
    if (!(index_scale > 0))
        return lam_error_set(err, LAM_ERANGE, "index scale %g out of range", index_scale);
    lam_status st;
    if ((st = ensure_cone(m, p->v[LAM_MP_NA], err)) || (st = ensure_weights(m, p, err)))
        return st;
    for (size_t o = 0; o < n_oxide && !st; o += SUBSTRATE_SLOTS) {
        size_t ns = n_oxide - o < SUBSTRATE_SLOTS ? n_oxide - o : SUBSTRATE_SLOTS;
        st = films_on(m, oxide_nm + o, ns, index_scale, thickness_nm, count,
                      contrast + o * count, err);
    }
    return st;
}

lam_status lam_model_eval_films(lam_model *m, const lam_model_point *p, double index_scale,
                                const double *thickness_nm, size_t count,
                                double (*contrast)[LAM_MAX_CHANNELS], lam_error *err)
{
    return lam_model_eval_films_oxides(m, p, &p->v[LAM_MP_OXIDE], 1, index_scale, thickness_nm,
                                       count, contrast, err);
}
