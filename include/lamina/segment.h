/*
 * lamina/segment.h - pixel classes and connected regions of a contrast map.
 *
 * Regions are made without the model (lam_segment_uniform): pixels of
 * uniform contrast join, transition pixels between them belong to none,
 * and regions near zero contrast are the substrate; the model only labels
 * them afterwards (lamina/infer.h), and once their layer counts are known
 * the parts of one flake are joined (lam_segment_join).
 * Connected (4-neighbour) pixels of one class form a region; pixels at
 * least LAM_INTERIOR_DEPTH from its boundary and not saturated are its
 * interior, from which statistics are taken (edge pixels mix two classes).
 *
 * Ownership: lam_segmentation_alloc / lam_segmentation_free.
 */
#ifndef LAMINA_SEGMENT_H
#define LAMINA_SEGMENT_H

#include <stddef.h>
#include <stdint.h>
#include "lamina/error.h"
#include "lamina/contrast.h"

#define LAM_CLASS_SUBSTRATE 0
#define LAM_CLASS_THICK 254
#define LAM_CLASS_UNMODELLED 253
#define LAM_CLASS_NONE 255

typedef struct lam_segment_options {
    size_t min_region_px;        /* smaller regions are dropped (12) */
    size_t threads;              /* worker threads for the pixel passes (1) */
    double file_step[3];         /* the file's own colour steps in contrast units per
                                  * channel (one JPEG DC quantisation step at the
                                  * substrate's darkest level, where the step is the
                                  * largest share of the light; one code at its mean
                                  * level for other 8-bit files); 0 for lossless
                                  * files (0) */
    /* lam_segment_uniform: flakes brighter than the substrate (contrast
     * C < 0: hBN, thick TMDs) carry more noise in contrast units - shot
     * noise grows as sqrt(b), flat-field residuals as b, b = 1 - C: with
     * bright_scaling the thresholds grow so (0: off, as for graphene) */
    int bright_scaling;
    /* lam_segment_uniform: the largest channel's contrast of the faintest
     * count the material may show, when fainter than the c1 the
     * thresholds scale with (a TMD's 3L can be; lamina/analyze.c
     * segment_step); regions within 0.3 of it of zero are substrate. 0:
     * c1's (0) */
    double faint_step;
    /* lam_segment_uniform: 1 merges pixel by pixel in the published
     * method's order only, without first making flat 2 x 2 blocks and
     * 4 x 4 and 8 x 8 squares one region each (segment_grow.c
     * premerge_blocks): about five times the pairs to merge (23.4 M
     * against 4.2 M at 12 MP), for checking the blocks against (0) */
    int pixel_order;
} lam_segment_options;

/* Interior pixels lie at least this far (city-block) from the region's
 * boundary: blur and the 3x3 denoising mix two classes within ~2 px. */
#define LAM_INTERIOR_DEPTH 3
/* A region whose deepest pixel is closer than this to its boundary is a
 * ribbon - in practice the blurred transition along another region's edge -
 * and does not inform the shared parameters. */
#define LAM_RIBBON_DEPTH 4
/* Depths are counted to this and no further: all the interior and ribbon
 * tests ask, and a count that stops here is a few local comparisons per
 * pixel instead of a distance transform over the whole map. */
#define LAM_DEPTH_CAP 4
#if LAM_DEPTH_CAP < LAM_RIBBON_DEPTH || LAM_DEPTH_CAP < LAM_INTERIOR_DEPTH
#error "LAM_DEPTH_CAP must reach the interior and ribbon depths"
#endif

typedef struct lam_region_stats {
    uint32_t id;
    uint8_t cls;
    size_t area, interior, clipped;
    size_t edge;                 /* transition pixels nearer its contrast than any other
                                  * side's (lam_segment_edge_areas); 0 until then */
    unsigned depth_max;          /* the deepest pixel's distance to the boundary (inradius),
                                  * counted to LAM_DEPTH_CAP */
    size_t bbox[4];              /* x0, y0, x1, y1 inclusive */
    double sx, sy;               /* coordinate sums for the centroid */
    double sum[3], sumsq[3];     /* interior contrast */
    int touches_border;
} lam_region_stats;

typedef struct lam_segmentation {
    size_t width, height;
    uint8_t *cls;                /* class per pixel (LAM_CLASS_NONE for dropped) */
    uint32_t *label;             /* region id per pixel, 0 = none */
    size_t count;
    lam_region_stats *regions;   /* ids 1..count at index id-1 */
} lam_segmentation;

/* Regions of at least 12 px, one thread, a lossless file (no coding
 * steps), no bright scaling. */
lam_segment_options lam_segment_options_default(void);

/* A width x height segmentation with its class and label maps (zeroed);
 * release with lam_segmentation_free. LAM_ENOMEM or LAM_ETOOBIG. */
lam_status lam_segmentation_alloc(size_t width, size_t height, lam_segmentation **out,
                                  lam_error *err);
/* Release; s may be NULL. */
void lam_segmentation_free(lam_segmentation *s);

/* Regions of uniform contrast, independent of the model (the analysis'
 * segmentation): transition pixels (a change of more than half the prior's
 * monolayer step c1 across two pixels, or 4 sigma of the denoised noise, in
 * some channel) belong to no region; the other pixels join 4-neighbours
 * whose contrast differs by less than 4.5 times the measured neighbour
 * noise in every channel; the connected sets are regions, and those at
 * zero contrast (within 0.3 max_c |c1_c|, 0.003 or 4 x the substrate's own
 * low-frequency scatter 'scatter', in every channel) the bare substrate.
 * A lossy file's own colour steps (opt->file_step: flat areas of a JPEG
 * move by whole DC quantisation steps from block to block) neither split a
 * region nor make a patch of substrate a region: regions within one step
 * merge, and the substrate tolerance is at least 1.5 steps, 2 in a JPEG
 * (taken at the substrate's darkest level: in a vignetted
 * corner, where noise no longer dithers the blocks, patches of bare
 * substrate sat 1.7 steps off in one channel and were read as flakes,
 * dragging the oxide 45 nm). In a JPEG, areas of transition pixels wider
 * than a band (a small flake whose colour rings throughout) keep their
 * core as a region (segment_cores.c). Layer counts
 * are then decided per region (lamina/infer.h), so a flake is one region
 * however the model's ladder is off. */
lam_status lam_segment_uniform(const lam_contrast_map *contrast, size_t channels, const double *c1,
                               const double noise[3], const double scatter[3],
                               const lam_segment_options *opt, lam_segmentation *seg,
                               lam_error *err);

/* Join the parts of one flake that artefacts cut apart, once their layer
 * counts are known: regions i and j (index id-1) with key[i] == key[j] >= 0
 * (the caller's confident layer count; -1: never joined) that touch, or
 * face each other across a band of at most 10 transition pixels crossed by
 * at least 4 straight row or column runs, become one region. Band pixels
 * whose contrast is within fill[c] of the joined region's interior mean in
 * every channel join it; the rest (a crack, the substrate between two
 * flakes) stay out. A hole of transition pixels inside one such region (no
 * larger than 1/20 of it, or 64 px, with 80 % of its pixels within fill)
 * is filled. Regions are renumbered in row-major order of their
 * first pixel and their statistics recomputed; map (seg->count entries,
 * caller storage) receives each old id's new id, *joined the number of
 * regions that disappeared. The pixel passes run on 'threads' threads (the
 * result is the same for any count). LAM_ENOMEM only. The caller
 * re-measures and re-infers when *joined or holes changed the statistics
 * (compare areas, or simply always). */
lam_status lam_segment_join(const lam_contrast_map *contrast, size_t channels, const int *key,
                            const double fill[3], size_t threads, lam_segmentation *seg,
                            uint32_t *map, size_t *joined, lam_error *err);

/* Connected regions of non-substrate classes with their statistics (used
 * for label maps, whose classes are given). */
lam_status lam_segment_regions(const lam_contrast_map *contrast, const lam_segment_options *opt,
                               lam_segmentation *seg, lam_error *err);

/* Give each transition pixel (in no region, not substrate) to the side
 * within 4 px - a region, or the substrate at zero contrast - whose mean
 * interior contrast it is nearest: the half-contrast edge of a blurred
 * step. Sets every region's edge count; the band is a fixed number of
 * pixels wide, so without it a flake's area would depend on the
 * magnification. Rows are shared out to 'threads' threads (the counts are
 * the same for any number). LAM_ENOMEM only (the edge counts are then
 * left as they were). */
lam_status lam_segment_edge_areas(const lam_contrast_map *contrast, size_t channels, size_t threads,
                                  lam_segmentation *seg, lam_error *err);

/* A region's area in pixels up to its half-contrast edge: area + edge. */
double lam_region_area(const lam_region_stats *r);

/* Largest axis-aligned rectangle of interior pixels of region 'id'. */
void lam_usable_rectangle(const lam_segmentation *seg, const lam_region_stats *r,
                          size_t out_wh[2], size_t out_xy[2]);

#endif
