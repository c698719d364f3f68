/* synth_polygon.c - convex-ish random polygons (flake outlines) and their
 * raster: a pixel belongs to a polygon when its centre is inside. */
#include "synth_internal.h"

#include <math.h>

double synth_polygon_area(const double *x, const double *y, int nv)
{
    double a = 0;
    for (int i = 0, j = nv - 1; i < nv; j = i++)
        a += x[j] * y[i] - x[i] * y[j];
    return 0.5 * fabs(a);
}

/* nv vertices at jittered angles and radii, stretched along a random axis,
 * then scaled so that the equivalent radius sqrt(area / pi) is radius. */
void synth_polygon_make(synth_rng *r, double cx, double cy, double radius, int nv,
                        double *x, double *y)
{
    double phase = synth_rng_uniform(r, 0, 2 * SYNTH_PI);
    double rough = synth_rng_uniform(r, 0.08, 0.28);
    double stretch = synth_rng_uniform(r, 1.0, 1.8), axis = synth_rng_uniform(r, 0, SYNTH_PI);
    double ca = cos(axis), sa = sin(axis);
    for (int i = 0; i < nv; i++) {
        double t = phase + 2 * SYNTH_PI * (i + synth_rng_uniform(r, -0.3, 0.3)) / nv;
        double rho = 1.0 + synth_rng_uniform(r, -rough, rough);
        double u = rho * cos(t) * stretch, v = rho * sin(t);
        x[i] = u * ca - v * sa;
        y[i] = u * sa + v * ca;
    }
    double s = radius / sqrt(synth_polygon_area(x, y, nv) / SYNTH_PI);
    for (int i = 0; i < nv; i++) {
        x[i] = cx + s * x[i];
        y[i] = cy + s * y[i];
    }
}

int synth_polygon_inside(const double *x, const double *y, int nv, double px, double py)
{
    int in = 0;
    for (int i = 0, j = nv - 1; i < nv; j = i++)
        if ((y[i] > py) != (y[j] > py) &&
            px < (x[j] - x[i]) * (py - y[i]) / (y[j] - y[i]) + x[i])
            in = !in;
    return in;
}

void synth_polygon_bounds(const double *x, const double *y, int nv, double box[4])
{
    box[0] = box[2] = x[0];
    box[1] = box[3] = y[0];
    for (int i = 1; i < nv; i++) {
        box[0] = fmin(box[0], x[i]);
        box[1] = fmin(box[1], y[i]);
        box[2] = fmax(box[2], x[i]);
        box[3] = fmax(box[3], y[i]);
    }
}

static void paint(synth_scene *sc, int idx)
{
    const synth_object *o = &sc->obj[idx];
    double b[4];
    synth_polygon_bounds(o->x, o->y, o->nv, b);
    int x0 = (int)fmax(0, floor(b[0])), x1 = (int)fmin(sc->width - 1, ceil(b[2]));
    int y0 = (int)fmax(0, floor(b[1])), y1 = (int)fmin(sc->height - 1, ceil(b[3]));
    for (int yy = y0; yy <= y1; yy++)
        for (int xx = x0; xx <= x1; xx++) {
            size_t p = (size_t)yy * sc->width + xx;
            if (o->parent >= 0 && sc->owner[p] != o->parent)
                continue;   /* a fold lies on its flake only */
            if (synth_polygon_inside(o->x, o->y, o->nv, xx + 0.5, yy + 0.5))
                sc->owner[p] = (int16_t)idx;
        }
}

/* Objects without a parent first, folds on top; then areas and centroids. */
int synth_rasterise(synth_scene *sc)
{
    size_t n = (size_t)sc->width * sc->height;
    for (size_t p = 0; p < n; p++)
        sc->owner[p] = -1;
    for (int pass = 0; pass < 2; pass++)
        for (int i = 0; i < sc->nobj; i++)
            if ((sc->obj[i].parent >= 0) == pass)
                paint(sc, i);
    double sx[SYNTH_MAX_OBJECTS] = {0}, sy[SYNTH_MAX_OBJECTS] = {0};
    for (int i = 0; i < sc->nobj; i++)
        sc->obj[i].area_px = 0;
    for (size_t p = 0; p < n; p++) {
        int o = sc->owner[p];
        sc->truth[p] = o < 0 ? 0 : (uint8_t)sc->obj[o].label;
        if (o < 0)
            continue;
        sc->obj[o].area_px++;
        sx[o] += p % sc->width + 0.5;
        sy[o] += p / sc->width + 0.5;
    }
    for (int i = 0; i < sc->nobj; i++) {
        long a = sc->obj[i].area_px;
        sc->obj[i].cx = a ? sx[i] / a : NAN;
        sc->obj[i].cy = a ? sy[i] / a : NAN;
    }
    return 0;
}
