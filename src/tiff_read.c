/* tiff_read.c - TIFF decoding with libtiff over the caller's stream: 8- and
 * 16-bit grey or RGB, strips or tiles, contiguous or separate planes, every
 * codec libtiff has; 8-bit YCbCr through libtiff's RGBA conversion. Pages,
 * float and signed samples, CMYK, Lab, palettes, odd bit depths and camera
 * raw mosaics are refused with what was found. libtiff's messages go to
 * per-file handlers (TIFFOpenOptions, libtiff >= 4.5), never to stderr. */
#include "imageio_internal.h"
#include "colourmeta.h"
#include "pixconv.h"
#include "rowpipe.h"

#include <math.h>
#include <stdarg.h>
#include <stdlib.h>
#include <string.h>
#include <sys/types.h>
#include <tiffio.h>

#ifndef PHOTOMETRIC_LINEARRAW
#define PHOTOMETRIC_LINEARRAW 34892 /* DNG 1.4 specification */
#endif
#define TIFF_MAX_PAGES 4096       /* IFDs walked when counting pages */
#define TIFF_MAX_SUBIFDS 16       /* SubIFDs looked into for raw data, per IFD */
#define TIFF_MAX_EXTRA 4          /* extra (alpha) samples accepted after the colours */
#define TIFF_MAX_PIECE (256u << 20) /* largest strip or tile buffer */
/* A pixel size above this is a print or screen resolution (72-1200 dpi give
 * 21-353 um), not the size of a pixel at the sample: a micrograph for flake
 * searching has pixels of 0.05-5 um (common practice). */
#define TIFF_MAX_PLAUSIBLE_UM 20.0

/* ---- libtiff's view of the caller's stream (offsets from where it stood) ---- */

typedef struct tiff_stream {
    FILE *fp;
    off_t start;
} tiff_stream;

static tmsize_t s_read(thandle_t h, void *buf, tmsize_t n)
{
    tiff_stream *s = h;
    return n <= 0 ? 0 : (tmsize_t)fread(buf, 1, (size_t)n, s->fp);
}

static tmsize_t s_write(thandle_t h, void *buf, tmsize_t n)
{
    (void)h;
    (void)buf;
    (void)n;
    return -1; /* opened for reading only */
}

static toff_t s_seek(thandle_t h, toff_t off, int whence)
{
    tiff_stream *s = h;
    int64_t o = (int64_t)off;
    if (whence == SEEK_SET) {
        if (o < 0 || o > INT64_MAX - s->start)
            return (toff_t)-1;
        o += s->start;
    }
    if (fseeko(s->fp, (off_t)o, whence) != 0)
        return (toff_t)-1;
    off_t pos = ftello(s->fp);
    return pos < s->start ? (toff_t)-1 : (toff_t)(pos - s->start);
}

static int s_close(thandle_t h)
{
    (void)h;
    return 0; /* the caller owns the stream */
}

static toff_t s_size(thandle_t h)
{
    tiff_stream *s = h;
    off_t here = ftello(s->fp), end = -1;
    if (here >= 0 && fseeko(s->fp, 0, SEEK_END) == 0)
        end = ftello(s->fp);
    if (here >= 0)
        fseeko(s->fp, here, SEEK_SET);
    return end < s->start ? 0 : (toff_t)(end - s->start);
}

static int s_map(thandle_t h, void **base, toff_t *size)
{
    (void)h;
    (void)base;
    (void)size;
    return 0; /* no memory mapping: libtiff reads */
}

static void s_unmap(thandle_t h, void *base, toff_t size)
{
    (void)h;
    (void)base;
    (void)size;
}

/* ---- messages ---- */

typedef struct tiff_msgs {
    char msg[256];      /* libtiff's latest error: the one of the call that failed */
    char jpeg[256];     /* the first warning of libjpeg */
    int errors;
    int jpeg_warnings;  /* libjpeg pads damaged data with grey and only warns */
} tiff_msgs;

static void keep_message(char *buf, size_t n, const char *module, const char *fmt, va_list ap)
{
    int k = snprintf(buf, n, "%s: ", module ? module : "libtiff");
    if (k > 0 && (size_t)k < n)
        vsnprintf(buf + k, n - (size_t)k, fmt, ap);
}

static int on_tiff_error(TIFF *tif, void *user, const char *module, const char *fmt, va_list ap)
{
    (void)tif;
    tiff_msgs *m = user;
    if (m) {
        m->errors++;
        keep_message(m->msg, sizeof m->msg, module, fmt, ap);
    }
    return 1; /* handled: libtiff's global handler (stderr) is not called */
}

/* Unknown tags and the like are not failures; libjpeg's warnings (corrupt
 * or truncated JPEG data, which it pads with grey) are, as for JPEG files. */
static int on_tiff_warning(TIFF *tif, void *user, const char *module, const char *fmt,
                           va_list ap)
{
    (void)tif;
    tiff_msgs *m = user;
    if (m && module && !strcmp(module, "JPEGLib") && !m->jpeg_warnings++)
        keep_message(m->jpeg, sizeof m->jpeg, module, fmt, ap);
    return 1; /* handled: nothing printed */
}

static lam_status damaged(const tiff_msgs *m, lam_error *err, const char *what)
{
    return lam_error_set(err, LAM_EFORMAT, "damaged TIFF (%s)%s%s", what, m->errors ? ": " : "",
                         m->msg);
}

/* ---- the job ---- */

typedef struct tiff_layout {
    uint32_t w, h;
    uint16_t bps, spp, photometric, planar, format, compression;
    int colour;         /* colour samples used: 1 or 3 */
    int rgba;           /* 8-bit YCbCr: through libtiff's RGBA interface */
    int invert;         /* MinIsWhite */
    unsigned max_value; /* MaxSampleValue when the file gives a lower one, else 0 */
} tiff_layout;

typedef struct tiff_job {
    TIFF *tif;
    tiff_stream stream;
    tiff_msgs msgs;
    tiff_layout L;
    lam_image *img;
    lam__pixconv pc;
    unsigned char *band;  /* decoded rows: width x bspp samples each */
    unsigned char *piece; /* one strip or tile as libtiff decodes it */
    size_t bspp, bytes;   /* samples per pixel in 'band', bytes per sample */
} tiff_job;

static lam_status tiff_open(tiff_job *job, FILE *fp, const char *name,
                            const lam_load_options *opt, lam_error *err)
{
    job->stream.fp = fp;
    job->stream.start = ftello(fp);
    if (job->stream.start < 0)
        return lam_error_set(err, LAM_EIO, "TIFF needs a seekable input");
    TIFFOpenOptions *o = TIFFOpenOptionsAlloc();
    if (!o)
        return lam_error_set(err, LAM_ENOMEM, "cannot create a TIFF decoder");
    TIFFOpenOptionsSetErrorHandlerExtR(o, on_tiff_error, &job->msgs);
    TIFFOpenOptionsSetWarningHandlerExtR(o, on_tiff_warning, &job->msgs);
    /* one allocation inside libtiff may hold up to the largest strip of an
     * image at the pixel limit (4 samples of 16 bits), plus slack */
    size_t limit = opt->max_pixels ? opt->max_pixels : LAM_IMAGE_DEFAULT_MAX_PIXELS;
    double cap = fmin((double)limit * 8.0 + (double)(16u << 20), 4e9);
    TIFFOpenOptionsSetMaxSingleMemAlloc(o, (tmsize_t)cap);
    job->tif = TIFFClientOpenExt(name, "rm", &job->stream, s_read, s_write, s_seek, s_close,
                                 s_size, s_map, s_unmap, o);
    TIFFOpenOptionsFree(o);
    return job->tif ? LAM_OK : damaged(&job->msgs, err, "directory");
}

static void tiff_job_release(tiff_job *job)
{
    if (job->tif)
        TIFFClose(job->tif);
    lam_image_free(job->img);
    lam__pixconv_clear(&job->pc);
    free(job->band);
    free(job->piece);
}

/* Whether the current directory has a tag, whatever its type: passcount
 * fields take a count (16 or 32 bits; a zeroed uint32_t holds either) and a
 * pointer, the others one value of at most 8 bytes or a pointer. */
static int has_tag(TIFF *tif, uint32_t tag)
{
    const TIFFField *f = TIFFFindField(tif, tag, TIFF_ANY);
    if (!f)
        return 0;
    union {
        uint64_t u;
        double d;
        void *p;
    } v;
    uint32_t count = 0;
    void *data = NULL;
    v.u = 0;
    if (TIFFFieldPassCount(f))
        return TIFFGetField(tif, tag, &count, &data);
    return TIFFGetField(tif, tag, &v);
}

/* A raw sensor mosaic (TIFF/EP and DNG tags): what it is, or NULL. */
static const char *raw_kind(TIFF *tif)
{
    uint16_t photo = 0;
    if (has_tag(tif, TIFFTAG_DNGVERSION))
        return "DNG";
    if (TIFFGetField(tif, TIFFTAG_PHOTOMETRIC, &photo) &&
        (photo == PHOTOMETRIC_CFA || photo == PHOTOMETRIC_LINEARRAW))
        return photo == PHOTOMETRIC_CFA ? "colour filter mosaic" : "DNG linear raw";
    if (has_tag(tif, TIFFTAG_CFAPATTERN) || has_tag(tif, TIFFTAG_CFAREPEATPATTERNDIM))
        return "colour filter mosaic";
    return NULL;
}

/* The same in the SubIFDs of directory 'dir' (NEF keeps its mosaic there);
 * the current directory is 'dir' again afterwards. */
static const char *raw_in_subifds(TIFF *tif, tdir_t dir)
{
    uint16_t n = 0;
    uint64_t *offs = NULL;
    if (!TIFFGetField(tif, TIFFTAG_SUBIFD, &n, &offs) || !offs || n == 0)
        return NULL;
    uint64_t copy[TIFF_MAX_SUBIFDS];
    size_t k = n < TIFF_MAX_SUBIFDS ? n : TIFF_MAX_SUBIFDS;
    memcpy(copy, offs, k * sizeof *copy); /* libtiff frees offs when it moves on */
    const char *kind = NULL;
    for (size_t i = 0; i < k && !kind; i++)
        if (TIFFSetSubDirectory(tif, copy[i]))
            kind = raw_kind(tif);
    TIFFSetDirectory(tif, dir);
    return kind;
}

/* Count the full-resolution images (reduced-resolution and mask subfiles
 * do not count), refuse raw files and several pages, and settle on the
 * image's directory. */
static lam_status pick_directory(tiff_job *job, lam_error *err)
{
    TIFF *tif = job->tif;
    unsigned pages = 0;
    tdir_t first = 0, d = 0;
    for (;; d++) {
        const char *raw = raw_kind(tif);
        if (!raw)
            raw = raw_in_subifds(tif, d);
        if (raw)
            return lam_error_set(err, LAM_EFORMAT,
                                 "a camera raw file (%s): convert it to a 16-bit TIFF first", raw);
        uint32_t sub = 0;
        TIFFGetField(tif, TIFFTAG_SUBFILETYPE, &sub);
        if (!(sub & (FILETYPE_REDUCEDIMAGE | FILETYPE_MASK)) && pages++ == 0)
            first = d;
        if (TIFFLastDirectory(tif) || d + 1 >= TIFF_MAX_PAGES)
            break;
        if (!TIFFReadDirectory(tif))
            return damaged(&job->msgs, err, "directory chain");
    }
    if (pages > 1)
        return lam_error_set(err, LAM_EFORMAT, "TIFF with %s%u pages: give one image per file",
                             d + 1 >= TIFF_MAX_PAGES ? "at least " : "", pages);
    if (pages == 0)
        return lam_error_set(err, LAM_EFORMAT,
                             "TIFF holds only reduced-resolution images (thumbnails)");
    if (!TIFFSetDirectory(tif, first))
        return damaged(&job->msgs, err, "directory");
    return LAM_OK;
}

/* ---- what the image is ---- */

static lam_status check_photometric(tiff_layout *L, lam_error *err)
{
    switch (L->photometric) {
    case PHOTOMETRIC_MINISWHITE:
        L->invert = 1;
        /* fall through */
    case PHOTOMETRIC_MINISBLACK:
        L->colour = 1;
        return LAM_OK;
    case PHOTOMETRIC_RGB:
        L->colour = 3;
        return LAM_OK;
    case PHOTOMETRIC_YCBCR:
        L->colour = 3;
        L->rgba = 1; /* libtiff converts 8-bit YCbCr (also JPEG-compressed) to RGB */
        if (L->bps == 8)
            return LAM_OK;
        return lam_error_set(err, LAM_EFORMAT, "%u-bit YCbCr TIFF is not supported "
                             "(save the image as RGB)", L->bps);
    case PHOTOMETRIC_PALETTE:
        return lam_error_set(err, LAM_EFORMAT,
                             "palette (colour-mapped) TIFF is not supported: save it as RGB");
    case PHOTOMETRIC_SEPARATED:
        return lam_error_set(err, LAM_EFORMAT, "CMYK TIFF is not supported: save it as RGB");
    case PHOTOMETRIC_CIELAB:
    case PHOTOMETRIC_ICCLAB:
    case PHOTOMETRIC_ITULAB:
        return lam_error_set(err, LAM_EFORMAT,
                             "CIE L*a*b* TIFF is not supported: save it as RGB");
    case PHOTOMETRIC_LOGL:
    case PHOTOMETRIC_LOGLUV:
        return lam_error_set(err, LAM_EFORMAT, "LogLuv high-dynamic-range TIFF is not supported");
    case PHOTOMETRIC_MASK:
        return lam_error_set(err, LAM_EFORMAT, "a TIFF transparency mask, not an image");
    default:
        break;
    }
    return lam_error_set(err, LAM_EFORMAT, "TIFF photometric interpretation %u is not supported",
                         L->photometric);
}

static lam_status check_samples(const tiff_layout *L, lam_error *err)
{
    if (L->format == SAMPLEFORMAT_IEEEFP)
        return lam_error_set(err, LAM_EFORMAT, "%u-bit float TIFF samples are not supported "
                             "(lamina reads 8- and 16-bit unsigned integers)", L->bps);
    if (L->format == SAMPLEFORMAT_INT)
        return lam_error_set(err, LAM_EFORMAT, "signed %u-bit TIFF samples are not supported "
                             "(lamina reads 8- and 16-bit unsigned integers)", L->bps);
    if (L->format != SAMPLEFORMAT_UINT && L->format != SAMPLEFORMAT_VOID)
        return lam_error_set(err, LAM_EFORMAT, "complex-valued TIFF samples are not supported");
    if (L->bps == 12)
        return lam_error_set(err, LAM_EFORMAT, "12-bit packed TIFF samples are not supported "
                             "(save the image with 16-bit samples)");
    if (L->bps != 8 && L->bps != 16)
        return lam_error_set(err, LAM_EFORMAT, "%u-bit TIFF samples are not supported "
                             "(lamina reads 8- and 16-bit)", L->bps);
    return LAM_OK;
}

static lam_status read_layout(tiff_job *job, const lam_load_options *opt, lam_error *err)
{
    TIFF *tif = job->tif;
    tiff_layout *L = &job->L;
    if (!TIFFGetField(tif, TIFFTAG_IMAGEWIDTH, &L->w) ||
        !TIFFGetField(tif, TIFFTAG_IMAGELENGTH, &L->h))
        return damaged(&job->msgs, err, "no image size");
    TIFFGetFieldDefaulted(tif, TIFFTAG_BITSPERSAMPLE, &L->bps);
    TIFFGetFieldDefaulted(tif, TIFFTAG_SAMPLESPERPIXEL, &L->spp);
    TIFFGetFieldDefaulted(tif, TIFFTAG_SAMPLEFORMAT, &L->format);
    TIFFGetFieldDefaulted(tif, TIFFTAG_PLANARCONFIG, &L->planar);
    TIFFGetFieldDefaulted(tif, TIFFTAG_COMPRESSION, &L->compression);
    if (!TIFFGetField(tif, TIFFTAG_PHOTOMETRIC, &L->photometric))
        L->photometric = L->spp >= 3 ? PHOTOMETRIC_RGB : PHOTOMETRIC_MINISBLACK;
    lam_status st;
    if ((st = check_samples(L, err)) || (st = check_photometric(L, err)))
        return st;
    if (L->spp < L->colour || L->spp > L->colour + TIFF_MAX_EXTRA)
        return lam_error_set(err, LAM_EFORMAT, "TIFF with %u samples per pixel for a %s image "
                             "is not supported", L->spp, L->colour == 1 ? "grey" : "colour");
    if (!TIFFIsCODECConfigured(L->compression)) {
        const TIFFCodec *c = TIFFFindCODEC(L->compression);
        return lam_error_set(err, LAM_EFORMAT, "TIFF compression %s (%u) is not available",
                             c ? c->name : "unknown", L->compression);
    }
    uint16_t maxv = 0;
    if (TIFFGetField(tif, TIFFTAG_MAXSAMPLEVALUE, &maxv) && maxv > 0 &&
        maxv < (1u << L->bps) - 1)
        L->max_value = maxv; /* e.g. 4095: a 12-bit camera in 16-bit samples saturates there */
    return lam_image_check_size(L->w, L->h, opt->max_pixels, "TIFF image", err);
}

/* Micrometres per pixel from XResolution and ResolutionUnit (inch when
 * absent, TIFF 6.0 section 8); 0 without a unit or when implausible. */
static double pixel_size_um(TIFF *tif)
{
    float xres = 0.0f;
    uint16_t unit = RESUNIT_INCH;
    if (!TIFFGetField(tif, TIFFTAG_XRESOLUTION, &xres) || !(xres > 0.0f) || !isfinite(xres))
        return 0.0;
    TIFFGetFieldDefaulted(tif, TIFFTAG_RESOLUTIONUNIT, &unit);
    double per = unit == RESUNIT_INCH ? 25400.0 : unit == RESUNIT_CENTIMETER ? 10000.0 : 0.0;
    double um = per / (double)xres;
    return um > 0.0 && um <= TIFF_MAX_PLAUSIBLE_UM ? um : 0.0;
}

/* Allocate the image, choose its curve (an embedded ICC profile counts). */
static lam_status make_image(tiff_job *job, const lam_load_options *opt, lam_error *err)
{
    const tiff_layout *L = &job->L;
    int depth = L->bps == 16 ? 16 : 8;
    lam_status st;
    if ((st = lam__image_alloc_unset(L->w, L->h, &job->img, err)) ||
        (st = lam__pixconv_init(&job->pc, depth, L->colour, err)))
        return st;
    lam_image *img = job->img;
    img->bit_depth = depth;
    img->source_channels = img->channels = L->colour;
    img->kind = LAM_FILE_TIFF;
    img->um_per_px_file = pixel_size_um(job->tif);
    lam__colour_meta meta;
    memset(&meta, 0, sizeof meta);
    uint32_t n = 0;
    void *icc = NULL;
    if (TIFFGetField(job->tif, TIFFTAG_ICCPROFILE, &n, &icc) && icc && n) {
        meta.kind = LAM__META_ICC;
        meta.icc = icc;
        meta.icc_len = n;
    }
    if ((st = lam__colour_apply(&meta, &opt->transfer, &job->pc, img, err)))
        return st;
    if (L->max_value && !L->invert)
        job->pc.clip_code = L->max_value;
    if (opt->keep_display8 && depth == 8 && !(img->display8 = malloc((size_t)L->w * L->h * 3)))
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the display copy");
    return LAM_OK;
}

/* ---- pixels ---- */

/* Copy 'rows' x 'cols' pixels of a decoded strip or tile (src_w pixels of
 * src_spp samples a row) to column x0 of the band, 'ns' samples each from
 * sample s0 on (a separate plane: one sample into slot s0). */
static void put_block(const tiff_job *job, unsigned char *band, const unsigned char *src,
                      size_t src_w, size_t src_spp, size_t x0, size_t rows, size_t cols,
                      size_t s0, size_t ns)
{
    size_t B = job->bytes, w = job->L.w, bspp = job->bspp;
    for (size_t r = 0; r < rows; r++) {
        const unsigned char *sp = src + r * src_w * src_spp * B;
        unsigned char *dp = band + ((r * w + x0) * bspp + s0) * B;
        if (src_spp == ns && ns == bspp) {
            memcpy(dp, sp, cols * ns * B);
            continue;
        }
        for (size_t c = 0; c < cols; c++)
            memcpy(dp + c * bspp * B, sp + c * src_spp * B, ns * B);
    }
}

/* MinIsWhite: the band's rows inverted, so that white is the top code. */
static void invert_rows(const tiff_job *job, unsigned char *band, size_t rows)
{
    size_t n = rows * (size_t)job->L.w * job->bspp;
    if (!job->L.invert)
        return;
    if (job->bytes == 1)
        for (size_t k = 0; k < n; k++)
            band[k] = (unsigned char)(255 - band[k]);
    else
        for (size_t k = 0; k < n; k++)
            ((uint16_t *)(void *)band)[k] = (uint16_t)(65535 - ((uint16_t *)(void *)band)[k]);
}

/* Band rows y0.. to the planes; returns their clipped pixels. */
static size_t convert_rows(const tiff_job *job, const unsigned char *band, size_t y0, size_t rows)
{
    return lam__pixconv_rows(&job->pc, job->img, y0, rows, band,
                             (size_t)job->L.w * job->bspp * job->bytes, job->bspp);
}

/* The piece buffer for pieces of piece_w x piece_h pixels; *band_bytes:
 * a band of piece_h rows (the pipeline's buffers hold bands). */
static lam_status alloc_piece(tiff_job *job, size_t piece_w, size_t piece_h, size_t *band_bytes,
                              lam_error *err)
{
    const tiff_layout *L = &job->L;
    int separate = L->planar == PLANARCONFIG_SEPARATE;
    size_t pspp = separate ? 1 : L->spp;
    job->bytes = L->bps / 8;
    job->bspp = separate ? (size_t)L->colour : L->spp;
    double piece = (double)piece_w * (double)piece_h * (double)(pspp * job->bytes);
    double band = (double)L->w * (double)piece_h * (double)(job->bspp * job->bytes);
    if (piece > TIFF_MAX_PIECE || band > 4.0 * TIFF_MAX_PIECE)
        return lam_error_set(err, LAM_EFORMAT, "TIFF %s of %zux%zu pixels are too large",
                             TIFFIsTiled(job->tif) ? "tiles" : "strips", piece_w, piece_h);
    *band_bytes = (size_t)band;
    if (!(job->piece = malloc((size_t)piece)))
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate TIFF buffers");
    return LAM_OK;
}

/* Strips or tiles decoded on this thread a band at a time, converted on
 * the other cores meanwhile (rowpipe.h). */
typedef struct tiff_pipe {
    tiff_job *job;
    lam_error *err;
    lam_status st;          /* a damaged piece's status (decode's NULL) */
    uint32_t piece_w, piece_h; /* a tile's size, or piece_w 0: strips of piece_h rows */
} tiff_pipe;

/* Band rows y0.. from the strips that hold them (a whole number of
 * strips of piece_h rows, each one per plane). */
static int strips_into(tiff_pipe *tp, size_t y0, size_t rows, unsigned char *band)
{
    tiff_job *job = tp->job;
    const tiff_layout *L = &job->L;
    int separate = L->planar == PLANARCONFIG_SEPARATE;
    size_t pspp = separate ? 1 : L->spp, planes = separate ? (size_t)L->colour : 1;
    size_t row_bytes = (size_t)L->w * job->bspp * job->bytes;
    for (size_t r0 = 0; r0 < rows; r0 += tp->piece_h) {
        size_t n = rows - r0 < tp->piece_h ? rows - r0 : tp->piece_h;
        tmsize_t need = (tmsize_t)(n * L->w * pspp * job->bytes);
        for (size_t s = 0; s < planes; s++) {
            uint32_t strip = TIFFComputeStrip(job->tif, (uint32_t)(y0 + r0), (uint16_t)s);
            if (TIFFReadEncodedStrip(job->tif, strip, job->piece, need) < need) {
                tp->st = damaged(&job->msgs, tp->err, "strip data");
                return 0;
            }
            put_block(job, band + r0 * row_bytes, job->piece, L->w, pspp, 0, n, L->w, s,
                      separate ? 1 : L->spp);
        }
    }
    return 1;
}

/* Band rows y0.. from the row of tiles that holds them. */
static int tiles_into(tiff_pipe *tp, size_t y0, size_t rows, unsigned char *band)
{
    tiff_job *job = tp->job;
    const tiff_layout *L = &job->L;
    int separate = L->planar == PLANARCONFIG_SEPARATE;
    size_t pspp = separate ? 1 : L->spp, planes = separate ? (size_t)L->colour : 1;
    size_t tw = tp->piece_w;
    tmsize_t need = (tmsize_t)(tw * (size_t)tp->piece_h * pspp * job->bytes);
    for (size_t x0 = 0; x0 < L->w; x0 += tw) {
        size_t cols = L->w - x0 < tw ? L->w - x0 : tw;
        for (size_t s = 0; s < planes; s++) {
            uint32_t tile = TIFFComputeTile(job->tif, (uint32_t)x0, (uint32_t)y0, 0, (uint16_t)s);
            if (TIFFReadEncodedTile(job->tif, tile, job->piece, need) < need) {
                tp->st = damaged(&job->msgs, tp->err, "tile data");
                return 0;
            }
            put_block(job, band, job->piece, tw, pspp, x0, rows, cols, s, separate ? 1 : L->spp);
        }
    }
    return 1;
}

static const uint8_t *decode_band(void *vp, size_t y0, size_t rows, uint8_t *buf)
{
    tiff_pipe *tp = vp;
    if (!(tp->piece_w ? tiles_into(tp, y0, rows, buf) : strips_into(tp, y0, rows, buf)))
        return NULL;
    invert_rows(tp->job, buf, rows);
    return buf;
}

static size_t convert_band(void *vp, size_t y0, size_t rows, const uint8_t *band)
{
    const tiff_pipe *tp = vp;
    return convert_rows(tp->job, band, y0, rows);
}

/* Above this a band is converted on this thread alone: the pipeline holds
 * two bands per thread, where one band held the whole picture's worth of
 * rows at a time before. */
#define TIFF_PIPE_BAND_MAX ((size_t)4 << 20)

/* The picture in bands of a row of tiles, or of as many strips of
 * piece_h rows as make a strip of the pipeline (lam__rowpipe_strip_rows:
 * a TIFF of one-row strips would otherwise hand over every row, which
 * costs even on one thread). */
static lam_status read_bands(tiff_job *job, uint32_t piece_w, uint32_t piece_h,
                             size_t piece_band_bytes, lam_error *err)
{
    tiff_pipe tp = {job, err, LAM_OK, piece_w, piece_h};
    size_t row_bytes = piece_band_bytes / piece_h, band_rows = piece_h, clipped = 0;
    size_t threads = lam__rowpipe_threads(job->L.h, row_bytes);
    if (piece_band_bytes > TIFF_PIPE_BAND_MAX)
        threads = 1;
    if (!piece_w) {
        size_t want = lam__rowpipe_strip_rows(row_bytes), k = (want + piece_h - 1) / piece_h;
        size_t k_max = TIFF_PIPE_BAND_MAX / piece_band_bytes;
        k = k < k_max ? k : k_max;
        k = k ? k : 1; /* one strip above the limit: a band of its own */
        band_rows = (size_t)piece_h * k < job->L.h ? (size_t)piece_h * k : job->L.h;
    }
    lam__rowpipe_ops ops = {decode_band, convert_band, &tp};
    int r = lam__rowpipe_run(job->L.h, band_rows, row_bytes, threads, &ops, &clipped);
    if (r == -1)
        return tp.st;
    if (r)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate TIFF buffers");
    job->img->clipped_count += clipped;
    return LAM_OK;
}

static lam_status read_strips(tiff_job *job, lam_error *err)
{
    const tiff_layout *L = &job->L;
    uint32_t rps = 0;
    TIFFGetFieldDefaulted(job->tif, TIFFTAG_ROWSPERSTRIP, &rps);
    if (rps == 0 || rps > L->h)
        rps = L->h;
    size_t band_bytes = 0;
    lam_status st = alloc_piece(job, L->w, rps, &band_bytes, err);
    return st ? st : read_bands(job, 0, rps, band_bytes, err);
}

static lam_status read_tiles(tiff_job *job, lam_error *err)
{
    uint32_t tw = 0, th = 0;
    if (!TIFFGetField(job->tif, TIFFTAG_TILEWIDTH, &tw) ||
        !TIFFGetField(job->tif, TIFFTAG_TILELENGTH, &th) || tw == 0 || th == 0)
        return damaged(&job->msgs, err, "no tile size");
    size_t band_bytes = 0;
    lam_status st = alloc_piece(job, tw, th, &band_bytes, err);
    return st ? st : read_bands(job, tw, th, band_bytes, err);
}

/* Rows per call of libtiff's RGBA conversion: a whole strip or row of
 * tiles, since each call decodes every strip or tile it touches (smaller
 * bands would decode the same strip again and again). */
static uint32_t rgba_band_rows(tiff_job *job)
{
    uint32_t rows = 0;
    if (TIFFIsTiled(job->tif))
        TIFFGetField(job->tif, TIFFTAG_TILELENGTH, &rows);
    else
        TIFFGetFieldDefaulted(job->tif, TIFFTAG_ROWSPERSTRIP, &rows);
    uint32_t most = (uint32_t)(TIFF_MAX_PIECE / 4u / job->L.w);
    if (rows == 0 || rows > job->L.h)
        rows = job->L.h;
    return rows > most ? (most ? most : 1) : rows;
}

/* 8-bit YCbCr: libtiff's RGBA conversion, top-down, a band of rows at a time. */
static lam_status read_rgba(tiff_job *job, lam_error *err)
{
    char emsg[1024] = "";
    TIFFRGBAImage ri;
    if (!TIFFRGBAImageOK(job->tif, emsg) || !TIFFRGBAImageBegin(&ri, job->tif, 1, emsg))
        return lam_error_set(err, LAM_EFORMAT, "YCbCr TIFF that libtiff cannot convert: %s", emsg);
    ri.req_orientation = ORIENTATION_TOPLEFT;
    size_t w = job->L.w, band = rgba_band_rows(job);
    uint32_t *raster = malloc(w * band * sizeof *raster);
    job->bytes = 1;
    job->bspp = 3;
    job->band = malloc(w * band * 3);
    lam_status st = LAM_OK;
    if (!raster || !job->band)
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate TIFF buffers");
    for (uint32_t y0 = 0; !st && y0 < job->L.h; y0 += (uint32_t)band) {
        uint32_t rows = job->L.h - y0 < band ? job->L.h - y0 : (uint32_t)band;
        ri.row_offset = (int)y0;
        ri.col_offset = 0;
        if (!TIFFRGBAImageGet(&ri, raster, (uint32_t)w, rows)) {
            st = damaged(&job->msgs, err, "YCbCr data");
            break;
        }
        for (size_t k = 0; k < (size_t)rows * w; k++) {
            job->band[3 * k] = (unsigned char)TIFFGetR(raster[k]);
            job->band[3 * k + 1] = (unsigned char)TIFFGetG(raster[k]);
            job->band[3 * k + 2] = (unsigned char)TIFFGetB(raster[k]);
        }
        invert_rows(job, job->band, rows);
        job->img->clipped_count += convert_rows(job, job->band, y0, rows);
    }
    TIFFRGBAImageEnd(&ri);
    free(raster);
    return st;
}

lam_status lam__tiff_load(FILE *fp, const char *path, const lam_load_options *opt,
                          lam_image **out, lam_error *err)
{
    tiff_job job;
    memset(&job, 0, sizeof job);
    lam_status st = tiff_open(&job, fp, path, opt, err);
    if (!st)
        st = pick_directory(&job, err);
    if (!st)
        st = read_layout(&job, opt, err);
    if (!st)
        st = make_image(&job, opt, err);
    if (!st)
        st = job.L.rgba ? read_rgba(&job, err)
             : TIFFIsTiled(job.tif) ? read_tiles(&job, err) : read_strips(&job, err);
    if (!st && job.msgs.jpeg_warnings)
        st = lam_error_set(err, LAM_EFORMAT, "damaged TIFF (JPEG data): %s", job.msgs.jpeg);
    if (!st) {
        *out = job.img;
        job.img = NULL;
    }
    tiff_job_release(&job);
    return st;
}
