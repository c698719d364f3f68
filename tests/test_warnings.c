/* test_warnings.c - no silent wrong answers: the mistakes labs make with
 * files, exposures and setups, each on a micrograph from the independent
 * generator (tests/synth/; graphene from Weber et al., APL 97, 091904
 * (2010) as a 0.335 nm film per layer), each ending in the right answer
 * with a named warning, or an error naming the file and the problem. */
#include "check.h"
#include "robust/robust.h"
#include "lamina/analyze.h"
#include "lamina/error.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

static char dir[512];

typedef struct made {
    synth_scene sc;
    char img[600], setup[600];
} made;

/* Render one scene into dir/NAME with its setup (informed: the microscope
 * given). */
static int make(const synth_config *cfg, unsigned long long seed, synth_format fmt, int q,
                int informed, const char *name, made *m)
{
    synth_image im;
    if (synth_scene_make(cfg, seed, &m->sc))
        return -1;
    snprintf(m->img, sizeof m->img, "%s/%s.%s", dir, name, synth_format_ext(fmt));
    snprintf(m->setup, sizeof m->setup, "%s/%s.setup.json", dir, name);
    int rc = synth_render(&m->sc, &im);
    if (!rc) {
        rc = synth_save(&im, fmt, q, m->img) || synth_write_setup(&m->sc, fmt, informed, m->setup);
        synth_image_free(&im);
    }
    return rc;
}

/* Replace the first 'from' in a text file by 'to'. */
static int edit(const char *path, const char *from, const char *to)
{
    char *t = check_slurp(path, NULL);
    char *at = t ? strstr(t, from) : NULL;
    FILE *f = at ? fopen(path, "w") : NULL;
    if (f) {
        fwrite(t, 1, (size_t)(at - t), f);
        fputs(to, f);
        fputs(at + strlen(from), f);
        fclose(f);
    }
    free(t);
    return f ? 0 : -1;
}

static lam_status run(const char *img, const char *setup_path, lam_analysis **a, lam_error *err)
{
    lam_setup s;
    lam_setup_default(&s);
    lam_status st = lam_setup_load(setup_path, &s, err);
    lam_analysis_options o = lam_analysis_options_default();
    o.threads = 1;
    if (!st)
        st = lam_analyze(img, &s, &o, a, err);
    lam_setup_clear(&s);
    return st;
}

/* 1-3L flakes right, counted like tests/robust. */
static double right_share(const made *m, const lam_analysis *a, size_t *n)
{
    size_t ok = 0, total = 0;
    for (int o = 0; o < m->sc.nobj; o++) {
        const synth_object *ob = &m->sc.obj[o];
        if (ob->kind != SYNTH_OBJ_FLAKE || ob->layers > 3 || ob->area_px < 300)
            continue;
        size_t k = (size_t)ob->cy * a->width + (size_t)ob->cx;
        uint32_t l = a->seg->label[k];
        total++;
        ok += l && a->results[l - 1].layers == ob->layers;
    }
    *n = total;
    return total ? (double)ok / (double)total : 0;
}

static int has(const lam_analysis *a, const char *code)
{
    return lam_warnings_find(&a->warnings, code) != NULL;
}

static void base_config(synth_config *c)
{
    synth_config_init(c);
    c->response = SYNTH_RESP_WEBER;
    c->nominal_oxide_nm = 285;
    c->camera = SYNTH_CAM_GAUSS;
}

/* A 16-bit linear PNG with a setup that says sRGB (the bundled setup of
 * an 8-bit camera): every layer count doubled before. */
static void test_linear_as_srgb(void)
{
    synth_config c;
    base_config(&c);
    made m;
    lam_analysis *a = NULL;
    lam_error err;
    lam_error_clear(&err);
    check_int(make(&c, 700001, SYNTH_FMT_PNG16, 0, 1, "lin16", &m), 0, "16-bit scene made");
    check_int(edit(m.setup, "\"encoding\": \"linear\"", "\"encoding\": \"srgb\""), 0,
              "setup says sRGB");
    if (check_int(run(m.img, m.setup, &a, &err), LAM_OK, "16-bit file analyses (%s)", err.message)) {
        size_t n;
        double r = right_share(&m, a, &n);
        check_true(has(a, "encoding-mismatch"), "16-bit linear file under an sRGB setup: "
                                                "'encoding-mismatch' warning");
        check_true(r >= 0.95, "... and the layer counts right (%.0f %% of %zu)", 100 * r, n);
    }
    lam_analysis_free(a);
    synth_scene_free(&m.sc);
}

/* A monochrome camera behind a green filter: grey files analyse with a
 * one-channel setup, and are refused with a colour camera's setup. */
static void test_grey(void)
{
    synth_config c;
    base_config(&c);
    c.camera = SYNTH_CAM_MONO;
    made m;
    lam_analysis *a = NULL;
    lam_error err;
    lam_error_clear(&err);
    check_int(make(&c, 700002, SYNTH_FMT_PNG, 0, 1, "grey", &m), 0, "grey scene made");
    if (check_int(run(m.img, m.setup, &a, &err), LAM_OK, "grey image with a one-channel setup "
                                                           "analyses (%s)", err.message)) {
        size_t n;
        double r = right_share(&m, a, &n);
        check_true(r >= 0.9 || has(a, "monochrome"),
                   "monochrome camera: 1-3L right (%.0f %% of %zu), or the limit said", 100 * r,
                   n);
        check_true(has(a, "monochrome"), "one channel, oxide not measured: 'monochrome'");
    }
    lam_analysis_free(a);
    a = NULL;
    check_int(run(m.img, "samples/bench3-setup.json", &a, &err), LAM_EINVAL,
              "grey image with a colour camera's setup refused");
    check_true(strstr(err.message, "grey") && strstr(err.file, "grey.png"),
               "the error names the file (%s) and the mismatch: %s", err.file, err.message);
    lam_analysis_free(a);
    synth_scene_free(&m.sc);
}

static void test_exposure(void)
{
    synth_config c;
    base_config(&c);
    c.exposure = 1.15; /* the substrate's brightest channel past full scale */
    made m;
    lam_analysis *a = NULL;
    lam_error err;
    lam_error_clear(&err);
    check_int(make(&c, 700003, SYNTH_FMT_PNG, 0, 1, "bright", &m), 0, "overexposed scene made");
    lam_status st = run(m.img, m.setup, &a, &err);
    check_true(st == LAM_OK ? has(a, "saturated") : strstr(err.message, "saturated") != NULL,
               "overexposed: 'saturated' warning or an error that says so (%s)",
               st ? err.message : "analysed");
    lam_analysis_free(a);
    a = NULL;
    synth_scene_free(&m.sc);
    c.exposure = 0.015;
    check_int(make(&c, 700004, SYNTH_FMT_PNG, 0, 1, "dark", &m), 0, "dark scene made");
    if (check_int(run(m.img, m.setup, &a, &err), LAM_OK, "dark image analyses (%s)",
                  err.message))
        check_true(has(a, "underexposed"), "dark 8-bit image: 'underexposed' warning");
    lam_analysis_free(a);
    synth_scene_free(&m.sc);
}

/* A 90 nm chip analysed with a 285 nm profile. */
static void test_wrong_oxide(void)
{
    synth_config c;
    base_config(&c);
    c.nominal_oxide_nm = 90;
    made m;
    lam_analysis *a = NULL;
    lam_error err;
    lam_error_clear(&err);
    check_int(make(&c, 700005, SYNTH_FMT_PNG, 0, 1, "ox90", &m), 0, "90 nm scene made");
    check_int(edit(m.setup, "\"thickness_nm\": 90", "\"thickness_nm\": 285"), 0,
              "setup says 285 nm");
    if (check_int(run(m.img, m.setup, &a, &err), LAM_OK, "90 nm chip analyses (%s)",
                  err.message)) {
        size_t n;
        double r = right_share(&m, a, &n);
        check_true(has(a, "oxide-off-nominal"), "90 nm chip under 285 nm: 'oxide-off-nominal'");
        check_true(a->oxide.fitted && fabs(a->oxide.estimate - m.sc.phys.oxide_nm) < 6,
                   "... the oxide found (%.1f nm, true %.1f)", a->oxide.estimate,
                   m.sc.phys.oxide_nm);
        check_true(r >= 0.85, "... and the layer counts right (%.0f %% of %zu)", 100 * r, n);
        lam_analysis *b = NULL;
        check_int(edit(m.setup, "\"thickness_nm\": 285", "\"thickness_nm\": 90"), 0,
                  "setup corrected to 90 nm");
        if (check_int(run(m.img, m.setup, &b, &err), LAM_OK, "with the right setup (%s)",
                      err.message)) {
            int same = a->count == b->count;
            for (size_t i = 0; same && i < a->count; i++)
                same = a->results[i].layers == b->results[i].layers;
            check_true(same, "... the same layer counts as with the right setup");
        }
        lam_analysis_free(b);
    }
    lam_analysis_free(a);
    synth_scene_free(&m.sc);
}

/* The microscope not given: said, with what it costs. */
static void test_defaults(void)
{
    synth_config c;
    base_config(&c);
    made m;
    lam_analysis *a = NULL;
    lam_error err;
    lam_error_clear(&err);
    check_int(make(&c, 700006, SYNTH_FMT_PNG, 0, 0, "bare", &m), 0, "scene made");
    if (check_int(run(m.img, m.setup, &a, &err), LAM_OK, "analyses (%s)", err.message))
        check_true(has(a, "setup-defaults"), "camera, NA and lamp not given: 'setup-defaults'");
    lam_analysis_free(a);
    synth_scene_free(&m.sc);
}

/* A TMD without its camera: its counts are said to be in doubt (the
 * warning's figures come from make accuracy-crystals); with the camera
 * given, not. */
static void test_tmd_camera(void)
{
    synth_config c;
    base_config(&c);
    c.crystal = SYNTH_XTAL_MOS2;
    c.nk_source = 0;
    c.nominal_oxide_nm = 90;
    const char *names[2] = {"mos2-bare", "mos2-informed"};
    for (int informed = 0; informed < 2; informed++) {
        made m;
        lam_analysis *a = NULL;
        lam_error err;
        lam_error_clear(&err);
        check_int(make(&c, 700007, SYNTH_FMT_PNG, 0, informed, names[informed], &m), 0,
                  "MoS2 scene made");
        if (check_int(run(m.img, m.setup, &a, &err), LAM_OK, "analyses (%s)", err.message))
            check_true(has(a, "crystal-camera-unknown") == !informed,
                       "camera %s: 'crystal-camera-unknown' %s", informed ? "given" : "not given",
                       informed ? "absent" : "present");
        lam_analysis_free(a);
        synth_scene_free(&m.sc);
    }
}

int main(void)
{
    check_begin("test_warnings");
    lam_error_init_gsl();
    snprintf(dir, sizeof dir, "%s", check_tmpdir());
    test_linear_as_srgb();
    test_grey();
    test_exposure();
    test_wrong_oxide();
    test_defaults();
    test_tmd_camera();
    return check_summary();
}
