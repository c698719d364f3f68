/* colourmeta.h - from a file's colour metadata (ICC profile, PNG sRGB and
 * gAMA chunks) and the user's choice to the transfer tables of a load
 * (internal to the image loaders). The order of precedence and the
 * channel-by-channel use of ICC tone curves are set out in
 * include/lamina/image.h. */
#ifndef LAMINA_COLOURMETA_H
#define LAMINA_COLOURMETA_H

#include <stddef.h>
#include "pixconv.h"

typedef enum lam__meta_kind {
    LAM__META_NONE = 0, /* the file says nothing */
    LAM__META_SRGB,     /* PNG sRGB chunk */
    LAM__META_GAMMA,    /* PNG gAMA chunk alone */
    LAM__META_ICC       /* an embedded ICC profile */
} lam__meta_kind;

typedef struct lam__colour_meta {
    lam__meta_kind kind;
    double file_gamma;        /* gAMA: the encoding exponent, V = L^file_gamma (0.45455) */
    const unsigned char *icc; /* ICC: the profile bytes (borrowed) */
    size_t icc_len;
} lam__colour_meta;

/* Choose the curve (the user's when set, else the file's metadata, else
 * sRGB for 8-bit and linear for 16-bit samples), fill the tables of 'pc'
 * (already initialised) and record on 'img': transfer, file_transfer,
 * transfer_from_file, file_colour and transfer_source. LAM_EFORMAT when
 * the file's ICC profile cannot be applied channel by channel and the user
 * set no curve. */
lam_status lam__colour_apply(const lam__colour_meta *meta, const lam_transfer *user,
                             lam__pixconv *pc, lam_image *img, lam_error *err);

#endif
