/* targets.c - fuzz entry points: feed bytes to a parser, expect a status. */
#include "targets.h"
#include "lamina/colour.h"
#include "lamina/image.h"
#include "lamina/labels.h"
#include "lamina/material.h"
#include "lamina/render.h"
#include "lamina/setup.h"
#include "imageio_internal.h"
#include "deflate_runs.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include <zlib.h>

int fuzz_image(const uint8_t *data, size_t n)
{
    FILE *fp = fmemopen((void *)data, n ? n : 1, "rb");
    if (!fp)
        return 0;
    lam_load_options opt = lam_load_options_default();
    opt.max_pixels = 4000000; /* keep allocations fuzz-sized */
    opt.keep_display8 = n % 3 == 1; /* every way a loader fills its outputs: planes */
    opt.display8_only = n % 3 == 2; /* alone, with the 8-bit copy, the copy alone */
    lam_image *img = NULL;
    lam_error err;
    lam_error_clear(&err);
    if (n && lam_image_load_stream(fp, "fuzz", &opt, &img, &err) == LAM_OK)
        lam_image_free(img);
    fclose(fp);
    return 0;
}

/* Straight to libtiff, so that mutated headers still reach it. */
int fuzz_tiff(const uint8_t *data, size_t n)
{
    FILE *fp = fmemopen((void *)data, n ? n : 1, "rb");
    if (!fp)
        return 0;
    lam_load_options opt = lam_load_options_default();
    opt.max_pixels = 4000000;
    opt.keep_display8 = n % 2; /* both ways of filling the 8-bit copy */
    lam_image *img = NULL;
    lam_error err;
    lam_error_clear(&err);
    if (n && lam__tiff_load(fp, "fuzz", &opt, &img, &err) == LAM_OK)
        lam_image_free(img);
    fclose(fp);
    return 0;
}

static char *terminated(const uint8_t *data, size_t n)
{
    char *s = malloc(n + 1);
    if (s) {
        memcpy(s, data, n);
        s[n] = '\0';
    }
    return s;
}

int fuzz_setup(const uint8_t *data, size_t n)
{
    char *s = terminated(data, n);
    if (!s)
        return 0;
    lam_setup su;
    lam_setup_default(&su);
    lam_setup_parse(s, "/nonexistent", &su, NULL);
    lam_setup_clear(&su);
    free(s);
    return 0;
}

int fuzz_scene(const uint8_t *data, size_t n)
{
    char *s = terminated(data, n);
    if (!s)
        return 0;
    lam_scene sc;
    if (lam_scene_parse(s, "/nonexistent", &sc, NULL) == LAM_OK)
        lam_scene_clear(&sc);
    free(s);
    return 0;
}

int fuzz_labels(const uint8_t *data, size_t n)
{
    char *s = terminated(data, n);
    if (!s)
        return 0;
    lam_labels l;
    if (lam_labels_parse(s, &l, NULL) == LAM_OK) {
        uint8_t map[16 * 16];
        for (size_t i = 0; i < l.count; i++)
            lam_label_fill(&l.items[i], map, 16, 16);
        lam_labels_clear(&l);
    }
    free(s);
    return 0;
}

int fuzz_csv(const uint8_t *data, size_t n)
{
    char path[64];
    snprintf(path, sizeof path, "/tmp/lamina-fuzz-%ld.csv", (long)getpid());
    FILE *fp = fopen(path, "wb");
    if (!fp)
        return 0;
    fwrite(data, 1, n, fp);
    fclose(fp);
    lam_material m;
    if (lam_material_load_csv(path, &m, NULL) == LAM_OK) {
        double complex v;
        lam_material_index(&m, 550, &v, NULL);
        lam_material_clear(&m);
    }
    lam_table_spectrum t;
    if (lam_table_spectrum_load(path, 3, &t, NULL) == LAM_OK) {
        lam_table_spectrum_eval(&t, 1, 500);
        lam_table_spectrum_clear(&t);
    }
    unlink(path);
    return 0;
}

/* The PNG writer's deflate blocks (src/deflate_runs.c): the input, cut into
 * 1 to 4 blocks by its first byte, encoded and joined; zlib's inflate must
 * give it back exactly, else abort (a crash for the fuzzer). */
int fuzz_deflate(const uint8_t *data, size_t n)
{
    if (n < 2)
        return 0;
    size_t blocks = 1 + data[0] % 4, m = n - 1;
    const uint8_t *in = data + 1;
    uint8_t *out = malloc(blocks * lam__deflate_runs_bound(m)), *back = malloc(m + 1);
    void *scratch = malloc(lam__deflate_runs_scratch(m));
    if (!out || !back || !scratch) {
        free(out), free(back), free(scratch);
        return 0;
    }
    size_t len = 0;
    for (size_t b = 0; b < blocks; b++)
        len += lam__deflate_runs(in + m * b / blocks, m * (b + 1) / blocks - m * b / blocks,
                                 b + 1 == blocks, scratch, out + len);
    z_stream z;
    memset(&z, 0, sizeof z);
    int ok = inflateInit2(&z, -15) == Z_OK;
    z.next_in = out;
    z.avail_in = (uInt)len;
    z.next_out = back;
    z.avail_out = (uInt)(m + 1);
    ok = ok && inflate(&z, Z_FINISH) == Z_STREAM_END && z.total_out == m && !memcmp(back, in, m);
    inflateEnd(&z);
    free(out), free(back), free(scratch);
    if (!ok)
        abort();
    return 0;
}
