/*
 * lamina/crops.h - small pictures of catalogue candidates: each crop shows
 * the region in its image with its outline, usable rectangle, a label and
 * a scale bar; the contact sheet puts the top candidates side by side.
 *
 * Sources: the image as analysed (its path as recorded; if it cannot be
 * read, the annotated picture STEM.annotated.png in the results folder) and
 * the layer map STEM.layers.png there, from which the region is recovered
 * (the connected pixels of its layer count around its usable rectangle).
 * Without the layer map the crop has no outline.
 *
 * Crops are written as DIR/crops/STEM.rID.png (lam_crop_name), at most
 * 'max' of them, candidates in catalogue order; an existing crop newer
 * than the image's STEM.json is kept (a live session redraws only new
 * ones). Files are written atomically.
 */
#ifndef LAMINA_CROPS_H
#define LAMINA_CROPS_H

#include <stddef.h>
#include "lamina/catalog.h"
#include "lamina/error.h"

#define LAM_CROP_PX 200

/* "crops/STEM.rID.png" for entry i (relative to the output folder). */
void lam_crop_name(const lam_catalog *c, size_t i, char *out, size_t n);

/* Write the crops of the first 'max_crops' candidates into dir/crops/ and
 * a contact sheet of the first 'max_sheet' (4 a row, numbered by catalogue
 * rank) to sheet_path. Each image's sources are read once for both, and
 * the images are worked on lam_parallel_default() threads (each thread
 * reads one image at a time); the sheet's cells are the crops' pictures.
 * A crop whose image cannot be read is skipped (not an error; its cell
 * stays empty). The first error in image order is returned. */
lam_status lam_crops_and_sheet_write(const lam_catalog *c, const char *dir, size_t max_crops,
                                     const char *sheet_path, size_t max_sheet, lam_error *err);

#endif
