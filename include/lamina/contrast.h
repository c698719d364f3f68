/*
 * lamina/contrast.h - the image as contrast against the bare substrate.
 *
 * C_c = (B_c - I_c) / B_c per channel, in linear light, B the flat field of
 * the substrate fitted by lamina/substrate.h: positive where a flake is
 * darker than the substrate around it. Then a 3 x 3 box filter lowers the
 * pixel noise threefold before regions are cut (blur and the filter mix
 * two classes within ~2 px of an edge, which is why region statistics use
 * interior pixels only, lamina/segment.h).
 *
 * Both work in place on a lam_image's planes, in row slices on up to
 * 'threads' threads; results do not depend on the thread count.
 */
#ifndef LAMINA_CONTRAST_H
#define LAMINA_CONTRAST_H

#include <stddef.h>
#include "lamina/error.h"
#include "lamina/image.h"
#include "lamina/substrate.h"

/* Replace the image planes by contrast (B - I) / B, the flat field sampled
 * every 16 pixels and interpolated bilinearly (it is smooth). Without
 * memory for the samples it evaluates B at every pixel instead: never
 * fails. */
void lam_contrast_in_place(lam_image *img, const lam_substrate *s, size_t threads);

/* 3 x 3 box filter of each contrast plane, in place (edges replicate).
 * LAM_ENOMEM only. */
lam_status lam_contrast_denoise(lam_image *contrast, size_t threads, lam_error *err);

#endif
