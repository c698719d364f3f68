/* image.c - the lam_image type: allocation, size checks, format sniffing. */
#include "lamina/image.h"

#include <stdint.h>
#include <stdlib.h>
#include <string.h>

lam_load_options lam_load_options_default(void)
{
    lam_load_options o;
    o.transfer.kind = LAM_TRANSFER_AUTO;
    o.transfer.gamma = 0.0;
    o.max_pixels = LAM_IMAGE_DEFAULT_MAX_PIXELS;
    o.keep_display8 = 0;
    return o;
}

lam_status lam_image_check_size(size_t width, size_t height, size_t max_pixels,
                                const char *what, lam_error *err)
{
    if (width == 0 || height == 0)
        return lam_error_set(err, LAM_EFORMAT, "%s has zero size (%zux%zu)", what,
                             width, height);
    if (max_pixels == 0)
        max_pixels = LAM_IMAGE_DEFAULT_MAX_PIXELS;
    if (width > max_pixels || height > max_pixels / width)
        return lam_error_set(err, LAM_ETOOBIG,
                             "%s is %zux%zu pixels, above the limit of %zu pixels "
                             "(raise it with --max-megapixels)",
                             what, width, height, max_pixels);
    /* 3 float planes must also fit in size_t */
    if (width * height > SIZE_MAX / (3 * sizeof(float)))
        return lam_error_set(err, LAM_ETOOBIG, "%s is too large to hold in memory", what);
    return LAM_OK;
}

lam_status lam_image_alloc(size_t width, size_t height, lam_image **out, lam_error *err)
{
    lam_status st = lam_image_check_size(width, height, SIZE_MAX / 16, "image", err);
    if (st)
        return st;
    size_t n = width * height;
    lam_image *img = calloc(1, sizeof *img);
    float *pix = calloc(3 * n, sizeof *pix);
    uint8_t *clip = calloc(n, 1);
    if (!img || !pix || !clip) {
        free(img);
        free(pix);
        free(clip);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a %zux%zu image", width,
                             height);
    }
    img->width = width;
    img->height = height;
    img->plane[0] = pix;
    img->plane[1] = pix + n;
    img->plane[2] = pix + 2 * n;
    img->clipped = clip;
    img->bit_depth = 8;
    img->source_channels = 3;
    img->transfer.kind = LAM_TRANSFER_LINEAR;
    *out = img;
    return LAM_OK;
}

void lam_image_free(lam_image *img)
{
    if (!img)
        return;
    free(img->plane[0]);
    free(img->clipped);
    free(img->display8);
    free(img);
}

lam_file_kind lam_file_sniff(const unsigned char *head, size_t n)
{
    static const unsigned char png_sig[8] = {0x89, 'P', 'N', 'G', '\r', '\n', 0x1a, '\n'};
    if (n >= 8 && !memcmp(head, png_sig, 8))
        return LAM_FILE_PNG;
    if (n >= 3 && head[0] == 0xff && head[1] == 0xd8 && head[2] == 0xff)
        return LAM_FILE_JPEG;
    return LAM_FILE_UNKNOWN;
}
