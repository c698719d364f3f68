/* test_corpus.c - the malformed and unusual file corpus, each with its
 * documented outcome (docs/user-guide.md, "Files lamina accepts"). Files
 * are made here with libpng/libjpeg (Debian) so nothing binary is kept. */
#include "check.h"
#include "lamina/analyze.h"
#include "lamina/image.h"

#include <jpeglib.h>
#include <png.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <gsl/gsl_errno.h>

static char path_buf[512];
static const char *tmp(const char *name)
{
    return check_path(path_buf, sizeof path_buf, check_tmpdir(), name);
}

/* Write a PNG with libpng: colour type, depth, interlace, optional palette+tRNS. */
static int write_png(const char *path, int w, int h, int ctype, int depth, int interlace)
{
    FILE *fp = fopen(path, "wb");
    if (!fp)
        return -1;
    png_structp png = png_create_write_struct(PNG_LIBPNG_VER_STRING, NULL, NULL, NULL);
    png_infop info = png_create_info_struct(png);
    if (setjmp(png_jmpbuf(png))) {
        png_destroy_write_struct(&png, &info);
        fclose(fp);
        return -1;
    }
    png_init_io(png, fp);
    png_set_IHDR(png, info, (png_uint_32)w, (png_uint_32)h, depth, ctype,
                 interlace ? PNG_INTERLACE_ADAM7 : PNG_INTERLACE_NONE, PNG_COMPRESSION_TYPE_DEFAULT,
                 PNG_FILTER_TYPE_DEFAULT);
    if (ctype == PNG_COLOR_TYPE_PALETTE) {
        png_color pal[4] = {{200, 100, 150}, {120, 130, 220}, {10, 10, 10}, {250, 250, 250}};
        png_byte alpha[2] = {0, 128};
        png_set_PLTE(png, info, pal, 4);
        png_set_tRNS(png, info, alpha, 2, NULL);
    }
    png_write_info(png, info);
    if (depth == 16)
        png_set_swap(png);
    int ch = ctype == PNG_COLOR_TYPE_RGB ? 3 : 1;
    size_t rb = (size_t)w * (size_t)ch * (size_t)(depth == 16 ? 2 : 1);
    png_bytep *rows = malloc((size_t)h * sizeof *rows);
    unsigned char *data = malloc(rb * (size_t)h);
    for (size_t i = 0; i < rb * (size_t)h; i++)
        data[i] = ctype == PNG_COLOR_TYPE_PALETTE ? (unsigned char)(i % 4) : (unsigned char)(37 * i + 11);
    for (int y = 0; y < h; y++)
        rows[y] = data + (size_t)y * rb;
    png_write_image(png, rows);
    png_write_end(png, NULL);
    png_destroy_write_struct(&png, &info);
    fclose(fp);
    free(rows);
    free(data);
    return 0;
}

static int write_cmyk_jpeg(const char *path)
{
    FILE *fp = fopen(path, "wb");
    if (!fp)
        return -1;
    struct jpeg_compress_struct c;
    struct jpeg_error_mgr e;
    c.err = jpeg_std_error(&e);
    jpeg_create_compress(&c);
    jpeg_stdio_dest(&c, fp);
    c.image_width = 16;
    c.image_height = 8;
    c.input_components = 4;
    c.in_color_space = JCS_CMYK;
    jpeg_set_defaults(&c);
    jpeg_set_colorspace(&c, JCS_CMYK);
    jpeg_start_compress(&c, TRUE);
    unsigned char row[16 * 4];
    for (int i = 0; i < 64; i++)
        row[i] = (unsigned char)(i * 3);
    while (c.next_scanline < c.image_height) {
        JSAMPROW r = row;
        jpeg_write_scanlines(&c, &r, 1);
    }
    jpeg_finish_compress(&c);
    jpeg_destroy_compress(&c);
    fclose(fp);
    return 0;
}

/* First bytes of formats lamina does not read, from each format's
 * specification (magic numbers; "from memory" for the camera raw makers'
 * own headers), padded with zeros to 32 bytes. */
static const struct {
    const char *file, *head;
    size_t len;
    const char *words;
} foreign[] = {
    {"a.bmp", "BM\066\0\0\0\0\0\0\0\066\0\0\0", 14, "a BMP image: lamina reads PNG, JPEG and TIFF"},
    {"a.gif", "GIF89a\001\0\001\0", 10, "a GIF image"},
    {"a.webp", "RIFF\044\0\0\0WEBPVP8 ", 16, "a WebP image"},
    {"a.jp2", "\0\0\0\014jP  \r\n\207\n", 12, "a JPEG 2000 image"},
    {"a.j2k", "\377\117\377\121", 4, "a JPEG 2000 image"},
    {"a.jxl", "\377\012", 2, "a JPEG XL image"},
    {"a.heic", "\0\0\0\030ftypheic", 12, "a HEIF image"},
    {"a.avif", "\0\0\0\034ftypavif", 12, "an AVIF image"},
    {"a.pgm", "P5\n16 16\n255\n", 13, "a PNM (PBM/PGM/PPM) image"},
    {"a.fits", "SIMPLE  =                    T", 30, "a FITS image"},
    {"a.psd", "8BPS\0\001", 6, "a Photoshop PSD image"},
    {"a.exr", "\166\057\061\001", 4, "an OpenEXR image"},
    {"a.pdf", "%PDF-1.7\n", 9, "a PDF document"},
    {"a.zip", "PK\003\004", 4, "a zip or gzip archive: lamina"},
    {"a.cr2", "II*\0\020\0\0\0CR\002\0", 12,
     "a camera raw file (Canon CR2): convert it to a 16-bit TIFF first"},
    {"a.cr3", "\0\0\0\030ftypcrx ", 12, "a camera raw file (Canon CR3)"},
    {"a.orf", "IIRO\010\0\0\0", 8, "a camera raw file (Olympus ORF)"},
    {"a.rw2", "IIU\0\030\0\0\0", 8, "a camera raw file (Panasonic RW2)"},
    {"a.raf", "FUJIFILMCCD-RAW 0201", 20, "a camera raw file (Fujifilm RAF)"},
    {"a.txt", "hello, world", 12, "not a PNG, JPEG or TIFF image"},
};

static lam_status load(const char *path, lam_image **img, lam_error *err)
{
    lam_error_clear(err);
    *img = NULL;
    return lam_image_load(path, NULL, img, err);
}

int main(void)
{
    check_begin("test_corpus");
    gsl_set_error_handler_off();
    lam_image *img, *ref;
    lam_error err;

    FILE *fp = fopen(tmp("zero.png"), "wb");
    fclose(fp);
    check_int(load(tmp("zero.png"), &img, &err), LAM_EFORMAT, "zero bytes: format error");
    check_true(strstr(err.message, "empty") != NULL, "zero bytes: says empty (%s)", err.message);

    write_png(tmp("real-png.jpg"), 8, 6, PNG_COLOR_TYPE_RGB, 8, 0);
    check_int(load(tmp("real-png.jpg"), &img, &err), LAM_OK,
              "wrong extension: the content decides (PNG named .jpg loads)");
    lam_image_free(img);

    check_int(write_cmyk_jpeg(tmp("cmyk.jpg")), 0, "make a CMYK JPEG");
    check_int(load(tmp("cmyk.jpg"), &img, &err), LAM_EFORMAT, "CMYK JPEG refused");
    check_true(strstr(err.message, "CMYK") != NULL, "CMYK message: %s", err.message);

    write_png(tmp("one.png"), 1, 1, PNG_COLOR_TYPE_RGB, 8, 0);
    check_int(load(tmp("one.png"), &img, &err), LAM_OK, "1x1 PNG loads");
    lam_image_free(img);
    lam_setup s;
    lam_setup_default(&s);
    lam_analysis *a = NULL;
    lam_error_clear(&err);
    check_int(lam_analyze(tmp("one.png"), &s, NULL, &a, &err), LAM_ERANGE,
              "1x1 PNG: analysis finds no substrate (%s)", err.message);

    write_png(tmp("wide.png"), 65535, 1, PNG_COLOR_TYPE_GRAY, 8, 0);
    check_int(load(tmp("wide.png"), &img, &err), LAM_OK, "65535x1 PNG loads");
    check_int(img ? (long long)img->width : 0, 65535, "65535x1 width");
    lam_image_free(img);

    write_png(tmp("palette.png"), 12, 9, PNG_COLOR_TYPE_PALETTE, 8, 0);
    check_int(load(tmp("palette.png"), &img, &err), LAM_OK, "palette PNG with transparency loads");
    check_true(img && img->source_channels == 3, "palette expands to RGB (alpha dropped)");
    lam_image_free(img);

    write_png(tmp("grey16.png"), 10, 7, PNG_COLOR_TYPE_GRAY, 16, 0);
    check_int(load(tmp("grey16.png"), &img, &err), LAM_OK, "16-bit grey PNG loads");
    check_true(img && img->bit_depth == 16 && img->transfer.kind == LAM_TRANSFER_LINEAR,
               "16-bit grey decodes as linear");
    lam_image_free(img);

    write_png(tmp("plain.png"), 23, 17, PNG_COLOR_TYPE_RGB, 8, 0);
    write_png(tmp("adam7.png"), 23, 17, PNG_COLOR_TYPE_RGB, 8, 1);
    check_int(load(tmp("adam7.png"), &img, &err), LAM_OK, "interlaced PNG loads");
    load(tmp("plain.png"), &ref, &err);
    int same = img && ref;
    for (size_t k = 0; same && k < 23 * 17 * 3; k++)
        same = img->plane[0][k % (23 * 17)] == ref->plane[0][k % (23 * 17)];
    check_true(same, "interlaced PNG equals the same image non-interlaced");
    lam_image_free(img);
    lam_image_free(ref);

    /* progressive JPEG through cjpeg (Debian libjpeg-turbo-progs) */
    char cmd[2048];
    fp = fopen(tmp("in.ppm"), "wb");
    fprintf(fp, "P6\n16 16\n255\n");
    for (int i = 0; i < 16 * 16 * 3; i++)
        fputc((i * 7) & 255, fp);
    fclose(fp);
    snprintf(cmd, sizeof cmd, "cjpeg -progressive %s/in.ppm > %s/prog.jpg", check_tmpdir(),
             check_tmpdir());
    check_int(system(cmd), 0, "cjpeg -progressive");
    check_int(load(tmp("prog.jpg"), &img, &err), LAM_OK, "progressive JPEG loads");
    lam_image_free(img);

    /* a PNG with a corrupted CRC in its first IDAT chunk */
    fp = fopen(tmp("plain.png"), "rb");
    unsigned char buf[8192];
    size_t n = fread(buf, 1, sizeof buf, fp);
    fclose(fp);
    unsigned char *idat = NULL;
    for (size_t i = 8; i + 8 < n; i++)
        if (!memcmp(buf + i, "IDAT", 4)) {
            idat = buf + i;
            break;
        }
    if (check_true(idat != NULL, "found IDAT")) {
        size_t len = ((size_t)idat[-4] << 24) | ((size_t)idat[-3] << 16) | ((size_t)idat[-2] << 8) | idat[-1];
        idat[4 + len] ^= 0x5a; /* first CRC byte */
        fp = fopen(tmp("badcrc.png"), "wb");
        fwrite(buf, 1, n, fp);
        fclose(fp);
        check_int(load(tmp("badcrc.png"), &img, &err), LAM_EFORMAT, "bad CRC refused: %s",
                  err.message);
    }

    for (size_t i = 0; i < sizeof foreign / sizeof foreign[0]; i++) {
        unsigned char head[32] = {0};
        memcpy(head, foreign[i].head, foreign[i].len);
        fp = fopen(tmp(foreign[i].file), "wb");
        fwrite(head, 1, sizeof head, fp);
        fclose(fp);
        lam_status st = load(tmp(foreign[i].file), &img, &err);
        check_true(st == LAM_EFORMAT && strstr(err.message, foreign[i].words),
                   "%s refused, its kind named: %s", foreign[i].file, err.message);
        lam_image_free(img);
    }
    return check_summary();
}
