/* test_labels.c - label files (lamina-labels/1): the sample reads as
 * written, every malformed label is refused with its index, and polygons
 * fill the pixels whose centres they contain. */
#include "check.h"
#include "lamina/labels.h"
#include "lamina/png.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define HEAD "{\"schema\":\"lamina-labels/1\",\"labels\":["

static void refused(const char *json, lam_status want, const char *frag)
{
    lam_labels l;
    lam_error err;
    lam_error_clear(&err);
    lam_status st = lam_labels_parse(json, &l, &err);
    check_int(st, want, "refused: %s", json);
    check_true(strstr(err.message, frag) != NULL, "message has '%s': %s", frag, err.message);
    check_true(l.items == NULL && l.count == 0, "nothing left allocated");
}

static void test_sample(void)
{
    lam_labels l;
    lam_error err;
    lam_error_clear(&err);
    check_int(lam_labels_load("samples/HT285-C11-tile07.labels.json", &l, &err), LAM_OK,
              "the sample label file reads (%s)", err.message);
    /* the file lists: point 1L, polygon 2L (4 vertices), point 1L, point 2L */
    check_int(l.count, 4, "four labels");
    check_true(l.count == 4 && l.items[0].kind == LAM_LABEL_POINT && l.items[0].layers == 1 &&
                   l.items[0].x[0] == 200 && l.items[0].y[0] == 400,
               "first: a 1L point at (200, 400)");
    check_true(l.count == 4 && l.items[1].kind == LAM_LABEL_POLYGON && l.items[1].layers == 2 &&
                   l.items[1].vertices == 4 && l.items[1].x[3] == 318 && l.items[1].y[3] == 312,
               "second: a 2L polygon ending at (318, 312)");
    lam_labels_clear(&l);
    lam_labels_clear(NULL);
}

static void test_refused(void)
{
    refused(HEAD "{\"layers\":0,\"point\":[1,1]}]}", LAM_EFORMAT,
            "labels[0].layers: expected 1 to 40");
    refused(HEAD "{\"layers\":1,\"point\":[1,1]},{\"layers\":41,\"point\":[1,1]}]}", LAM_EFORMAT,
            "labels[1].layers");
    refused(HEAD "{\"layers\":2,\"polygon\":[[0,0],[5,0]]}]}", LAM_EFORMAT,
            "labels[0].polygon: expected 3 to 256 [x, y] points");
    refused(HEAD "{\"layers\":2,\"polygon\":[[0,0],[5,0],[5,\"x\"]]}]}", LAM_EFORMAT,
            "labels[0].polygon");
    refused(HEAD "{\"layers\":2,\"point\":[3]}]}", LAM_EFORMAT, "labels[0].point: expected [x, y]");
    refused(HEAD "{\"layers\":2}]}", LAM_EFORMAT, "labels[0]: needs a polygon or a point");
    refused(HEAD "{\"layers\":2,\"polgon\":[[0,0],[5,0],[5,5]]}]}", LAM_EFORMAT,
            "unknown key labels[0].polgon; did you mean labels[0].polygon?");
    refused("{\"schema\":\"lamina-labels/1\",\"label\":[]}", LAM_EFORMAT,
            "did you mean labels?");
    refused("{\"schema\":\"lamina-labels/1\"}", LAM_EFORMAT, "key labels: expected a list");
    refused("{\"schema\":\"lamina-label/1\",\"labels\":[]}", LAM_EFORMAT, "key schema");
}

static void test_fill(void)
{
    /* a square from (2, 2) to (6, 6) contains the pixel centres 2.5..5.5 in
     * x and y: 4 x 4 = 16 pixels (centre sampling, common practice in
     * rasterisers); a point label writes nothing */
    lam_labels l;
    lam_error err;
    lam_error_clear(&err);
    check_int(lam_labels_parse(HEAD "{\"layers\":3,\"polygon\":[[2,2],[6,2],[6,6],[2,6]]},"
                                    "{\"layers\":1,\"point\":[8,8]}]}",
                               &l, &err),
              LAM_OK, "parse a square and a point (%s)", err.message);
    uint8_t map[10 * 10] = {0};
    for (size_t i = 0; i < l.count; i++)
        lam_label_fill(&l.items[i], map, 10, 10);
    size_t n = 0, inside = 1;
    for (size_t y = 0; y < 10; y++)
        for (size_t x = 0; x < 10; x++) {
            n += map[y * 10 + x] != 0;
            if ((x >= 2 && x <= 5 && y >= 2 && y <= 5) != (map[y * 10 + x] == 3))
                inside = 0;
        }
    check_int(n, 16, "16 pixels labelled");
    check_true(inside, "exactly the pixels whose centres lie inside, with the layer count");
    lam_labels_clear(&l);
}

/* Label maps: the codes come back as stored, from 8- and 16-bit PNGs
 * written by the library's own writer. */
static void test_map(void)
{
    uint8_t codes[6 * 4];
    uint16_t wide[6 * 4];
    for (size_t k = 0; k < 24; k++) {
        codes[k] = (uint8_t)(k % 3 == 0 ? 0 : (k % 3 == 1 ? 2 : 255));
        wide[k] = codes[k];
    }
    char p8[512], p16[512];
    snprintf(p8, sizeof p8, "%s/map8.png", check_tmpdir());
    snprintf(p16, sizeof p16, "%s/map16.png", check_tmpdir());
    lam_error err;
    lam_error_clear(&err);
    lam_png_save_grey8(p8, codes, 6, 4, &err);
    lam_png_save_16(p16, wide, 6, 4, 1, &err);
    const char *paths[2] = {p8, p16};
    for (int i = 0; i < 2; i++) {
        uint8_t *map = NULL;
        size_t w = 0, h = 0;
        check_int(lam_labels_load_map(paths[i], &map, &w, &h, &err), LAM_OK, "%d-bit map reads",
                  i ? 16 : 8);
        check_true(map && w == 6 && h == 4 && !memcmp(map, codes, sizeof codes),
                   "%d-bit map: the codes as written", i ? 16 : 8);
        free(map);
    }
    uint8_t *map = NULL;
    size_t w, h;
    lam_error_clear(&err);
    check_int(lam_labels_load_map("tests/none.png", &map, &w, &h, &err), LAM_EIO,
              "a missing map");
    check_true(strstr(err.file, "none.png") != NULL, "names the file");
}

int main(void)
{
    check_begin("test_labels");
    test_sample();
    test_refused();
    test_fill();
    test_map();
    return check_summary();
}
