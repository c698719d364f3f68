/*
 * lamina/catalog.h - the chip-scale catalogue: regions of many images in
 * one list, candidates first, in chip coordinates when stage positions are
 * known, with the same flake seen in overlapping tiles listed once.
 *
 * Entries are read from analysis JSON ("lamina-analysis/1" trees, fresh or
 * from files), so a catalogue can be rebuilt from results on disk
 * (`lamina catalog merge`, `lamina watch`). Ranking: monolayers by usable
 * area, then bilayers, ..., then thick, then the rest; "small" regions
 * after the others of their layer count. With a thickness target
 * (lam_catalog_set_target) regions of a continuous crystal (hBN) inside the
 * range come first, the rest of them by their distance to it.
 *
 * catalog.csv and catalog.json share one schema (docs/catalog.md): the same
 * names, one row per region; lists are JSON arrays and ';'-separated in
 * CSV; unknown values are null in JSON and empty in CSV. Boxes are
 * [x0, y0, x1, y1] in pixels, inclusive. goto.csv lists the candidates'
 * stage readings in the stage's own convention (lamina/stage.h).
 *
 * Ownership: caller storage set up by lam_catalog_init and released by
 * lam_catalog_clear.
 */
#ifndef LAMINA_CATALOG_H
#define LAMINA_CATALOG_H

#include <stddef.h>
#include "lamina/error.h"
#include "lamina/stage.h"

struct cJSON;

typedef struct lam_catalog_image {
    char path[1024];          /* the image as analysed */
    char results[1024];       /* folder of STEM.json, STEM.layers.png, ... ("" unknown) */
    char stem[256];           /* file name without its extension */
    char annotated[300];      /* the annotated picture's file name in results (its JSON's
                               * "outputs"; STEM.annotated.png for results without) */
    double width, height, um_per_px;  /* um_per_px NAN when unknown */
    double oxide_nm;
    int oxide_fitted;
    const lam_position *pos;  /* borrowed from the positions; NULL if none */
    size_t regions, candidates;
    char warnings[2048];      /* ';'-separated: the analysis' and the catalogue's */
    char own_warnings[256];   /* the catalogue's alone, e.g. "not in the positions file" */
    char warning_codes[256];  /* the analysis' warning codes, ';'-separated (short, for tables) */
} lam_catalog_image;

typedef struct lam_catalog_entry {
    size_t image;             /* index into images */
    unsigned region;
    char label[16];
    char class_[16];          /* layers, thick, unmodelled, ambiguous */
    int layers;               /* 1..K, 0 for every other class */
    double probability;       /* posterior probability of 'label' */
    double area_px, area_um2; /* area_um2 NAN when unknown */
    double bbox[4];           /* x0, y0, x1, y1 inclusive */
    double usable[4];         /* x0, y0, x1, y1 inclusive; usable[2] < usable[0]: none */
    double usable_um[2];      /* width, height; NAN when unknown */
    double centroid[2];
    double stage_um[2];       /* stage reading of the centroid, um; NAN without a position */
    double chip_um[2];        /* from the origin; NAN without a position */
    double chip_box[4];       /* chip box x0, y0, x1, y1 (for duplicates) */
    char flags[128];          /* ';'-separated */
    int small, rank;
    size_t duplicate_of;      /* index + 1 of the entry kept, or 0 */
    double thickness_nm[3];   /* continuous crystals (hBN): estimate, lo, hi; NAN otherwise */
    double target_distance;   /* |ln| distance of the estimate to the target range (0 inside) */
} lam_catalog_entry;

typedef struct lam_catalog {
    size_t count, cap;
    lam_catalog_entry *entries;
    size_t n_images, cap_images;
    lam_catalog_image *images;
    lam_stage stage;              /* convention for chip coordinates and goto.csv */
    const lam_positions *positions; /* borrowed; NULL without */
    char results[1024];           /* folder of the results being added ("" unknown) */
    char warnings[2048];          /* catalogue-level, ';'-separated */
    double target_nm[2];          /* thickness range sought (hBN), NAN: none */
} lam_catalog;

/* An empty catalogue (always LAM_OK). */
lam_status lam_catalog_init(lam_catalog *c);

/* Release the entries; c may be NULL. */
void lam_catalog_clear(lam_catalog *c);

/* Use stage positions (borrowed, may be NULL) and a convention. */
void lam_catalog_set_stage(lam_catalog *c, const lam_positions *p, const lam_stage *stage);

/* Rank regions with a thickness (continuous crystals, e.g. hBN) by their
 * closeness to [lo_nm, hi_nm]: a region whose estimate lies inside and
 * whose interference order is not ambiguous is a candidate, ranked before
 * every layer count; the others follow the layer counts by their distance
 * |ln(d / nearest end)|, then by usable area. Call before adding. */
void lam_catalog_set_target(lam_catalog *c, double lo_nm, double hi_nm);

/* Add the regions of one analysis (JSON tree). The image's results are
 * taken to be in c->results. 'pos' may be NULL; an image missing from the
 * positions gets the warning "not in the positions file". */
lam_status lam_catalog_add(lam_catalog *c, const struct cJSON *analysis, const char *image_path,
                           const lam_position *pos, lam_error *err);

/* Add every "lamina-analysis/1" STEM.json of a results folder, in name
 * order (catalog*.json, oxide.json and pool.json are not results), with
 * positions when given (may be NULL); c->results is set to dir. *images
 * (may be NULL) is incremented per result added. LAM_EIO when the folder
 * cannot be read; lam_catalog_add's errors with the file named. */
lam_status lam_catalog_add_folder(lam_catalog *c, const char *dir, const lam_positions *pos,
                                  size_t *images, lam_error *err);

/* Rank, resolve the stage origin and chip coordinates, and mark the same
 * flake seen in overlapping tiles (same label, and the centroid of one lies
 * inside the other's chip box): the copy with the larger usable rectangle
 * (usually the one not cut by a tile edge) is kept, the others listed as
 * also seen in. LAM_EINVAL when the origin's tile is unknown. */
lam_status lam_catalog_finish(lam_catalog *c, lam_error *err);

/* The catalogue rank of entry i (1-based, duplicates not counted); the
 * rank of the entry kept for a duplicate. */
size_t lam_catalog_rank(const lam_catalog *c, size_t i);

/* Is entry i a candidate: assigned layers, not small, not a duplicate? */
int lam_catalog_is_candidate(const lam_catalog *c, size_t i);

/* catalog.csv, catalog.json and (with positions) goto.csv into dir. */
lam_status lam_catalog_write(const lam_catalog *c, const char *dir, lam_error *err);

/* The image's own warnings joined with the catalogue's for it, or "". */
const char *lam_catalog_image_warnings(const lam_catalog *c, size_t image);

/* The positions file and stage convention a run recorded in
 * dir/catalog.json ("stage": lam_catalog_write): 1 with the positions
 * file's path in positions (n bytes) and the convention in *st (from the
 * defaults); 0, both untouched, when there is no readable catalogue or it
 * records no positions file. */
int lam_catalog_recorded_stage(const char *dir, char *positions, size_t n, lam_stage *st);

#endif
