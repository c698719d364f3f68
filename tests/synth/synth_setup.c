/* synth_setup.c - what a lab WOULD know about the microscope, as a
 * lamina-setup/1 profile (docs/setup.md): camera and lamp as tables, the
 * illumination NA, the file's encoding, the NOMINAL oxide and the pixel
 * size, the flake crystal - never the graphene response, a crystal's n,k
 * source, the true oxide or the pupil weighting. The uninformed profile has only the oxide and pixel size. */
#include "synth_internal.h"

#include <string.h>

static void stem_of(const char *path, char *stem, size_t n)
{
    snprintf(stem, n, "%s", path);
    size_t l = strlen(stem);
    const char *suffix[] = {".setup.json", ".json"};
    for (int i = 0; i < 2; i++) {
        size_t s = strlen(suffix[i]);
        if (l > s && !strcmp(stem + l - s, suffix[i])) {
            stem[l - s] = '\0';
            return;
        }
    }
}

static const char *base_name(const char *path)
{
    const char *s = strrchr(path, '/');
    return s ? s + 1 : path;
}

static int write_camera(const synth_physics *p, const char *path)
{
    synth_outfile of;
    if (synth_outfile_open(&of, path))
        return -1;
    fprintf(of.fp, p->cam.nc == 3 ? "wavelength_nm,r,g,b\n" : "wavelength_nm,grey\n");
    for (int i = 0; i < SYNTH_NL; i++) {
        fprintf(of.fp, "%g", synth_wl(i));
        for (int k = 0; k < p->cam.nc; k++)
            fprintf(of.fp, ",%.6g", p->sens[k][i]);
        fputc('\n', of.fp);
    }
    return synth_outfile_commit(&of);
}

static int write_lamp(const synth_physics *p, const char *path)
{
    synth_outfile of;
    if (synth_outfile_open(&of, path))
        return -1;
    fprintf(of.fp, "wavelength_nm,relative\n");
    for (int i = 0; i < SYNTH_NL; i++)
        fprintf(of.fp, "%g,%.6g\n", synth_wl(i), p->lamp_spd[i]);
    return synth_outfile_commit(&of);
}

static const char *encoding(synth_format fmt)
{
    return fmt == SYNTH_FMT_PNG16 || fmt == SYNTH_FMT_TIFF16 ? "\"linear\""
           : fmt == SYNTH_FMT_PNG_GAMMA22                    ? "{\"gamma\": 2.2}" : "\"srgb\"";
}

int synth_write_setup(const synth_scene *sc, synth_format fmt, int informed, const char *path)
{
    const synth_physics *p = &sc->phys;
    char stem[1024], cam[1100], lamp[1100];
    stem_of(path, stem, sizeof stem);
    snprintf(cam, sizeof cam, "%s.camera.csv", stem);
    snprintf(lamp, sizeof lamp, "%s.lamp.csv", stem);
    if (informed && (write_camera(p, cam) || write_lamp(p, lamp)))
        return -1;
    synth_outfile of;
    if (synth_outfile_open(&of, path))
        return -1;
    FILE *f = of.fp;
    fprintf(f, "{\n  \"schema\": \"lamina-setup/1\",\n");
    if (informed) {
        fprintf(f, "  \"objective\": {\"illumination_na\": %.4g},\n", p->na);
        fprintf(f, "  \"illuminant\": {\"kind\": \"table\", \"file\": \"%s\"},\n",
                base_name(lamp));
        fprintf(f, "  \"camera\": {\"kind\": \"table\", \"file\": \"%s\"},\n", base_name(cam));
        fprintf(f, "  \"encoding\": %s,\n", encoding(fmt));
    }
    if (p->crystal != SYNTH_XTAL_GRAPHENE) /* the lab knows its crystal, not the n,k */
        fprintf(f, "  \"material\": \"%s\",\n", synth_crystal_name(p->crystal));
    fprintf(f, "  \"um_per_px\": %.6g,\n", p->um_per_px);
    fprintf(f, "  \"substrate\": {\"stack\": [{\"material\": \"SiO2\", \"thickness_nm\": %g}], "
               "\"base\": \"Si\"}\n}\n", p->nominal_oxide_nm);
    return synth_outfile_commit(&of);
}
