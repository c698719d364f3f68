/* summary_image.c - how an image loaded, in one line (lamina/summary.h,
 * lam_summary_image; `lamina inspect`). */
#include "lamina/summary.h"
#include "summary_internal.h"

lam_status lam_summary_image(const char *path, const lam_image *img, char **text,
                             lam_error *err)
{
    lam__text t;
    lam_status st = lam__text_open(&t, err);
    if (st)
        return st;
    size_t n = img->width * img->height;
    double mean[3] = {0, 0, 0};
    for (int ch = 0; ch < 3; ch++) {
        for (size_t k = 0; k < n; k++)
            mean[ch] += img->plane[ch][k];
        mean[ch] /= (double)n;
    }
    fprintf(t.f,
            "%s: %zux%zu %s %d-bit %s, transfer %s, saturated %.3f %%, linear mean "
            "%.4f %.4f %.4f",
            path, img->width, img->height, lam_file_kind_name(img->kind), img->bit_depth,
            img->source_channels == 1 ? "grey" : "RGB", lam_transfer_name(&img->transfer),
            100.0 * (double)img->clipped_count / (double)n, mean[0], mean[1], mean[2]);
    return lam__text_close(&t, text, err);
}
