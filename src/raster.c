/* raster.c - scanline polygon filling with the even-odd rule. */
#include "lamina/raster.h"

#include <math.h>

void lam_raster_polygon(const double *px, const double *py, size_t nv, size_t w, size_t h,
                        lam_span_fn span, void *ctx)
{
    if (nv < 3 || nv > LAM_RASTER_MAX_VERTICES)
        return;
    double ymin = py[0], ymax = py[0];
    for (size_t k = 1; k < nv; k++) {
        ymin = fmin(ymin, py[k]);
        ymax = fmax(ymax, py[k]);
    }
    long y0 = (long)floor(ymin), y1 = (long)ceil(ymax);
    double xs[LAM_RASTER_MAX_VERTICES];
    for (long y = y0 < 0 ? 0 : y0; y <= y1 && y < (long)h; y++) {
        double yc = (double)y + 0.5;
        size_t nx = 0;
        for (size_t k = 0; k < nv; k++) {
            size_t j = (k + 1) % nv;
            double ya = py[k], yb = py[j];
            if ((ya <= yc && yb > yc) || (yb <= yc && ya > yc))
                xs[nx++] = px[k] + (yc - ya) / (yb - ya) * (px[j] - px[k]);
        }
        for (size_t a = 1; a < nx; a++)
            for (size_t b = a; b > 0 && xs[b - 1] > xs[b]; b--) {
                double t = xs[b];
                xs[b] = xs[b - 1];
                xs[b - 1] = t;
            }
        for (size_t a = 0; a + 1 < nx; a += 2) {
            long xa = (long)ceil(xs[a] - 0.5), xb = (long)floor(xs[a + 1] - 0.5);
            if (xa < 0)
                xa = 0;
            if (xb >= (long)w)
                xb = (long)w - 1;
            if (xa <= xb)
                span((size_t)y, (size_t)xa, (size_t)xb, ctx);
        }
    }
}
