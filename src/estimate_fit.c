/* estimate_fit.c - the joint fit: oxide grid per image, EM with damped
 * Gauss-Newton M-steps over the shared parameters and every oxide (the
 * oxides eliminated by Schur complement, so the cost grows linearly with the
 * number of images), floor re-estimation, Laplace covariance; the
 * multistart over the grid's other maxima is estimate_starts.c. */
#include "estimate_fit_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define FIT_LAYERS 16       /* ... and for the fit (the posteriors use all 40) */
#define MAX_TRIES 8         /* damping increases per iteration */
#define FLOOR_PRIOR_SD_LOG_REL 0.5
#define FLOOR_PRIOR_SD_LOG_ABS 0.7
#define FLOOR_REL_MIN 0.005
#define FLOOR_REL_MAX 0.25
#define FLOOR_ABS_MIN 0.001
#define FLOOR_ABS_MAX 0.04
#define FLOOR_STEPS 16

int lam__model_param_of(int k)
{
    if (k == LAM_NU_CONTINUUM)
        return LAM_MP_CONTINUUM;
    if (k == LAM_NU_RESONANCE)
        return LAM_MP_RESONANCE;
    if (k == LAM_NU_BACKGROUND)
        return LAM_MP_BACKGROUND;
    if (k == LAM_NU_NA)
        return LAM_MP_NA;
    if (k >= LAM_NU_SHIFT && k < LAM_NU_SHIFT + LAM_MAX_CHANNELS)
        return LAM_MP_SHIFT + (k - LAM_NU_SHIFT);
    if (k >= LAM_NU_WIDTH && k < LAM_NU_WIDTH + LAM_MAX_CHANNELS)
        return LAM_MP_WIDTH + (k - LAM_NU_WIDTH);
    return -1;
}

static void collect_free(lam_estimate *e)
{
    e->nfree = 0;
    for (int k = 0; k < LAM_NU_COUNT; k++)
        if (e->shared[k].fitted)
            e->free_index[e->nfree++] = k;
}

lam_status lam__image_gradient(const lam_estimate *e, size_t j, lam_model *model,
                               const lam_prediction *ladder, lam_ladder_grad *grad,
                               lam_error *err)
{
    size_t K = e->max_layers, nc = e->channels, n = e->nfree;
    int which[LAM_NU_COUNT + 1], slot[LAM_NU_COUNT + 1];
    size_t nm = 0;
    for (size_t k = 0; k < n; k++) {
        int mp = lam__model_param_of(e->free_index[k]);
        if (mp >= 0) {
            which[nm] = mp;
            slot[nm++] = (int)k;
        }
    }
    which[nm] = LAM_MP_OXIDE;
    slot[nm++] = (int)n;
    lam_ladder_grad *tmp = malloc(nm * sizeof *tmp);
    if (!tmp)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate gradients");
    lam_model_point p = lam_estimate_point(e, j);
    lam_status st = lam_model_gradient(model, &p, K, which, nm, tmp, err);
    double g[LAM_MAX_CHANNELS], eps[LAM_MAX_CHANNELS];
    lam_estimate_gains(e, g);
    for (size_t c = 0; c < LAM_MAX_CHANNELS; c++)
        eps[c] = e->shared[LAM_NU_OFFSET + c].value;
    for (size_t k = 0; k <= n && !st; k++)
        memset(grad[k], 0, sizeof grad[k]);
    /* observed P = g C + eps (1 - g C): dP/dtheta = g (1 - eps) dC/dtheta */
    for (size_t q = 0; q < nm && !st; q++)
        for (size_t N = 1; N <= K; N++)
            for (size_t c = 0; c < nc; c++)
                grad[slot[q]][N][c] = g[c] * (1 - eps[c]) * tmp[q][N][c];
    /* model contrast g C recovered from the observed ladder */
    for (size_t k = 0; k < n && !st; k++) {
        int s = e->free_index[k];
        size_t c = (size_t)(s - (s >= LAM_NU_OFFSET ? LAM_NU_OFFSET : LAM_NU_GAIN));
        if (s < LAM_NU_GAIN)
            continue;
        for (size_t N = 1; N <= K; N++) {
            double gc = (ladder->contrast[N][c] - eps[c]) / (1 - eps[c]);
            grad[k][N][c] = s >= LAM_NU_OFFSET ? 1 - gc : gc * (1 - eps[c]);
        }
    }
    free(tmp);
    return st;
}

/* ---- the objective ---- */

double lam__prior_at(const lam_nuisance *n, double v)
{
    if (!n->fitted)
        return 0;
    double z = (v - n->prior_mean) / n->prior_sd;
    return -0.5 * z * z;
}

static double prior_term(const lam_nuisance *n)
{
    return lam__prior_at(n, n->value);
}

/* The floor's log-normal priors (the floor is part of what a start
 * settles to, so modes are compared each at its own floor). */
static double floor_logprior(const lam_estimate *e)
{
    double z = log(e->floor_rel / e->floor_rel_prior) / FLOOR_PRIOR_SD_LOG_REL, s = -0.5 * z * z;
    for (size_t c = 0; c < e->channels; c++) {
        z = log(e->floor_abs[c] / e->floor_abs_prior[c]) / FLOOR_PRIOR_SD_LOG_ABS;
        s -= 0.5 * z * z;
    }
    return s;
}

static double shared_logprior(const lam_estimate *e)
{
    double s = floor_logprior(e);
    for (int k = 0; k < LAM_NU_COUNT; k++)
        s += prior_term(&e->shared[k]);
    return s;
}

/* Ladder of image j at the current point, gains applied, N = 0..layers. */
lam_status lam__image_ladder(const lam_estimate *e, size_t j, lam_model *model, size_t layers,
                            lam_prediction *out, lam_error *err)
{
    lam_model_point p = lam_estimate_point(e, j);
    lam_status st = lam_model_eval_point(model, &p, layers, out, err);
    if (!st)
        lam_estimate_observe(e, out);
    return st;
}

/* log posterior share of image j (its regions and its oxide prior); fills
 * responsibilities when resp is given. */
double lam__image_logpost(const lam_estimate *e, size_t j, const lam_prediction *ladder,
                          double *resp)
{
    return lam__image_logpost_with(e, j, ladder, prior_term(&e->image[j].oxide), NULL, resp);
}

/* A hypothesis' share exp(d) of the best one's, or 0 where it cannot
 * count: below e^-37 (8.5e-17, under half a unit in the last place of
 * the sum, which holds the best hypothesis' 1) adding it leaves the sum
 * as it is once the best is in (before it, by a last bit at most), and a
 * responsibility that small changes no weight (the fit skips those below
 * 1e-6) and the unmodelled share by under 1e-16. Six in ten of the
 * starting grid's exponentials lie there at 3 MP; glibc's exp also takes
 * a slow path below -745 (it sets errno). */
#define NEGLIGIBLE_LOG_SHARE (-37.0)
static double exp_or_zero(double d)
{
    return d < NEGLIGIBLE_LOG_SHARE ? 0.0 : exp(d);
}

double lam__image_logpost_with(const lam_estimate *e, size_t j, const lam_prediction *ladder,
                               double oxide_prior, const lam__region_fixed *fixed, double *resp)
{
    const lam_est_image *im = &e->image[j];
    size_t H = e->max_layers + 3;
    double lt[LAM_MODEL_MAX_LAYERS + 3], total = oxide_prior;
    lam__ladder_terms t;
    lam__ladder_terms_of(e, ladder, &t);
    for (size_t i = 0; i < im->count; i++) {
        const lam_est_region *r = &im->regions[i];
        if (!r->use)
            continue;
        lam__region_logterms_in(e, r, ladder, &t, fixed ? &fixed[i] : NULL, lt);
        double top = -INFINITY, sum = 0;
        for (size_t h = 0; h < H; h++)
            top = lt[h] > top ? lt[h] : top; /* fmax(top, lt[h]), NaN too, without a call */
        if (!isfinite(top)) { /* as lam__logsumexp: no hypothesis at all */
            total += top;
            for (size_t h = 0; resp && h < H; h++)
                resp[i * H + h] = 0;
            continue;
        }
        for (size_t h = 0; h < H; h++) /* each exponential once: the sum and the shares */
            sum += (lt[h] = exp_or_zero(lt[h] - top));
        total += top + log(sum);
        if (resp)
            for (size_t h = 0; h < H; h++)
                resp[i * H + h] = lt[h] / sum;
    }
    return total;
}

lam_status lam__fit_objective(lam_estimate *e, lam_model *model, img_work *w, double *out,
                            lam_error *err)
{
    double total = shared_logprior(e);
    for (size_t j = 0; j < e->images; j++) {
        lam_status st = lam__image_ladder(e, j, model, FIT_LAYERS, &w[j].ladder, err);
        if (st)
            return st;
        double v = lam__image_logpost(e, j, &w[j].ladder, w[j].resp);
        e->image[j].log_posterior = v;
        total += v;
    }
    *out = total;
    return LAM_OK;
}

/* ---- normal equations (Gauss-Newton on the expected complete-data
 * log-likelihood, responsibilities fixed) ---- */

static void add_region(const lam_estimate *e, const lam_est_region *r, const double *resp,
                       const img_work *w, normal_eq *q, size_t j)
{
    size_t n = q->n, K = e->max_layers, nc = e->channels;
    double var[LAM_MAX_CHANNELS];
    lam__region_var(e, r, var);
    for (size_t h = 1; h <= K; h++) {
        double rh = resp[h];
        if (rh < 1e-6)
            continue;
        for (size_t c = 0; c < nc; c++) {
            double pred = w->ladder.contrast[h][c];
            double wt = rh / var[c];
            double res = r->mean[c] - pred;
            double jd = w->grad[n][h][c];
            for (size_t a = 0; a < n; a++) {
                double ja = w->grad[a][h][c];
                q->b_s[a] += wt * ja * res;
                for (size_t b = 0; b <= a; b++)
                    q->a_ss[a][b] += wt * ja * w->grad[b][h][c];
                q->a_sd[j * n + a] += wt * ja * jd;
            }
            q->a_dd[j] += wt * jd * jd;
            q->b_d[j] += wt * jd * res;
        }
    }
}

static void build_normal(const lam_estimate *e, const img_work *w, normal_eq *q)
{
    size_t n = q->n, H = e->max_layers + 3;
    memset(q->a_ss, 0, sizeof q->a_ss);
    memset(q->b_s, 0, sizeof q->b_s);
    memset(q->a_sd, 0, e->images * (n ? n : 1) * sizeof *q->a_sd);
    for (size_t j = 0; j < e->images; j++) {
        const lam_est_image *im = &e->image[j];
        q->a_dd[j] = q->b_d[j] = 0;
        for (size_t i = 0; i < im->count; i++)
            if (im->regions[i].use)
                add_region(e, &im->regions[i], w[j].resp + i * H, &w[j], q, j);
        if (im->oxide.fitted) {
            double sd = im->oxide.prior_sd;
            q->a_dd[j] += 1 / (sd * sd);
            q->b_d[j] += (im->oxide.prior_mean - im->oxide.value) / (sd * sd);
        } else {
            q->a_dd[j] = 1; /* fixed: no step */
            q->b_d[j] = 0;
            for (size_t a = 0; a < n; a++)
                q->a_sd[j * n + a] = 0;
        }
    }
    for (size_t a = 0; a < n; a++) {
        const lam_nuisance *p = &e->shared[e->free_index[a]];
        q->a_ss[a][a] += 1 / (p->prior_sd * p->prior_sd);
        q->b_s[a] += (p->prior_mean - p->value) / (p->prior_sd * p->prior_sd);
        for (size_t b = 0; b < a; b++)
            q->a_ss[b][a] = q->a_ss[a][b];
    }
}

/* Solve the damped system by eliminating the oxides (Schur complement).
 * Damping multiplies the diagonal by (1 + lambda). */
static void solve_damped(const lam_estimate *e, const normal_eq *q, double lambda,
                         double *ds, double *dd)
{
    size_t n = q->n;
    lam__mat s;
    double rhs[LAM__MAT_MAX];
    memcpy(s, q->a_ss, sizeof s);
    memcpy(rhs, q->b_s, sizeof rhs);
    for (size_t a = 0; a < n; a++)
        s[a][a] *= 1 + lambda;
    for (size_t j = 0; j < e->images; j++) {
        double ajj = q->a_dd[j] * (1 + lambda);
        const double *asd = q->a_sd + j * n;
        for (size_t a = 0; a < n; a++) {
            rhs[a] -= asd[a] * q->b_d[j] / ajj;
            for (size_t b = 0; b < n; b++)
                s[a][b] -= asd[a] * asd[b] / ajj;
        }
    }
    lam__mat l;
    if (n) {
        lam__cholesky_ridged(s, n, l);
        lam__cholesky_solve(l, n, rhs);
    }
    for (size_t a = 0; a < n; a++)
        ds[a] = rhs[a];
    for (size_t j = 0; j < e->images; j++) {
        double ajj = q->a_dd[j] * (1 + lambda), t = q->b_d[j];
        for (size_t a = 0; a < n; a++)
            t -= q->a_sd[j * n + a] * ds[a];
        dd[j] = t / ajj;
    }
}

/* ---- parameter vector handling ---- */

void lam__fit_save_point(const lam_estimate *e, saved_point *s)
{
    memcpy(s->floor_abs, e->floor_abs, sizeof s->floor_abs);
    s->floor_rel = e->floor_rel;
    for (int k = 0; k < LAM_NU_COUNT; k++)
        s->shared[k] = e->shared[k].value;
    for (size_t j = 0; j < e->images; j++)
        s->oxide[j] = e->image[j].oxide.value;
}

void lam__fit_restore_point(lam_estimate *e, const saved_point *s)
{
    memcpy(e->floor_abs, s->floor_abs, sizeof s->floor_abs);
    e->floor_rel = s->floor_rel;
    for (int k = 0; k < LAM_NU_COUNT; k++)
        e->shared[k].value = s->shared[k];
    for (size_t j = 0; j < e->images; j++)
        e->image[j].oxide.value = s->oxide[j];
}

void lam__fit_copy_point(saved_point *to, const saved_point *from, size_t images)
{
    memcpy(to->shared, from->shared, sizeof to->shared);
    memcpy(to->floor_abs, from->floor_abs, sizeof to->floor_abs);
    to->floor_rel = from->floor_rel;
    memcpy(to->oxide, from->oxide, images * sizeof *to->oxide);
}

static double clamp(double v, const lam_nuisance *n)
{
    return v < n->lo ? n->lo : (v > n->hi ? n->hi : v);
}

/* Move to base + step; returns the largest step asked for, and in *move
 * the largest move made (after the bounds and the oxide's limit), both in
 * prior standard deviations. */
static double take_step(lam_estimate *e, const saved_point *base, const double *ds,
                        const double *dd, double *move)
{
    double big = 0;
    *move = 0;
    for (size_t a = 0; a < e->nfree; a++) {
        lam_nuisance *p = &e->shared[e->free_index[a]];
        double from = base->shared[e->free_index[a]];
        p->value = clamp(from + ds[a], p);
        big = fmax(big, fabs(ds[a]) / p->prior_sd);
        *move = fmax(*move, fabs(p->value - from) / p->prior_sd);
    }
    for (size_t j = 0; j < e->images; j++) {
        lam_nuisance *o = &e->image[j].oxide;
        if (!o->fitted)
            continue;
        /* an oxide step beyond 15 nm would jump between basins: the grid chose it */
        double d = fmax(-15, fmin(15, dd[j]));
        o->value = clamp(base->oxide[j] + d, o);
        big = fmax(big, fabs(dd[j]) / o->prior_sd);
        *move = fmax(*move, fabs(o->value - base->oxide[j]) / o->prior_sd);
    }
    return big;
}

/* ---- the EM / Gauss-Newton loop ---- */

/* The step from base to the current point as taken (after the bounds and
 * the oxide's limit) into d: the free shared parameters, then every
 * image's oxide (0 where it is not fitted). */
static void taken_step(const lam_estimate *e, const saved_point *base, double *d)
{
    size_t k = 0;
    for (size_t a = 0; a < e->nfree; a++)
        d[k++] = e->shared[e->free_index[a]].value - base->shared[e->free_index[a]];
    for (size_t j = 0; j < e->images; j++, k++)
        d[k] = e->image[j].oxide.fitted ? e->image[j].oxide.value - base->oxide[j] : 0;
}

/* The gain the normal equations' quadratic model predicts for the taken
 * step d (taken_step): b'd - d'Ad/2 with the undamped A. */
static double predicted_gain(const lam_estimate *e, const normal_eq *q, const double *d)
{
    size_t n = q->n;
    const double *dd = d + n;
    double gain = 0;
    for (size_t a = 0; a < n; a++) {
        gain += q->b_s[a] * d[a];
        for (size_t b = 0; b < n; b++)
            gain -= 0.5 * d[a] * q->a_ss[a][b] * d[b];
    }
    for (size_t j = 0; j < e->images; j++) {
        gain += q->b_d[j] * dd[j] - 0.5 * q->a_dd[j] * dd[j] * dd[j];
        for (size_t a = 0; a < n; a++)
            gain -= q->a_sd[j * n + a] * d[a] * dd[j];
    }
    return gain;
}

/* The cosine of the angle between the taken step d and 'last', the step
 * before (0 when there was none), both in their priors' standard
 * deviations; 'last' then becomes d so measured. */
static double step_turn(const lam_estimate *e, const double *d, double *last)
{
    size_t n = e->nfree, len = n + e->images;
    double dot = 0, a2 = 0, b2 = 0;
    for (size_t i = 0; i < len; i++) {
        const lam_nuisance *p = i < n ? &e->shared[e->free_index[i]] : &e->image[i - n].oxide;
        double now = i < n || p->fitted ? d[i] / p->prior_sd : 0; /* a fixed oxide: no sd */
        dot += now * last[i];
        a2 += now * now;
        b2 += last[i] * last[i];
        last[i] = now;
    }
    return a2 > 0 && b2 > 0 ? dot / sqrt(a2 * b2) : 0;
}

/* The damping after an accepted step that gained rho times what the
 * quadratic model predicted, where the step turned back on the one before
 * (step_turn below -1/2; any other step passes rho = 1 and loosens it,
 * lambda / 3, as it always did). Under a quarter the step has overshot:
 * along one direction whose curvature the model underestimates by a
 * factor k, a full step overshoots the maximum by k - 1 of its length,
 * gains rho = 2 - k of the prediction, and the next comes back; it comes
 * out right when the diagonal is scaled by k more, so 1 + lambda grows by
 * 2 - rho (at most 4 times). Otherwise it loosens. Without this, a start
 * whose oxide the model's curvature underestimated (EM's responsibilities,
 * and then the floor's dependence on the prediction, which Gauss-Newton
 * left out: the floor is now taken at the measured contrast) went from
 * one side of its maximum to the other and back for 73 iterations, each
 * step a fifth of its predicted gain. Only such turns change the damping:
 * the ratio alone (damping every step that gained under a quarter) also
 * slowed the first, far steps of starts and sent one uninformed tile's
 * first start to another mode (docs/performance.md). */
static double next_damping(double lambda, double rho)
{
    if (rho < 0.25)
        return (1 + lambda) * fmin(4.0, 2.0 - rho) - 1;
    return fmax(lambda / 3, 1e-6);
}

/* The damping after the step from f->base to the current point, which
 * gained 'gain': the model's prediction is only asked for where the step
 * turned back (f->last_step then becomes this step). */
static double damping_after(fit_ctx *f, double lambda, double gain)
{
    double rho = 1; /* a step that did not turn back loosens the damping */
    taken_step(f->e, &f->base, f->step);
    if (step_turn(f->e, f->step, f->last_step) < -0.5) {
        double predicted = predicted_gain(f->e, &f->q, f->step);
        rho = predicted > 0 ? gain / predicted : 1;
    }
    return next_damping(lambda, rho);
}

static lam_status gradients(fit_ctx *f, lam_error *err)
{
    for (size_t j = 0; j < f->e->images; j++) {
        lam_status st = lam__image_gradient(f->e, j, f->model, &f->w[j].ladder, f->w[j].grad, err);
        if (st)
            return st;
    }
    return LAM_OK;
}

/* One damped step that raises the posterior, or none (returns 0 when no
 * step helped: converged); *move: how far it moved (take_step; 0 when
 * none was taken). */
static lam_status one_iteration(fit_ctx *f, double *logpost, double *lambda, int *moved,
                                double *move, lam_error *err)
{
    lam_estimate *e = f->e;
    lam_status st = gradients(f, err);
    if (st)
        return st;
    build_normal(e, f->w, &f->q);
    lam__fit_save_point(e, &f->base);
    *moved = 0;
    for (int t = 0; t < MAX_TRIES; t++) {
        solve_damped(e, &f->q, *lambda, f->ds, f->dd);
        double trial, big = take_step(e, &f->base, f->ds, f->dd, move);
        if ((st = lam__fit_objective(e, f->model, f->w, &trial, err)))
            return st;
        if (trial >= *logpost - 1e-9) {
            *moved = trial - *logpost > 1e-4 || big > 1e-3;
            *lambda = damping_after(f, *lambda, trial - *logpost);
            *logpost = trial;
            return LAM_OK;
        }
        *lambda *= 4;
    }
    *move = 0;
    lam__fit_restore_point(e, &f->base);
    return lam__fit_objective(e, f->model, f->w, logpost, err);
}

int lam__start_hopeless(double lp, const double *gain, const double *move, size_t done,
                        size_t left, double below)
{
    double rate = fmax(gain[0], fmax(gain[1], gain[2]));
    double moved = fmax(move[0], fmax(move[1], move[2]));
    return done >= LAM_HOPELESS_AFTER && moved < LAM_HOPELESS_MOVE &&
           lp + (double)left * rate < below;
}

lam_status lam__fit_run_em(fit_ctx *f, size_t max_it, double *logpost, lam_error *err)
{
    double lambda = 1e-3, gain[3] = {0, 0, 0}, move[3] = {0, 0, 0};
    memset(f->last_step, 0, f->step_len * sizeof *f->last_step); /* no step before the first */
    lam_status st = lam__fit_objective(f->e, f->model, f->w, logpost, err);
    for (size_t it = 0; it < max_it && !st; it++) {
        int moved = 0;
        double before = *logpost;
        st = one_iteration(f, logpost, &lambda, &moved, &move[it % 3], err);
        f->e->iterations++;
        gain[it % 3] = *logpost - before;
        if (!moved ||
            lam__start_hopeless(*logpost, gain, move, it + 1, max_it - it - 1, f->give_up_below))
            break;
    }
    return st;
}

/* ---- the floor from the residuals of confidently assigned regions ---- */

/* The floor has an absolute part (flat-field and JPEG colour-quantisation
 * errors, which do not scale with contrast) and a relative one (model
 * error); both are estimated, each with a log-normal prior about the
 * starting value so that a few regions cannot talk it to zero. */

/* Log-likelihood of the confident regions' residuals in the channels of
 * 'mask' with absolute floors fa[] and relative floor fr, with the priors. */
static double floor_loglik(const lam_estimate *e, const img_work *w, const double *fa, double fr,
                           unsigned mask)
{
    size_t K = e->max_layers, H = K + 3, nc = e->channels;
    double s = 0;
    for (size_t j = 0; j < e->images; j++) {
        const lam_est_image *im = &e->image[j];
        for (size_t i = 0; i < im->count; i++) {
            const lam_est_region *r = &im->regions[i];
            const double *resp = w[j].resp + i * H;
            for (size_t h = 1; h <= K && r->use; h++) {
                if (resp[h] < 0.9)
                    continue;
                for (size_t c = 0; c < nc; c++) {
                    if (!(mask & (1u << c)))
                        continue;
                    double pred = w[j].ladder.contrast[h][c], d = r->mean[c] - pred;
                    double fl = fa[c] + fr * fabs(r->mean[c]), var = r->var[c] + fl * fl;
                    s += -0.5 * (d * d / var + log(var));
                }
            }
        }
    }
    double zr = log(fr / e->floor_rel_prior) / FLOOR_PRIOR_SD_LOG_REL;
    s -= 0.5 * zr * zr;
    for (size_t c = 0; c < nc; c++)
        if (mask & (1u << c)) {
            double za = log(fa[c] / e->floor_abs_prior[c]) / FLOOR_PRIOR_SD_LOG_ABS;
            s -= 0.5 * za * za;
        }
    return s;
}

static double grid_value(double lo, double hi, int k)
{
    return lo * pow(hi / lo, k / (double)FLOOR_STEPS);
}

/* Each channel's absolute floor and the shared relative floor, by
 * coordinate search on log grids (two rounds). */
static void estimate_floor(const lam_estimate *e, const img_work *w, double *fa, double *fr)
{
    memcpy(fa, e->floor_abs, LAM_MAX_CHANNELS * sizeof *fa);
    *fr = e->floor_rel;
    unsigned all = (1u << e->channels) - 1;
    for (int round = 0; round < 2; round++) {
        for (size_t c = 0; c < e->channels; c++) {
            double best = -INFINITY, keep = fa[c];
            for (int k = 0; k <= FLOOR_STEPS; k++) {
                fa[c] = grid_value(FLOOR_ABS_MIN, FLOOR_ABS_MAX, k);
                double v = floor_loglik(e, w, fa, *fr, 1u << c);
                if (v > best)
                    best = v, keep = fa[c];
            }
            fa[c] = keep;
        }
        double best = -INFINITY, keep = *fr;
        for (int k = 0; k <= FLOOR_STEPS; k++) {
            double r = grid_value(FLOOR_REL_MIN, FLOOR_REL_MAX, k);
            double v = floor_loglik(e, w, fa, r, all);
            if (v > best)
                best = v, keep = r;
        }
        *fr = keep;
    }
}

/* Re-estimate the floor; refit when it moved. */
lam_status lam__fit_refloor(fit_ctx *f, double *lp, lam_error *err)
{
    lam_estimate *e = f->e;
    if (!e->opt.estimate_floor)
        return LAM_OK;
    double fa[LAM_MAX_CHANNELS], fr;
    estimate_floor(e, f->w, fa, &fr);
    int moved = fabs(log(fr / e->floor_rel)) > 0.2;
    for (size_t c = 0; c < e->channels; c++)
        moved |= fabs(log(fa[c] / e->floor_abs[c])) > 0.2;
    if (!moved)
        return LAM_OK;
    memcpy(e->floor_abs, fa, sizeof e->floor_abs);
    e->floor_rel = fr;
    return lam__fit_run_em(f, e->opt.max_iterations, lp, err);
}

/* ---- Laplace covariance ---- */

/* Each image's oxide sigma with the setup's own priors where pooled ones
 * replaced them (lam_nuisance.alone_sd), at the same optimum, from the
 * shared block's Schur complement 'schur': pooling pins the shared
 * parameters, not the bias the model family leaves in them, so the
 * analysis reports the oxide's uncertainty as one image alone has it
 * (lam_est_image.oxide_sigma_alone). */
static void alone_sigmas(fit_ctx *f, const lam__mat schur, size_t n)
{
    lam_estimate *e = f->e;
    lam__mat s, l, inv;
    int pooled = 0;
    memcpy(s, schur, sizeof s);
    for (size_t a = 0; a < n; a++) {
        const lam_nuisance *p = &e->shared[e->free_index[a]];
        if (p->alone_sd > p->prior_sd) {
            s[a][a] += 1 / (p->alone_sd * p->alone_sd) - 1 / (p->prior_sd * p->prior_sd);
            pooled = 1;
        }
    }
    memset(inv, 0, sizeof inv);
    if (pooled) {
        lam__cholesky_ridged(s, n, l);
        lam__cholesky_inverse(l, n, inv);
    }
    for (size_t j = 0; j < e->images; j++) {
        lam_est_image *im = &e->image[j];
        const double *asd = f->q.a_sd + j * n;
        double ajj = f->q.a_dd[j], quad = 0;
        for (size_t a = 0; pooled && a < n; a++)
            for (size_t b = 0; b < n; b++)
                quad += asd[a] * inv[a][b] * asd[b] / (ajj * ajj);
        im->oxide_sigma_alone =
            !pooled ? im->oxide.sigma : im->oxide.fitted ? sqrt(1 / ajj + quad) : 0;
    }
}

static lam_status laplace(fit_ctx *f, lam_error *err)
{
    lam_estimate *e = f->e;
    /* the Jacobians at this point: the last iteration's were taken at
     * another one (the last start's, or none in a rival's fresh context) */
    lam_status st = gradients(f, err);
    if (st)
        return st;
    build_normal(e, f->w, &f->q);
    size_t n = f->q.n;
    lam__mat s, l, inv;
    memcpy(s, f->q.a_ss, sizeof s);
    for (size_t j = 0; j < e->images; j++)
        for (size_t a = 0; a < n; a++)
            for (size_t b = 0; b < n; b++)
                s[a][b] -= f->q.a_sd[j * n + a] * f->q.a_sd[j * n + b] / f->q.a_dd[j];
    memset(inv, 0, sizeof inv);
    double logdet_cov = 0; /* of the full covariance: shared block and oxides */
    if (n) {
        lam__cholesky_ridged(s, n, l);
        lam__cholesky_inverse(l, n, inv);
        logdet_cov = -lam__cholesky_logdet(l, n);
    }
    for (size_t j = 0; j < e->images; j++)
        if (e->image[j].oxide.fitted && f->q.a_dd[j] > 0)
            logdet_cov -= log(f->q.a_dd[j]);
    e->log_evidence = 0.5 * logdet_cov; /* the caller adds the log posterior */
    memset(e->cov, 0, sizeof e->cov);
    for (size_t a = 0; a < n; a++) {
        for (size_t b = 0; b < n; b++)
            e->cov[a][b] = inv[a][b];
        e->shared[e->free_index[a]].sigma = sqrt(inv[a][a]);
    }
    for (size_t j = 0; j < e->images; j++) {
        const double *asd = f->q.a_sd + j * n;
        double ajj = f->q.a_dd[j], quad = 0;
        for (size_t a = 0; a < n; a++) {
            double cr = 0;
            for (size_t b = 0; b < n; b++)
                cr -= inv[a][b] * asd[b] / ajj;
            e->cross[j * (n ? n : 1) + a] = cr;
            quad -= asd[a] * cr / ajj;
        }
        lam_nuisance *o = &e->image[j].oxide;
        o->sigma = o->fitted ? sqrt(1 / ajj + quad) : 0;
        e->image[j].oxide_sigma_given_shared = o->fitted ? sqrt(1 / ajj) : 0;
    }
    alone_sigmas(f, s, n);
    return LAM_OK;
}

/* ---- bookkeeping after the fit ---- */

static void count_regions(lam_estimate *e, const img_work *w)
{
    size_t K = e->max_layers, H = K + 3;
    for (size_t j = 0; j < e->images; j++) {
        lam_est_image *im = &e->image[j];
        im->regions_used = im->confident = 0;
        double unmodelled = 0;
        for (size_t i = 0; i < im->count; i++) {
            if (!im->regions[i].use)
                continue;
            im->regions_used++;
            for (size_t h = 1; h <= K; h++)
                im->confident += w[j].resp[i * H + h] >= 0.9;
            unmodelled += w[j].resp[i * H + K + 2];
        }
        im->unmodelled_share = im->regions_used ? unmodelled / (double)im->regions_used : 0;
        im->data_loglik = im->log_posterior - prior_term(&im->oxide);
    }
}

void lam__fit_free_ctx(fit_ctx *f)
{
    if (f->w)
        for (size_t j = 0; j < f->e->images; j++)
            free(f->w[j].resp);
    free(f->w);
    free(f->q.a_sd);
    free(f->q.a_dd);
    free(f->q.b_d);
    free(f->base.oxide);
    free(f->ds);
    free(f->dd);
    free(f->step);
    free(f->last_step);
    memset(f, 0, sizeof *f); /* released: freeing again, or a zeroed context, is a no-op */
}

lam_status lam__fit_init_ctx(fit_ctx *f, lam_estimate *e, lam_model *model, lam_error *err)
{
    memset(f, 0, sizeof *f);
    f->e = e;
    f->model = model;
    f->give_up_below = -INFINITY;
    collect_free(e);
    size_t m = e->images ? e->images : 1, n = e->nfree ? e->nfree : 1;
    f->q.n = e->nfree;
    f->w = calloc(m, sizeof *f->w);
    f->q.a_sd = calloc(m * n, sizeof *f->q.a_sd);
    f->q.a_dd = calloc(m, sizeof *f->q.a_dd);
    f->q.b_d = calloc(m, sizeof *f->q.b_d);
    f->base.oxide = calloc(m, sizeof *f->base.oxide);
    f->ds = calloc(LAM__MAT_MAX, sizeof *f->ds);
    f->dd = calloc(m, sizeof *f->dd);
    f->step_len = e->nfree + e->images;
    f->step = calloc(f->step_len + 1, sizeof *f->step);
    f->last_step = calloc(f->step_len + 1, sizeof *f->last_step);
    free(e->cross);
    e->cross = calloc(m * n, sizeof *e->cross);
    int ok = f->w && f->q.a_sd && f->q.a_dd && f->q.b_d && f->base.oxide && f->ds && f->dd &&
             f->step && f->last_step && e->cross;
    for (size_t j = 0; j < e->images && ok; j++)
        ok = (f->w[j].resp = calloc((e->image[j].count ? e->image[j].count : 1) *
                                        (e->max_layers + 3), sizeof(double))) != NULL;
    if (!ok) {
        lam__fit_free_ctx(f);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the fit");
    }
    return LAM_OK;
}

/* The Laplace fit of a point: covariance, counts and log evidence. */
static lam_status finish(fit_ctx *f, double lp, lam_error *err)
{
    lam_status st = laplace(f, err);
    if (st)
        return st;
    count_regions(f->e, f->w);
    f->e->log_evidence += lp;
    f->e->fitted = 1;
    return LAM_OK;
}

/* A rival mode within LAM_RIVAL_MARGIN of the best in log posterior is
 * fitted on a copy; when its evidence is higher the two swap, so that the
 * estimate itself is always the more probable mode. */
static lam_status fit_rival(fit_ctx *f, const mode_set *m, lam_error *err)
{
    lam_estimate *e = f->e;
    if (!(m->rival_lp > m->best_lp - LAM_RIVAL_MARGIN))
        return LAM_OK;
    lam_estimate *r = lam__estimate_clone(e);
    if (!r)
        return lam_error_set(err, LAM_ENOMEM, "cannot copy the estimate");
    fit_ctx g;
    lam_status st = lam__fit_init_ctx(&g, r, f->model, err);
    double lp = 0;
    if (!st) {
        lam__fit_restore_point(r, &m->rival);
        if (!(st = lam__fit_objective(r, g.model, g.w, &lp, err)))
            st = finish(&g, lp, err);
        lam__fit_free_ctx(&g);
    }
    /* The weight is the ratio of the posterior densities at the two modes.
     * The Laplace volume term (log_evidence) would be the better measure
     * for two well-shaped peaks, but a mode pressed against a parameter's
     * bound (a response term at zero) has a flat direction whose curvature
     * overstates its volume by orders of magnitude. */
    double d = m->rival_lp - m->best_lp;
    if (st || d < -LAM_RIVAL_MARGIN) {
        lam_estimate_free(r);
        return st;
    }
    e->rival = r;
    e->rival_weight = 1 / (1 + exp(-d));
    return LAM_OK;
}

lam_status lam_estimate_fit(lam_estimate *e, lam_model *model, lam_model *thick, lam_error *err)
{
    (void)thick;
    if (lam_model_max_layers(model) < e->max_layers)
        return lam_error_set(err, LAM_EINTERNAL, "fit model has fewer than %zu layers",
                             e->max_layers);
    fit_ctx f;
    lam_status st = lam__fit_init_ctx(&f, e, model, err);
    if (st)
        return st;
    double lp = 0;
    e->iterations = 0;
    lam_estimate_free(e->rival);
    e->rival = NULL;
    e->rival_weight = 0;
    mode_set m;
    if (!lam__mode_set_init(&m, e))
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate the multistart");
    if (!st && !(st = lam__estimate_grids(e, model, err)) && !(st = lam__fit_settle(&f, &lp, err)))
        st = lam__multistart(&f, &lp, &m, err);
    if (!st && !(st = finish(&f, lp, err)))
        st = fit_rival(&f, &m, err);
    lam__mode_set_free(&m);
    lam__fit_free_ctx(&f);
    return st;
}

lam_status lam_estimate_refit(lam_estimate *e, lam_model *model, lam_error *err)
{
    fit_ctx f;
    lam_status st = lam__fit_init_ctx(&f, e, model, err);
    if (st)
        return st;
    double lp = 0;
    e->iterations = 0;
    st = lam__fit_run_em(&f, e->opt.max_iterations, &lp, err);
    if (!st)
        st = lam__fit_refloor(&f, &lp, err);
    if (!st && !(st = laplace(&f, err))) {
        count_regions(e, f.w);
        e->fitted = 1;
    }
    lam__fit_free_ctx(&f);
    return st;
}

lam_status lam_estimate_view(const lam_estimate *e, size_t j, lam_model *model,
                             lam_est_view *v, lam_error *err)
{
    lam_status st = lam_estimate_ladder(e, j, model, &v->ladder, err);
    if (st)
        return st;
    /* lam__image_gradient needs the free list of the last fit */
    if ((st = lam__image_gradient(e, j, model, &v->ladder, v->grad, err)))
        return st;
    size_t n = e->nfree;
    v->nfree = n + 1;
    memset(v->cov, 0, sizeof v->cov);
    for (size_t a = 0; a < n; a++) {
        for (size_t b = 0; b < n; b++)
            v->cov[a][b] = e->cov[a][b];
        v->cov[a][n] = v->cov[n][a] = e->cross ? e->cross[j * n + a] : 0;
    }
    double so = e->image[j].oxide.sigma;
    v->cov[n][n] = isfinite(so) ? so * so : 0;
    return LAM_OK;
}
