/* test_thickness.c - hBN thickness per region (lamina/thickness.h): the
 * posterior's modes on a single-wavelength table (interference orders).
 * The figures on the independent generator's images are in
 * test_crystals_synth.c (quick) and build/tests/robust/crystals (full). */
#include "check.h"
#include "lamina/analyze.h"
#include "lamina/thickness.h"
#include "lamina/summary.h"
#include <cjson/cJSON.h>
#include <stdlib.h>

#include <complex.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

/* A 1-channel table at one wavelength and normal incidence. */
static lam_thickness_table *mono_table(double nm, double oxide, lam_model **m)
{
    lam_setup s;
    lam_setup_default(&s);
    lam_setup_set_material(&s, "hBN", NULL);
    lam_setup_set_na(&s, 0, NULL);
    lam_setup_set_oxide(&s, oxide, NULL);
    lam_thickness_table *t = NULL;
    if (!lam_model_alloc(&s, 1, nm, m, NULL)) {
        lam_model_point p = lam_model_point_default(*m);
        double w = 1;
        lam_thickness_options o = lam_thickness_options_default();
        lam_thickness_table_build(*m, &p, &oxide, &w, 1, 1.0, 0.02, &o, &t, NULL);
    }
    lam_setup_clear(&s);
    return t;
}

static void test_modes(void)
{
    lam_model *m = NULL;
    lam_thickness_table *t = mono_table(550, 285, &m);
    if (!check_true(t != NULL, "a 550 nm table"))
        return;
    lam_thickness_noise nz = {1, {0.003}, 0.03};
    lam_thickness_options o = lam_thickness_options_default();
    lam_est_region r;
    memset(&r, 0, sizeof r);
    r.var[0] = 1e-6;
    r.use = 1;
    /* one channel cannot tell interference orders apart: a thick film's
     * contrast recurs every ~125 nm of hBN at 550 nm */
    double d = 150, c[1][LAM_MAX_CHANNELS];
    lam_model_point p = lam_model_point_default(m);
    lam_model_eval_films(m, &p, 1.0, &d, 1, c, NULL);
    r.mean[0] = c[0][0];
    lam_thickness_result res;
    lam_thickness_infer(t, &nz, &r, &o, &res);
    check_true(res.evaluated && res.modes >= 2 && res.order_ambiguous,
               "a 150 nm film seen at one wavelength: several orders, flagged (%zu modes)",
               res.modes);
    int found = 0;
    for (size_t k = 0; k < res.modes; k++)
        found |= d >= res.mode[k].lo && d <= res.mode[k].hi;
    check_true(found, "one reported mode covers the true 150 nm");
    double sum = 0;
    for (size_t k = 0; k < res.modes; k++)
        sum += res.mode[k].probability;
    check_true(sum <= res.p_film + 1e-9 && res.mode[0].probability >= res.mode[res.modes - 1].probability,
               "modes sorted by probability, within the film's posterior");
    /* a bare-substrate measurement */
    r.mean[0] = 0;
    lam_thickness_infer(t, &nz, &r, &o, &res);
    check_true(res.p_substrate > res.p_film, "zero contrast: the substrate is most probable");
    /* far outside what a film of 0.3-300 nm gives: unmodelled */
    r.mean[0] = 40;
    lam_thickness_infer(t, &nz, &r, &o, &res);
    check_true(res.p_unmodelled > 0.5, "contrast 40: unmodelled (p %.3f)", res.p_unmodelled);
    /* a thin film: one order, interval about the truth */
    d = 5;
    lam_model_eval_films(m, &p, 1.0, &d, 1, c, NULL);
    r.mean[0] = c[0][0];
    lam_thickness_infer(t, &nz, &r, &o, &res);
    check_true(res.evaluated && res.lo <= 5 && res.hi >= 5 && res.hi / res.lo < 1.3,
               "5 nm: the most probable mode's 95 %% interval [%.2f, %.2f] holds it", res.lo,
               res.hi);
    lam_thickness_table_free(t);
    lam_model_free(m);
}

/* The film phases a model keeps between evaluations (model.c
 * film_table_for: per index scale, cone and thickness table) give the
 * numbers a model without them gives: evaluations at four index scales
 * (one more than the tables kept, so one is evicted and made again), two
 * oxides and two NAs, in an order that revisits each, compared bit for
 * bit with a fresh copy of the model (lam_model_clone: empty caches);
 * a table too large to keep (2000 thicknesses) takes the other path. The
 * check fails when a table is found without its NA in the key (7 of 24
 * then differ). */
static void test_film_tables(void)
{
    lam_setup s;
    lam_setup_default(&s);
    lam_setup_set_material(&s, "hBN", NULL);
    s.grid_step_nm = 10; /* the oxide profile's coarse model (thickness_stage.c) */
    s.cone_nodes = 4;
    lam_model *m = NULL;
    static double d[2000], got[2000][LAM_MAX_CHANNELS], want[2000][LAM_MAX_CHANNELS];
    for (size_t j = 0; j < 2000; j++)
        d[j] = 0.5 + 0.15 * (double)j;
    if (!check_int(lam_model_alloc(&s, 1, 0, &m, NULL), LAM_OK, "an hBN model")) {
        lam_setup_clear(&s);
        return;
    }
    const double scale[4] = {0.9, 1.0, 1.1, 1.2}, oxide[2] = {285, 300}, na[2] = {0.5, 0.55};
    size_t same = 0, tried = 0;
    for (size_t k = 0; k < 24; k++) {
        lam_model_point p = lam_model_point_default(m);
        p.v[LAM_MP_OXIDE] = oxide[(k / 4) % 2];
        p.v[LAM_MP_NA] = na[(k / 6) % 2];
        size_t count = k == 23 ? 2000 : 200, f = k % 8 == 7 ? 3 : k % 3;
        lam_model *fresh = NULL;
        if (lam_model_clone(m, &fresh, NULL) ||
            lam_model_eval_films(m, &p, scale[f], d, count, got, NULL) ||
            lam_model_eval_films(fresh, &p, scale[f], d, count, want, NULL)) {
            lam_model_free(fresh);
            break;
        }
        tried++;
        same += !memcmp(got, want, count * sizeof *got);
        lam_model_free(fresh);
    }
    check_true(tried == 24 && same == tried,
               "film phases kept between evaluations: %zu of %zu evaluations bit-identical to a "
               "fresh model's", same, tried);
    lam_model_free(m);
    lam_setup_clear(&s);
}

/* lam_model_eval_films_oxides gives what one lam_model_eval_films per
 * oxide gives, to the bit: seven oxides (more than the six substrates a
 * model keeps, so they go in two groups, and one repeated), 300
 * thicknesses (a table the model keeps) and 2000 (one it makes each
 * time), reflection and transmission. */
static void test_films_at_oxides(void)
{
    static const double oxide[7] = {280, 285, 290, 300, 285, 95, 310};
    static double d[2000], one[2000][LAM_MAX_CHANNELS], all[7 * 2000][LAM_MAX_CHANNELS];
    for (size_t j = 0; j < 2000; j++)
        d[j] = 0.5 + 0.15 * (double)j;
    size_t same = 0, tried = 0;
    /* transmission: a film on a stamp (a transparent base; the film's SiO2
     * is there for the oxide to move) */
    static const char *stamp = "{\"schema\":\"lamina-setup/1\",\"material\":\"hBN\","
                               "\"observation\":\"transmission\",\"substrate\":{\"stack\":"
                               "[{\"material\":\"SiO2\",\"thickness_nm\":285}],"
                               "\"base\":\"PDMS\"}}";
    for (int transmission = 0; transmission < 2; transmission++) {
        lam_setup s;
        lam_setup_default(&s);
        if (!transmission)
            lam_setup_set_material(&s, "hBN", NULL);
        else if (!check_int(lam_setup_parse(stamp, ".", &s, NULL), LAM_OK, "a stamp's setup")) {
            lam_setup_clear(&s);
            break;
        }
        lam_model *m = NULL, *fresh = NULL;
        for (size_t count = 300; count <= 2000; count += 1700) {
            if (lam_model_alloc(&s, 1, 0, &m, NULL) || lam_model_clone(m, &fresh, NULL))
                break;
            lam_model_point p = lam_model_point_default(m);
            if (lam_model_eval_films_oxides(m, &p, oxide, 7, 1.05, d, count, all, NULL))
                break;
            for (size_t o = 0; o < 7; o++) {
                p.v[LAM_MP_OXIDE] = oxide[o];
                tried++;
                same += !lam_model_eval_films(fresh, &p, 1.05, d, count, one, NULL) &&
                        !memcmp(one, all + o * count, count * sizeof *one);
            }
            lam_model_free(m);
            lam_model_free(fresh);
            m = fresh = NULL;
        }
        lam_model_free(m);
        lam_model_free(fresh);
        lam_setup_clear(&s);
    }
    check_true(tried == 28 && same == tried,
               "films at seven oxides in one call: %zu of %zu bit-identical to one call each",
               same, tried);
}

/* The terminal's text for hBN results (summary.c): the batch table lists
 * the thicknesses with the target marked, an hBN-only batch has no
 * monolayer list, the watch line gives the range. */
static void test_summary(void)
{
    const char *text =
        "{\"substrate\":{\"oxide_nm\":{\"estimate\":287.5}},\"regions\":["
        "{\"id\":1,\"layers\":null,\"label\":\"12 nm\",\"class\":\"thickness\",\"flags\":[],"
        "\"thickness_nm\":{\"estimate\":12.3,\"lo\":10.1,\"hi\":14.9,\"probability\":0.99,"
        "\"order_ambiguous\":false}},"
        "{\"id\":2,\"layers\":null,\"label\":\"31 nm\",\"class\":\"thickness\",\"flags\":[],"
        "\"thickness_nm\":{\"estimate\":30.8,\"lo\":26.3,\"hi\":37.3,\"probability\":0.63,"
        "\"order_ambiguous\":true}},"
        "{\"id\":3,\"layers\":null,\"label\":\"2 nm\",\"class\":\"thickness\",\"flags\":[\"small\"],"
        "\"thickness_nm\":{\"estimate\":2,\"lo\":1,\"hi\":3,\"probability\":1,"
        "\"order_ambiguous\":false}}],\"warnings\":[]}";
    cJSON *json = cJSON_Parse(text);
    lam_batch_item item;
    memset(&item, 0, sizeof item);
    item.path = "chip/t1.png";
    snprintf(item.stem, sizeof item.stem, "t1");
    item.json = json;
    lam_batch b;
    memset(&b, 0, sizeof b);
    b.count = 1;
    b.items = &item;
    lam_stage stage = lam_stage_default();
    lam_error err;
    lam_error_clear(&err);
    char *out = NULL;
    double target[2] = {10, 30};
    check_int(lam_summary_batch_target(&b, NULL, &stage, target, &out, &err), LAM_OK,
              "batch table with thicknesses");
    check_true(out && strstr(out, "flakes by thickness"), "the thickness table is there");
    check_true(out && strstr(out, "12.3") && strstr(out, "in target"), "12.3 nm is in the target");
    check_true(out && strstr(out, "order-ambiguous") && !strstr(out, "ambiguous in target"),
               "the ambiguous 30.8 nm flake is not called in target");
    check_true(out && !strstr(out, "monolayer candidates"), "no monolayer list for hBN only");
    check_true(out && !strstr(out, " 2.0 "), "small regions left out");
    check_true(out && strstr(out, "    0      2     0"), "two thickness regions in the 'thick' column:\n%s",
               out ? out : "");
    free(out);
    out = NULL;
    check_int(lam_summary_image_line("chip/t1.png", json, 0, &out, &err), LAM_OK, "watch line");
    check_true(out && strstr(out, "2 flakes 12.3-30.8 nm"), "the watch line gives the range (%s)",
               out ? out : "");
    free(out);
    cJSON_Delete(json);
}

int main(void)
{
    lam_error_init_gsl();
    check_begin("test_thickness");
    if (!check_refdata_dir())
        check_skip("tests/data/nk not found");
    test_modes();
    test_film_tables();
    test_films_at_oxides();
    test_summary();
    return check_summary();
}
