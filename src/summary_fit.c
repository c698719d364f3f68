/* summary_fit.c - the text the command line shows for a prediction, a
 * calibration and an oxide audit (lamina/summary.h). */
#include "lamina/summary.h"
#include "summary_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <cjson/cJSON.h>

static const char *channel_name(size_t channels, size_t c)
{
    static const char *rgb[3] = {"R", "G", "B"};
    return channels == 1 ? "mono" : rgb[c];
}

/* A nearly anti-reflecting substrate (issue 14): below this channel
 * reflectance the relative contrast is ill-conditioned (stray light and the
 * model's errors in R_sub dominate it), so dR and a signal-to-noise are
 * given too. */
#define AR_REFLECTANCE 0.03
/* The signal-to-noise convention: shot noise of a camera whose full well
 * (10000 e-, common practice for microscope cameras) bare Si would fill at
 * the same exposure: SNR = |dR| sqrt(FW / (R_Si R_sub)). */
#define SNR_FULL_WELL 10000.0

int lam_summary_prediction_near_ar(const lam_prediction *p)
{
    for (size_t c = 0; c < p->channels; c++)
        if (p->substrate[c] < AR_REFLECTANCE)
            return 1;
    return 0;
}

/* Bare-Si reflectance of the brightest channel (the SNR's exposure). */
static double bare_si(const lam_setup *s, double mono)
{
    lam_setup b = *s;
    b.layers = 0;
    lam_model *m = NULL;
    lam_prediction *p = malloc(sizeof *p);
    double top = 0.35;
    if (p && !lam_model_alloc(&b, 1, mono, &m, NULL) &&
        !lam_model_eval(m, 0, b.sheet.fermi_ev, p, NULL)) {
        top = 0;
        for (size_t c = 0; c < p->channels; c++)
            top = fmax(top, p->substrate[c]);
    }
    lam_model_free(m);
    free(p);
    return top;
}

/* th: film thicknesses of rows lo..hi (th[N - 1], nm), or NULL for layer
 * counts. */
static cJSON *prediction_json(const lam_prediction *p, size_t lo, size_t hi, double mono,
                              const lam_setup *s, const double *th)
{
    cJSON *root = cJSON_CreateObject();
    cJSON_AddStringToObject(root, "schema", "lamina-predict/1");
    cJSON_AddStringToObject(root, "contrast_convention", "(substrate - flake) / substrate");
    cJSON *ch = cJSON_AddArrayToObject(root, "channels");
    for (size_t c = 0; c < p->channels; c++)
        cJSON_AddItemToArray(ch, cJSON_CreateString(channel_name(p->channels, c)));
    if (mono > 0)
        cJSON_AddNumberToObject(root, "wavelength_nm", mono);
    cJSON_AddNumberToObject(root, "oxide_nm", p->oxide_nm);
    cJSON_AddNumberToObject(root, "illumination_na", s->illumination_na);
    cJSON_AddNumberToObject(root, "fermi_eV", fabs(p->fermi_ev));
    char desc[200];
    lam_setup_describe_flake(s, desc, sizeof desc);
    cJSON_AddStringToObject(root, "material", s->flake);
    cJSON_AddStringToObject(root, "observation", s->transmission ? "transmission" : "reflection");
    cJSON_AddStringToObject(root, "conductivity", desc);
    cJSON *sr = cJSON_AddArrayToObject(root, "substrate_reflectance");
    for (size_t c = 0; c < p->channels; c++)
        cJSON_AddItemToArray(sr, cJSON_CreateNumber(p->substrate[c]));
    cJSON *rows = cJSON_AddArrayToObject(root, "rows");
    for (size_t N = lo; N <= hi; N++) {
        cJSON *row = cJSON_CreateObject();
        if (th)
            cJSON_AddNumberToObject(row, "thickness_nm", th[N - 1]);
        else
            cJSON_AddNumberToObject(row, "layers", (double)N);
        cJSON *con = cJSON_AddArrayToObject(row, "contrast");
        for (size_t c = 0; c < p->channels; c++)
            cJSON_AddItemToArray(con, cJSON_CreateNumber(p->contrast[N][c]));
        cJSON_AddItemToArray(rows, row);
    }
    return root;
}

static void prediction_table(FILE *f, const lam_prediction *p, size_t lo, size_t hi,
                             double mono, const lam_setup *s, int csv, const double *th)
{
    int ar = lam_summary_prediction_near_ar(p);
    double r_si = ar ? bare_si(s, mono) : 1;
    int other = strcmp(s->flake, "graphene") != 0;
    if (!csv)
        fprintf(f, "# contrast = (substrate - flake) / substrate%s; %s%soxide %.1f nm, "
                   "illumination NA %.2f%s\n",
                s->transmission ? " in transmission (1 - T_flake / T_substrate)" : "",
                other ? s->flake : "", other ? ", " : "", p->oxide_nm, s->illumination_na,
                mono > 0 ? ", monochromatic" : "");
    const char *key = th ? "thickness_nm" : "layers";
    if (csv)
        fputs(key, f);
    else
        fprintf(f, th ? "%-12s" : "%-7s", key);
    for (size_t c = 0; c < p->channels; c++)
        fprintf(f, csv ? ",%s" : " %10s", channel_name(p->channels, c));
    for (size_t c = 0; ar && c < p->channels; c++)
        fprintf(f, csv ? ",dR_%s,snr_%s" : " %9s_dR %8s_snr", channel_name(p->channels, c),
                channel_name(p->channels, c));
    fputc('\n', f);
    for (size_t N = lo; N <= hi; N++) {
        if (th)
            fprintf(f, csv ? "%g" : "%-12g", th[N - 1]);
        else
            fprintf(f, csv ? "%zu" : "%-7zu", N);
        for (size_t c = 0; c < p->channels; c++)
            fprintf(f, csv ? ",%.6f" : " %10.5f", p->contrast[N][c]);
        for (size_t c = 0; ar && c < p->channels; c++) {
            double dr = p->substrate[c] - p->reflectance[N][c];
            fprintf(f, csv ? ",%.6f,%.2f" : " %12.6f %12.2f", dr,
                    fabs(dr) * sqrt(SNR_FULL_WELL / (r_si * p->substrate[c])));
        }
        fputc('\n', f);
    }
}

static lam_status prediction_text(const lam_prediction *p, size_t lo, size_t hi, double mono_nm,
                                  const lam_setup *setup, const double *th, const char *format,
                                  char **text, lam_error *err)
{
    int json = !strcmp(format, "json"), csv = !strcmp(format, "csv");
    if (!json && !csv && strcmp(format, "table"))
        return lam_error_set(err, LAM_EINVAL, "format %s: expected table, csv or json", format);
    lam__text t;
    lam_status st = lam__text_open(&t, err);
    if (st)
        return st;
    if (json) {
        cJSON *root = prediction_json(p, lo, hi, mono_nm, setup, th);
        char *s = root ? cJSON_Print(root) : NULL;
        cJSON_Delete(root);
        if (!s) {
            fclose(t.f);
            free(t.buf);
            return lam_error_set(err, LAM_ENOMEM, "cannot format the prediction");
        }
        fprintf(t.f, "%s\n", s);
        free(s);
    } else {
        prediction_table(t.f, p, lo, hi, mono_nm, setup, csv, th);
    }
    return lam__text_close(&t, text, err);
}

lam_status lam_summary_prediction(const lam_prediction *p, size_t lo, size_t hi, double mono_nm,
                                  const lam_setup *setup, const char *format, char **text,
                                  lam_error *err)
{
    return prediction_text(p, lo, hi, mono_nm, setup, NULL, format, text, err);
}

lam_status lam_summary_prediction_films(const lam_prediction *p, const double *thickness_nm,
                                        size_t count, double mono_nm, const lam_setup *setup,
                                        const char *format, char **text, lam_error *err)
{
    return prediction_text(p, 1, count, mono_nm, setup, thickness_nm, format, text, err);
}

/* The ladder up to hi layers, or with thickness_nm the films (rows
 * 1..count), at the setup's oxide (0 without SiO2) and Fermi level. */
static lam_status predict_rows(const lam_setup *s, double mono, size_t hi,
                               const double *thickness_nm, size_t count, lam_prediction *p,
                               lam_error *err)
{
    lam_model *m = NULL;
    double ox = lam_setup_oxide(s);
    lam_status st = lam_model_alloc(s, thickness_nm ? 1 : hi, mono, &m, err);
    if (!st)
        st = lam_model_eval(m, ox < 0 ? 0 : ox, s->sheet.fermi_ev, p, err);
    if (!st && thickness_nm) {
        lam_model_point pt = lam_model_point_default(m);
        pt.v[LAM_MP_OXIDE] = ox < 0 ? 0 : ox;
        double (*c)[LAM_MAX_CHANNELS] = (double (*)[LAM_MAX_CHANNELS])p->contrast[1];
        st = lam_model_eval_films(m, &pt, 1.0, thickness_nm, count, c, err);
        p->max_layers = count;
        for (size_t j = 1; !st && j <= count; j++)
            for (size_t k = 0; k < p->channels; k++)
                p->reflectance[j][k] = p->substrate[k] * (1 - p->contrast[j][k]);
    }
    lam_model_free(m);
    return st;
}

lam_status lam_summary_predict(const lam_setup *setup, size_t lo, size_t hi, double mono_nm,
                               const double *thickness_nm, size_t count, const char *format,
                               char **text, int *near_ar, lam_error *err)
{
    lam_prediction *p = malloc(sizeof *p); /* large: not on the stack */
    lam_status st = p ? LAM_OK : lam_error_set(err, LAM_ENOMEM, "out of memory");
    if (!st && thickness_nm && lam_setup_crystal_kind(setup) != LAM_CRYSTAL_CONTINUOUS)
        st = lam_error_set(err, LAM_EINVAL, "film thicknesses need a crystal of continuous "
                                            "thickness (material hBN), not %s", setup->flake);
    if (!st && (st = predict_rows(setup, mono_nm, hi, thickness_nm, count, p, err)))
        lam_error_set_file(err, setup->source);
    if (!st && near_ar)
        *near_ar = lam_summary_prediction_near_ar(p);
    if (!st)
        st = thickness_nm ? lam_summary_prediction_films(p, thickness_nm, count, mono_nm, setup,
                                                         format, text, err)
                          : lam_summary_prediction(p, lo, hi, mono_nm, setup, format, text, err);
    free(p);
    return st;
}

static void calib_value(FILE *f, const lam_calib_value *v, const char *unit)
{
    if (!v->fitted)
        fprintf(f, "  %-18s %10.4g %s (given)\n", v->name, v->value, unit);
    else if (v->constrained)
        fprintf(f, "  %-18s %10.4g +- %.2g %s\n", v->name, v->value, v->sigma, unit);
    else
        fprintf(f, "  %-18s not constrained by these labels (prior %.4g +- %.2g %s kept)\n",
                v->name, v->value, v->prior_sd, unit);
}

lam_status lam_summary_calibration(const lam_calib_result *r, const char *const *images,
                                   char **text, lam_error *err)
{
    lam__text t;
    lam_status st = lam__text_open(&t, err);
    if (st)
        return st;
    FILE *f = t.f;
    fprintf(f, "%zu labelled region(s)", r->labelled);
    if (r->labelled && r->latent)
        fprintf(f, " and %zu with latent counts", r->latent);
    fprintf(f, " in %zu image(s); chi2 %.1f for %.0f labelled values; model floor %.1f %%\n",
            r->images, r->chi2, r->dof, 100 * r->floor_rel);
    for (int k = 0; k < LAM_NU_COUNT; k++) {
        const lam_calib_value *v = &r->shared[k];
        if (v->name && (v->fitted || k == LAM_NU_NA) &&
            (k < LAM_NU_SHIFT || (size_t)((k - LAM_NU_SHIFT) % LAM_MAX_CHANNELS) < r->channels))
            calib_value(f, v, (k >= LAM_NU_SHIFT && k < LAM_NU_WIDTH) ? "nm" : "");
    }
    for (size_t j = 0; j < r->images; j++) {
        fprintf(f, "  oxide of %s:", images[j]);
        calib_value(f, &r->oxide[j], "nm");
    }
    for (size_t k = 0; k < r->residuals; k++) {
        const lam_calib_residual *x = &r->residual[k];
        fprintf(f, "  label %zu (%dL) in %s: chi2 %.2f (p %.2g)\n", k + 1, x->layers,
                images[x->image], x->chi2, x->pvalue);
    }
    const lam_substrate_colour *c = &r->setup.substrate_colour;
    if (isfinite(c->oxide_nm))
        fprintf(f, "substrate colour recorded at %.1f +- %.1f nm of oxide: later images read "
                   "their oxide from it while the lamp and white balance stay as they are\n",
                c->oxide_nm, c->oxide_sd_nm);
    if (isfinite(c->oxide_nm) && isfinite(c->second_oxide_nm))
        fprintf(f, "  and at %.1f +- %.1f nm (a second chip): it measures how the colour changes "
                   "with the oxide\n",
                c->second_oxide_nm, c->second_oxide_sd_nm);
    return lam__text_close(&t, text, err);
}

static void oxide_images(FILE *f, const lam_oxide_audit *a)
{
    for (size_t j = 0; j < a->n_images; j++) {
        const lam_oxide_audit_image *im = &a->images[j];
        if (!im->fitted)
            fprintf(f, "  %-38s no usable region (not in the fit)\n", im->file);
        else
            fprintf(f, "  %-38s %.1f +- %.1f nm (%zu regions): %s\n", im->file,
                    im->sample.estimate_nm, im->sample.sigma_nm, im->regions_used,
                    lam_oxide_verdict_name(im->verdict));
    }
}

lam_status lam_summary_oxide(const lam_oxide_audit *a, char **text, lam_error *err)
{
    lam__text t;
    lam_status st = lam__text_open(&t, err);
    if (st)
        return st;
    FILE *f = t.f;
    oxide_images(f, a);
    const lam_oxide_combined *c = &a->combined;
    if (c->n)
        fprintf(f, "combined: %.1f +- %.1f nm (of which %.1f nm shared) from %zu image%s; 95 %% "
                   "interval %.1f to %.1f nm\n", c->estimate_nm, c->sigma_nm, c->sigma_shared_nm,
                c->n, c->n == 1 ? "" : "s", c->lo95_nm, c->hi95_nm);
    if (c->n > 1 && !c->consistent)
        fprintf(f, "note: the images disagree (chi2 %.1f for %zu dof, p = %.2g): the oxide "
                   "varies across the batch (spread %.1f nm)\n", c->chi2, c->dof, c->p_value,
                c->spread_nm);
    fprintf(f, "nominal %.1f +- %.1f nm: %s: %s\n", a->nominal_nm, a->tolerance_nm,
            lam_oxide_verdict_name(a->verdict), a->reason);
    if (a->advice[0])
        fprintf(f, "to decide: %s\n", a->advice);
    if (a->absolute_set && isfinite(a->absolute_nm))
        fprintf(f, "absolute (substrate colour vs %s): %.1f nm%s\n", a->reference,
                a->absolute_nm, a->n_absolute > 1 ? " (other interference orders fit as well)"
                                                  : "");
    if (a->n_orders && !a->order_decides)
        fprintf(f, "note: %zu other thickness(es) one interference order away fit as well (e.g. "
                   "%.0f nm)\n", a->n_orders, a->orders_nm[0]);
    return lam__text_close(&t, text, err);
}
