/*
 * lamina/transfer.h - camera transfer curves (encoded value <-> linear light).
 *
 * Contrast is a ratio of linear intensities, so every pixel must be
 * linearised before it is compared: a gamma or tone curve does not cancel
 * in (B - I) / B, while a per-channel white-balance gain does.
 *
 * Values are 0..1 of full scale on both sides. Pure functions; no errors.
 */
#ifndef LAMINA_TRANSFER_H
#define LAMINA_TRANSFER_H

#include "lamina/names.h"

typedef enum lam_transfer_kind {
    LAM_TRANSFER_AUTO = 0, /* choose from the file: sRGB for 8-bit, linear for 16-bit */
    LAM_TRANSFER_SRGB,     /* IEC 61966-2-1 piecewise curve */
    LAM_TRANSFER_LINEAR,   /* values are already linear */
    LAM_TRANSFER_GAMMA     /* pure power law V = L^(1/gamma) */
} lam_transfer_kind;

/* The gamma values accepted anywhere (files and options). */
#define LAM_GAMMA_MIN 0.2
#define LAM_GAMMA_MAX 5.0

typedef struct lam_transfer {
    lam_transfer_kind kind;
    double gamma; /* used by LAM_TRANSFER_GAMMA only; > 0 */
} lam_transfer;

/* Names of the kinds: "auto", "srgb", "linear", "gamma" (a setup file gives
 * a gamma as {"gamma": g}, so "gamma" and "auto" are marked internal). */
extern const lam_name lam_transfer_kind_names[];

/* Encoded value v (0..1) to linear light. */
double lam_transfer_decode(const lam_transfer *t, double v);

/* Linear light l (0..1) to encoded value. */
double lam_transfer_encode(const lam_transfer *t, double l);

/* Parse "srgb", "linear" or a gamma number such as "2.2". Returns 0 on
 * success, -1 when the text is none of these. */
int lam_transfer_parse(const char *text, lam_transfer *out);

/* Name for reports: "srgb", "linear", "gamma" or "auto". */
const char *lam_transfer_name(const lam_transfer *t);

#endif
