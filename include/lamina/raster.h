/*
 * lamina/raster.h - filling polygons on a pixel grid (even-odd rule, pixel
 * centres at +0.5), for synthetic scenes and label files. The callback gets
 * each covered span [x0, x1] of row y, clipped to the image.
 */
#ifndef LAMINA_RASTER_H
#define LAMINA_RASTER_H

#include <stddef.h>

#define LAM_RASTER_MAX_VERTICES 256

typedef void (*lam_span_fn)(size_t y, size_t x0, size_t x1, void *ctx);

void lam_raster_polygon(const double *x, const double *y, size_t vertices, size_t width,
                        size_t height, lam_span_fn span, void *ctx);

#endif
