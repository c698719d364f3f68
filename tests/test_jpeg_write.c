/* test_jpeg_write.c - the annotated picture's JPEG (lam_jpeg_save_xrgb32):
 * coded in bands side by side and joined with restart markers, it must be
 * a JPEG that libjpeg-turbo (the reference library, Debian's) decodes
 * without a warning to exactly the pixels of its own one-pass coding of
 * the same picture at the same settings, and the same file for any
 * thread count. */
#include "check.h"
#include "lamina/jpeg.h"
#include "lamina/parallel.h"

#include <stdio.h>
#include <jpeglib.h>
#include <stdlib.h>
#include <string.h>

/* A picture with what the annotated ones hold: smooth shading, noise-like
 * texture, 1-pixel lines of saturated colour and flat panels; h is not a
 * multiple of the bands' 512 rows nor of the blocks' 8. */
static uint32_t *picture(size_t w, size_t h)
{
    uint32_t *px = malloc(w * h * sizeof *px);
    uint32_t seed = 12345;
    for (size_t y = 0; px && y < h; y++)
        for (size_t x = 0; x < w; x++) {
            seed = seed * 1664525u + 1013904223u;
            unsigned r = (unsigned)(120 + 60 * x / w + (seed >> 28)),
                     g = (unsigned)(100 + 50 * y / h + (seed >> 29)), b = 170 + (seed >> 30);
            if (x % 97 == 0 || y % 89 == 0) /* thin yellow lines */
                r = 250, g = 220, b = 20;
            if (x > w / 3 && x < w / 2 && y > h / 5 && y < h / 4) /* a dark panel */
                r = g = b = 34;
            px[y * w + x] = (uint32_t)r << 16 | (uint32_t)g << 8 | b;
        }
    return px;
}

/* libjpeg-turbo's own one-pass coding of px: quality 92, 4:4:4, no
 * restart markers. */
static int reference_jpeg(const char *path, const uint32_t *px, size_t w, size_t h)
{
    FILE *fp = fopen(path, "wb");
    if (!fp)
        return 0;
    struct jpeg_compress_struct c;
    struct jpeg_error_mgr e;
    c.err = jpeg_std_error(&e);
    jpeg_create_compress(&c);
    jpeg_stdio_dest(&c, fp);
    c.image_width = (JDIMENSION)w;
    c.image_height = (JDIMENSION)h;
    c.input_components = 4;
    c.in_color_space = JCS_EXT_BGRX; /* 0x00RRGGBB words on this little-endian machine */
    jpeg_set_defaults(&c);
    jpeg_set_quality(&c, 92, TRUE);
    for (int k = 0; k < c.num_components; k++)
        c.comp_info[k].h_samp_factor = c.comp_info[k].v_samp_factor = 1;
    jpeg_start_compress(&c, TRUE);
    for (size_t y = 0; y < h; y++) {
        JSAMPROW row = (JSAMPROW)(void *)(px + y * w);
        jpeg_write_scanlines(&c, &row, 1);
    }
    jpeg_finish_compress(&c);
    jpeg_destroy_compress(&c);
    fclose(fp);
    return 1;
}

/* The file decoded to RGB by libjpeg-turbo; *warnings: the decoder's
 * count (a misnumbered restart marker is one). NULL when it fails. */
static uint8_t *decode(const char *path, size_t *w, size_t *h, long *warnings)
{
    FILE *fp = fopen(path, "rb");
    if (!fp)
        return NULL;
    struct jpeg_decompress_struct d;
    struct jpeg_error_mgr e;
    d.err = jpeg_std_error(&e);
    jpeg_create_decompress(&d);
    jpeg_stdio_src(&d, fp);
    jpeg_read_header(&d, TRUE);
    d.out_color_space = JCS_RGB;
    jpeg_start_decompress(&d);
    *w = d.output_width, *h = d.output_height;
    uint8_t *rgb = malloc(*w * *h * 3);
    while (rgb && d.output_scanline < d.output_height) {
        JSAMPROW row = rgb + (size_t)d.output_scanline * *w * 3;
        jpeg_read_scanlines(&d, &row, 1);
    }
    jpeg_finish_decompress(&d);
    *warnings = e.num_warnings;
    jpeg_destroy_decompress(&d);
    fclose(fp);
    return rgb;
}

static long file_size(const char *path)
{
    FILE *fp = fopen(path, "rb");
    long n = -1;
    if (fp && !fseek(fp, 0, SEEK_END))
        n = ftell(fp);
    if (fp)
        fclose(fp);
    return n;
}

static void test_bands_join(size_t w, size_t h)
{
    char ours[600], ours1[600], ref[600];
    snprintf(ours, sizeof ours, "%s/bands-%zux%zu.jpg", check_tmpdir(), w, h);
    snprintf(ours1, sizeof ours1, "%s/bands1-%zux%zu.jpg", check_tmpdir(), w, h);
    snprintf(ref, sizeof ref, "%s/ref-%zux%zu.jpg", check_tmpdir(), w, h);
    uint32_t *px = picture(w, h);
    lam_error err;
    lam_parallel_set_default(2);
    lam_status st = px ? lam_jpeg_save_xrgb32(ours, px, w, h, 92, &err) : LAM_ENOMEM;
    lam_parallel_set_default(1);
    lam_status st1 = px ? lam_jpeg_save_xrgb32(ours1, px, w, h, 92, &err) : LAM_ENOMEM;
    lam_parallel_set_default(0);
    if (!check_int(st, LAM_OK, "%zux%zu: written on two threads", w, h) ||
        !check_int(st1, LAM_OK, "%zux%zu: written on one", w, h) ||
        !check_true(reference_jpeg(ref, px, w, h), "%zux%zu: the reference written", w, h)) {
        free(px);
        return;
    }
    check_true(check_same_file(ours, ours1), "%zux%zu: the same file for one and two threads",
               w, h);
    size_t aw = 0, ah = 0, bw = 0, bh = 0;
    long warn_a = -1, warn_b = -1;
    uint8_t *a = decode(ours, &aw, &ah, &warn_a), *b = decode(ref, &bw, &bh, &warn_b);
    if (check_true(a && b && aw == w && ah == h && bw == w && bh == h,
                   "%zux%zu: both decode at their size", w, h)) {
        check_int(warn_a, 0, "%zux%zu: decoded without a warning (restart markers in order)", w,
                  h);
        size_t differ = 0;
        for (size_t k = 0; k < 3 * w * h; k++)
            differ += a[k] != b[k];
        check_int((long long)differ, 0, "%zux%zu: the pixels of libjpeg-turbo's one-pass coding",
                  w, h);
    }
    long sa = file_size(ours), sb = file_size(ref);
    check_true(sa > 0 && sb > 0 && sa < sb + sb / 50,
               "%zux%zu: within 2 %% of the one-pass file's size (%ld against %ld bytes)", w, h,
               sa, sb);
    free(a);
    free(b);
    free(px);
}

int main(void)
{
    check_begin("test_jpeg_write");
    test_bands_join(1003, 1501); /* three bands, the last one partial and not whole blocks */
    test_bands_join(640, 480);   /* one band */
    test_bands_join(37, 1030);   /* three bands, narrow */
    return check_summary();
}
