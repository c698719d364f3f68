/* transfer.c - sRGB (IEC 61966-2-1), linear and power-law transfer curves. */
#include "lamina/transfer.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

const lam_name lam_transfer_kind_names[] = {
    {LAM_TRANSFER_SRGB, "srgb", 0},   {LAM_TRANSFER_LINEAR, "linear", 0},
    {LAM_TRANSFER_AUTO, "auto", 1},   {LAM_TRANSFER_GAMMA, "gamma", 1},
    {0, NULL, 0}};

double lam_transfer_decode(const lam_transfer *t, double v)
{
    switch (t->kind) {
    case LAM_TRANSFER_SRGB:
    case LAM_TRANSFER_AUTO:
        /* IEC 61966-2-1:1999, section 5.2 */
        return v <= 0.04045 ? v / 12.92 : pow((v + 0.055) / 1.055, 2.4);
    case LAM_TRANSFER_GAMMA:
        return v <= 0.0 ? 0.0 : pow(v, t->gamma);
    case LAM_TRANSFER_LINEAR:
        break;
    }
    return v;
}

double lam_transfer_encode(const lam_transfer *t, double l)
{
    switch (t->kind) {
    case LAM_TRANSFER_SRGB:
    case LAM_TRANSFER_AUTO:
        return l <= 0.0031308 ? 12.92 * l : 1.055 * pow(l, 1.0 / 2.4) - 0.055;
    case LAM_TRANSFER_GAMMA:
        return l <= 0.0 ? 0.0 : pow(l, 1.0 / t->gamma);
    case LAM_TRANSFER_LINEAR:
        break;
    }
    return l;
}

int lam_transfer_parse(const char *text, lam_transfer *out)
{
    for (const lam_name *t = lam_transfer_kind_names; t->name; t++) {
        if (t->value != LAM_TRANSFER_GAMMA && !strcasecmp(text, t->name)) {
            *out = (lam_transfer){(lam_transfer_kind)t->value, 0.0};
            return 0;
        }
    }
    char *end = NULL;
    double g = strtod(text, &end);
    if (end == text || *end != '\0' || !isfinite(g) || g < LAM_GAMMA_MIN || g > LAM_GAMMA_MAX)
        return -1;
    *out = (lam_transfer){LAM_TRANSFER_GAMMA, g};
    return 0;
}

const char *lam_transfer_name(const lam_transfer *t)
{
    const char *name = lam_name_of(lam_transfer_kind_names, (int)t->kind);
    return name ? name : "auto";
}
