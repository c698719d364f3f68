/* synth_cone.c - the illumination cone: angles 0..asin(NA) in air,
 * midpoint rule in the angle t, with the scene's pupil weighting
 * (sin t cos t: a uniformly filled pupil under Koehler illumination; sin t:
 * uniform radiance per solid angle; annular; or a partly filled pupil with
 * a Gaussian fall-off in sin t). */
#include "synth_internal.h"

#include <math.h>

static const char *pupil_names[] = {"random", "sin-cos", "sin", "annular", "filled"};

const char *synth_pupil_name(synth_pupil p)
{
    return pupil_names[p];
}

int synth_cone_nodes(const synth_physics *p, double *sin_t, double *w, int max)
{
    if (p->na <= 0 || max < 2) {
        sin_t[0] = 0;
        w[0] = 1;
        return 1;
    }
    int n = p->cone_steps < max ? p->cone_steps : max;
    double t_hi = asin(p->na), t_lo = 0, sum = 0;
    if (p->pupil == SYNTH_PUPIL_ANNULAR)
        t_lo = asin(p->pupil_f * p->na);
    double h = (t_hi - t_lo) / n;
    for (int i = 0; i < n; i++) {
        double t = t_lo + (i + 0.5) * h, s = sin(t);
        double wt = p->pupil == SYNTH_PUPIL_SIN ? s : s * cos(t);
        if (p->pupil == SYNTH_PUPIL_FILLED) {
            double u = s / (p->pupil_f * p->na);
            wt *= exp(-0.5 * u * u);
        }
        sin_t[i] = s;
        w[i] = wt;
        sum += wt;
    }
    for (int i = 0; i < n; i++)
        w[i] /= sum;
    return n;
}
