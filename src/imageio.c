/* imageio.c - open an image file, detect its kind, dispatch to a loader. */
#include "imageio_internal.h"
#include "lamina/parallel.h"

#include <errno.h>
#include <stdlib.h>
#include <string.h>

void lam__transfer_lut(const lam_transfer *t, float *lut, size_t levels)
{
    double top = (double)(levels - 1);
    for (size_t i = 0; i < levels; i++)
        lut[i] = (float)lam_transfer_decode(t, (double)i / top);
}

typedef struct convert_ctx {
    lam_image *img;
    const float *lut;
    size_t clipped[LAM_MAX_THREADS];
} convert_ctx;

static void convert_rows(size_t begin, size_t end, size_t slice, void *vctx)
{
    convert_ctx *c = vctx;
    lam_image *img = c->img;
    size_t w = img->width, clipped = 0;
    for (size_t k = begin * w; k < end * w; k++) {
        const uint8_t *p = img->display8 + k * 3;
        img->plane[0][k] = c->lut[p[0]];
        img->plane[1][k] = c->lut[p[1]];
        img->plane[2][k] = c->lut[p[2]];
        int clip = p[0] == 255 || p[1] == 255 || p[2] == 255;
        img->clipped[k] = (uint8_t)clip;
        clipped += (size_t)clip;
    }
    c->clipped[slice] = clipped;
}

void lam__convert_rgb8(lam_image *img, const float *lut)
{
    convert_ctx *c = calloc(1, sizeof *c);
    if (!c) {
        /* no memory for the context: do it here, one slice */
        convert_ctx local;
        memset(&local, 0, sizeof local);
        local.img = img;
        local.lut = lut;
        convert_rows(0, img->height, 0, &local);
        img->clipped_count = local.clipped[0];
        return;
    }
    c->img = img;
    c->lut = lut;
    size_t threads = lam_parallel_default();
    lam_parallel_for(img->height, threads, convert_rows, c);
    img->clipped_count = 0;
    for (size_t t = 0; t < LAM_MAX_THREADS; t++)
        img->clipped_count += c->clipped[t];
    free(c);
}

lam_status lam_image_load_stream(FILE *fp, const char *name, const lam_load_options *opt,
                                 lam_image **out, lam_error *err)
{
    lam_load_options defaults = lam_load_options_default();
    if (!opt)
        opt = &defaults;
    unsigned char head[8];
    long start = ftell(fp);
    size_t n = fread(head, 1, sizeof head, fp);
    if (start < 0 || fseek(fp, start, SEEK_SET) != 0)
        return lam_error_set(err, LAM_EIO, "cannot rewind the input");
    lam_status st;
    switch (lam_file_sniff(head, n)) {
    case LAM_FILE_PNG:
        st = lam__png_load(fp, name, opt, out, err);
        break;
    case LAM_FILE_JPEG:
        st = lam__jpeg_load(fp, name, opt, out, err);
        break;
    default:
        st = n == 0 ? lam_error_set(err, LAM_EFORMAT, "empty file")
                    : lam_error_set(err, LAM_EFORMAT,
                                    "not a PNG or JPEG image (unrecognised first bytes)");
        break;
    }
    if (st)
        lam_error_set_file(err, name);
    return st;
}

lam_status lam_image_load(const char *path, const lam_load_options *opt,
                          lam_image **out, lam_error *err)
{
    FILE *fp = fopen(path, "rb");
    if (!fp) {
        lam_status st = lam_error_set(err, LAM_EIO, "cannot open: %s", strerror(errno));
        if (err)
            err->sys_errno = errno;
        lam_error_set_file(err, path);
        return st;
    }
    lam_status st = lam_image_load_stream(fp, path, opt, out, err);
    fclose(fp);
    return st;
}
