/* report.c - JSON analysis and layer map (the annotated picture is drawn in
 * annotate.c, the contrast plot in plot.c). */
#include "lamina/report.h"
#include "lamina/bigalloc.h"
#include "lamina/outfile.h"
#include "lamina/png.h"
#include "lamina/version.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cjson/cJSON.h>

unsigned lam_report_layer_value(const lam_region_result *r)
{
    if (r->flags & (LAM_FLAG_UNMODELLED | LAM_FLAG_SATURATED))
        return 255u;
    if (r->layers > 0)
        return (unsigned)r->layers;
    return r->thick ? 254u : 255u;
}

lam_status lam_report_write_layers(const lam_analysis *a, const char *path, lam_error *err)
{
    size_t n = a->width * a->height;
    uint8_t *map = lam_big_malloc(n);
    if (!map)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the layer map");
    for (size_t k = 0; k < n; k++) {
        uint32_t l = a->seg->label[k];
        map[k] = l ? (uint8_t)lam_report_layer_value(&a->results[l - 1])
                   : (a->seg->cls[k] == LAM_CLASS_SUBSTRATE ? 0 : 255);
    }
    lam_status st = lam_png_save_grey8(path, map, a->width, a->height, err);
    free(map);
    return st;
}
