/*
 * lamina/raster.h - filling polygons on a pixel grid (even-odd rule, pixel
 * centres at +0.5), for synthetic scenes and label files. The callback gets
 * each covered span [x0, x1] of row y, clipped to the image.
 */
#ifndef LAMINA_RASTER_H
#define LAMINA_RASTER_H

#include <stddef.h>
#include <stdint.h>

#define LAM_RASTER_MAX_VERTICES 256

/* Called for each covered span [x0, x1] (inclusive) of row y. */
typedef void (*lam_span_fn)(size_t y, size_t x0, size_t x1, void *ctx);

/* Visit the pixels of a polygon (x[i], y[i] in pixels, origin top-left)
 * that lie inside a width x height image. Polygons with fewer than 3 or
 * more than LAM_RASTER_MAX_VERTICES vertices cover nothing. */
void lam_raster_polygon(const double *x, const double *y, size_t vertices, size_t width,
                        size_t height, lam_span_fn span, void *ctx);

/* Set every pixel of the polygon to 'code' in a row-major map of 8-bit
 * (fill_u8) or 16-bit (fill_u16) cells: label maps and class maps. */
void lam_raster_fill_u8(const double *x, const double *y, size_t vertices, size_t width,
                        size_t height, uint8_t *map, uint8_t code);
void lam_raster_fill_u16(const double *x, const double *y, size_t vertices, size_t width,
                         size_t height, uint16_t *map, uint16_t code);

#endif
