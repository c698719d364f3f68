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

static cJSON *prediction_json(const lam_prediction *p, size_t lo, size_t hi, double mono,
                              const lam_setup *s)
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
    lam_sheet_describe(&s->sheet, desc, sizeof desc);
    cJSON_AddStringToObject(root, "conductivity", desc);
    cJSON *sr = cJSON_AddArrayToObject(root, "substrate_reflectance");
    for (size_t c = 0; c < p->channels; c++)
        cJSON_AddItemToArray(sr, cJSON_CreateNumber(p->substrate[c]));
    cJSON *rows = cJSON_AddArrayToObject(root, "rows");
    for (size_t N = lo; N <= hi; N++) {
        cJSON *row = cJSON_CreateObject();
        cJSON_AddNumberToObject(row, "layers", (double)N);
        cJSON *con = cJSON_AddArrayToObject(row, "contrast");
        for (size_t c = 0; c < p->channels; c++)
            cJSON_AddItemToArray(con, cJSON_CreateNumber(p->contrast[N][c]));
        cJSON_AddItemToArray(rows, row);
    }
    return root;
}

static void prediction_table(FILE *f, const lam_prediction *p, size_t lo, size_t hi,
                             double mono, const lam_setup *s, int csv)
{
    if (!csv)
        fprintf(f, "# contrast = (substrate - flake) / substrate; oxide %.1f nm, illumination NA "
                   "%.2f%s\n", p->oxide_nm, s->illumination_na, mono > 0 ? ", monochromatic" : "");
    fprintf(f, csv ? "layers" : "%-7s", csv ? "" : "layers");
    for (size_t c = 0; c < p->channels; c++)
        fprintf(f, csv ? ",%s" : " %10s", channel_name(p->channels, c));
    fputc('\n', f);
    for (size_t N = lo; N <= hi; N++) {
        fprintf(f, csv ? "%zu" : "%-7zu", N);
        for (size_t c = 0; c < p->channels; c++)
            fprintf(f, csv ? ",%.6f" : " %10.5f", p->contrast[N][c]);
        fputc('\n', f);
    }
}

lam_status lam_summary_prediction(const lam_prediction *p, size_t lo, size_t hi, double mono_nm,
                                  const lam_setup *setup, const char *format, char **text,
                                  lam_error *err)
{
    int json = !strcmp(format, "json"), csv = !strcmp(format, "csv");
    if (!json && !csv && strcmp(format, "table"))
        return lam_error_set(err, LAM_EINVAL, "format %s: expected table, csv or json", format);
    lam__text t;
    lam_status st = lam__text_open(&t, err);
    if (st)
        return st;
    if (json) {
        cJSON *root = prediction_json(p, lo, hi, mono_nm, setup);
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
        prediction_table(t.f, p, lo, hi, mono_nm, setup, csv);
    }
    return lam__text_close(&t, text, err);
}

lam_status lam_summary_predict(const lam_setup *setup, size_t lo, size_t hi, double mono_nm,
                               const char *format, char **text, lam_error *err)
{
    lam_model *m = NULL;
    lam_prediction *p = malloc(sizeof *p); /* large: not on the stack */
    double ox = lam_setup_oxide(setup);
    lam_status st = p ? LAM_OK : lam_error_set(err, LAM_ENOMEM, "out of memory");
    if (!st && ((st = lam_model_alloc(setup, hi, mono_nm, &m, err)) ||
                (st = lam_model_eval(m, ox < 0 ? 0 : ox, setup->sheet.fermi_ev, p, err))))
        lam_error_set_file(err, setup->source);
    if (!st)
        st = lam_summary_prediction(p, lo, hi, mono_nm, setup, format, text, err);
    free(p);
    lam_model_free(m);
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
    fprintf(f, "%zu labelled region(s) in %zu image(s); chi2 %.1f for %.0f values; model floor "
               "%.1f %%\n", r->labelled, r->images, r->chi2, r->dof, 100 * r->floor_rel);
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
