/* synth_jpeg.c - baseline JPEG through libjpeg with quality q and, for
 * colour, 4:2:0 chroma subsampling set explicitly (luma 2 x 2, chroma
 * 1 x 1), as most cameras write. */
#include "synth_internal.h"

#include <jpeglib.h>
#include <setjmp.h>

typedef struct jerr {
    struct jpeg_error_mgr mgr;
    jmp_buf jump;
} jerr;

static void on_error(j_common_ptr cinfo)
{
    longjmp(((jerr *)cinfo->err)->jump, 1);
}

static int encode(FILE *fp, const uint8_t *px, int w, int h, int nc, int quality)
{
    struct jpeg_compress_struct c;
    jerr e;
    c.err = jpeg_std_error(&e.mgr);
    e.mgr.error_exit = on_error;
    if (setjmp(e.jump)) {
        jpeg_destroy_compress(&c);
        return -1;
    }
    jpeg_create_compress(&c);
    jpeg_stdio_dest(&c, fp);
    c.image_width = (JDIMENSION)w;
    c.image_height = (JDIMENSION)h;
    c.input_components = nc;
    c.in_color_space = nc == 3 ? JCS_RGB : JCS_GRAYSCALE;
    jpeg_set_defaults(&c);
    jpeg_set_quality(&c, quality, TRUE);
    if (nc == 3) {
        c.comp_info[0].h_samp_factor = c.comp_info[0].v_samp_factor = 2;
        for (int i = 1; i < 3; i++)
            c.comp_info[i].h_samp_factor = c.comp_info[i].v_samp_factor = 1;
    }
    jpeg_start_compress(&c, TRUE);
    while (c.next_scanline < c.image_height) {
        JSAMPROW row = (JSAMPROW)(px + (size_t)c.next_scanline * w * nc);
        jpeg_write_scanlines(&c, &row, 1);
    }
    jpeg_finish_compress(&c);
    jpeg_destroy_compress(&c);
    return 0;
}

int synth_jpeg_write(const char *path, const uint8_t *px, int w, int h, int nc, int quality)
{
    if (quality < 1 || quality > 100)
        return synth_fail("%s: JPEG quality %d is outside 1..100", path, quality);
    synth_outfile of;
    if (synth_outfile_open(&of, path))
        return -1;
    if (encode(of.fp, px, w, h, nc, quality)) {
        synth_outfile_abort(&of);
        return synth_fail("%s: libjpeg could not write the image", path);
    }
    return synth_outfile_commit(&of);
}
