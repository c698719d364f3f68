/* synth_degrade.c - blur and sensor noise on linear images. */
#include "synth_internal.h"

#include <math.h>
#include <stdlib.h>

/* One pass of a normalised Gaussian kernel along rows (dx = nc) or
 * columns (dx = w nc); edges are clamped. */
static void pass(float *px, int len, int lines, size_t step, size_t line_step, int nc,
                 const double *kern, int rad, float *buf)
{
    for (int l = 0; l < lines; l++)
        for (int k = 0; k < nc; k++) {
            float *base = px + (size_t)l * line_step + k;
            for (int i = 0; i < len; i++)
                buf[i] = base[(size_t)i * step];
            for (int i = 0; i < len; i++) {
                double s = 0;
                for (int j = -rad; j <= rad; j++) {
                    int t = i + j < 0 ? 0 : i + j >= len ? len - 1 : i + j;
                    s += kern[j + rad] * buf[t];
                }
                base[(size_t)i * step] = (float)s;
            }
        }
}

int synth_blur(float *px, int w, int h, int nc, double sigma)
{
    if (!(sigma > 0))
        return 0;
    int rad = (int)ceil(3 * sigma);
    double kern[64], sum = 0;
    if (rad > 31)
        rad = 31;
    for (int j = -rad; j <= rad; j++)
        sum += kern[j + rad] = exp(-0.5 * j * j / (sigma * sigma));
    for (int j = 0; j <= 2 * rad; j++)
        kern[j] /= sum;
    float *buf = malloc((size_t)(w > h ? w : h) * sizeof *buf);
    if (!buf)
        return synth_fail("out of memory for the blur");
    pass(px, w, h, (size_t)nc, (size_t)w * nc, nc, kern, rad, buf);
    pass(px, h, w, (size_t)w * nc, (size_t)nc, nc, kern, rad, buf);
    free(buf);
    return 0;
}

/* Shot noise (Gaussian with the Poisson variance: every pixel here holds
 * hundreds of electrons or more) and read noise, clipped to [0, 1]. */
void synth_add_noise(float *px, size_t n, double full_well_e, double read_e, synth_rng *r)
{
    for (size_t i = 0; i < n; i++) {
        double v = px[i];
        if (full_well_e > 0) {
            double e = v > 0 ? v * full_well_e : 0;
            v += sqrt(e + read_e * read_e) / full_well_e * synth_rng_normal(r);
        }
        px[i] = (float)(v < 0 ? 0 : v > 1 ? 1 : v);
    }
}
