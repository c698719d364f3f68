/*
 * lamina/contour.h - region outlines as closed polygons, for drawing.
 *
 * Marching squares over a label map (one uint32 id per pixel, 0 = none):
 * each region's boundary is traced through the midpoints between its
 * pixels and their neighbours, so an outline runs half a pixel outside
 * the region's pixel centres and cuts pixel corners diagonally (smooth
 * when drawn, unlike a staircase). Diagonal neighbours are separate, as
 * regions are 4-connected. Outside the image counts as outside every
 * region, so outlines close along the border.
 *
 * Coordinates are canvas coordinates: pixel (x, y) covers [x, x+1) x
 * [y, y+1), its centre at (x + 0.5, y + 0.5). Every loop of a region has
 * the region on the same side (holes run the other way round), so filling
 * with either fill rule gives the region. Collinear points are dropped.
 *
 * Ownership: lam_contours_trace allocates; lam_contours_free releases
 * (NULL is safe). Errors: LAM_ENOMEM.
 */
#ifndef LAMINA_CONTOUR_H
#define LAMINA_CONTOUR_H

#include <stddef.h>
#include <stdint.h>
#include "lamina/error.h"

typedef struct lam_contours {
    size_t regions;        /* ids 1..regions */
    size_t *loop_start;    /* regions + 1 entries: loops of id r are
                            * loop_start[r-1] .. loop_start[r]-1 */
    size_t *point_start;   /* loops + 1 entries into xy */
    float *xy;             /* x, y pairs */
    size_t loops, points;
} lam_contours;

/* Trace the outlines of regions 1..regions within the window x0, y0, w, h
 * of a label map of the given stride (ids outside 1..regions are ignored).
 * Coordinates are relative to the whole map. */
lam_status lam_contours_trace(const uint32_t *label, size_t stride, size_t x0, size_t y0,
                              size_t w, size_t h, size_t regions, lam_contours **out,
                              lam_error *err);
void lam_contours_free(lam_contours *c);

/* Drop points closer than 'tolerance' to the line through their kept
 * neighbours (Douglas-Peucker, in place): a pixel-noisy edge becomes a
 * straight one when drawn. A loop keeps at least 3 points. */
lam_status lam_contours_simplify(lam_contours *c, double tolerance, lam_error *err);

#endif
