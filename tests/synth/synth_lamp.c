/* synth_lamp.c - microscope lamps: a halogen bulb as a blackbody
 * 2800-3400 K (Planck's law, c2 = 1.438777e-2 m K, CODATA 2018), CIE
 * illuminant A (CIE 015: Planck's law with c2 = 1.435e-2 m K at 2848 K,
 * i.e. 2856 K on today's temperature scale), and a white LED of our own
 * two-band model: a blue die (Gaussian, 445-455 nm) and a broad phosphor
 * band (a Gaussian with different widths below and above its 540-600 nm
 * peak). */
#include "synth_internal.h"

#include <math.h>

static const char *lamp_names[] = {"random", "blackbody", "led-white", "cie-a"};

const char *synth_lamp_name(synth_lamp_kind k)
{
    return lamp_names[k];
}

void synth_lamp_draw(synth_rng *r, synth_lamp_kind kind, synth_lamp *out)
{
    if (kind == SYNTH_LAMP_RANDOM)
        kind = (synth_lamp_kind)synth_rng_int(r, SYNTH_LAMP_BLACKBODY, SYNTH_LAMP_CIE_A);
    synth_lamp l = {0};
    l.kind = kind;
    l.kelvin = kind == SYNTH_LAMP_CIE_A ? 2856.0 : synth_rng_uniform(r, 2800, 3400);
    l.blue_nm = synth_rng_uniform(r, 445, 455);
    l.blue_fwhm_nm = synth_rng_uniform(r, 16, 26);
    l.phos_nm = synth_rng_uniform(r, 540, 600);
    l.phos_lo_nm = synth_rng_uniform(r, 45, 70);
    l.phos_hi_nm = synth_rng_uniform(r, 60, 95);
    l.blue_share = synth_rng_uniform(r, 0.6, 1.6);
    if (kind != SYNTH_LAMP_LED)
        l.blue_nm = l.blue_fwhm_nm = l.phos_nm = l.phos_lo_nm = l.phos_hi_nm = l.blue_share = 0;
    if (kind == SYNTH_LAMP_LED)
        l.kelvin = 0;
    *out = l;
}

static double planck(double wl_nm, double kelvin, double c2)
{
    double x = wl_nm * 1e-9;
    return 1.0 / (pow(x / 560e-9, 5) * expm1(c2 / (x * kelvin)));
}

double synth_lamp_spd(const synth_lamp *l, double wl_nm)
{
    if (l->kind == SYNTH_LAMP_CIE_A)
        return planck(wl_nm, 2848.0, 1.435e-2) / planck(560, 2848.0, 1.435e-2);
    if (l->kind == SYNTH_LAMP_BLACKBODY)
        return planck(wl_nm, l->kelvin, 1.438777e-2) / planck(560, l->kelvin, 1.438777e-2);
    double sb = l->blue_fwhm_nm / (2 * sqrt(2 * log(2.0)));
    double db = (wl_nm - l->blue_nm) / sb;
    double hw = wl_nm < l->phos_nm ? l->phos_lo_nm : l->phos_hi_nm;
    double dp = (wl_nm - l->phos_nm) / hw;
    /* half widths at half maximum: exp(-ln2 (d/hw)^2) */
    return l->blue_share * exp(-0.5 * db * db) + exp(-log(2.0) * dp * dp);
}
