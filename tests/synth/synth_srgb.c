/* synth_srgb.c - transfer curves for 8-bit files: the sRGB encoding of
 * IEC 61966-2-1 (linear segment 12.92 v up to 0.0031308, then
 * 1.055 v^(1/2.4) - 0.055) and a plain power law for cameras that do not
 * use the sRGB curve. */
#include "synth_internal.h"

#include <math.h>

double synth_srgb_encode(double v)
{
    if (!(v > 0))
        return 0.0;
    if (v >= 1)
        return 1.0;
    return v <= 0.0031308 ? 12.92 * v : 1.055 * pow(v, 1.0 / 2.4) - 0.055;
}

double synth_gamma_encode(double v, double gamma)
{
    if (!(v > 0))
        return 0.0;
    return v >= 1 ? 1.0 : pow(v, 1.0 / gamma);
}
