/* imageio_internal.h - the format loaders that imageio.c dispatches to (not
 * public). Each reads from the stream's current position, checks the size
 * against opt->max_pixels before allocating pixels, converts through
 * pixconv.h with the curve colourmeta.h chooses, and writes one message
 * into err on failure (imageio.c adds the file name). */
#ifndef LAMINA_IMAGEIO_INTERNAL_H
#define LAMINA_IMAGEIO_INTERNAL_H

#include <stdio.h>
#include "lamina/image.h"

lam_status lam__png_load(FILE *fp, const char *path, const lam_load_options *opt,
                         lam_image **out, lam_error *err);
lam_status lam__jpeg_load(FILE *fp, const char *path, const lam_load_options *opt,
                          lam_image **out, lam_error *err);
/* Open an image file for reading; on failure LAM_EIO with the system's
 * reason, errno in err->sys_errno and the file named (as lam_image_load
 * reports it). Also for callers that read the file otherwise
 * (analyze_source.c). */
lam_status lam__image_fopen(const char *path, FILE **fp, lam_error *err);

/* lam_image_alloc with the planes not zeroed, for a loader that writes
 * every sample of every plane (lam__pixconv_row, lam__pixconv_rgb8).
 * Why: zeroing is a pass over 12 bytes a pixel on one thread, which
 * touches every page first there; on this project's machines the first
 * touch of a page is the costly part (a 12 MP load after a few idle
 * seconds 0.25-0.28 s zeroed, 0.19-0.22 s written first by the
 * conversion on all cores; docs/performance.md). */
lam_status lam__image_alloc_unset(size_t width, size_t height, lam_image **out, lam_error *err);

/* TIFF needs a seekable stream. */
lam_status lam__tiff_load(FILE *fp, const char *path, const lam_load_options *opt,
                          lam_image **out, lam_error *err);

#endif
