/* synth_truth.c - the truth of a scene: STEM.truth.png (8-bit: 0
 * substrate, N = 1..60 layers, 250 PMMA residue, 251 dust) and
 * STEM.truth.json (every object and the true physics). */
#include "synth_internal.h"

#include <math.h>

static void num(FILE *f, const char *key, double v, const char *after)
{
    if (isfinite(v))
        fprintf(f, "\"%s\": %.6g%s", key, v, after);
    else
        fprintf(f, "\"%s\": null%s", key, after);
}

static void arr(FILE *f, const double *v, int n)
{
    fputc('[', f);
    for (int i = 0; i < n; i++) {
        if (isfinite(v[i]))
            fprintf(f, "%s%.6g", i ? ", " : "", v[i]);
        else
            fprintf(f, "%snull", i ? ", " : "");
    }
    fputc(']', f);
}

static void vec(FILE *f, const char *key, const double *v, int n, const char *after)
{
    fprintf(f, "\"%s\": ", key);
    arr(f, v, n);
    fprintf(f, "%s", after);
}

static void write_lamp(FILE *f, const synth_lamp *l)
{
    fprintf(f, "    \"lamp\": {\"kind\": \"%s\", ", synth_lamp_name(l->kind));
    if (l->kind == SYNTH_LAMP_LED) {
        num(f, "blue_nm", l->blue_nm, ", "), num(f, "blue_fwhm_nm", l->blue_fwhm_nm, ", ");
        num(f, "phosphor_nm", l->phos_nm, ", "), num(f, "phosphor_hwhm_lo_nm", l->phos_lo_nm, ", ");
        num(f, "phosphor_hwhm_hi_nm", l->phos_hi_nm, ", "), num(f, "blue_share", l->blue_share, "");
    } else {
        num(f, "kelvin", l->kelvin, "");
    }
    fprintf(f, "},\n");
}

static void write_camera(FILE *f, const synth_camera *c)
{
    fprintf(f, "    \"camera\": {\"kind\": \"%s\", \"channels\": %d, ", synth_camera_name(c->kind),
            c->nc);
    if (c->kind == SYNTH_CAM_GAUSS) {
        vec(f, "centre_nm", c->centre_nm, 3, ", "), vec(f, "fwhm_nm", c->fwhm_nm, 3, ", ");
    } else if (c->kind == SYNTH_CAM_DYE) {
        vec(f, "rise_nm", c->rise_nm, 3, ", "), vec(f, "rise_width_nm", c->rise_w, 3, ", ");
        vec(f, "fall_nm", c->fall_nm, 3, ", "), vec(f, "fall_width_nm", c->fall_w, 3, ", ");
        num(f, "ircut_nm", c->ircut_nm, ", "), num(f, "ircut_width_nm", c->ircut_w, ", ");
        fprintf(f, "\"ccm\": [");
        for (int k = 0; k < 3; k++) {
            arr(f, c->ccm[k], 3);
            fprintf(f, k < 2 ? ", " : "], ");
        }
    } else {
        num(f, "filter_nm", c->filter_nm, ", "), num(f, "filter_fwhm_nm", c->filter_fwhm_nm, ", ");
        fprintf(f, "\"filter_shape\": \"%s\", ", c->filter_flat ? "flat-top" : "gaussian");
    }
    vec(f, "white_balance_gain", c->gain, c->nc, "},\n");
}

static void write_physics(FILE *f, const synth_physics *p)
{
    fprintf(f, "  \"physics\": {\n    \"response\": \"%s\", \"si\": \"%s\", \"sio2\": \"%s\", "
               "\"pmma\": \"%s\", \"graphite\": \"graphite-o-Djurisic1999.yml\",\n    ",
            synth_response_name(p->response), synth_si_file(p->si), synth_sio2_file(p->sio2),
            synth_pmma_file(p->pmma));
    num(f, "oxide_nm", p->oxide_nm, ", "), num(f, "nominal_oxide_nm", p->nominal_oxide_nm, ", ");
    num(f, "na", p->na, ", ");
    if (p->crystal != SYNTH_XTAL_GRAPHENE)
        fprintf(f, "\"crystal\": \"%s\", \"nk\": [\"%s\", \"%s\", \"%s\", \"%s\"], ",
                synth_crystal_name(p->crystal), synth_crystal_file(p->crystal, p->nk_source, 1),
                synth_crystal_file(p->crystal, p->nk_source, 2),
                synth_crystal_file(p->crystal, p->nk_source, 3),
                synth_crystal_file(p->crystal, p->nk_source, 4));
    fprintf(f, "\"pupil\": \"%s\", ", synth_pupil_name(p->pupil));
    num(f, "pupil_f", p->pupil_f, ", ");
    fprintf(f, "\"cone_steps\": %d, \"temperature_K\": 295,\n", p->cone_steps);
    write_lamp(f, &p->lamp);
    write_camera(f, &p->cam);
    fprintf(f, "    ");
    vec(f, "substrate_value", p->sub_value, p->cam.nc, ", ");
    num(f, "exposure", p->exposure, ", "), num(f, "vignette", p->vignette, ", ");
    num(f, "gradient", p->gradient, ", "), num(f, "gradient_deg", p->gradient_deg, ",\n    ");
    num(f, "blur_px", p->blur_px, ", "), num(f, "full_well_e", p->full_well_e, ", ");
    num(f, "read_noise_e", p->read_noise_e, ", "), num(f, "um_per_px", p->um_per_px, "\n  },\n");
}

static void write_object(FILE *f, const synth_scene *sc, int i)
{
    static const char *kinds[] = {"flake", "fold", "residue", "dust"};
    const synth_object *o = &sc->obj[i];
    double c[3];
    for (int k = 0; k < sc->phys.cam.nc; k++)
        c[k] = 1.0 - o->rel[k];
    fprintf(f, "    {\"id\": %d, \"kind\": \"%s\", \"label\": %d, \"layers\": %d, "
               "\"parent\": %d, \"doped\": %s, ", i, kinds[o->kind], o->label, o->layers,
            o->parent, o->doped ? "true" : "false");
    num(f, "fermi_eV", o->fermi_eV, ", ");
    if (o->thickness_nm > 0)
        num(f, "thickness_nm", o->thickness_nm, ", ");
    if (o->kind == SYNTH_OBJ_RESIDUE)
        num(f, "residue_nm", o->residue_nm, ", ");
    if (o->kind == SYNTH_OBJ_DUST)
        num(f, "transmission", o->transmission, ", ");
    fprintf(f, "\"area_px\": %ld, ", o->area_px);
    double cen[2] = {o->cx, o->cy};
    vec(f, "centroid", cen, 2, ", ");
    vec(f, "contrast", c, sc->phys.cam.nc, ",\n     \"polygon\": [");
    for (int v = 0; v < o->nv; v++)
        fprintf(f, "%s[%.2f, %.2f]", v ? ", " : "", o->x[v], o->y[v]);
    fprintf(f, "]}%s\n", i + 1 < sc->nobj ? "," : "");
}

static int write_json(const synth_scene *sc, const char *path)
{
    synth_outfile of;
    if (synth_outfile_open(&of, path))
        return -1;
    FILE *f = of.fp;
    fprintf(f, "{\n  \"schema\": \"synth-truth/1\",\n  \"seed\": %llu, \"width\": %d, "
               "\"height\": %d,\n", (unsigned long long)sc->seed, sc->width, sc->height);
    write_physics(f, &sc->phys);
    fprintf(f, "  \"objects\": [\n");
    for (int i = 0; i < sc->nobj; i++)
        write_object(f, sc, i);
    fprintf(f, "  ]\n}\n");
    return synth_outfile_commit(&of);
}

int synth_write_truth(const synth_scene *sc, const char *stem)
{
    char path[1100];
    snprintf(path, sizeof path, "%s.truth.png", stem);
    if (synth_png_write(path, sc->truth, sc->width, sc->height, 1, 8, 0, 0, 0, 0))
        return -1;
    snprintf(path, sizeof path, "%s.truth.json", stem);
    return write_json(sc, path);
}
