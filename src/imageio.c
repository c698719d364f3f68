/* imageio.c - open an image file, detect its kind, dispatch to a loader or
 * name the kind it refuses. */
#include "imageio_internal.h"

#include <errno.h>
#include <stdlib.h>
#include <string.h>

/* The first bytes of a camera raw file name the maker's format. */
static const char *raw_name(const unsigned char *head, size_t n)
{
    if (n >= 4 && !memcmp(head, "II*\0", 4))
        return "Canon CR2";
    if (n >= 12 && !memcmp(head + 4, "ftyp", 4))
        return "Canon CR3";
    if (n >= 4 && !memcmp(head, "IIU\0", 4))
        return "Panasonic RW2";
    if (n >= 8 && !memcmp(head, "FUJIFILM", 8))
        return "Fujifilm RAF";
    return "Olympus ORF";
}

static lam_status refuse(lam_file_kind kind, const unsigned char *head, size_t n,
                         lam_error *err)
{
    if (n == 0)
        return lam_error_set(err, LAM_EFORMAT, "empty file");
    if (kind == LAM_FILE_CAMERA_RAW)
        return lam_error_set(err, LAM_EFORMAT,
                             "a camera raw file (%s): convert it to a 16-bit TIFF first",
                             raw_name(head, n));
    if (kind == LAM_FILE_UNKNOWN)
        return lam_error_set(err, LAM_EFORMAT,
                             "not a PNG, JPEG or TIFF image (unrecognised first bytes)");
    const char *name = lam_file_kind_name(kind);
    const char *noun = kind == LAM_FILE_PDF       ? " document"
                       : kind == LAM_FILE_ARCHIVE ? ""
                                                  : " image";
    return lam_error_set(err, LAM_EFORMAT, "%s %s%s: lamina reads PNG, JPEG and TIFF",
                         strchr("AEIOU", name[0]) ? "an" : "a", name, noun);
}

lam_status lam_image_load_stream(FILE *fp, const char *name, const lam_load_options *opt,
                                 lam_image **out, lam_error *err)
{
    lam_load_options defaults = lam_load_options_default();
    if (!opt)
        opt = &defaults;
    unsigned char head[32];
    long start = ftell(fp);
    size_t n = fread(head, 1, sizeof head, fp);
    if (start < 0 || fseek(fp, start, SEEK_SET) != 0)
        return lam_error_set(err, LAM_EIO, "cannot rewind the input");
    lam_status st;
    lam_file_kind kind = lam_file_sniff(head, n);
    if (opt->display8_only && kind != LAM_FILE_JPEG && kind != LAM_FILE_PNG) {
        lam_error_set(err, LAM_EINVAL, "decoding the 8-bit codes alone is for JPEG and PNG "
                                       "files, this is %s", lam_file_kind_name(kind));
        lam_error_set_file(err, name);
        return LAM_EINVAL;
    }
    switch (kind) {
    case LAM_FILE_PNG:
        st = lam__png_load(fp, name, opt, out, err);
        break;
    case LAM_FILE_JPEG:
        st = lam__jpeg_load(fp, name, opt, out, err);
        break;
    case LAM_FILE_TIFF:
        st = lam__tiff_load(fp, name, opt, out, err);
        break;
    default:
        st = refuse(kind, head, n, err);
        break;
    }
    if (st)
        lam_error_set_file(err, name);
    return st;
}

lam_status lam__image_fopen(const char *path, FILE **fp, lam_error *err)
{
    if ((*fp = fopen(path, "rb")))
        return LAM_OK;
    int e = errno;
    lam_status st = lam_error_set(err, LAM_EIO, "cannot open: %s", strerror(e));
    if (err)
        err->sys_errno = e;
    lam_error_set_file(err, path);
    return st;
}

lam_status lam_image_load(const char *path, const lam_load_options *opt,
                          lam_image **out, lam_error *err)
{
    FILE *fp = NULL;
    lam_status st = lam__image_fopen(path, &fp, err);
    if (st)
        return st;
    st = lam_image_load_stream(fp, path, opt, out, err);
    fclose(fp);
    return st;
}
