/* synth_scene.c - a scene from a config and a seed: the physics drawn
 * from one random stream, the layout from another (so fixing, say, the
 * camera does not move the flakes), then the raster and the per-object
 * channel values. */
#include "synth_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

static const char *resp_names[] = {"random", "sigma0", "weber", "song", "elsayed",
                                   "lamina-default"};

const char *synth_response_name(synth_response r)
{
    return r < SYNTH_RESP_COUNT ? resp_names[r] : "?";
}

int synth_response_parse(const char *name, synth_response *out)
{
    for (int i = 0; i < SYNTH_RESP_COUNT; i++)
        if (!strcmp(name, resp_names[i])) {
            *out = (synth_response)i;
            return 0;
        }
    return synth_fail("unknown response '%s' (sigma0, weber, song, elsayed, lamina-default)",
                      name);
}

void synth_config_init(synth_config *cfg)
{
    memset(cfg, 0, sizeof *cfg);
    cfg->um_per_px = cfg->nominal_oxide_nm = cfg->oxide_nm = cfg->na = NAN;
    cfg->fermi_eV = cfg->fermi_lo_eV = cfg->fermi_hi_eV = NAN;
    cfg->exposure = cfg->blur_px = cfg->lamp_kelvin = NAN;
    for (int k = 0; k < 3; k++)
        cfg->gauss_centre_nm[k] = cfg->gauss_fwhm_nm[k] = NAN;
    cfg->nk_source = -1;
    cfg->hbn_min_nm = cfg->hbn_max_nm = NAN;
}

static double pick(double given, double drawn)
{
    return isnan(given) ? drawn : given;
}

static void draw_optics(const synth_config *cfg, synth_rng *r, synth_physics *p)
{
    static const double nominal[3] = {90, 285, 300};
    int resp = synth_rng_int(r, SYNTH_RESP_SIGMA0, SYNTH_RESP_LAMINA_DEFAULT);
    p->response = cfg->response ? cfg->response : (synth_response)resp;
    double u = synth_rng_uniform(r, 0, 1);
    p->si = cfg->si ? cfg->si : u < 0.5 ? SYNTH_SI_GREEN : u < 0.75 ? SYNTH_SI_SCHINKE
                                                                     : SYNTH_SI_ASPNES;
    u = synth_rng_uniform(r, 0, 1);
    p->sio2 = cfg->sio2 ? cfg->sio2 : u < 0.75 ? SYNTH_SIO2_MALITSON : SYNTH_SIO2_GAO;
    p->pmma = synth_rng_int(r, 0, 1);
    p->nominal_oxide_nm = pick(cfg->nominal_oxide_nm, nominal[synth_rng_int(r, 0, 2)]);
    p->oxide_nm = pick(cfg->oxide_nm, p->nominal_oxide_nm + synth_rng_uniform(r, -12, 12));
    p->na = pick(cfg->na, synth_rng_uniform(r, 0.2, 0.8));
    int pupil = synth_rng_int(r, SYNTH_PUPIL_SINCOS, SYNTH_PUPIL_FILLED);
    p->pupil = cfg->pupil ? cfg->pupil : (synth_pupil)pupil;
    p->pupil_f = p->pupil == SYNTH_PUPIL_ANNULAR ? synth_rng_uniform(r, 0.3, 0.7)
                                                 : synth_rng_uniform(r, 0.5, 1.0);
    if (p->pupil == SYNTH_PUPIL_SINCOS || p->pupil == SYNTH_PUPIL_SIN)
        p->pupil_f = 0;
    int steps = synth_rng_int(r, 24, 48);
    p->cone_steps = cfg->cone_steps > 0 ? cfg->cone_steps : steps;
    p->kT_eV = SYNTH_KB_EVK * 295.0;
}

static void draw_camera(const synth_config *cfg, synth_rng *r, synth_physics *p)
{
    synth_lamp_draw(r, cfg->lamp, &p->lamp);
    if (p->lamp.kind == SYNTH_LAMP_BLACKBODY)
        p->lamp.kelvin = pick(cfg->lamp_kelvin, p->lamp.kelvin);
    synth_camera_draw(r, cfg->camera, &p->cam);
    for (int k = 0; k < 3 && p->cam.kind == SYNTH_CAM_GAUSS; k++) {
        p->cam.centre_nm[k] = pick(cfg->gauss_centre_nm[k], p->cam.centre_nm[k]);
        p->cam.fwhm_nm[k] = pick(cfg->gauss_fwhm_nm[k], p->cam.fwhm_nm[k]);
    }
    synth_camera_balance(p);
    p->exposure = pick(cfg->exposure, synth_rng_uniform(r, 0.35, 0.8));
    p->vignette = synth_rng_uniform(r, 0, 0.25);
    p->gradient = synth_rng_uniform(r, 0, 0.10);
    p->gradient_deg = synth_rng_uniform(r, 0, 360);
    if (cfg->no_flat_field)
        p->vignette = p->gradient = 0;
    p->blur_px = pick(cfg->blur_px, synth_rng_uniform(r, 0.5, 1.5));
    p->full_well_e = synth_rng_uniform(r, 5000, 30000);
    p->read_noise_e = synth_rng_uniform(r, 2, 12);
    if (cfg->noiseless)
        p->full_well_e = p->read_noise_e = 0;
    p->um_per_px = pick(cfg->um_per_px, synth_rng_uniform(r, 0.1, 0.25));
}

/* The crystal's n,k source; drawn after the optics and camera so that a
 * graphene scene's stream is what it always was. */
static void draw_crystal(const synth_config *cfg, synth_rng *r, synth_physics *p)
{
    static const int sources[SYNTH_XTAL_COUNT] = {1, 3, 2, 2, 1};
    p->crystal = cfg->crystal;
    if (p->crystal == SYNTH_XTAL_GRAPHENE)
        return;
    int n = sources[p->crystal];
    p->nk_source = cfg->nk_source >= 0 && cfg->nk_source < n ? cfg->nk_source
                                                               : synth_rng_int(r, 0, n - 1);
}

void synth_physics_draw(const synth_config *cfg, synth_rng *r, synth_physics *p)
{
    memset(p, 0, sizeof *p);
    draw_optics(cfg, r, p);
    draw_camera(cfg, r, p);
    draw_crystal(cfg, r, p);
    for (int k = 0; k < 3; k++) /* a white balance off the lamp's by a factor */
        for (int i = 0; i < SYNTH_NL && cfg->wb_drift[k] > 0; i++)
            p->weight[k][i] *= cfg->wb_drift[k];
}

static int check_config(const synth_config *cfg)
{
    if (cfg->width < 0 || cfg->height < 0 || cfg->width > 16384 || cfg->height > 16384)
        return synth_fail("image size %d x %d is outside 1..16384", cfg->width, cfg->height);
    if (!isnan(cfg->na) && (cfg->na < 0 || cfg->na >= 1))
        return synth_fail("NA %g is outside 0..0.99", cfg->na);
    if (!isnan(cfg->oxide_nm) && (cfg->oxide_nm < 0 || cfg->oxide_nm > 2000))
        return synth_fail("oxide %g nm is outside 0..2000", cfg->oxide_nm);
    if (cfg->n_doped < 0 || cfg->n_doped > 8 || cfg->n_flakes < 0 || cfg->n_flakes > 40)
        return synth_fail("n_doped %d (0..8) or n_flakes %d (0..40) out of range",
                          cfg->n_doped, cfg->n_flakes);
    if (cfg->response >= SYNTH_RESP_COUNT)
        return synth_fail("response %d unknown", (int)cfg->response);
    if (cfg->crystal >= SYNTH_XTAL_COUNT)
        return synth_fail("crystal %d unknown", (int)cfg->crystal);
    if ((!isnan(cfg->hbn_min_nm) && !(cfg->hbn_min_nm >= 0.3)) ||
        (!isnan(cfg->hbn_max_nm) && !(cfg->hbn_max_nm <= 1000)) ||
        (!isnan(cfg->hbn_min_nm) && !isnan(cfg->hbn_max_nm) && cfg->hbn_max_nm < cfg->hbn_min_nm))
        return synth_fail("hBN thickness range %g..%g nm is outside 0.3..1000", cfg->hbn_min_nm,
                          cfg->hbn_max_nm);
    if (!isnan(cfg->lamp_kelvin) && !(cfg->lamp_kelvin >= 1000 && cfg->lamp_kelvin <= 20000))
        return synth_fail("lamp temperature %g K is outside 1000..20000", cfg->lamp_kelvin);
    for (int k = 0; k < 3; k++)
        if (cfg->wb_drift[k] != 0 && !(cfg->wb_drift[k] >= 0.5 && cfg->wb_drift[k] <= 2))
            return synth_fail("white balance drift %g is outside 0.5..2", cfg->wb_drift[k]);
    for (int k = 0; k < 3; k++)
        if ((!isnan(cfg->gauss_centre_nm[k]) && !(cfg->gauss_centre_nm[k] > 300)) ||
            (!isnan(cfg->gauss_fwhm_nm[k]) && !(cfg->gauss_fwhm_nm[k] > 1)))
            return synth_fail("camera channel %d: centre or FWHM out of range", k);
    return 0;
}

/* Other crystals' flakes can be several times brighter than the substrate
 * (hBN on 90 nm oxide): the exposure is lowered, when needed, so that the
 * brightest flake stays below 92 % of full scale with the flat field's
 * peak - an exposure set to avoid clipping, as one sets it for bright
 * flakes (common practice). Graphene scenes are unchanged. */
static void cap_exposure(synth_scene *sc)
{
    synth_physics *p = &sc->phys;
    if (p->crystal == SYNTH_XTAL_GRAPHENE)
        return;
    double top = 0, bright = 1;
    for (int k = 0; k < p->cam.nc; k++)
        top = fmax(top, p->sub_value[k]);
    for (int i = 0; i < sc->nobj; i++)
        for (int k = 0; k < p->cam.nc; k++)
            if (sc->obj[i].kind == SYNTH_OBJ_FLAKE || sc->obj[i].kind == SYNTH_OBJ_FOLD)
                bright = fmax(bright, sc->obj[i].rel[k] * p->sub_value[k] / top);
    double peak = (1 + 0.5 * p->gradient);
    p->exposure = fmin(p->exposure, 0.92 / (bright * peak));
}

int synth_scene_make(const synth_config *cfg, uint64_t seed, synth_scene *out)
{
    return synth_scene_make2(cfg, seed, seed, out);
}

int synth_scene_make2(const synth_config *cfg, uint64_t physics_seed, uint64_t layout_seed,
                      synth_scene *out)
{
    memset(out, 0, sizeof *out);
    if (check_config(cfg))
        return -1;
    out->seed = layout_seed;
    out->width = cfg->width ? cfg->width : 640;
    out->height = cfg->height ? cfg->height : 480;
    synth_rng rp, rl;
    synth_rng_seed(&rp, physics_seed ^ 0x5048595349435321ULL);   /* physics stream */
    synth_rng_seed(&rl, layout_seed ^ 0x4c41594f55543a29ULL);    /* layout stream */
    synth_physics_draw(cfg, &rp, &out->phys);
    size_t n = (size_t)out->width * out->height;
    out->owner = malloc(n * sizeof *out->owner);
    out->truth = malloc(n);
    if (!out->owner || !out->truth) {
        synth_scene_free(out);
        return synth_fail("out of memory for a %d x %d scene", out->width, out->height);
    }
    if (synth_layout(cfg, &rl, out) || synth_rasterise(out) || synth_classes(out)) {
        synth_scene_free(out);
        return -1;
    }
    cap_exposure(out);
    return 0;
}

void synth_scene_free(synth_scene *sc)
{
    if (!sc)
        return;
    free(sc->owner);
    free(sc->truth);
    sc->owner = NULL;
    sc->truth = NULL;
}
