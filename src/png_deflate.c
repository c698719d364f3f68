/* png_deflate.c - the PNG encoder for 8-bit images: fixed bands of rows
 * compressed on all cores (each band a raw deflate stream ended by a sync
 * point, the last one finished; the Adler-32 values are combined), as pigz
 * does. Rows are Up-filtered and each band coded as literals and runs of
 * one byte with Huffman codes of its own (deflate_runs.h). The bands do
 * not depend on the thread count, so the file is the same for any number
 * of threads. */
#include "png_internal.h"
#include "deflate_runs.h"
#include "lamina/outfile.h"
#include "lamina/parallel.h"

#include <stdlib.h>
#include <string.h>
#include <zlib.h>

#define BAND_ROWS 256           /* rows per band, at most */
#define BAND_BYTES_MAX (1u << 30) /* filtered bytes per band, at most (zlib's counts) */

typedef struct band {
    unsigned char *out;
    size_t out_len;
    uLong adler;
    size_t raw_len;
    int failed;
} band;

typedef struct deflate_job {
    const uint8_t *pixels;
    size_t width, height, channels, rows, bands; /* rows: per band */
    band *b;
} deflate_job;

static void up_filter(const uint8_t *pixels, size_t y, size_t rowbytes, unsigned char *d)
{
    const uint8_t *restrict row = pixels + y * rowbytes, *restrict up = row - rowbytes;
    unsigned char *restrict out = d + 1;
    d[0] = 2;
    if (y == 0)
        memcpy(out, row, rowbytes);
    else
        for (size_t i = 0; i < rowbytes; i++)
            out[i] = (unsigned char)(row[i] - up[i]);
}

/* The band's n filtered bytes as one block of literals and runs
 * (deflate_runs.h), made in 'work' (lam__deflate_runs_bound(n) bytes,
 * reused band after band) and kept in a block of its own size; scratch:
 * lam__deflate_runs_scratch(n) bytes. */
static void compress_band(band *b, const unsigned char *filtered, size_t n, int last,
                          void *scratch, uint8_t *work)
{
    b->out_len = lam__deflate_runs(filtered, n, last, scratch, work);
    if (!(b->out = malloc(b->out_len ? b->out_len : 1))) {
        b->failed = 1;
        return;
    }
    memcpy(b->out, work, b->out_len);
}

static void deflate_bands(size_t begin, size_t end, size_t slice, void *vctx)
{
    (void)slice;
    deflate_job *j = vctx;
    size_t rowbytes = j->width * j->channels, line = rowbytes + 1;
    unsigned char *filtered = malloc(line * j->rows);
    void *scratch = malloc(lam__deflate_runs_scratch(line * j->rows));
    uint8_t *work = malloc(lam__deflate_runs_bound(line * j->rows));
    for (size_t k = begin; k < end; k++) {
        band *b = &j->b[k];
        size_t y0 = k * j->rows, y1 = y0 + j->rows < j->height ? y0 + j->rows : j->height;
        size_t n = (y1 - y0) * line;
        if (!filtered || !scratch || !work) {
            b->failed = 1;
            continue;
        }
        /* Up filter: each byte minus the byte above (chosen by measurement,
         * docs/performance.md: the cheapest filter, and it turns flat areas
         * into runs of zeros) */
        for (size_t y = y0; y < y1; y++)
            up_filter(j->pixels, y, rowbytes, filtered + (y - y0) * line);
        b->raw_len = n;
        b->adler = adler32(adler32(0L, Z_NULL, 0), filtered, (uInt)n);
        compress_band(b, filtered, n, k + 1 == j->bands, scratch, work);
    }
    free(filtered);
    free(scratch);
    free(work);
}

static void put32(unsigned char *p, uint32_t v)
{
    p[0] = (unsigned char)(v >> 24), p[1] = (unsigned char)(v >> 16);
    p[2] = (unsigned char)(v >> 8), p[3] = (unsigned char)v;
}

static int chunk(FILE *fp, const char *type, const unsigned char *data, size_t n)
{
    unsigned char h[8];
    put32(h, (uint32_t)n);
    memcpy(h + 4, type, 4);
    uLong crc = crc32(0L, (const Bytef *)type, 4);
    if (n)
        crc = crc32(crc, data, (uInt)n);
    unsigned char c[4];
    put32(c, (uint32_t)crc);
    return fwrite(h, 1, 8, fp) != 8 || (n && fwrite(data, 1, n, fp) != n) || fwrite(c, 1, 4, fp) != 4;
}

lam_status lam__png_save_parallel(const char *path, const uint8_t *pixels, size_t width,
                                  size_t height, int channels, lam_error *err)
{
    if (width == 0 || height == 0 || width > 0x7fffffff || height > 0x7fffffff ||
        width * (size_t)channels + 1 > BAND_BYTES_MAX)
        return lam_error_set(err, LAM_EINVAL, "cannot write a %zux%zu PNG", width, height);
    size_t line = width * (size_t)channels + 1;
    size_t rows = BAND_BYTES_MAX / line < BAND_ROWS ? BAND_BYTES_MAX / line : BAND_ROWS;
    deflate_job j = {pixels, width, height, (size_t)channels, rows, (height + rows - 1) / rows,
                     NULL};
    j.b = calloc(j.bands, sizeof *j.b);
    if (!j.b)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate PNG bands");
    lam_parallel_for(j.bands, lam_parallel_default(), deflate_bands, &j);
    lam_status st = LAM_OK;
    for (size_t k = 0; k < j.bands; k++)
        if (j.b[k].failed)
            st = lam_error_set(err, LAM_ENOMEM, "PNG compression failed");
    lam_outfile of;
    if (!st)
        st = lam_outfile_open(&of, path, err);
    if (!st) {
        static const unsigned char sig[8] = {0x89, 'P', 'N', 'G', '\r', '\n', 0x1a, '\n'};
        unsigned char ihdr[13];
        put32(ihdr, (uint32_t)width);
        put32(ihdr + 4, (uint32_t)height);
        ihdr[8] = 8;
        ihdr[9] = channels == 3 ? 2 : (channels == 4 ? 6 : 0);
        ihdr[10] = ihdr[11] = ihdr[12] = 0;
        int bad = fwrite(sig, 1, 8, of.fp) != 8 || chunk(of.fp, "IHDR", ihdr, 13);
        /* zlib stream = header, the bands' raw deflate data, Adler-32 of all */
        static const unsigned char zhead[2] = {0x78, 0x01};
        bad = bad || chunk(of.fp, "IDAT", zhead, 2);
        uLong adler = adler32(0L, Z_NULL, 0);
        for (size_t k = 0; k < j.bands && !bad; k++) {
            adler = adler32_combine(adler, j.b[k].adler, (z_off_t)j.b[k].raw_len);
            for (size_t off = 0; off < j.b[k].out_len && !bad; off += 1u << 20) {
                size_t len = j.b[k].out_len - off < (1u << 20) ? j.b[k].out_len - off : (1u << 20);
                bad = chunk(of.fp, "IDAT", j.b[k].out + off, len);
            }
        }
        unsigned char tail[4];
        put32(tail, (uint32_t)adler);
        bad = bad || chunk(of.fp, "IDAT", tail, 4) || chunk(of.fp, "IEND", NULL, 0);
        if (bad) {
            lam_outfile_abort(&of);
            lam_error_set_file(err, path);
            st = lam_error_set(err, LAM_EIO, "cannot write PNG %s", path);
        } else {
            st = lam_outfile_commit(&of, err);
        }
    }
    for (size_t k = 0; k < j.bands; k++)
        free(j.b[k].out);
    free(j.b);
    return st;
}
