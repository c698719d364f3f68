/* imageio.c - open an image file, detect its kind, dispatch to a loader. */
#include "imageio_internal.h"

#include <errno.h>
#include <string.h>

void lam__transfer_lut(const lam_transfer *t, float *lut, size_t levels)
{
    double top = (double)(levels - 1);
    for (size_t i = 0; i < levels; i++)
        lut[i] = (float)lam_transfer_decode(t, (double)i / top);
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
