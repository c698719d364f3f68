/* synth_crystal.c - the crystals other than graphene: names, layer
 * thicknesses and the published n,k file of each source and layer count
 * (tests/data/nk; papers in tests/data/nk/README.md). */
#include "synth_internal.h"

#include <string.h>

static const char *const names[SYNTH_XTAL_COUNT] = {"graphene", "hBN", "MoS2", "WSe2", "WS2"};

const char *synth_crystal_name(synth_crystal c)
{
    return c < SYNTH_XTAL_COUNT ? names[c] : "?";
}

int synth_crystal_parse(const char *name, synth_crystal *out)
{
    for (int i = 0; i < SYNTH_XTAL_COUNT; i++)
        if (!strcmp(name, names[i])) {
            *out = (synth_crystal)i;
            return 0;
        }
    return synth_fail("unknown crystal '%s' (graphene, hBN, MoS2, WSe2, WS2)", name);
}

double synth_crystal_layer_nm(synth_crystal c)
{
    static const double nm[SYNTH_XTAL_COUNT] = {SYNTH_LAYER_NM, 0.333, 0.615, 0.649, 0.616};
    return c < SYNTH_XTAL_COUNT ? nm[c] : SYNTH_LAYER_NM;
}

const char *synth_crystal_file(synth_crystal c, int source, int layers)
{
    static const char *const hbn[3] = {"hBN-o-Grudinin2023.yml", "hBN-o-Lee2018.yml",
                                       "hBN-o-Rah2019.yml"};
    switch (c) {
    case SYNTH_XTAL_HBN:
        return hbn[source >= 0 && source < 3 ? source : 0];
    case SYNTH_XTAL_MOS2:
        if (source == 1)
            return layers == 1 ? "MoS2-1L-Song2019.yml" : "MoS2-bulk-Song2019.yml";
        return layers == 1 ? "MoS2-1L-Hsu2019.yml" : layers == 2 ? "MoS2-2L-Hsu2019.yml"
               : layers == 3 ? "MoS2-3L-Hsu2019.yml" : "MoS2-bulk-Song2019.yml";
    case SYNTH_XTAL_WSE2:
        return source == 1 ? "WSe2-1L-Gu2019.yml" : "WSe2-1L-Hsu2019.yml";
    case SYNTH_XTAL_WS2:
        return "WS2-1L-Hsu2019.yml";
    default:
        return NULL;
    }
}
