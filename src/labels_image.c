/* labels_image.c - the label map of one image from either kind of label
 * file (lamina/labels.h). */
#include "lamina/labels.h"
#include "lamina/calibrate.h"
#include "lamina/image.h"

#include <stdlib.h>
#include <string.h>

lam_status lam_labels_map_for_image(const char *labels, const char *image,
                                    const struct lam_setup *setup, uint8_t **map, size_t *width,
                                    size_t *height, lam_error *err)
{
    size_t len = strlen(labels);
    *map = NULL;
    if (len <= 5 || strcmp(labels + len - 5, ".json"))
        return lam_labels_load_map(labels, map, width, height, err);
    /* polygons or points: the image's size decides the map's */
    lam_image *im = NULL;
    lam_status st = lam_image_load(image, NULL, &im, err);
    if (st)
        return st;
    *width = im->width;
    *height = im->height;
    lam_image_free(im);
    size_t n = *width * *height;
    if (!(*map = malloc(n ? n : 1)))
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a %zux%zu label map", *width,
                             *height);
    if ((st = lam_calib_labels_from_json(labels, image, setup, *width, *height, *map, err))) {
        free(*map);
        *map = NULL;
    }
    return st;
}
