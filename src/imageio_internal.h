/* imageio_internal.h - shared between the image loaders (not public). */
#ifndef LAMINA_IMAGEIO_INTERNAL_H
#define LAMINA_IMAGEIO_INTERNAL_H

#include <stdio.h>
#include "lamina/image.h"

lam_status lam__png_load(FILE *fp, const char *path, const lam_load_options *opt,
                         lam_image **out, lam_error *err);
lam_status lam__jpeg_load(FILE *fp, const char *path, const lam_load_options *opt,
                          lam_image **out, lam_error *err);

/* Fill lut[0..levels-1] with linear values for each code value. */
void lam__transfer_lut(const lam_transfer *t, float *lut, size_t levels);

/* Fill the float planes and clip mask from img->display8 (8-bit RGB codes)
 * through a 256-entry table, on all cores. */
void lam__convert_rgb8(lam_image *img, const float *lut);

#endif
