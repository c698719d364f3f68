/* synth_tiff.c - 16-bit grey or RGB TIFF through libtiff, deflate
 * compression with the horizontal predictor, strips of 16 rows, and the
 * pixel size as resolution in pixels per centimetre. */
#include "synth_internal.h"

#include <stdarg.h>
#include <stdlib.h>
#include <string.h>
#include <tiffio.h>

static int encode(TIFF *t, const uint16_t *px, int w, int h, int nc, double um_per_px)
{
    TIFFSetField(t, TIFFTAG_IMAGEWIDTH, (uint32_t)w);
    TIFFSetField(t, TIFFTAG_IMAGELENGTH, (uint32_t)h);
    TIFFSetField(t, TIFFTAG_BITSPERSAMPLE, 16);
    TIFFSetField(t, TIFFTAG_SAMPLESPERPIXEL, nc);
    TIFFSetField(t, TIFFTAG_PHOTOMETRIC, nc == 3 ? PHOTOMETRIC_RGB : PHOTOMETRIC_MINISBLACK);
    TIFFSetField(t, TIFFTAG_PLANARCONFIG, PLANARCONFIG_CONTIG);
    TIFFSetField(t, TIFFTAG_COMPRESSION, COMPRESSION_ADOBE_DEFLATE);
    TIFFSetField(t, TIFFTAG_PREDICTOR, PREDICTOR_HORIZONTAL);
    TIFFSetField(t, TIFFTAG_ROWSPERSTRIP, 16);
    if (um_per_px > 0) {
        TIFFSetField(t, TIFFTAG_RESOLUTIONUNIT, RESUNIT_CENTIMETER);
        TIFFSetField(t, TIFFTAG_XRESOLUTION, (float)(1e4 / um_per_px));
        TIFFSetField(t, TIFFTAG_YRESOLUTION, (float)(1e4 / um_per_px));
    }
    size_t stride = (size_t)w * nc;
    uint16_t *row = malloc(stride * sizeof *row);
    if (!row)
        return -1;
    int st = 0;
    for (int y = 0; y < h && !st; y++) {
        memcpy(row, px + (size_t)y * stride, stride * sizeof *row);   /* libtiff may modify */
        st = TIFFWriteScanline(t, row, (uint32_t)y, 0) < 0;
    }
    free(row);
    return st ? -1 : 0;
}

static void quiet(const char *module, const char *fmt, va_list ap)
{
    (void)module, (void)fmt, (void)ap;
}

int synth_tiff_write(const char *path, const uint16_t *px, int w, int h, int nc,
                     double um_per_px)
{
    synth_outfile of;
    if (synth_outfile_open(&of, path))
        return -1;
    fclose(of.fp);   /* libtiff opens the temporary itself */
    of.fp = NULL;
    TIFFErrorHandler old = TIFFSetErrorHandler(quiet);
    TIFF *t = TIFFOpen(of.tmp, "w");
    int st = t ? encode(t, px, w, h, nc, um_per_px) : -1;
    if (t)
        TIFFClose(t);
    TIFFSetErrorHandler(old);
    if (st) {
        synth_outfile_abort(&of);
        return synth_fail("%s: libtiff could not write the image", path);
    }
    if (rename(of.tmp, path) != 0) {
        remove(of.tmp);
        return synth_fail("%s: cannot rename into place", path);
    }
    return 0;
}
