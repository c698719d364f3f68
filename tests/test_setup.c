/* test_setup.c - the lamina-setup/1 reader and writer: defaults against
 * calib/default-setup.json, a range error for every key, strict keys with
 * their suggestions, messages written once, the round trip
 * lam_setup_save -> lam_setup_load, setters that record their keys, stack
 * files, a setup built from a file and given values, and the fuzz seeds (which must stay valid inputs). The ranges
 * checked are those documented in docs/setup.md. */
#include "check.h"
#include "lamina/batch.h"
#include "lamina/render.h"
#include "lamina/setup.h"
#include "lamina/textfile.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <cjson/cJSON.h>
#include <gsl/gsl_errno.h>

#define HEAD "{\"schema\":\"lamina-setup/1\","

static lam_status parse(const char *json, lam_setup *s, lam_error *err)
{
    lam_setup_default(s);
    lam_error_clear(err);
    return lam_setup_parse(json, ".", s, err);
}

/* Parse a bad setup: the status, and every fragment in the message. */
static void refused(const char *json, lam_status want, const char *frag1, const char *frag2)
{
    lam_setup s;
    lam_error err;
    lam_status st = parse(json, &s, &err);
    check_int(st, want, "refused (%s): %s", json, err.message);
    check_true(strstr(err.message, frag1) && (!frag2 || strstr(err.message, frag2)),
               "message has '%s'%s%s: %s", frag1, frag2 ? " and " : "", frag2 ? frag2 : "",
               err.message);
    lam_setup_clear(&s);
}

static size_t count(const char *hay, const char *needle)
{
    size_t n = 0;
    for (const char *p = strstr(hay, needle); p; p = strstr(p + 1, needle))
        n++;
    return n;
}

static void test_defaults(void)
{
    lam_setup d, f;
    lam_setup_default(&d);
    lam_setup_default(&f);
    lam_error err;
    lam_error_clear(&err);
    check_int(lam_setup_load("calib/default-setup.json", &f, &err), LAM_OK,
              "calib/default-setup.json loads (%s)", err.message);
    check_abs(f.objective_na, d.objective_na, 0, "calib file = compiled: objective NA");
    check_abs(f.illumination_na, d.illumination_na, 0, "calib file = compiled: illumination NA");
    check_abs(f.layer_nm[0], d.layer_nm[0], 0, "calib file = compiled: oxide");
    for (int c = 0; c < 3; c++) {
        check_abs(f.camera.centre_nm[c], d.camera.centre_nm[c], 0, "calib = compiled: centre %d",
                  c);
        check_abs(f.camera.fwhm_nm[c], d.camera.fwhm_nm[c], 0, "calib = compiled: FWHM %d", c);
    }
    check_abs(f.illuminant.kelvin, d.illuminant.kelvin, 0, "calib file = compiled: lamp");
    size_t n;
    const lam_setup_number *num = lam_setup_numbers(&n);
    for (size_t i = 0; i < n; i++) {
        double a = *(const double *)((const char *)&f + num[i].offset);
        double b = *(const double *)((const char *)&d + num[i].offset);
        check_abs(a, b, 0, "calib file = compiled: %s", num[i].key);
    }
    size_t own = 0; /* numbers listed under their own key */
    for (size_t i = 0; i < n; i++)
        own += num[i].records == NULL;
    check_int(d.defaulted_count, 13 + own, "the defaults list every key (13 others, %zu numbers)",
              own);
    check_true(!lam_setup_is_default(&f, "camera") && lam_setup_is_default(&d, "camera"),
               "defaulted keys are tracked");
    /* The visible response stays 'not given' so that the analysis keeps its
     * wide prior on it (docs/setup.md, "uncertainty"). */
    check_true(f.defaulted_count == 2 && lam_setup_is_default(&f, "um_per_px") &&
                   lam_setup_is_default(&f, "conductivity.response"),
               "the calib file gives every key but the pixel size (null: unknown) and the "
               "visible response (left to the analysis)");
    lam_setup_clear(&f);
}

/* Every number key: above and below its range, and of the wrong type. */
static void test_ranges(void)
{
    size_t n;
    const lam_setup_number *num = lam_setup_numbers(&n);
    check_true(n >= 8, "the number table has the documented keys (%zu)", n);
    for (size_t i = 0; i < n; i++) {
        const double bad[2] = {num[i].hi + 1 + fabs(num[i].hi), num[i].lo - 1 - fabs(num[i].lo)};
        for (int k = 0; k < 2; k++) {
            /* "a.b.c" as {"a":{"b":{"c":value}}} */
            char json[320], open[200] = "", close[16] = "";
            const char *part = num[i].key, *dot;
            while ((dot = strchr(part, '.'))) {
                size_t len = strlen(open);
                snprintf(open + len, sizeof open - len, "\"%.*s\":{", (int)(dot - part), part);
                strcat(close, "}");
                part = dot + 1;
            }
            snprintf(json, sizeof json, HEAD "%s\"%s\":%g%s}", open, part, bad[k], close);
            refused(json, LAM_ERANGE, num[i].key, "is outside");
        }
    }
    /* the keys outside the table, with the ranges of docs/setup.md */
    refused(HEAD "\"objective\":{\"illumination_na\":1.2}}", LAM_ERANGE,
            "key objective.illumination_na: 1.2 is outside 0 to 0.999", NULL);
    refused(HEAD "\"objective\":{\"na\":-0.1}}", LAM_ERANGE, "key objective.na", NULL);
    refused(HEAD "\"objective\":{\"cone_nodes\":200}}", LAM_ERANGE, "objective.cone_nodes", NULL);
    refused(HEAD "\"illuminant\":{\"kind\":\"blackbody\",\"kelvin\":500}}", LAM_ERANGE,
            "illuminant.kelvin", NULL);
    refused(HEAD "\"camera\":{\"kind\":\"gaussian\",\"channels\":[{\"centre_nm\":600,\"fwhm_nm\":"
                 "80},{\"centre_nm\":900,\"fwhm_nm\":80},{\"centre_nm\":450,\"fwhm_nm\":80}]}}",
            LAM_ERANGE, "camera.channels[1].centre_nm", NULL);
    refused(HEAD "\"camera\":{\"kind\":\"gaussian\",\"channels\":[{\"centre_nm\":600,\"fwhm_nm\":"
                 "80},{\"centre_nm\":500,\"fwhm_nm\":80},{\"centre_nm\":450,\"fwhm_nm\":0}]}}",
            LAM_ERANGE, "camera.channels[2].fwhm_nm", NULL);
    refused(HEAD "\"substrate\":{\"stack\":[{\"material\":\"SiO2\",\"thickness_nm\":-5}]}}",
            LAM_ERANGE, "substrate.stack[0].thickness_nm", NULL);
    refused(HEAD "\"encoding\":{\"gamma\":9}}", LAM_ERANGE, "encoding.gamma", NULL);
    refused(HEAD "\"spectrum\":{\"min_nm\":700,\"max_nm\":500}}", LAM_ERANGE, "spectrum", NULL);
    refused(HEAD "\"material\":\"MoTe2\"}", LAM_ERANGE, "key material", "MoTe2");
    refused(HEAD "\"fermi_eV\":\"high\"}", LAM_EFORMAT, "key fermi_eV: expected a number", NULL);
    refused(HEAD "\"spectrum\":5}", LAM_EFORMAT, "key spectrum: expected an object", NULL);
    refused("{\"schema\":\"lamina-setup/2\"}", LAM_EFORMAT, "schema", "lamina-setup/1");
    refused(HEAD "\"fermi_eV\": NaN}", LAM_EFORMAT, "not valid JSON", NULL);
    refused(HEAD "\"camera\":{\"kind\":\"fisheye\"}}", LAM_EFORMAT, "camera.kind", "gaussian");
}

static void test_strict_keys(void)
{
    /* the misspellings seen in use (issue 10) */
    refused(HEAD "\"objective\":{\"illumination_NA\":0.5}}", LAM_EFORMAT,
            "unknown key objective.illumination_NA; did you mean objective.illumination_na?",
            "case-sensitive");
    refused(HEAD "\"um_per_pixel\":0.1}", LAM_EFORMAT, "unknown key um_per_pixel",
            "did you mean um_per_px?");
    refused(HEAD "\"camera\":{\"kind\":\"gaussian\",\"channels\":[{\"centre_nm\":600,\"fwhm\":80},"
                 "{},{}]}}",
            LAM_EFORMAT, "camera.channels[0].fwhm", "did you mean camera.channels[0].fwhm_nm?");
    refused(HEAD "\"conductivity\":{\"puddles_eV\":0.05}}", LAM_EFORMAT,
            "did you mean conductivity.puddle_eV?", NULL);
    refused(HEAD "\"spectrum\":{\"step\":1}}", LAM_EFORMAT, "unknown key spectrum.step", NULL);
    refused(HEAD "\"lens\":{}}", LAM_EFORMAT, "unknown key lens (known at the top level",
            "objective");
    refused(HEAD "\"fermi_eV\":0.1,\"fermi_eV\":0.3}", LAM_EFORMAT, "fermi_eV: given twice", NULL);
    refused(HEAD "\"illuminant\":{\"kind\":\"led-white\",\"kelvin\":5000}}", LAM_EFORMAT,
            "illuminant.kelvin: only read with kind blackbody", NULL);
    refused(HEAD "\"camera\":{\"kind\":\"Gaussian\"}}", LAM_EFORMAT, "did you mean gaussian?",
            "case-sensitive");
    refused(HEAD "\"objective\":{\"pupil_weight\":\"sine\"}}", LAM_EFORMAT,
            "objective.pupil_weight", "did you mean sin?");
    refused(HEAD "\"encoding\":\"auto\"}", LAM_EFORMAT, "key encoding", "srgb or linear");
    refused(HEAD "\"substrate\":{\"stack\":[{\"material\":\"SiO2\",\"thickness\":90}]}}",
            LAM_EFORMAT, "substrate.stack[0].thickness",
            "did you mean substrate.stack[0].thickness_nm?");
    lam_setup s;
    lam_error err;
    check_int(parse(HEAD "\"_comment\":\"Bench 3\",\"objective\":{\"_note\":\"x\",\"na\":0.5},"
                         "\"calibration\":{\"anything\":1}}",
                    &s, &err),
              LAM_OK, "comments ('_' keys) and the calibration record are accepted (%s)",
              err.message);
    check_abs(s.illumination_na, 0.5, 0, "NA alone sets the illumination NA too");
    lam_setup_clear(&s);
}

/* Context added to a lower-level message appears once (no overlapping
 * vsnprintf, issue 11 item 3). */
static void test_messages_once(void)
{
    lam_setup s;
    lam_error err;
    parse(HEAD "\"substrate\":{\"base\":\"unobtainium\"}}", &s, &err);
    check_int(err.status, LAM_EFORMAT, "an unknown material in a file is a file error");
    check_int(count(err.message, "substrate.base"), 1, "key named once: %s", err.message);
    check_int(count(err.message, "unobtainium"), 1, "material named once: %s", err.message);
    lam_setup_clear(&s);
    lam_scene sc;
    lam_error_clear(&err);
    lam_status st = lam_scene_parse("{\"schema\":\"lamina-scene/1\",\"setup\":{\"schema\":"
                                    "\"lamina-setup/1\",\"objective\":{\"illumination_NA\":0.5}}}",
                                    ".", &sc, &err);
    check_int(st, LAM_EFORMAT, "an inline setup with a misspelt key is refused");
    check_int(count(err.message, "key setup: "), 1, "setup prefix once: %s", err.message);
    check_int(count(err.message, "illumination_NA"), 1, "key named once: %s", err.message);
    lam_error_clear(&err);
    st = lam_scene_parse("{\"schema\":\"lamina-scene/1\",\"flakes\":[{\"layers\":0,"
                         "\"circle\":[5,5,3]}]}",
                         ".", &sc, &err);
    check_int(st, LAM_ERANGE, "a flake of 0 layers is refused");
    check_str(err.message, "key flakes[0].layers: 0 is outside 1 to 40", "scene message");
    lam_error_clear(&err);
    st = lam_scene_parse("{\"schema\":\"lamina-scene/1\",\"flakes\":[{\"layer\":2,"
                         "\"circle\":[5,5,3]}]}",
                         ".", &sc, &err);
    check_true(st == LAM_EFORMAT && strstr(err.message, "did you mean flakes[0].layers?"),
               "scene objects are strict too: %s", err.message);
}

static void test_setters(void)
{
    lam_setup s;
    lam_error err;
    lam_error_clear(&err);
    lam_setup_default(&s);
    check_int(lam_setup_set_na(&s, 0.9, &err), LAM_OK, "set NA 0.9");
    check_true(!lam_setup_is_default(&s, "objective.illumination_na"), "NA recorded as given");
    check_abs(s.objective_na, 0.9, 0, "objective NA raised to the illumination NA");
    check_int(lam_setup_set_fermi(&s, 0.35, &err), LAM_OK, "set Fermi level");
    check_true(!lam_setup_is_default(&s, "fermi_eV") && s.sheet.fermi_ev == 0.35,
               "Fermi level stored and recorded");
    check_int(lam_setup_set_um_per_px(&s, 0.2, &err), LAM_OK, "set pixel size");
    check_true(!lam_setup_is_default(&s, "um_per_px") && s.um_per_px == 0.2,
               "pixel size stored and recorded");
    check_int(lam_setup_set_material(&s, "Graphene", &err), LAM_OK, "material in any case");
    check_true(!lam_setup_is_default(&s, "material"), "material recorded");
    check_int(lam_setup_set_oxide(&s, 90, &err), LAM_OK, "set oxide");
    check_true(!lam_setup_is_default(&s, "substrate.stack") && lam_setup_oxide(&s) == 90,
               "oxide stored and recorded");
    check_int(lam_setup_set_number(&s, "conductivity.puddle_eV", 0.05, &err), LAM_OK,
              "set a table number by its key");
    check_true(!lam_setup_is_default(&s, "conductivity"), "recorded under its object");
    check_int(lam_setup_set_na(&s, 1.0, &err), LAM_ERANGE, "NA 1 in air refused");
    check_true(strstr(err.message, "objective.illumination_na") != NULL, "names the key: %s",
               err.message);
    check_int(lam_setup_set_fermi(&s, 3, &err), LAM_ERANGE, "Fermi level 3 eV refused");
    check_str(err.message, "key fermi_eV: 3 is outside -2 to 2", "setter message");
    check_int(lam_setup_set_um_per_px(&s, 0, &err), LAM_ERANGE, "pixel size 0 refused");
    check_int(lam_setup_set_oxide(&s, -1, &err), LAM_ERANGE, "negative oxide refused");
    check_int(lam_setup_set_material(&s, "MoTe2", &err), LAM_ERANGE, "MoTe2 refused (not modelled)");
    check_int(lam_setup_set_number(&s, "colour", 1, &err), LAM_EINVAL, "unknown number key");
    check_abs(s.sheet.fermi_ev, 0.35, 0, "a refused value leaves the setup unchanged");
    lam_setup_clear(&s);
}

/* Compare every field the file format carries. */
static void same_setup(const lam_setup *a, const lam_setup *b, const char *what)
{
    int ok = a->objective_na == b->objective_na && a->illumination_na == b->illumination_na &&
             a->pupil == b->pupil && a->cone_nodes == b->cone_nodes &&
             !strcmp(a->ambient.name, b->ambient.name) &&
             a->illuminant.kind == b->illuminant.kind &&
             a->illuminant.kelvin == b->illuminant.kelvin && a->camera.kind == b->camera.kind &&
             a->encoding.kind == b->encoding.kind && a->encoding.gamma == b->encoding.gamma &&
             a->layers == b->layers && !strcmp(a->base.name, b->base.name) &&
             a->sheet.model == b->sheet.model && a->sheet.exciton == b->sheet.exciton &&
             a->flake_as_film == b->flake_as_film && !strcmp(a->flake, b->flake);
    for (int c = 0; c < 3; c++)
        ok &= fabs(a->camera.centre_nm[c] - b->camera.centre_nm[c]) < 0.05 &&
              fabs(a->camera.fwhm_nm[c] - b->camera.fwhm_nm[c]) < 0.05;
    for (size_t i = 0; i < a->layers && i < b->layers; i++)
        ok &= fabs(a->layer_nm[i] - b->layer_nm[i]) < 0.005 &&
              !strcmp(a->layer_material[i].name, b->layer_material[i].name);
    size_t n;
    const lam_setup_number *num = lam_setup_numbers(&n);
    for (size_t i = 0; i < n; i++) {
        double x = *(const double *)((const char *)a + num[i].offset);
        double y = *(const double *)((const char *)b + num[i].offset);
        ok &= x == y || (isnan(x) && isnan(y)); /* NaN: uncertainty not given */
    }
    check_true(ok, "%s: every field survives the round trip", what);
}

static void test_round_trip(void)
{
    lam_setup a, b;
    lam_error err;
    lam_error_clear(&err);
    lam_setup_default(&a);
    check_int(lam_setup_load("samples/bench3-setup.json", &a, &err), LAM_OK, "bench3 loads");
    lam_setup_set_number(&a, "conductivity.puddle_eV", 0.07, NULL);
    lam_setup_set_number(&a, "spectrum.step_nm", 1, NULL);
    a.encoding = (lam_transfer){LAM_TRANSFER_GAMMA, 2.2};
    a.pupil = LAM_PUPIL_SIN;
    a.cone_nodes = 12;
    a.sheet.model = LAM_SHEET_UNIVERSAL;
    a.sheet.exciton = 0;
    lam_setup_set_oxide(&a, 91.5, NULL);
    char path[512];
    snprintf(path, sizeof path, "%s/round.json", check_tmpdir());
    cJSON *extra = cJSON_CreateObject();
    cJSON_AddNumberToObject(extra, "rms_after", 0.8);
    check_int(lam_setup_save(&a, path, extra, &err), LAM_OK, "save (%s)", err.message);
    cJSON_Delete(extra);
    lam_setup_default(&b);
    check_int(lam_setup_load(path, &b, &err), LAM_OK, "the saved setup loads back (%s)",
              err.message);
    same_setup(&a, &b, "bench3 with changes");
    /* every value is written, but what was not given stays not given
     * ("assumed"): a calibrated profile must read back as it was fitted */
    check_true(a.defaulted_count > 0, "bench3 leaves some keys to the defaults (%zu)",
               a.defaulted_count);
    check_int(b.defaulted_count, a.defaulted_count, "as many keys not given after the round trip");
    for (size_t i = 0; i < a.defaulted_count; i++)
        check_true(lam_setup_is_default(&b, a.defaulted[i]), "'%s' stays not given",
                   a.defaulted[i]);
    lam_setup_clear(&a);
    lam_setup_clear(&b);
    /* the defaults, with the pixel size unknown (written as null) */
    lam_setup_default(&a);
    lam_setup_save(&a, path, NULL, &err);
    lam_setup_default(&b);
    check_int(lam_setup_load(path, &b, &err), LAM_OK, "saved defaults load back (%s)", err.message);
    same_setup(&a, &b, "defaults");
    check_true(lam_setup_is_default(&b, "um_per_px"), "um_per_px null stays unknown");
    lam_setup_clear(&b);
}

/* A profile written into another folder than its setup's names the
 * setup's tables so that it loads from any working folder (the tables are
 * found relative to the profile), and "assumed" keys are checked. */
static void test_profile_elsewhere(void)
{
    char a_dir[512], b_dir[512], path[600], rel[600];
    snprintf(a_dir, sizeof a_dir, "%s/scope", check_tmpdir());
    snprintf(b_dir, sizeof b_dir, "%s/profiles/today", check_tmpdir());
    snprintf(path, sizeof path, "%s/profiles", check_tmpdir());
    check_true(mkdir(a_dir, 0755) == 0 && mkdir(path, 0755) == 0 && mkdir(b_dir, 0755) == 0,
               "folders made");
    snprintf(path, sizeof path, "%s/lamp.csv", a_dir);
    FILE *f = fopen(path, "w");
    for (int nm = 380; f && nm <= 780; nm += 10)
        fprintf(f, "%s%d,%g\n", nm == 380 ? "wavelength_nm,power\n" : "", nm, 1 + nm / 1000.0);
    if (f)
        fclose(f);
    snprintf(path, sizeof path, "%s/setup.json", a_dir);
    f = fopen(path, "w");
    if (f) {
        fputs(HEAD "\"illuminant\": {\"kind\": \"table\", \"file\": \"lamp.csv\"}}", f);
        fclose(f);
    }
    lam_setup a, b;
    lam_error err;
    lam_error_clear(&err);
    lam_setup_default(&a);
    check_int(lam_setup_load(path, &a, &err), LAM_OK, "a setup with a lamp table (%s)",
              err.message);
    snprintf(path, sizeof path, "%s/profile.json", b_dir);
    check_int(lam_setup_save(&a, path, NULL, &err), LAM_OK, "saved elsewhere (%s)", err.message);
    lam_setup_default(&b);
    check_int(lam_setup_load(path, &b, &err), LAM_OK, "and read back from there (%s)",
              err.message);
    check_true(b.illuminant.kind == LAM_ILLUM_TABLE &&
                   b.illuminant.table.rows == a.illuminant.table.rows,
               "the same lamp table (%zu rows)", b.illuminant.table.rows);
    lam_setup_clear(&a);
    lam_setup_clear(&b);
    lam_path_relative(rel, sizeof rel, b_dir, a_dir);
    check_str(rel, "../../scope", "a folder two levels up and across");
    lam_path_relative(rel, sizeof rel, a_dir, path);
    check_str(rel, "../profiles/today/profile.json", "a file one level up and down");
    lam_path_relative(rel, sizeof rel, check_tmpdir(), path);
    check_str(rel, "profiles/today/profile.json", "a file inside the folder");
    refused(HEAD "\"assumed\": \"camera\"}", LAM_EFORMAT, "key assumed", "array");
    refused(HEAD "\"assumed\": [\"camera\", \"lens\"]}", LAM_EFORMAT, "key assumed", "'lens'");
    lam_setup s;
    check_int(parse(HEAD "\"camera\": {\"kind\": \"gaussian\", \"channels\": [{\"centre_nm\": "
                          "550, \"fwhm_nm\": 40}]}, \"assumed\": [\"camera\"]}",
                    &s, &err),
              LAM_OK, "an assumed camera (%s)", err.message);
    check_true(lam_setup_is_default(&s, "camera") && s.camera.channels == 1,
               "is read but counts as not given");
    lam_setup_clear(&s);
}

/* A calibration's record of the substrate's colour: read, refused when
 * incomplete, and written back as it was read. */
static void test_substrate_colour(void)
{
    lam_setup s, b;
    lam_error err;
    const char *good = HEAD "\"substrate_colour\": {\"oxide_nm\": 291.5, \"oxide_sd_nm\": 0.3, "
                            "\"ln_level\": [0.1, -0.4, 0.3], \"lamp_tilt\": 0.02}}";
    check_int(parse(good, &s, &err), LAM_OK, "substrate_colour read (%s)", err.message);
    check_abs(s.substrate_colour.oxide_nm, 291.5, 0, "its oxide");
    check_abs(s.substrate_colour.ln_level[1], -0.4, 0, "its levels");
    check_abs(s.substrate_colour.stability, 0.01, 0, "stability defaults to 0.01");
    check_abs(s.substrate_colour.lamp_tilt, 0.02, 0, "lamp_tilt as given");
    char path[512];
    snprintf(path, sizeof path, "%s/colour.json", check_tmpdir());
    check_int(lam_setup_save(&s, path, NULL, &err), LAM_OK, "saved (%s)", err.message);
    lam_setup_default(&b);
    check_int(lam_setup_load(path, &b, &err), LAM_OK, "loads back (%s)", err.message);
    check_true(b.substrate_colour.oxide_nm == 291.5 && b.substrate_colour.ln_level[2] == 0.3 &&
                   b.substrate_colour.oxide_sd_nm == 0.3 && b.substrate_colour.lamp_tilt == 0.02,
               "the colour survives a round trip");
    lam_setup_clear(&s);
    lam_setup_clear(&b);
    lam_setup_default(&s);
    check_true(isnan(s.substrate_colour.oxide_nm), "none recorded by default");
    refused(HEAD "\"substrate_colour\": {\"oxide_nm\": 291.5}}", LAM_EFORMAT, "substrate_colour",
            "ln_level");
    refused(HEAD "\"substrate_colour\": {\"oxide_nm\": 291.5, \"ln_level\": [0.1, 0.2]}}",
            LAM_EFORMAT, "substrate_colour.ln_level", "3 numbers");
    refused(HEAD "\"substrate_colour\": {\"ln_level\": [0.1, 0.2, 0.3]}}", LAM_EFORMAT,
            "substrate_colour", "oxide_nm");
}

/* A second chip's colour: read, written back, refused when incomplete or
 * too near or far from the first chip's oxide. */
static void test_second_chip(void)
{
#define FIRST "\"substrate_colour\": {\"oxide_nm\": 291.5, \"ln_level\": [0.1, -0.4, 0.3], "
    lam_setup s, b;
    lam_error err;
    const char *good = HEAD FIRST "\"second\": {\"oxide_nm\": 283.2, \"oxide_sd_nm\": 0.3, "
                                  "\"ln_level\": [0.12, -0.41, 0.29]}}}";
    check_int(parse(good, &s, &err), LAM_OK, "a second chip read (%s)", err.message);
    check_abs(s.substrate_colour.second_oxide_nm, 283.2, 0, "its oxide");
    check_abs(s.substrate_colour.second_ln_level[2], 0.29, 0, "its levels");
    char path[512];
    snprintf(path, sizeof path, "%s/second.json", check_tmpdir());
    check_int(lam_setup_save(&s, path, NULL, &err), LAM_OK, "saved (%s)", err.message);
    lam_setup_default(&b);
    check_int(lam_setup_load(path, &b, &err), LAM_OK, "loads back (%s)", err.message);
    check_true(b.substrate_colour.second_oxide_nm == 283.2 &&
                   b.substrate_colour.second_oxide_sd_nm == 0.3 &&
                   b.substrate_colour.second_ln_level[0] == 0.12,
               "the second chip survives a round trip");
    lam_setup_clear(&s);
    lam_setup_clear(&b);
    lam_setup_default(&s);
    check_true(isnan(s.substrate_colour.second_oxide_nm), "none by default");
    snprintf(path, sizeof path, "%s/first.json", check_tmpdir());
    check_true(!parse(HEAD FIRST "\"oxide_sd_nm\": 0.3}}", &s, &err) &&
                   !lam_setup_save(&s, path, NULL, &err),
               "a profile with one chip saved");
    char *text = check_slurp(path, NULL);
    check_true(text && !strstr(text, "second"), "... writes no second chip");
    free(text);
    lam_setup_clear(&s);
    refused(HEAD FIRST "\"second\": {\"oxide_nm\": 283.2}}}", LAM_EFORMAT,
            "substrate_colour.second", "ln_level");
    refused(HEAD FIRST "\"second\": {\"oxide_nm\": 292.5, \"ln_level\": [0, 0, 0]}}}",
            LAM_ERANGE, "substrate_colour.second.oxide_nm", "2 to 30 nm");
    refused(HEAD FIRST "\"second\": {\"oxide_nm\": 90, \"ln_level\": [0, 0, 0]}}}",
            LAM_ERANGE, "substrate_colour.second.oxide_nm", "2 to 30 nm");
#undef FIRST
}

static void test_stack_file(void)
{
    char path[512];
    snprintf(path, sizeof path, "%s/stack.json", check_tmpdir());
    FILE *fp = fopen(path, "w");
    fputs("{\"stack\":[{\"material\":\"hBN\",\"thickness_nm\":20},{\"material\":\"SiO2\","
          "\"thicknes_nm\":90}],\"base\":\"Si\"}",
          fp);
    fclose(fp);
    lam_setup s;
    lam_error err;
    lam_error_clear(&err);
    lam_setup_default(&s);
    check_int(lam_setup_load_stack(path, &s, &err), LAM_EFORMAT, "a stack with a misspelt key");
    check_true(strstr(err.message, "unknown key stack[1].thicknes_nm; did you mean "
                                   "stack[1].thickness_nm?") &&
                   strstr(err.file, "stack.json"),
               "stack keys named without a prefix, file recorded: %s (%s)", err.message, err.file);
    lam_setup_clear(&s);
}

/* lam_setup_build: file, then the given values through the setters (so
 * defaults_used does not list them), refusals as bad options, and the
 * setup hash of what was given. samples/bench3-setup.json is demo data. */
static void test_build(void)
{
    lam_setup_overrides o;
    lam_setup_overrides_init(&o);
    lam_setup s, d;
    lam_error err;
    lam_error_clear(&err);
    lam_setup_default(&d);
    check_int(lam_setup_build(&o, &s, &err), LAM_OK, "nothing given: the defaults");
    check_int((long long)s.defaulted_count, (long long)d.defaulted_count, "all keys defaulted");
    lam_setup_clear(&s);
    o.setup_file = "samples/bench3-setup.json";
    o.oxide_nm = 90;
    o.na = 0.3;
    o.fermi_ev = 0.1;
    o.um_per_px = 0.25;
    check_int(lam_setup_build(&o, &s, &err), LAM_OK, "file and values (%s)", err.message);
    check_abs(lam_setup_oxide(&s), 90, 0, "--oxide over the file's 285 nm");
    check_abs(s.illumination_na, 0.3, 0, "--na");
    check_abs(s.sheet.fermi_ev, 0.1, 0, "--fermi");
    check_abs(s.um_per_px, 0.25, 0, "--um-per-px");
    check_abs(s.objective_na, 0.8, 0, "the file's objective NA kept");
    check_true(!lam_setup_is_default(&s, "objective.illumination_na") &&
                   !lam_setup_is_default(&s, "fermi_eV") && !lam_setup_is_default(&s, "um_per_px"),
               "given values are not listed as defaults");
    lam_setup_clear(&s);
    char h1[LAM_BATCH_HASH_LEN], h2[LAM_BATCH_HASH_LEN];
    lam_analysis_options ao = lam_analysis_options_default();
    lam_batch_overrides_hash(&o, &ao, h1);
    lam_batch_overrides_hash(&o, &ao, h2);
    check_str(h1, h2, "the same values, the same hash");
    o.fermi_ev = 0.2;
    lam_batch_overrides_hash(&o, &ao, h2);
    check_true(strcmp(h1, h2) != 0, "another Fermi level, another hash");
    o.na = 1.2;
    check_int(lam_setup_build(&o, &s, &err), LAM_EINVAL, "NA 1.2 in air is a bad option");
    check_str(err.message, "--na: key objective.illumination_na: 1.2 is outside 0 to 0.999",
              "the option named before the setter's message");
    check_str(err.file, "", "no file for an option");
    lam_setup_overrides_init(&o);
    o.setup_file = "tests/data/no-such-setup.json";
    lam_error_clear(&err);
    check_true(lam_setup_build(&o, &s, &err) != LAM_OK && strstr(err.file, "no-such-setup"),
               "a missing setup file is named: %s (%s)", err.message, err.file);
}

/* The hand-written fuzz seeds stay valid inputs (their mutations reach
 * deep into the readers only from a valid start). */
static void test_seeds(void)
{
    static const struct { const char *path; int scene; } seeds[] = {
        {"tests/fuzz/corpus/setup/bench3.json", 0}, {"tests/fuzz/corpus/setup/default.json", 0},
        {"tests/fuzz/corpus/setup/full.json", 0},   {"tests/fuzz/corpus/scene/c11.json", 1},
        {"tests/fuzz/corpus/scene/tiny.json", 1},   {"tests/fuzz/corpus/scene/inline.json", 1}};
    for (size_t i = 0; i < sizeof seeds / sizeof seeds[0]; i++) {
        char *text = NULL;
        lam_error err;
        lam_error_clear(&err);
        lam_status st = lam_text_load(seeds[i].path, 1u << 20, "seed", &text, &err);
        if (!st && seeds[i].scene) {
            lam_scene sc;
            if (!(st = lam_scene_parse(text, "samples", &sc, &err)))
                lam_scene_clear(&sc);
        } else if (!st) {
            lam_setup s;
            lam_setup_default(&s);
            st = lam_setup_parse(text, "samples", &s, &err);
            lam_setup_clear(&s);
        }
        free(text);
        check_int(st, LAM_OK, "seed %s parses (%s)", seeds[i].path, err.message);
    }
}

int main(void)
{
    check_begin("test_setup");
    gsl_set_error_handler_off();
    test_defaults();
    test_ranges();
    test_strict_keys();
    test_messages_once();
    test_setters();
    test_round_trip();
    test_substrate_colour();
    test_second_chip();
    test_profile_elsewhere();
    test_stack_file();
    test_build();
    test_seeds();
    return check_summary();
}
