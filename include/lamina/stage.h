/*
 * lamina/stage.h - stage positions and the stage's own coordinate
 * convention: where a pixel of a tile is on the chip, in the numbers the
 * microscope's stage shows.
 *
 * Positions file (CSV): a header "file,x_um,y_um" or "file,x_mm,y_mm",
 * optionally followed by ",rotation_deg"; then one row per tile: its file
 * name (matched by base name) and the stage reading at which the tile's
 * centre pixel was under the crosshair. Lines starting with # are comments.
 *
 * The convention (lam_stage):
 *   axes      which way the stage's readings grow in the camera image:
 *             "right,down" (default: like pixel coordinates), "right,up",
 *             "left,down" or "left,up". To find out, move the stage by +x:
 *             if the picture moves left, readings grow to the right.
 *   units     "um" or "mm": the unit of the go-to list and of an origin
 *             given as a reading (default: that of the positions file).
 *   rotation  degrees by which the picture must be turned counter-clockwise
 *             (as shown on screen) to bring its axes onto the stage's
 *             (added to a tile's rotation_deg).
 *   origin    "X,Y": a stage reading (in 'units') that becomes chip (0, 0);
 *             or "TILE:PX,PY": the pixel PX,PY of tile TILE (e.g. an
 *             alignment mark), whose reading becomes chip (0, 0).
 * A pixel (px, py) of a tile w x h px at um_per_px whose centre reads P:
 *   d = R(rotation) * ((px + 0.5 - w/2) * um_per_px, (py + 0.5 - h/2) * um_per_px)
 *   reading = P + (sx * d.x, sy * d.y)     (sx, sy = +1 or -1 from 'axes')
 * with R that counter-clockwise turn on screen (image y points down):
 * R (1, 0) = (cos t, -sin t). Pixel indices count from 0 at the top left.
 * Chip coordinates are readings minus the origin (readings themselves
 * without one), in micrometres, in the stage's axis directions.
 *
 * Ownership: lam_positions_load fills a caller-owned lam_positions
 * (lam_positions_clear). Errors name the file, line or option value.
 */
#ifndef LAMINA_STAGE_H
#define LAMINA_STAGE_H

#include <stddef.h>
#include "lamina/error.h"

typedef struct lam_position {
    char file[256];
    double x_um, y_um, rotation_deg; /* the reading, converted to um */
} lam_position;

typedef struct lam_positions {
    size_t count;
    lam_position *items;
    double unit_um;                  /* 1 (x_um header) or 1000 (x_mm) */
    char path[1024];                 /* the file, for messages */
} lam_positions;

/* Read a positions file (see above); errors name the file and line. */
lam_status lam_positions_load(const char *path, lam_positions *out, lam_error *err);
/* Release what lam_positions_load filled; p may be zeroed. */
void lam_positions_clear(lam_positions *p);

/* The position of an image, matched by base name; NULL when absent. */
const lam_position *lam_positions_find(const lam_positions *p, const char *image_path);

typedef struct lam_stage {
    int x_sign, y_sign;        /* +1 right / down, -1 left / up */
    double unit_um;            /* 0: that of the positions file */
    double rotation_deg;
    int origin_kind;           /* 0 none, 1 a reading, 2 a pixel of a tile */
    double origin[2];          /* kind 1: reading in 'unit_um' units; kind 2: pixel */
    char origin_tile[256];
    char origin_text[300];     /* as given, for the record */
    double origin_um[2];       /* resolved origin reading, um (lam_stage_resolve) */
    int resolved;
} lam_stage;

/* Axes right,down, units from the positions file, no rotation, no origin. */
lam_stage lam_stage_default(void);

/* Set one key ("axes", "units", "rotation", "origin") from its text;
 * LAM_EINVAL with a message naming the key and the accepted forms. */
lam_status lam_stage_set(lam_stage *s, const char *key, const char *value, lam_error *err);

/* The unit of go-to coordinates in um (1 or 1000). */
double lam_stage_unit_um(const lam_stage *s, const lam_positions *p);
const char *lam_stage_unit_name(const lam_stage *s, const lam_positions *p);

/* Stage reading (um) of pixel (px, py) of a w x h tile at um_per_px. */
void lam_stage_reading(const lam_stage *s, const lam_position *pos, double w, double h,
                       double um_per_px, double px, double py, double out_um[2]);

/* Fix the origin: for a tile's pixel, from that tile's position and size
 * (w, h, um_per_px). LAM_EINVAL when the tile is not in the positions. */
lam_status lam_stage_resolve(lam_stage *s, const lam_positions *p, double w, double h,
                             double um_per_px, lam_error *err);

/* Chip coordinates (um from the origin) of a reading (um). */
void lam_stage_chip(const lam_stage *s, const double reading_um[2], double chip_um[2]);

#endif
