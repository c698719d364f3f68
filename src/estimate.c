/* estimate.c - the nuisance parameters and their priors, images, and the
 * pieces of the joint likelihood shared by the fit (estimate_fit.c) and the
 * region posteriors (infer.c). */
#include "estimate_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

/* Prior centre and spread of graphene's visible response: centred on the
 * default (Weber et al. 2010), wide enough that the universal sheet
 * (0, 0, 0) and the CVD films of Song 2018 (-0.05, 6.3, 0) and El-Sayed
 * 2021 (0.13, 4.7, 12) lie within about two standard deviations
 * (tests/test_conductivity.c fits them). */
#define PRIOR_SD_CONTINUUM 0.10
#define PRIOR_SD_RESONANCE 2.6
#define PRIOR_SD_BACKGROUND 18.0
/* Spreads of values a profile gives without an "uncertainty" block: an
 * aperture stop set by hand, a camera curve from a data sheet. */
#define GIVEN_SD_NA 0.05
#define GIVEN_SD_SHIFT_NM 4.0
#define GIVEN_SD_LOG_GAIN 0.05
#define GIVEN_SD_LOG_WIDTH 0.05
/* ... and of what it leaves to defaults. */
#define DEFAULT_NA 0.55
#define DEFAULT_SD_NA 0.2
#define DEFAULT_SD_SHIFT_NM 15.0
#define DEFAULT_SD_LOG_GAIN 0.15
#define DEFAULT_SD_LOG_WIDTH 0.25 /* FWHM 50-110 nm about a typical 80 nm */
/* Flake-versus-substrate colour bias (JPEG colour quantisation shifts the
 * two colours differently): a few thousandths of contrast. */
#define PRIOR_SD_OFFSET 0.004

lam_estimate_options lam_estimate_options_default(void)
{
    lam_estimate_options o = {6, 60.0, 2.0, 0.003, 0.03, 1, 30, 1, 1, NULL};
    return o;
}

double lam_hypothesis_prior(size_t hyp, size_t K)
{
    if (hyp == LAM_HYP_SUBSTRATE || hyp == K + LAM_HYP_UNMODELLED_OFFSET)
        return 0.1;
    return 1.0; /* each of 1..K, and "thick" as one hypothesis */
}

static void set(lam_nuisance *n, const char *name, double mean, double sd, double lo,
                double hi, const char *source)
{
    n->name = name;
    n->value = n->prior_mean = mean;
    n->prior_sd = sd;
    n->lo = lo;
    n->hi = hi;
    n->sigma = NAN;
    n->fitted = sd > 0;
    n->source = source;
}

static double given_sd(double setup_sigma, double fallback)
{
    return isfinite(setup_sigma) ? setup_sigma : fallback;
}

static void response_priors(lam_estimate *e, const lam_setup *s)
{
    const lam_sheet_params *p = &s->sheet;
    int given = !lam_setup_is_default(s, "conductivity.response");
    const char *src = given ? (isfinite(s->sigma.resonance) ? "setup (calibrated)" : "setup")
                            : "default prior";
    if (p->model != LAM_SHEET_KUBO || !p->exciton || s->flake_as_film) {
        /* a response without the family: nothing to fit */
        set(&e->shared[LAM_NU_CONTINUUM], "continuum", p->continuum, 0, -1, 2, "setup");
        set(&e->shared[LAM_NU_RESONANCE], "resonance", p->resonance, 0, 0, 30, "setup");
        set(&e->shared[LAM_NU_BACKGROUND], "background", p->background, 0, 0, 200, "setup");
        return;
    }
    double f = given ? 0.25 : 1.0; /* a response set by hand: a quarter of the spread */
    set(&e->shared[LAM_NU_CONTINUUM], "continuum", p->continuum,
        given_sd(given ? s->sigma.continuum : NAN, f * PRIOR_SD_CONTINUUM), -0.5, 1.0, src);
    set(&e->shared[LAM_NU_RESONANCE], "resonance", p->resonance,
        given_sd(given ? s->sigma.resonance : NAN, f * PRIOR_SD_RESONANCE), 0, 15, src);
    set(&e->shared[LAM_NU_BACKGROUND], "background", p->background,
        given_sd(given ? s->sigma.background : NAN, f * PRIOR_SD_BACKGROUND), 0, 90, src);
}

static void optics_priors(lam_estimate *e, const lam_setup *s)
{
    static const char *const shift_names[3] = {"shift_1", "shift_2", "shift_3"};
    static const char *const gain_names[3] = {"log_gain_1", "log_gain_2", "log_gain_3"};
    static const char *const width_names[3] = {"log_width_1", "log_width_2", "log_width_3"};
    static const char *const offset_names[3] = {"offset_1", "offset_2", "offset_3"};
    double n_amb = creal(lam_material_index_eval(&s->ambient, 550));
    int na_given = !lam_setup_is_default(s, "objective.illumination_na");
    if (na_given)
        set(&e->shared[LAM_NU_NA], "illumination_na", s->illumination_na,
            given_sd(s->sigma.na, GIVEN_SD_NA), 0.0, 0.95 * n_amb,
            isfinite(s->sigma.na) ? "setup (calibrated)" : "setup");
    else
        set(&e->shared[LAM_NU_NA], "illumination_na", DEFAULT_NA, DEFAULT_SD_NA, 0.02,
            0.95 * n_amb, "default prior");
    int cam_given = !lam_setup_is_default(s, "camera");
    const char *src = cam_given ? (isfinite(s->sigma.shift_nm) ? "setup (calibrated)" : "setup")
                                : "default prior";
    double sd_shift = cam_given ? given_sd(s->sigma.shift_nm, GIVEN_SD_SHIFT_NM)
                                : DEFAULT_SD_SHIFT_NM;
    double sd_gain = cam_given ? given_sd(s->sigma.log_gain, GIVEN_SD_LOG_GAIN)
                               : DEFAULT_SD_LOG_GAIN;
    double sd_width = cam_given ? given_sd(s->sigma.log_width, GIVEN_SD_LOG_WIDTH)
                                : DEFAULT_SD_LOG_WIDTH;
    /* other crystals (lamina/crystal.h): the published n,k of one crystal
     * differ by up to ~20 % in contrast (TMDs), which a wider per-channel
     * gain absorbs; the model floor starts from the crystal's */
    if (s->crystal && s->crystal->kind != LAM_CRYSTAL_SHEETS) {
        sd_gain = fmax(sd_gain, s->crystal->log_gain_sd);
        e->floor_rel = e->floor_rel_prior = fmax(e->floor_rel_prior, s->crystal->floor_rel);
    }
    for (size_t c = 0; c < LAM_MAX_CHANNELS; c++) {
        int on = c < e->channels;
        double shift = on ? s->camera_shift_nm[c] : 0, lg = on ? log(s->camera_gain[c]) : 0;
        set(&e->shared[LAM_NU_SHIFT + c], shift_names[c], shift, on ? sd_shift : 0, -60, 60, src);
        set(&e->shared[LAM_NU_GAIN + c], gain_names[c], lg, on ? sd_gain : 0, -1.5, 0.7, src);
        double lw = on ? log(s->camera_width[c]) : 0;
        set(&e->shared[LAM_NU_WIDTH + c], width_names[c], lw, on ? sd_width : 0, -0.8, 0.8, src);
        set(&e->shared[LAM_NU_OFFSET + c], offset_names[c], 0, on ? PRIOR_SD_OFFSET : 0, -0.05,
            0.05, "default prior");
    }
}

lam_status lam_estimate_alloc(const lam_setup *setup, size_t channels,
                              const lam_estimate_options *opt, lam_estimate **out,
                              lam_error *err)
{
    if (channels < 1 || channels > LAM_MAX_CHANNELS)
        return lam_error_set(err, LAM_EINVAL, "%zu camera channels (1 to %d)", channels,
                             LAM_MAX_CHANNELS);
    lam_estimate *e = calloc(1, sizeof *e);
    if (!e)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate an estimate");
    e->opt = opt ? *opt : lam_estimate_options_default();
    if (e->opt.max_layers < 1 || e->opt.max_layers > 20)
        e->opt.max_layers = 6;
    e->channels = channels;
    e->max_layers = e->opt.max_layers;
    for (size_t c = 0; c < LAM_MAX_CHANNELS; c++)
        e->floor_abs[c] = e->floor_abs_prior[c] = e->opt.floor_abs;
    e->floor_rel = e->floor_rel_prior = e->opt.floor_rel;
    e->fermi_ev = setup->sheet.fermi_ev;
    response_priors(e, setup);
    optics_priors(e, setup);
    *out = e;
    return LAM_OK;
}

void lam_estimate_free(lam_estimate *e)
{
    if (!e)
        return;
    lam_estimate_free(e->rival);
    for (size_t j = 0; j < e->images; j++)
        free(e->image[j].regions);
    free(e->image);
    free(e->cross);
    free(e);
}

lam_estimate *lam__estimate_clone(const lam_estimate *e)
{
    lam_estimate *c = malloc(sizeof *c);
    if (!c)
        return NULL;
    *c = *e;
    c->rival = NULL;
    c->rival_weight = 0;
    c->image = calloc(e->cap ? e->cap : 1, sizeof *c->image);
    c->cross = NULL; /* made again by the fit of the copy */
    int ok = c->image != NULL;
    for (size_t j = 0; ok && j < e->images; j++) {
        c->image[j] = e->image[j];
        size_t n = e->image[j].count ? e->image[j].count : 1;
        c->image[j].regions = malloc(n * sizeof *c->image[j].regions);
        ok = c->image[j].regions != NULL;
        if (ok)
            memcpy(c->image[j].regions, e->image[j].regions,
                   e->image[j].count * sizeof *c->image[j].regions);
        else
            c->images = j;
    }
    if (!ok) {
        lam_estimate_free(c);
        return NULL;
    }
    return c;
}

lam_status lam_estimate_add_image(lam_estimate *e, const lam_est_region *regions, size_t count,
                                  double nominal, double sd, size_t *index, lam_error *err)
{
    if (e->images == e->cap) {
        size_t cap = e->cap ? 2 * e->cap : 4;
        lam_est_image *im = realloc(e->image, cap * sizeof *im);
        if (!im)
            return lam_error_set(err, LAM_ENOMEM, "cannot grow the image list");
        e->image = im;
        e->cap = cap;
    }
    lam_est_image *im = &e->image[e->images];
    memset(im, 0, sizeof *im);
    im->regions = malloc((count ? count : 1) * sizeof *im->regions);
    if (!im->regions)
        return lam_error_set(err, LAM_ENOMEM, "cannot copy %zu regions", count);
    if (count)
        memcpy(im->regions, regions, count * sizeof *regions);
    im->count = count;
    if (!(sd > 0))
        sd = fmax(8.0, 0.08 * nominal);
    sd = fmax(sd, LAM_OXIDE_SD_MIN_NM);
    set(&im->oxide, "oxide_nm", nominal, sd, fmax(0, nominal - 250), nominal + 250,
        "nominal prior");
    for (int k = 0; k < 3; k++)
        im->alt_oxide[k] = im->alt_scale[k] = im->alt_score[k] = NAN;
    im->grid_scale = 1;
    if (index)
        *index = e->images;
    e->images++;
    e->fitted = 0;
    return LAM_OK;
}

lam_status lam_estimate_set_regions(lam_estimate *e, size_t j, const lam_est_region *regions,
                                    size_t count, lam_error *err)
{
    lam_est_image *im = &e->image[j];
    lam_est_region *r = malloc((count ? count : 1) * sizeof *r);
    if (!r)
        return lam_error_set(err, LAM_ENOMEM, "cannot copy %zu regions", count);
    if (count)
        memcpy(r, regions, count * sizeof *r);
    free(im->regions);
    im->regions = r;
    im->count = count;
    return LAM_OK;
}

void lam_estimate_set_floor_prior(lam_estimate *e, size_t c, double floor_abs)
{
    if (c < LAM_MAX_CHANNELS && floor_abs > e->opt.floor_abs)
        e->floor_abs[c] = e->floor_abs_prior[c] = floor_abs;
}

void lam_estimate_set_prior(lam_estimate *e, int k, double mean, double sd, const char *source)
{
    lam_nuisance *n = &e->shared[k];
    if (k >= LAM_NU_SHIFT && k < LAM_NU_COUNT && (size_t)((k - LAM_NU_SHIFT) % LAM_MAX_CHANNELS) >= e->channels)
        return; /* no such channel */
    n->prior_mean = n->value = fmin(n->hi, fmax(n->lo, mean));
    n->prior_sd = sd > 0 ? sd : 0;
    n->alone_sd = 0;
    n->fitted = sd > 0;
    n->source = source;
}

lam_model_point lam_estimate_point(const lam_estimate *e, size_t j)
{
    lam_model_point p;
    memset(&p, 0, sizeof p);
    p.v[LAM_MP_OXIDE] = e->image[j].oxide.value;
    p.v[LAM_MP_NA] = e->shared[LAM_NU_NA].value;
    p.v[LAM_MP_FERMI] = e->fermi_ev;
    p.v[LAM_MP_CONTINUUM] = e->shared[LAM_NU_CONTINUUM].value;
    p.v[LAM_MP_RESONANCE] = e->shared[LAM_NU_RESONANCE].value;
    p.v[LAM_MP_BACKGROUND] = e->shared[LAM_NU_BACKGROUND].value;
    for (size_t c = 0; c < LAM_MAX_CHANNELS; c++)
        p.v[LAM_MP_SHIFT + c] = e->shared[LAM_NU_SHIFT + c].value;
    for (size_t c = 0; c < LAM_MAX_CHANNELS; c++)
        p.v[LAM_MP_WIDTH + c] = e->shared[LAM_NU_WIDTH + c].value;
    return p;
}

void lam_estimate_gains(const lam_estimate *e, double gain[LAM_MAX_CHANNELS])
{
    for (size_t c = 0; c < LAM_MAX_CHANNELS; c++)
        gain[c] = exp(e->shared[LAM_NU_GAIN + c].value);
}

/* One row of model contrasts on the observed scale: g C + eps (1 - g C). */
static void observe_row(const lam_estimate *e, const double *g, size_t channels, double *row)
{
    for (size_t c = 0; c < channels; c++) {
        double gc = g[c] * row[c], eps = e->shared[LAM_NU_OFFSET + c].value;
        row[c] = gc + eps * (1 - gc);
    }
}

void lam_estimate_observe(const lam_estimate *e, lam_prediction *P)
{
    double g[LAM_MAX_CHANNELS];
    lam_estimate_gains(e, g);
    for (size_t N = 1; N <= P->max_layers; N++)
        observe_row(e, g, P->channels, P->contrast[N]);
    for (size_t k = 0; k < P->residues; k++)
        observe_row(e, g, P->channels, P->residue[k]);
}

double lam_estimate_floor_var(const lam_estimate *e, size_t channel, double measured)
{
    double f = e->floor_abs[channel] + e->floor_rel * fabs(measured);
    return f * f;
}

void lam__region_var(const lam_estimate *e, const lam_est_region *r,
                     double var[LAM_MAX_CHANNELS])
{
    for (size_t c = 0; c < e->channels; c++)
        var[c] = r->var[c] + lam_estimate_floor_var(e, c, r->mean[c]);
}

lam_status lam_estimate_ladder(const lam_estimate *e, size_t j, lam_model *thick,
                               lam_prediction *out, lam_error *err)
{
    lam_model_point p = lam_estimate_point(e, j);
    lam_status st = lam_model_eval_point(thick, &p, 0, out, err);
    if (!st)
        lam_estimate_observe(e, out);
    return st;
}

/* ---- the likelihood of one region, shared with infer.c ---- */

/* ln prod_c (2 pi var_c): the Gaussian normaliser of a region of
 * variance var, the same for every mean it is compared with. */
static double log_norm_of(const double *var, size_t nc)
{
    double prod = 1;
    for (size_t c = 0; c < nc; c++)
        prod *= 2 * M_PI * var[c];
    return log(prod);
}

double lam__gauss_logpdf_norm(const double *m, const double *mu, const double *var, size_t nc,
                              double log_norm)
{
    double s = 0;
    for (size_t c = 0; c < nc; c++) {
        double d = m[c] - mu[c];
        s += d * d / var[c];
    }
    return -0.5 * (s + log_norm);
}

double lam__logsumexp(const double *x, size_t n)
{
    double top = -INFINITY;
    for (size_t i = 0; i < n; i++)
        top = fmax(top, x[i]);
    if (!isfinite(top))
        return top;
    double s = 0;
    for (size_t i = 0; i < n; i++)
        s += exp(x[i] - top);
    return top + log(s);
}

void lam__ladder_terms_of(const lam_estimate *e, const lam_prediction *ladder,
                          lam__ladder_terms *t)
{
    size_t K = e->max_layers, top = ladder->max_layers;
    t->log_prior_substrate = log(lam_hypothesis_prior(0, K));
    t->log_prior_layers = log(lam_hypothesis_prior(1, K));
    t->log_prior_thick = log(lam_hypothesis_prior(K + 1, K));
    t->log_prior_unmodelled = log(lam_hypothesis_prior(K + 2, K));
    t->any = top > K;
    for (size_t c = 0; c < e->channels; c++) {
        double lo = INFINITY, hi = -INFINITY;
        for (size_t N = K + 1; N <= top; N++) {
            lo = fmin(lo, ladder->contrast[N][c]);
            hi = fmax(hi, ladder->contrast[N][c]);
        }
        t->lo[c] = lo;
        t->hi[c] = hi;
    }
}

/* The "thicker" hypothesis while fitting: a broad density over the span of
 * the thick entries (per channel from the least to the most contrast of
 * K+1..top, t, widened by three floors), not the mixture of sharp entries.
 * Otherwise a graphite flake far beyond the model's reach would pull the
 * shared parameters (a smaller contrast scale lets more of them land on
 * some entry); only thin flakes should inform the fit. The region
 * posteriors (infer.c) use the sharp entries. */
static double thick_broad_logpdf(const lam_estimate *e, const lam_est_region *r,
                                 const double *var, const lam__ladder_terms *t)
{
    if (!t->any)
        return -INFINITY;
    double s = 0, span = 1;
    for (size_t c = 0; c < e->channels; c++) {
        double lo = t->lo[c], hi = t->hi[c];
        double f = sqrt(var[c]);
        lo -= 3 * f, hi += 3 * f;
        double m = r->mean[c], out = m < lo ? lo - m : (m > hi ? m - hi : 0);
        s -= 0.5 * (out / f) * (out / f);
        span *= hi - lo;
    }
    return s - log(span);
}

/* ln of the unmodelled hypothesis' density: a broad box of side
 * LAM_UNMODELLED_SIDE per channel (dust, folds, another material), and,
 * when the ladder carries residue films, half of the mass on those films
 * (thickness uniform over the films' range). Polymer residue is the most
 * common thing on a chip that is not a flake: as a box it costs a region
 * so much that a wrong layer ladder which explains residue as a thick
 * flake could beat the right one (a WSe2 chip of 102 nm sold as 90 read
 * 3L/3L/4L for 1L/2L/3L). */
static double unmodelled_logpdf(const lam_estimate *e, const lam_est_region *r, const double *var,
                                double log_norm, const lam_prediction *ladder)
{
    size_t nc = e->channels, n = ladder->residues;
    double box = -(double)nc * log(LAM_UNMODELLED_SIDE);
    if (!n)
        return box;
    /* chi^2 of every film first (no logarithms): most regions lie far from
     * the residue's curve, and only films near the best one add mass */
    double q[LAM_RESIDUE_FILMS], qmin = INFINITY;
    for (size_t k = 0; k < n; k++) {
        q[k] = 0;
        for (size_t c = 0; c < nc; c++) {
            double d = r->mean[c] - ladder->residue[k][c];
            q[k] += d * d / var[c];
        }
        qmin = fmin(qmin, q[k]);
    }
    double top = -INFINITY, ll[LAM_RESIDUE_FILMS];
    for (size_t k = 0; k < n; k++) {
        ll[k] = -INFINITY;
        if (q[k] > qmin + 60) /* below e^-30 of the best film */
            continue;
        top = fmax(top, ll[k] = -0.5 * (q[k] + log_norm)); /* var: the same for every film */
    }
    double film = top + log(1.0 / (double)n);
    if (film < box - 40)
        return box + log(0.5);
    double sum = 0;
    for (size_t k = 0; k < n; k++)
        if (ll[k] > -INFINITY)
            sum += exp(ll[k] - top);
    film += log(sum);
    double hi = fmax(box, film);
    return hi + log(0.5 * exp(box - hi) + 0.5 * exp(film - hi));
}

/* log( prior x likelihood ) of every hypothesis of a region while fitting:
 * index 0 substrate, 1..K layers, K+1 thick (broad), K+2 unmodelled.
 * 'ladder' holds observed-scale contrasts (gains applied). */
void lam__region_logterms(const lam_estimate *e, const lam_est_region *r,
                          const lam_prediction *ladder, double *lt)
{
    lam__ladder_terms t;
    lam__ladder_terms_of(e, ladder, &t);
    lam__region_logterms_in(e, r, ladder, &t, NULL, lt);
}

void lam__region_fixed_of(const lam_estimate *e, const lam_est_region *r,
                          const lam_prediction *ladder, lam__region_fixed *out)
{
    lam__region_var(e, r, out->var);
    out->log_norm = log_norm_of(out->var, e->channels);
    out->unmodelled = unmodelled_logpdf(e, r, out->var, out->log_norm, ladder);
}

void lam__region_logterms_in(const lam_estimate *e, const lam_est_region *r,
                             const lam_prediction *ladder, const lam__ladder_terms *t,
                             const lam__region_fixed *fixed, double *lt)
{
    size_t K = e->max_layers, nc = e->channels, top = ladder->max_layers;
    lam__region_fixed own;
    if (!fixed) {
        lam__region_fixed_of(e, r, ladder, &own);
        fixed = &own;
    }
    /* the normaliser once, not once per hypothesis: every hypothesis
     * shares the region's variance */
    for (size_t h = 0; h <= K && h <= top; h++) {
        lt[h] = (h ? t->log_prior_layers : t->log_prior_substrate) +
                lam__gauss_logpdf_norm(r->mean, ladder->contrast[h], fixed->var, nc,
                                       fixed->log_norm);
    }
    lt[K + 1] = t->log_prior_thick + thick_broad_logpdf(e, r, fixed->var, t);
    lt[K + 2] = t->log_prior_unmodelled + fixed->unmodelled;
    if (r->known_layers > 0) {
        /* a label: only its hypothesis counts */
        size_t k = (size_t)r->known_layers <= K ? (size_t)r->known_layers : K + 1;
        for (size_t h = 0; h <= K + 2; h++)
            if (h != k)
                lt[h] = -INFINITY;
    }
}
