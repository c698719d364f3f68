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

typedef struct fill_ctx {
    void *map;
    size_t width;
    unsigned code;
    int wide; /* 16-bit cells */
} fill_ctx;

static void fill_span(size_t y, size_t x0, size_t x1, void *vctx)
{
    const fill_ctx *f = vctx;
    for (size_t x = x0; x <= x1; x++) {
        if (f->wide)
            ((uint16_t *)f->map)[y * f->width + x] = (uint16_t)f->code;
        else
            ((uint8_t *)f->map)[y * f->width + x] = (uint8_t)f->code;
    }
}

void lam_raster_fill_u8(const double *x, const double *y, size_t vertices, size_t width,
                        size_t height, uint8_t *map, uint8_t code)
{
    fill_ctx f = {map, width, code, 0};
    lam_raster_polygon(x, y, vertices, width, height, fill_span, &f);
}

void lam_raster_fill_u16(const double *x, const double *y, size_t vertices, size_t width,
                         size_t height, uint16_t *map, uint16_t code)
{
    fill_ctx f = {map, width, code, 1};
    lam_raster_polygon(x, y, vertices, width, height, fill_span, &f);
}
