/* image.c - the lam_image type: allocation, size checks, format sniffing,
 * comparing the file's transfer curve with the user's. */
#include "lamina/image.h"
#include "imageio_internal.h"
#include "lamina/bigalloc.h"

#include <math.h>
#include <stdio.h>
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
    o.display8_only = 0;
    o.display8_xrgb_room = 0;
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

/* The fields every new image starts with (no pixel buffers). */
static lam_image *image_header(size_t width, size_t height)
{
    lam_image *img = calloc(1, sizeof *img);
    if (!img)
        return NULL;
    img->width = width;
    img->height = height;
    img->bit_depth = 8;
    img->source_channels = 3;
    img->channels = 3;
    img->transfer.kind = LAM_TRANSFER_LINEAR;
    img->file_transfer.kind = LAM_TRANSFER_AUTO;
    snprintf(img->file_colour, sizeof img->file_colour, "none");
    return img;
}

/* The planes zeroed or not (a loader writes every sample). */
static lam_status image_alloc(size_t width, size_t height, int zeroed, lam_image **out,
                              lam_error *err)
{
    lam_status st = lam_image_check_size(width, height, SIZE_MAX / 16, "image", err);
    if (st)
        return st;
    size_t n = width * height;
    lam_image *img = image_header(width, height);
    float *pix = zeroed ? lam_big_calloc(3 * n, sizeof *pix) : lam_big_malloc(3 * n * sizeof *pix);
    size_t stride = (width + 7) / 8;
    uint8_t *clip = lam_big_calloc(height, stride);
    if (!img || !pix || !clip) {
        free(img);
        free(pix);
        free(clip);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a %zux%zu image", width,
                             height);
    }
    img->plane[0] = pix;
    img->plane[1] = pix + n;
    img->plane[2] = pix + 2 * n;
    img->clip_bits = clip;
    img->clip_stride = stride;
    *out = img;
    return LAM_OK;
}

lam_status lam_image_alloc(size_t width, size_t height, lam_image **out, lam_error *err)
{
    return image_alloc(width, height, 1, out, err);
}

lam_status lam__image_alloc_unset(size_t width, size_t height, lam_image **out, lam_error *err)
{
    return image_alloc(width, height, 0, out, err);
}

lam_status lam_image_alloc_display8(size_t width, size_t height, int xrgb_room, lam_image **out,
                                    lam_error *err)
{
    lam_status st = lam_image_check_size(width, height, SIZE_MAX / 16, "image", err);
    if (st)
        return st;
    lam_image *img = image_header(width, height);
    uint8_t *codes = lam_big_malloc(width * height * (xrgb_room ? 4 : 3));
    if (!img || !codes) {
        free(img);
        free(codes);
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a %zux%zu picture", width,
                             height);
    }
    img->display8 = codes;
    *out = img;
    return LAM_OK;
}

void lam_image_free(lam_image *img)
{
    if (!img)
        return;
    free(img->plane[0]);
    free(img->clip_bits);
    free(img->display8);
    free(img);
}

static int starts(const unsigned char *head, size_t n, const char *magic, size_t len)
{
    return n >= len && !memcmp(head, magic, len);
}

/* ISO base media files (HEIF, AVIF, Canon CR3): "ftyp" box and its brand. */
static lam_file_kind sniff_isobmff(const unsigned char *head, size_t n)
{
    if (n < 12 || memcmp(head + 4, "ftyp", 4))
        return LAM_FILE_UNKNOWN;
    const char *b = (const char *)head + 8;
    if (!memcmp(b, "avif", 4) || !memcmp(b, "avis", 4))
        return LAM_FILE_AVIF;
    if (!memcmp(b, "crx ", 4))
        return LAM_FILE_CAMERA_RAW;
    static const char heif[][5] = {"heic", "heix", "hevc", "hevx", "heim", "heis", "mif1",
                                   "msf1"};
    for (size_t i = 0; i < sizeof heif / sizeof heif[0]; i++)
        if (!memcmp(b, heif[i], 4))
            return LAM_FILE_HEIF;
    return LAM_FILE_UNKNOWN;
}

/* TIFF and the raw formats that share (or bend) its header. Magic numbers
 * from TIFF 6.0 section 2 and the BigTIFF proposal (43 instead of 42);
 * CR2 marks "CR" at offset 8, ORF and RW2 change the magic (from memory). */
static lam_file_kind sniff_tiff(const unsigned char *head, size_t n)
{
    if (starts(head, n, "II*\0", 4)) {
        if (n >= 10 && head[8] == 'C' && head[9] == 'R')
            return LAM_FILE_CAMERA_RAW; /* Canon CR2 */
        return LAM_FILE_TIFF;
    }
    if (starts(head, n, "MM\0*", 4) || starts(head, n, "II+\0", 4) ||
        starts(head, n, "MM\0+", 4))
        return LAM_FILE_TIFF;
    if (starts(head, n, "IIRO", 4) || starts(head, n, "IIRS", 4) ||
        starts(head, n, "MMOR", 4) || starts(head, n, "IIU\0", 4))
        return LAM_FILE_CAMERA_RAW; /* Olympus ORF, Panasonic RW2 */
    return LAM_FILE_UNKNOWN;
}

static int is_pnm(const unsigned char *head, size_t n)
{
    return n >= 3 && head[0] == 'P' && head[1] >= '1' && head[1] <= '7' &&
           (head[2] == ' ' || head[2] == '\n' || head[2] == '\r' || head[2] == '\t');
}

lam_file_kind lam_file_sniff(const unsigned char *head, size_t n)
{
    static const unsigned char png_sig[8] = {0x89, 'P', 'N', 'G', '\r', '\n', 0x1a, '\n'};
    static const unsigned char jp2_sig[12] = {0, 0, 0, 12, 'j', 'P', ' ', ' ',
                                              '\r', '\n', 0x87, '\n'};
    static const unsigned char jxl_sig[12] = {0, 0, 0, 12, 'J', 'X', 'L', ' ',
                                              '\r', '\n', 0x87, '\n'};
    lam_file_kind k;
    if (n >= 8 && !memcmp(head, png_sig, 8))
        return LAM_FILE_PNG;
    if (n >= 3 && head[0] == 0xff && head[1] == 0xd8 && head[2] == 0xff)
        return LAM_FILE_JPEG;
    if ((k = sniff_tiff(head, n)) || (k = sniff_isobmff(head, n)))
        return k;
    if (starts(head, n, "GIF87a", 6) || starts(head, n, "GIF89a", 6))
        return LAM_FILE_GIF;
    if (n >= 12 && !memcmp(head, "RIFF", 4) && !memcmp(head + 8, "WEBP", 4))
        return LAM_FILE_WEBP;
    if ((n >= 12 && !memcmp(head, jp2_sig, 12)) || starts(head, n, "\xff\x4f\xff\x51", 4))
        return LAM_FILE_JPEG2000;
    if ((n >= 12 && !memcmp(head, jxl_sig, 12)) || starts(head, n, "\xff\x0a", 2))
        return LAM_FILE_JPEGXL;
    if (starts(head, n, "FUJIFILMCCD-RAW", 15))
        return LAM_FILE_CAMERA_RAW;
    if (starts(head, n, "BM", 2) && n >= 10 && !memcmp(head + 6, "\0\0\0\0", 4))
        return LAM_FILE_BMP;
    if (starts(head, n, "SIMPLE  =", 9))
        return LAM_FILE_FITS;
    if (starts(head, n, "8BPS", 4))
        return LAM_FILE_PSD;
    if (starts(head, n, "\x76\x2f\x31\x01", 4))
        return LAM_FILE_EXR;
    if (starts(head, n, "%PDF-", 5))
        return LAM_FILE_PDF;
    if (starts(head, n, "PK\x03\x04", 4) || starts(head, n, "\x1f\x8b", 2))
        return LAM_FILE_ARCHIVE;
    if (is_pnm(head, n))
        return LAM_FILE_PNM;
    return LAM_FILE_UNKNOWN;
}

const char *lam_file_kind_name(lam_file_kind kind)
{
    switch (kind) {
    case LAM_FILE_UNKNOWN: break;
    case LAM_FILE_PNG: return "PNG";
    case LAM_FILE_JPEG: return "JPEG";
    case LAM_FILE_TIFF: return "TIFF";
    case LAM_FILE_BMP: return "BMP";
    case LAM_FILE_GIF: return "GIF";
    case LAM_FILE_WEBP: return "WebP";
    case LAM_FILE_JPEG2000: return "JPEG 2000";
    case LAM_FILE_JPEGXL: return "JPEG XL";
    case LAM_FILE_HEIF: return "HEIF";
    case LAM_FILE_AVIF: return "AVIF";
    case LAM_FILE_PNM: return "PNM (PBM/PGM/PPM)";
    case LAM_FILE_FITS: return "FITS";
    case LAM_FILE_PSD: return "Photoshop PSD";
    case LAM_FILE_EXR: return "OpenEXR";
    case LAM_FILE_PDF: return "PDF";
    case LAM_FILE_CAMERA_RAW: return "camera raw";
    case LAM_FILE_ARCHIVE: return "zip or gzip archive";
    }
    return "unknown";
}

/* Local exponent d ln L / d ln V of a curve at V (central difference). */
static double local_exponent(const lam_transfer *t, double v)
{
    const double h = 1e-4;
    double lo = lam_transfer_decode(t, v - h), hi = lam_transfer_decode(t, v + h);
    if (lo <= 0.0 || hi <= 0.0)
        return 0.0;
    return (log(hi) - log(lo)) / (log(v + h) - log(v - h));
}

int lam_image_transfer_conflict(const lam_image *img, const lam_transfer *user)
{
    if (!img || !user || user->kind == LAM_TRANSFER_AUTO ||
        img->file_transfer.kind == LAM_TRANSFER_AUTO)
        return 0;
    for (int i = 0; i <= 85; i++) {
        double v = 0.1 + 0.01 * i;
        if (fabs(local_exponent(&img->file_transfer, v) - local_exponent(user, v)) > 0.05)
            return 1;
    }
    return 0;
}

int lam_image_block_coded(const lam_image *img)
{
    return img->jpeg_dc_step[0] > 0;
}
