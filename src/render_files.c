/* render_files.c - a scene file rendered to an image file and its truth map
 * beside it (lamina/render.h, lam_render_files). */
#include "lamina/png.h"
#include "lamina/render.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

lam_status lam_render_files(const char *scene_path, const char *out, int linear16,
                            char *truth_path, size_t n, lam_error *err)
{
    const char *dot = strrchr(out, '.');
    if (!dot || strchr(dot, '/'))
        dot = out + strlen(out);
    snprintf(truth_path, n, "%.*s.truth.png", (int)(dot - out), out);
    lam_scene scene;
    lam_status st = lam_scene_load(scene_path, &scene, err);
    if (st) {
        lam_error_set_file(err, scene_path);
        return st;
    }
    lam_image *img = NULL;
    uint8_t *truth = NULL;
    if ((st = lam_render(&scene, &img, &truth, err)) ||
        (st = lam_render_save(img, out, linear16, scene.jpeg_quality, err)) ||
        (st = lam_png_save_grey8(truth_path, truth, img->width, img->height, err)))
        lam_error_set_file(err, out);
    lam_image_free(img);
    free(truth);
    lam_scene_clear(&scene);
    return st;
}
