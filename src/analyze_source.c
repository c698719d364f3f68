/* analyze_source.c - the input's picture for the annotated image: a JPEG
 * is decoded again from its bytes, kept in memory, when the picture is
 * drawn; other files keep their 8-bit codes from the load.
 *
 * Why: the 8-bit copy of a 12 MP image is 36 MB, held through the whole
 * analysis only to be drawn on at the end, while the JPEG it came from is
 * typically 0.5-5 MB and decodes in ~0.04 s (djpeg's time). Keeping the
 * file's own bytes, not re-reading the file, guarantees that the picture
 * is of the very image analysed even if the file changes meanwhile. PNG
 * and TIFF files compress camera images far less (or not at all), so for
 * them the saving would be small or negative. */
#include "analyze_internal.h"
#include "imageio_internal.h"

#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* The rest of an open file (from its current position) in memory. */
static lam_status read_rest(FILE *fp, uint8_t **out, size_t *size, lam_error *err)
{
    size_t cap = (size_t)1 << 20, n = 0;
    uint8_t *buf = malloc(cap);
    while (buf) {
        n += fread(buf + n, 1, cap - n, fp);
        if (n < cap)
            break;
        uint8_t *grown = cap > SIZE_MAX / 2 ? NULL : realloc(buf, cap * 2);
        if (!grown) {
            free(buf);
            buf = NULL;
            break;
        }
        buf = grown, cap *= 2;
    }
    if (!buf)
        return lam_error_set(err, LAM_ENOMEM, "cannot hold the file in memory");
    if (ferror(fp)) {
        free(buf);
        return lam_error_set(err, LAM_EIO, "cannot read: %s", strerror(errno));
    }
    *out = buf;
    *size = n;
    return LAM_OK;
}

/* A JPEG read whole into memory and decoded from there; its bytes are
 * returned in *bytes. */
static lam_status load_jpeg_kept(FILE *fp, const char *path, const lam_load_options *lo,
                                 lam_image **img, uint8_t **bytes, size_t *size,
                                 lam_error *err)
{
    lam_status st = read_rest(fp, bytes, size, err);
    if (st)
        return st;
    FILE *mem = *size ? fmemopen(*bytes, *size, "rb") : NULL;
    if (!mem)
        st = lam_error_set(err, LAM_ENOMEM, "cannot read the file from memory");
    else {
        lam_load_options o = *lo;
        o.keep_display8 = 0;
        st = lam_image_load_stream(mem, path, &o, img, err);
        fclose(mem);
    }
    if (st) {
        free(*bytes);
        *bytes = NULL;
        *size = 0;
    }
    return st;
}

lam_status lam__load_input(const char *path, const lam_load_options *lo, lam_image **img,
                           uint8_t **bytes, size_t *size, lam_error *err)
{
    *bytes = NULL;
    *size = 0;
    FILE *fp = NULL;
    lam_status st = lam__image_fopen(path, &fp, err);
    if (st)
        return st;
    unsigned char head[16];
    size_t n = fread(head, 1, sizeof head, fp);
    if (fseek(fp, 0, SEEK_SET) != 0)
        st = lam_error_set(err, LAM_EIO, "cannot rewind the input");
    else if (lam_file_sniff(head, n) == LAM_FILE_JPEG)
        st = load_jpeg_kept(fp, path, lo, img, bytes, size, err);
    else {
        lam_load_options o = *lo;
        o.keep_display8 = 1; /* 8-bit files: the report draws on the file's own codes */
        st = lam_image_load_stream(fp, path, &o, img, err);
    }
    fclose(fp);
    if (st)
        lam_error_set_file(err, path);
    return st;
}

lam_status lam_analysis_display(lam_analysis *a, lam_error *err)
{
    if (a->display)
        return LAM_OK;
    if (!a->source)
        return lam_error_set(err, LAM_EINVAL, "the display copy was already used");
    FILE *mem = fmemopen(a->source, a->source_size, "rb");
    if (!mem)
        return lam_error_set(err, LAM_ENOMEM, "cannot read the kept input from memory");
    lam_load_options o = lam_load_options_default();
    o.display8_only = 1;
    o.display8_xrgb_room = 1; /* the annotated picture widens it in place */
    o.max_pixels = a->width * a->height;
    lam_image *img = NULL;
    lam_status st = lam_image_load_stream(mem, a->file, &o, &img, err);
    fclose(mem);
    if (!st && (img->width != a->width || img->height != a->height))
        st = lam_error_set(err, LAM_EINTERNAL, "the kept input decodes to %zux%zu, not %zux%zu",
                           img->width, img->height, a->width, a->height);
    if (!st) {
        a->display = img->display8;
        img->display8 = NULL;
    }
    lam_image_free(img);
    return st;
}

void lam_analysis_drop_pictures(lam_analysis *a)
{
    if (!a)
        return;
    free(a->display);
    free(a->source);
    a->display = NULL;
    a->source = NULL;
    a->source_size = 0;
}
