/*
 * lamina/image.h - images in linear light, and loading them from PNG, JPEG
 * and TIFF files.
 *
 * A lam_image holds three planes (R, G, B) of float, linear light, 0..1 of
 * full scale, row-major, origin top-left: pixel (x, y) of channel c is
 * plane[c][y * width + x]. 'channels' says how many planes carry data: a
 * grey file (channels 1) has its data in plane[0]; plane[1] and plane[2]
 * hold copies of it for code that still reads three planes, and new code
 * should read plane[0] only. A per-pixel clip mask marks pixels where any
 * channel reached the top code value of the file (saturated: their
 * contrast is not trustworthy).
 *
 * Linear light. The curve that turns file codes into light is chosen in
 * this order (docs/user-guide.md, "Files lamina accepts"):
 *   1. lam_load_options.transfer, when the user set it (kind != AUTO);
 *   2. the file's colour metadata: an ICC profile (PNG iCCP, JPEG APP2,
 *      TIFF tag 34675), else a PNG sRGB chunk, else a PNG gAMA chunk;
 *   3. the default: sRGB for 8-bit files, linear for 16-bit files.
 * An ICC profile is applied channel by channel through its own tone curves
 * (rTRC/gTRC/bTRC or grayTRC), never through its matrix: lamina treats the
 * channels as the camera's, so mixing them into another RGB space would be
 * wrong. Profiles without such curves (LUT-based, CMYK, Lab) are refused
 * unless the user sets the encoding. What the file said and what was used
 * are both recorded, so the analysis can warn when they disagree
 * (lam_image_transfer_conflict).
 *
 * Ownership: lam_image_alloc / lam_image_load return an image the caller
 * releases with lam_image_free (NULL is safe). On failure nothing is
 * allocated and *out is left untouched.
 *
 * Files are treated as hostile: dimensions and the pixel count are checked
 * against lam_load_options.max_pixels before any pixel buffer is allocated;
 * truncated or corrupt data gives LAM_EFORMAT with a message, never a crash.
 * The decoders' own warnings and errors go into the lam_error record; the
 * library prints nothing.
 */
#ifndef LAMINA_IMAGE_H
#define LAMINA_IMAGE_H

#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include "lamina/error.h"
#include "lamina/transfer.h"

#define LAM_IMAGE_DEFAULT_MAX_PIXELS ((size_t)100000000) /* 100 megapixels */

/* What a file's first bytes say it is. Only PNG, JPEG and TIFF are read;
 * the other kinds are recognised so that the refusal can name them. */
typedef enum lam_file_kind {
    LAM_FILE_UNKNOWN = 0,
    LAM_FILE_PNG,
    LAM_FILE_JPEG,
    LAM_FILE_TIFF,       /* classic or BigTIFF, little or big endian */
    LAM_FILE_BMP,
    LAM_FILE_GIF,
    LAM_FILE_WEBP,
    LAM_FILE_JPEG2000,   /* JP2 container or raw codestream */
    LAM_FILE_JPEGXL,
    LAM_FILE_HEIF,
    LAM_FILE_AVIF,
    LAM_FILE_PNM,        /* PBM/PGM/PPM/PAM */
    LAM_FILE_FITS,
    LAM_FILE_PSD,
    LAM_FILE_EXR,
    LAM_FILE_PDF,
    LAM_FILE_CAMERA_RAW, /* raw formats known by their first bytes (CR2, CR3, ORF, RW2, RAF) */
    LAM_FILE_ARCHIVE     /* zip or gzip */
} lam_file_kind;

typedef struct lam_image {
    size_t width, height;
    float *plane[3];       /* R, G, B; one allocation, plane[0] owns it */
    uint8_t *clip_bits;    /* saturated pixels, one bit each (lam_image_clipped): row
                            * y's bits start at byte y * clip_stride, pixel x is bit
                            * x % 8 of byte x / 8. Rows own whole bytes, so threads may
                            * write different rows at once */
    size_t clip_stride;    /* bytes per row of clip_bits: (width + 7) / 8 */
    size_t clipped_count;  /* pixels whose clip bit is set (keep it so when setting
                            * bits: lam_image_clipped reads none when it is 0) */
    int bit_depth;         /* of the source file: 8 or 16 */
    int source_channels;   /* 1 grey or 3 colour in the file */
    lam_file_kind kind;
    lam_transfer transfer; /* the curve actually used to linearise (for an ICC
                            * profile: the named curve closest to its tone curve) */
    uint8_t *display8;     /* the file's 8-bit RGB codes, interleaved, when asked for
                            * (lam_load_options.keep_display8) and the file is 8-bit;
                            * owned (a caller may take it and set it to NULL) */
    int channels;          /* planes that carry data: 1 (plane[0]) or 3 */
    lam_transfer file_transfer; /* what the file's colour metadata says; kind
                                 * LAM_TRANSFER_AUTO when it says nothing */
    int transfer_from_file;     /* 1 when 'transfer' came from the file's metadata */
    char file_colour[96];       /* the metadata found: "sRGB chunk", "gAMA 0.45455",
                                 * "ICC profile 'Adobe RGB (1998)'" or "none" */
    char transfer_source[128];  /* why 'transfer' was used: the metadata, "none (assumed
                                 * sRGB for 8-bit)", "none (assumed linear for 16-bit)"
                                 * or "set by the user (gamma 2.2)" */
    double um_per_px_file;      /* pixel size at the sample from the file (TIFF
                                 * XResolution in inch or cm units), 0 when absent */
    double jpeg_dc_step[3];     /* JPEG: what one quantisation step of each
                                 * component's block mean moves R, G, B by, at most, in
                                 * code values (0-255), from the file's tables; 0 for
                                 * lossless files */
} lam_image;

typedef struct lam_load_options {
    lam_transfer transfer; /* LAM_TRANSFER_AUTO: the file's metadata, else sRGB for
                            * 8 bit and linear for 16 bit; anything else: the user's
                            * choice, which wins over the file */
    size_t max_pixels;     /* 0 means LAM_IMAGE_DEFAULT_MAX_PIXELS */
    int keep_display8;     /* also keep the 8-bit codes (for drawing reports) */
    int display8_only;     /* decode only the 8-bit RGB codes (grey replicated) into
                            * display8: no planes, no clip mask (plane[] and clip_bits
                            * NULL), no transfer curve applied. JPEG and 8-bit PNG only:
                            * other files give LAM_EINVAL. For redrawing a picture of a
                            * file already analysed, at a fraction of a full load's
                            * memory and time */
    int display8_xrgb_room; /* with display8_only: allocate 4 bytes per pixel (the
                             * codes fill the first 3 width*height), so that a
                             * picture to draw on can be widened in place to
                             * cairo's 32-bit pixels, without a move that takes
                             * fresh memory (lamina/report.h) */
} lam_load_options;

/* Pixel (x, y)'s bit of a clip mask laid out as lam_image.clip_bits
 * (rows of 'stride' bytes, pixel x in bit x % 8 of byte x / 8). */
static inline int lam_clip_bit(const uint8_t *bits, size_t stride, size_t x, size_t y)
{
    return (bits[y * stride + x / 8] >> (x % 8)) & 1;
}

/* 1 when pixel (x, y) was saturated in the file (any channel at its
 * top code), else 0. Without a saturated pixel (clipped_count 0, the
 * common case) the bits are not read at all. */
static inline int lam_image_clipped(const lam_image *img, size_t x, size_t y)
{
    return img->clipped_count && lam_clip_bit(img->clip_bits, img->clip_stride, x, y);
}

/* Default options: automatic transfer curve, default pixel limit. */
lam_load_options lam_load_options_default(void);

/* Allocate a zeroed width x height image (both >= 1) with its clip mask;
 * 3 channels, linear, file_colour "none". */
lam_status lam_image_alloc(size_t width, size_t height, lam_image **out, lam_error *err);

/* The same without planes or clip mask: display8 gets width*height*3
 * bytes (not initialised), for a decode of the 8-bit codes alone; with
 * xrgb_room width*height*4 (lam_load_options.display8_xrgb_room). */
lam_status lam_image_alloc_display8(size_t width, size_t height, int xrgb_room, lam_image **out,
                                    lam_error *err);

/* Release an image; img may be NULL. */
void lam_image_free(lam_image *img);

/* Guess a file's kind from its first bytes (magic numbers, not the name);
 * 16 bytes are enough for every kind above. */
lam_file_kind lam_file_sniff(const unsigned char *head, size_t n);

/* Short name of a kind for messages: "PNG", "BMP", "JPEG 2000", ... */
const char *lam_file_kind_name(lam_file_kind kind);

/* Load a PNG, JPEG or TIFF file into linear light. The error record names
 * the file. LAM_EIO when it cannot be read, LAM_EFORMAT when it is not a
 * supported image (the message names the kind found: "a BMP image: lamina
 * reads PNG, JPEG and TIFF", "TIFF with 3 pages: give one image per file",
 * "32-bit float TIFF samples are not supported", ...) or is damaged,
 * LAM_ETOOBIG above the pixel limit.
 *
 * TIFF: 8- or 16-bit unsigned samples, grey (MinIsBlack; MinIsWhite is
 * inverted) or RGB, extra (alpha) samples ignored, contiguous or separate
 * planes, strips or tiles, any compression this libtiff decodes; 8-bit
 * YCbCr is converted to RGB by libtiff. One full-resolution image per file
 * (reduced-resolution subfiles are skipped). Camera raw mosaics are
 * refused. The Orientation tag is not applied (rows as stored). */
lam_status lam_image_load(const char *path, const lam_load_options *opt,
                          lam_image **out, lam_error *err);

/* The same from an open stream (read from its current position; TIFF needs
 * a seekable stream, which fmemopen gives); 'name' is used in messages. The
 * stream is not closed. */
lam_status lam_image_load_stream(FILE *fp, const char *name, const lam_load_options *opt,
                                 lam_image **out, lam_error *err);

/* Check width*height against a limit with overflow-safe arithmetic. */
lam_status lam_image_check_size(size_t width, size_t height, size_t max_pixels,
                                const char *what, lam_error *err);

/* 1 when the user set a transfer curve ('user' kind != AUTO), the file's
 * metadata names one too, and the two differ enough to matter: their local
 * exponents d ln L / d ln V differ by more than 0.05 somewhere in
 * V = 0.1..0.95, which changes a small contrast by about 2 % of itself.
 * 0 otherwise (no conflict, or nothing to compare). */
int lam_image_transfer_conflict(const lam_image *img, const lam_transfer *user);

/* 1 when the file was block-coded (a JPEG: jpeg_dc_step known), whose flat
 * areas lose the noise's dither and whose colour rings at edges. */
int lam_image_block_coded(const lam_image *img);

#endif
