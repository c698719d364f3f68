/*
 * lamina/inputs.h - the list of images a batch works on: files as given,
 * folders expanded to their images in name order (optionally with their
 * subfolders), list files, shards; and which file names are images and
 * which are lamina's own outputs.
 *
 * Order: byte order of names (strcmp), so a scan is the same on every
 * machine; hidden entries (a leading '.') are skipped.
 * Ownership: a lam_inputs owns its strings; lam_inputs_free releases them
 * (a zeroed lam_inputs is empty and may be freed).
 * Errors: LAM_EINVAL for what the caller asked wrongly (a folder that
 * yields no image, two inputs that would write the same results: the
 * command line exits 2), LAM_EIO for a folder or list that cannot be read,
 * LAM_ENOMEM. Messages name the folder or files; on failure the list is
 * left empty.
 */
#ifndef LAMINA_INPUTS_H
#define LAMINA_INPUTS_H

#include <stddef.h>
#include "lamina/error.h"

typedef struct lam_inputs {
    size_t count, cap;
    char **paths;
} lam_inputs;

/* Subfolders deeper than this are not entered (this also ends loops made
 * with symbolic links). */
#define LAM_INPUTS_MAX_DEPTH 16

/* Files as given; folders expanded to their .png/.jpg/.jpeg/.tif/.tiff
 * files in name order (lamina's own result images skipped), descending
 * into subfolders when 'recursive' (depth first, in name order). A folder
 * that yields no image is LAM_EINVAL saying why ("D holds no image files
 * (3 subfolders; add --recursive)"). 'list' (may be NULL) adds one path a
 * line ('#' comments and blank lines skipped), relative to the list's
 * folder. Two inputs whose output stems (lamina/batch.h) clash are
 * LAM_EINVAL. */
lam_status lam_inputs_collect(lam_inputs *in, const char *const *args, size_t n,
                              const char *list, int recursive, lam_error *err);

/* Keep the index-th of 'of' parts (1-based): items k with k % of == index-1. */
void lam_inputs_shard(lam_inputs *in, size_t index, size_t of);

/* Append a copy of path; LAM_ENOMEM. */
lam_status lam_inputs_add(lam_inputs *in, const char *path, lam_error *err);

/* Release the strings and empty the list (a zeroed list is fine). */
void lam_inputs_free(lam_inputs *in);

/* The names (not paths) in folder dir for which keep(name) is true (keep
 * may be NULL: every name), hidden ones skipped, sorted. LAM_EIO when the
 * folder cannot be read. */
lam_status lam_inputs_folder_names(const char *dir, int (*keep)(const char *name),
                                   lam_inputs *out, lam_error *err);

/* 1 when a name ends in .png/.jpg/.jpeg/.tif/.tiff (any case). */
int lam_inputs_is_image_name(const char *name);

/* 1 for lamina's own picture outputs (STEM.annotated.*, STEM.layers.*,
 * STEM.truth.*, contact-sheet.png), which a results folder may hold. */
int lam_inputs_is_output_name(const char *name);

#endif
