/* synth_render.c - image formation: linear pixel = exposure x (channel
 * value / substrate's brightest channel) x flat field, then Gaussian blur
 * (optics and sensor), then shot and read noise, clipped at full scale. */
#include "synth_internal.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define NOISE_STREAM 0x4e4f495345212121ULL

void synth_image_free(synth_image *im)
{
    if (!im)
        return;
    free(im->px);
    free(im->clean);
    im->px = im->clean = NULL;
}

/* Vignetting (1 - v r^2, r = 1 in the corners) times a linear gradient of
 * peak-to-peak size g across the image along direction (ca, sa). */
static double flat_field(const synth_physics *p, int w, int h, int x, int y, double ca,
                         double sa)
{
    double cx = 0.5 * w, cy = 0.5 * h, dx = x + 0.5 - cx, dy = y + 0.5 - cy;
    double r2 = (dx * dx + dy * dy) / (cx * cx + cy * cy);
    double proj = (dx * ca + dy * sa) / (fabs(cx * ca) + fabs(cy * sa));
    return (1.0 - p->vignette * r2) * (1.0 + 0.5 * p->gradient * proj);
}

static void fill_clean(const synth_scene *sc, float *clean)
{
    const synth_physics *p = &sc->phys;
    int nc = p->cam.nc;
    double top = 0, base[3];
    for (int k = 0; k < nc; k++)
        top = fmax(top, p->sub_value[k]);
    for (int k = 0; k < nc; k++)
        base[k] = p->exposure * p->sub_value[k] / top;
    double a = p->gradient_deg * SYNTH_PI / 180, ca = cos(a), sa = sin(a);
    for (int y = 0; y < sc->height; y++)
        for (int x = 0; x < sc->width; x++) {
            size_t i = (size_t)y * sc->width + x;
            int o = sc->owner[i];
            double f = flat_field(p, sc->width, sc->height, x, y, ca, sa);
            for (int k = 0; k < nc; k++)
                clean[i * nc + k] = (float)(base[k] * f * (o < 0 ? 1.0 : sc->obj[o].rel[k]));
        }
}

int synth_render(const synth_scene *sc, synth_image *out)
{
    memset(out, 0, sizeof *out);
    int nc = sc->phys.cam.nc;
    size_t n = (size_t)sc->width * sc->height * nc;
    out->px = malloc(n * sizeof *out->px);
    out->clean = malloc(n * sizeof *out->clean);
    if (!out->px || !out->clean) {
        synth_image_free(out);
        return synth_fail("out of memory for a %d x %d image", sc->width, sc->height);
    }
    out->width = sc->width;
    out->height = sc->height;
    out->nc = nc;
    out->full_well_e = sc->phys.full_well_e;
    out->read_noise_e = sc->phys.read_noise_e;
    out->noise_seed = sc->seed ^ NOISE_STREAM;
    out->um_per_px = sc->phys.um_per_px;
    fill_clean(sc, out->clean);
    if (synth_blur(out->clean, sc->width, sc->height, nc, sc->phys.blur_px)) {
        synth_image_free(out);
        return -1;
    }
    memcpy(out->px, out->clean, n * sizeof *out->px);
    synth_rng r;
    synth_rng_seed(&r, out->noise_seed);
    synth_add_noise(out->px, n, out->full_well_e, out->read_noise_e, &r);
    return 0;
}
