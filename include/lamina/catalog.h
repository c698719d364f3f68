/*
 * lamina/catalog.h - the chip-scale catalogue: regions of many images in
 * one list, candidates first, in chip coordinates when stage positions are
 * known, with the same flake seen in overlapping tiles listed once.
 *
 * Entries are read from analysis JSON ("lamina-analysis/1" trees, fresh or
 * from files), so a catalogue can be rebuilt from results on disk
 * (`lamina catalog merge`). Ranking: monolayers by usable area, then
 * bilayers, ..., then thick, then unassigned; "small" regions after the
 * others of their layer count.
 *
 * Positions CSV: header "file,x_um,y_um" with an optional "rotation_deg";
 * file is matched by base name. The stage coordinate of an image is that of
 * its centre; image x to the right and y down map to chip x and y rotated
 * by rotation_deg (counter-clockwise).
 *
 * Ownership: caller storage set up by lam_catalog_init and released by
 * lam_catalog_clear; lam_positions_load fills caller storage released by
 * lam_positions_clear.
 */
#ifndef LAMINA_CATALOG_H
#define LAMINA_CATALOG_H

#include <stddef.h>
#include "lamina/error.h"

struct cJSON;

typedef struct lam_position {
    char file[256];
    double x_um, y_um, rotation_deg;
} lam_position;

typedef struct lam_positions {
    size_t count;
    lam_position *items;
} lam_positions;

typedef struct lam_catalog_entry {
    char image[1024];   /* path as analysed */
    unsigned region;
    char label[16];
    int layers;         /* 0 when not assigned */
    double probability;
    double area_px, area_um2; /* area_um2 NAN when unknown */
    double usable_px[4];      /* x, y, w, h */
    double usable_um[2];      /* NAN when unknown */
    double centroid[2], bbox[4];
    double chip_um[2];        /* NAN without positions */
    double chip_box[4];       /* chip-coordinate box x0, y0, x1, y1 */
    char flags[96];
    int small, duplicate_of;  /* duplicate_of: index+1 of the entry kept, or 0 */
    int rank;
} lam_catalog_entry;

typedef struct lam_catalog {
    size_t count, cap;
    lam_catalog_entry *entries;
} lam_catalog;

/* Read a positions CSV (blank lines and '#' comments skipped). LAM_EFORMAT
 * names the line and column; LAM_ETOOBIG beyond 500000 rows. */
lam_status lam_positions_load(const char *path, lam_positions *out, lam_error *err);

/* Release the rows; p may be NULL. */
void lam_positions_clear(lam_positions *p);

/* The position of an image, matched by base name, or NULL (also for p NULL). */
const lam_position *lam_positions_find(const lam_positions *p, const char *image_path);

/* An empty catalogue (always LAM_OK). */
lam_status lam_catalog_init(lam_catalog *c);

/* Release the entries; c may be NULL. */
void lam_catalog_clear(lam_catalog *c);

/* Add the regions of one analysis (JSON tree); pos may be NULL. */
lam_status lam_catalog_add(lam_catalog *c, const struct cJSON *analysis, const char *image_path,
                           const lam_position *pos, lam_error *err);

/* Rank, and mark the same flake seen in overlapping tiles (same label, and
 * the centroid of one lies inside the other's chip-coordinate box): the copy
 * with the larger usable rectangle (usually the one not cut by a tile edge)
 * is kept, the others listed as also seen in. */
void lam_catalog_finish(lam_catalog *c);

/* Write DIR/catalog.csv and DIR/catalog.json (atomically), in rank order. */
lam_status lam_catalog_write(const lam_catalog *c, const char *dir, lam_error *err);

/* A contact sheet of the top candidates (labelled crops of the images). */
lam_status lam_catalog_contact_sheet(const lam_catalog *c, const char *path, size_t max_items,
                                     lam_error *err);

#endif
