/* test_segment.c - uniform-contrast regions and the joining of one flake's
 * parts (lam_segment_uniform, lam_segment_join) on contrast maps drawn
 * here: geometry, not physics, so the values are invented for the test.
 * Contrasts are of the size graphene shows on 285 nm SiO2 (a monolayer
 * 0.05-0.12 in red and green, little in blue); what matters is that an
 * artefact is small against that step and a feature is not. */
#include "check.h"
#include "lamina/segment.h"
#include "segment_internal.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define W 240
#define H 160

static const double MONO[3] = {0.06, 0.11, 0.01};

static void paint_wh(lam_image *img, size_t w, size_t x0, size_t y0, size_t x1, size_t y1,
                     const double c[3])
{
    for (size_t y = y0; y < y1; y++)
        for (size_t x = x0; x < x1; x++)
            for (int k = 0; k < 3; k++)
                img->plane[k][y * w + x] = (float)c[k];
}

static void paint(lam_image *img, size_t x0, size_t y0, size_t x1, size_t y1, const double c[3])
{
    paint_wh(img, W, x0, y0, x1, y1, c);
}

/* Pixel noise of the given sigma (sum of uniforms) on a w x h image. */
static void add_noise_wh(lam_image *img, size_t w, size_t h, double sigma, unsigned seed)
{
    unsigned s = seed;
    for (size_t i = 0; i < w * h; i++)
        for (int k = 0; k < 3; k++) {
            double u = 0;
            for (int t = 0; t < 4; t++) {
                s = s * 1103515245u + 12345u;
                u += (double)(s >> 8) / 16777216.0 - 0.5;
            }
            img->plane[k][i] += (float)(sigma * u * 1.732);
        }
}

/* Deterministic pixel noise of sigma ~0.002 on a W x H image. */
static void add_noise(lam_image *img)
{
    add_noise_wh(img, W, H, 0.002, 12345);
}

/* The scene: flake A (a monolayer, 140 x 100) cut across by a 3 px line
 * of JPEG-like error, its halves offset by a fifth of a step in red; inside
 * it a hole to the substrate, a bilayer island and a residue speck; flake
 * B, a monolayer 20 px away. */
static int scene(lam_contrast_map *out)
{
    lam_image *img = NULL;
    lam_error err;
    if (lam_image_alloc(W, H, &img, &err))
        return 0;
    memset(img->clip_bits, 0, H * img->clip_stride);
    const double zero[3] = {0, 0, 0}, bi[3] = {0.12, 0.21, 0.02};
    const double shifted[3] = {MONO[0] + 0.012, MONO[1], MONO[2]};
    const double cut[3] = {MONO[0], MONO[1] + 0.025, MONO[2] - 0.02};
    const double speck[3] = {MONO[0], MONO[1] + 0.08, MONO[2]};
    paint(img, 0, 0, W, H, zero);
    paint(img, 20, 30, 90, 130, MONO);
    paint(img, 90, 30, 160, 130, shifted);
    paint(img, 88, 30, 91, 130, cut);
    paint(img, 40, 50, 50, 60, zero);   /* a hole to the substrate */
    paint(img, 120, 90, 136, 106, bi);  /* an island of another count */
    paint(img, 60, 100, 63, 103, speck); /* residue */
    paint(img, 180, 40, 225, 120, MONO); /* flake B */
    add_noise(img);
    lam_contrast_compact(img, out, 1);
    lam_image_free(img);
    return 1;
}

static int key_of(const lam_region_stats *r)
{
    double g = r->interior ? r->sum[1] / (double)r->interior : 0;
    int n = (int)lround(g / MONO[1]);
    return n >= 1 && fabs(g - n * MONO[1]) < 0.3 * MONO[1] ? n : -1;
}

/* A copy of a segmentation (maps and regions). */
static lam_segmentation *copy_of(const lam_segmentation *s)
{
    lam_segmentation *c = NULL;
    lam_error err;
    if (lam_segmentation_alloc(s->width, s->height, &c, &err))
        return NULL;
    memcpy(c->label, s->label, s->width * s->height * sizeof *s->label);
    memcpy(c->cls, s->cls, s->width * s->height);
    c->count = s->count;
    c->regions = malloc((s->count ? s->count : 1) * sizeof *s->regions);
    if (c->regions)
        memcpy(c->regions, s->regions, s->count * sizeof *s->regions);
    return c;
}

/* The join's pixel passes run in slices of rows or columns; a flake cut
 * across by a row-wise band that straddles the border between two slices
 * (rows 53 and 106 with 3 threads) must come out as with one thread. */
static void join_threads(void)
{
    lam_image *img = NULL;
    lam_error err;
    if (!check_true(!lam_image_alloc(W, H, &img, &err), "second scene allocated"))
        return;
    memset(img->clip_bits, 0, H * img->clip_stride);
    const double zero[3] = {0, 0, 0}, cut[3] = {MONO[0], MONO[1] + 0.025, MONO[2] - 0.02};
    const double shifted[3] = {MONO[0] + 0.012, MONO[1], MONO[2]};
    paint(img, 0, 0, W, H, zero);
    paint(img, 20, 10, 200, 53, MONO);
    paint(img, 20, 53, 200, 150, shifted);
    paint(img, 20, 51, 200, 55, cut);
    paint(img, 20, 104, 200, 108, cut);
    add_noise(img);
    lam_contrast_map map;
    lam_contrast_compact(img, &map, 3);
    lam_segmentation *one = NULL, *three = NULL;
    lam_segment_options so = lam_segment_options_default();
    double noise[3] = {0.002, 0.002, 0.002}, scatter[3] = {0.0005, 0.0005, 0.0005};
    int ok = !lam_segmentation_alloc(W, H, &one, &err) &&
             !lam_segment_uniform(&map, 3, MONO, noise, scatter, &so, one, &err) &&
             (three = copy_of(one)) != NULL;
    size_t n = one ? one->count : 0, j1 = 0, j3 = 0;
    int *key = malloc((n ? n : 1) * sizeof *key);
    uint32_t *m1 = malloc((n ? n : 1) * sizeof *m1), *m3 = malloc((n ? n : 1) * sizeof *m3);
    ok = ok && key && m1 && m3;
    for (size_t i = 0; ok && i < n; i++)
        key[i] = key_of(&one->regions[i]);
    ok = ok &&
         !lam_segment_join(&map, 3, key, (double[3]){0.04, 0.04, 0.04}, 1, one, m1, &j1, &err) &&
         !lam_segment_join(&map, 3, key, (double[3]){0.04, 0.04, 0.04}, 3, three, m3, &j3, &err);
    if (check_true(ok, "joined with 1 and 3 threads")) {
        check_true(j1 >= 1, "the cut flake's parts joined (%zu)", j1);
        check_true(j1 == j3 && one->count == three->count && !memcmp(m1, m3, n * sizeof *m1) &&
                       !memcmp(one->label, three->label, (size_t)W * H * sizeof *one->label) &&
                       !memcmp(one->cls, three->cls, (size_t)W * H) &&
                       !memcmp(one->regions, three->regions, one->count * sizeof *one->regions),
                   "the same regions, labels and classes with 3 threads as with 1");
        check_true(!lam_segment_edge_areas(&map, 3, 1, one, &err) &&
                       !lam_segment_edge_areas(&map, 3, 3, three, &err),
                   "edge areas with 1 and 3 threads");
        size_t same = 0, edges = 0;
        for (size_t i = 0; i < one->count && i < three->count; i++)
            same += one->regions[i].edge == three->regions[i].edge, edges += one->regions[i].edge;
        check_true(edges > 0 && same == one->count,
                   "edge areas (%zu px) the same with 3 threads as with 1", edges);
    }
    free(key);
    free(m1);
    free(m3);
    lam_segmentation_free(one);
    lam_segmentation_free(three);
    lam_contrast_map_free(&map);
    lam_image_free(img);
}

static uint32_t label_at(const lam_segmentation *s, size_t x, size_t y)
{
    return s->label[y * W + x];
}

/* The cores of all-transition areas (segment_cores.c): a 40 x 40 px area
 * of transition pixels (a small flake a JPEG's colour ringing covers)
 * gets its core back, its rim stays transition; a band 9 px wide between
 * two regions, an ordinary edge, stays transition throughout. */
static void test_rescue_cores(void)
{
    enum { NONE = LAM_CLASS_NONE, JOIN = 1 };
    uint8_t *cls = malloc((size_t)W * H);
    if (!check_true(cls != NULL, "map allocated"))
        return;
    memset(cls, JOIN, (size_t)W * H);
    for (size_t y = 60; y < 100; y++)
        for (size_t x = 100; x < 140; x++)
            cls[y * W + x] = NONE;
    for (size_t y = 0; y < H; y++)
        for (size_t x = 20; x < 29; x++)
            cls[y * W + x] = NONE;
    check_int(lam__rescue_cores(cls, W, H, NONE, JOIN, 1), 0, "rescue ran");
    size_t core = 0, band = 0;
    for (size_t y = 60; y < 100; y++)
        for (size_t x = 100; x < 140; x++)
            core += cls[y * W + x] == JOIN;
    for (size_t y = 0; y < H; y++)
        for (size_t x = 20; x < 29; x++)
            band += cls[y * W + x] == JOIN;
    /* depth >= 6 from the outside: rows and columns 105..134, 30 x 30 px */
    check_int((long)core, 30 * 30, "the area's core (30 x 30 px) may join regions again");
    check_true(cls[60 * W + 100] == NONE && cls[64 * W + 120] == NONE, "its rim stays transition");
    check_int((long)band, 0, "a 9 px band between regions stays transition");
    free(cls);
}

/* The cores against the definition, pixel by pixel: a 'none' pixel whose
 * chessboard distance (max of |dx|, |dy|) to every pixel of another class
 * in the image is 6 or more becomes joinable, nothing else changes. Random
 * maps of transition blobs and specks (some touching the border, one all
 * transition), 1, 2 and 3 threads. */
static int brute_core(const uint8_t *cls, size_t w, size_t h, size_t x, size_t y, uint8_t none)
{
    if (cls[y * w + x] != none)
        return 0;
    for (size_t v = 0; v < h; v++)
        for (size_t u = 0; u < w; u++) {
            size_t dx = u > x ? u - x : x - u, dy = v > y ? v - y : y - v;
            if (cls[v * w + u] != none && (dx > dy ? dx : dy) < 6)
                return 0;
        }
    return 1;
}

static void rescue_cores_match_definition(void)
{
    enum { NONE = LAM_CLASS_NONE, JOIN = 1 };
    const size_t w = 53, h = 41;
    uint8_t *map = malloc(w * h), *cls = malloc(w * h);
    unsigned long state = 12345;
    size_t wrong = 0, cores = 0;
    for (int trial = 0; map && cls && trial < 12; trial++) {
        memset(map, trial == 11 ? NONE : JOIN, w * h);
        for (int b = 0; trial < 11 && b < 6; b++) { /* rectangles of transition */
            state = state * 6364136223846793005ul + 1442695040888963407ul;
            size_t x0 = (state >> 33) % w, y0 = (state >> 45) % h;
            size_t bw = 3 + (state >> 20) % 25, bh = 3 + (state >> 12) % 20;
            for (size_t y = y0; y < y0 + bh && y < h; y++)
                for (size_t x = x0; x < x0 + bw && x < w; x++)
                    map[y * w + x] = NONE;
        }
        for (size_t threads = 1; threads <= 3; threads++) {
            memcpy(cls, map, w * h);
            if (lam__rescue_cores(cls, w, h, NONE, JOIN, threads))
                wrong++;
            for (size_t y = 0; y < h; y++)
                for (size_t x = 0; x < w; x++) {
                    int core = brute_core(map, w, h, x, y, NONE);
                    cores += (size_t)core;
                    wrong += cls[y * w + x] != (core ? JOIN : map[y * w + x]);
                }
        }
    }
    check_int((long)wrong, 0, "rescued cores are the pixels 6 or more from another class");
    check_true(cores > 500, "the maps hold cores to rescue (%zu)", cores);
    free(map);
    free(cls);
}

/* lam_segment_edge_areas against its definition, written out here the
 * plain way: each transition pixel (no label, not substrate) goes to the
 * side within 4 px (Chebyshev) - a region with an interior that is not a
 * ribbon, or the substrate at zero contrast - whose mean it is nearest in
 * squared distance; sides are taken in raster order of the window, at
 * most 8, the first of equals wins. Random maps: rectangles of regions,
 * substrate and transition, then (every third trial) a salt of single
 * pixels of 14 labels, so that windows hold more than 8 sides and runs
 * of one pixel. */
enum { EW = 61, EH = 47, EREGIONS = 14 };

static double edge_mean(const lam_segmentation *s, uint32_t l, int c)
{
    const lam_region_stats *r = &s->regions[l - 1];
    return r->sum[c] / (double)r->interior;
}

static int edge_side_ok(const lam_segmentation *s, uint32_t l)
{
    return !l || (s->regions[l - 1].interior && s->regions[l - 1].depth_max >= LAM_RIBBON_DEPTH);
}

static uint32_t edge_owner_brute(const lam_segmentation *s, const lam_contrast_map *m, size_t x,
                                 size_t y)
{
    uint32_t seen[8], owner = 0;
    size_t n = 0;
    double best = INFINITY;
    for (size_t v = y >= 4 ? y - 4 : 0; v <= y + 4 && v < EH; v++)
        for (size_t u = x >= 4 ? x - 4 : 0; u <= x + 4 && u < EW; u++) {
            size_t k = v * EW + u, i = 0;
            uint32_t l = s->label[k];
            if (!l && s->cls[k] != LAM_CLASS_SUBSTRATE)
                continue;
            while (i < n && seen[i] != l)
                i++;
            if (i == n && n < 8)
                seen[n++] = l;
        }
    for (size_t i = 0; i < n; i++) {
        double d = 0;
        if (!edge_side_ok(s, seen[i]))
            continue;
        for (int c = 0; c < 3; c++) {
            double v = lam_contrast_value(m, (size_t)c, y * EW + x);
            double mean = seen[i] ? edge_mean(s, seen[i], c) : 0;
            d += (v - mean) * (v - mean);
        }
        if (d < best)
            best = d, owner = seen[i];
    }
    return owner;
}

static unsigned long edge_rand(unsigned long *state)
{
    *state = *state * 6364136223846793005ul + 1442695040888963407ul;
    return *state >> 24;
}

/* A random box within a w x h map, min_side + up to spread_w - 1 (and
 * spread_h - 1) pixels on a side, clipped: corners x0, y0 and ends x1, y1
 * (exclusive). */
static void random_box(size_t w, size_t h, size_t min_side, size_t spread_w, size_t spread_h,
                       unsigned long *st, size_t b[4])
{
    size_t x0 = edge_rand(st) % w, y0 = edge_rand(st) % h;
    size_t bw = min_side + edge_rand(st) % spread_w, bh = min_side + edge_rand(st) % spread_h;
    b[0] = x0, b[1] = y0, b[2] = x0 + bw < w ? x0 + bw : w, b[3] = y0 + bh < h ? y0 + bh : h;
}

/* count random boxes of labels 1..labels on a w x h label map. */
static void random_labels(uint32_t *label, size_t w, size_t h, int count, size_t min_side,
                          size_t spread_w, size_t spread_h, uint32_t labels, unsigned long *st)
{
    for (int i = 0; i < count; i++) {
        size_t b[4];
        random_box(w, h, min_side, spread_w, spread_h, st, b);
        uint32_t l = 1 + (uint32_t)(edge_rand(st) % labels);
        for (size_t y = b[1]; y < b[3]; y++)
            for (size_t x = b[0]; x < b[2]; x++)
                label[y * w + x] = l;
    }
}

/* A random map of labels and classes, region statistics and contrasts. */
static void edge_random_map(lam_segmentation *s, lam_contrast_map *m, int trial,
                            unsigned long *st)
{
    memset(s->label, 0, EW * EH * sizeof *s->label);
    memset(s->cls, LAM_CLASS_SUBSTRATE, EW * EH);
    for (int i = 0; i < 12; i++) {
        size_t b[4];
        random_box(EW, EH, 2, 20, 15, st, b);
        uint32_t l = (uint32_t)(edge_rand(st) % (EREGIONS + 2)); /* 0: substrate, 15: transition */
        for (size_t y = b[1]; y < b[3]; y++)
            for (size_t x = b[0]; x < b[2]; x++) {
                s->label[y * EW + x] = l <= EREGIONS ? l : 0;
                s->cls[y * EW + x] = l == 0 ? LAM_CLASS_SUBSTRATE : l <= EREGIONS ? 1 : LAM_CLASS_NONE;
            }
    }
    for (size_t k = 0; trial % 3 == 2 && k < EW * EH; k++)
        if (edge_rand(st) % 3 == 0) {
            uint32_t l = (uint32_t)(edge_rand(st) % (EREGIONS + 2));
            s->label[k] = l <= EREGIONS ? l : 0;
            s->cls[k] = l == 0 ? LAM_CLASS_SUBSTRATE : l <= EREGIONS ? 1 : LAM_CLASS_NONE;
        }
    for (size_t k = 0; k < EW * EH; k++) /* transition pixels between the rectangles too */
        if (edge_rand(st) % 5 == 0)
            s->label[k] = 0, s->cls[k] = LAM_CLASS_NONE;
    for (uint32_t i = 0; i < EREGIONS; i++) {
        lam_region_stats *r = &s->regions[i];
        memset(r, 0, sizeof *r);
        r->id = i + 1;
        r->interior = i % 5 == 4 ? 0 : 10 + edge_rand(st) % 50;
        r->depth_max = i % 4 == 3 ? LAM_RIBBON_DEPTH - 1 : LAM_RIBBON_DEPTH + 2;
        for (int c = 0; c < 3; c++) /* means on the map's grid, some equal: ties */
            r->sum[c] = (double)r->interior * (double)(edge_rand(st) % 8) / 64.0;
    }
    for (int c = 0; c < 3; c++)
        for (size_t k = 0; k < EW * EH; k++)
            m->plane[c][k] = (uint16_t)(LAM_CONTRAST_UNIT - edge_rand(st) % 600);
}

static void edge_areas_match_definition(void)
{
    lam_segmentation *s = NULL;
    lam_error err;
    lam_contrast_map m;
    memset(&m, 0, sizeof m);
    m.width = EW, m.height = EH;
    m.plane[0] = malloc(3 * EW * EH * sizeof *m.plane[0]);
    lam_region_stats *regions = malloc(EREGIONS * sizeof *regions);
    if (!check_true(m.plane[0] && regions && !lam_segmentation_alloc(EW, EH, &s, &err),
                    "edge-area maps allocated")) {
        free(m.plane[0]);
        free(regions);
        lam_segmentation_free(s);
        return;
    }
    m.plane[1] = m.plane[0] + EW * EH, m.plane[2] = m.plane[1] + EW * EH;
    free(s->regions);
    s->regions = regions, s->count = EREGIONS;
    unsigned long state = 2024;
    size_t wrong = 0, owned = 0;
    for (int trial = 0; trial < 9; trial++) {
        edge_random_map(s, &m, trial, &state);
        size_t want[EREGIONS] = {0};
        for (size_t y = 0; y < EH; y++)
            for (size_t x = 0; x < EW; x++) {
                uint32_t l = s->label[y * EW + x];
                if (!l && s->cls[y * EW + x] != LAM_CLASS_SUBSTRATE &&
                    (l = edge_owner_brute(s, &m, x, y)) != 0)
                    want[l - 1]++, owned++;
            }
        for (size_t threads = 1; threads <= 2; threads++) {
            wrong += lam_segment_edge_areas(&m, 3, threads, s, &err) != LAM_OK;
            for (size_t i = 0; i < EREGIONS; i++)
                wrong += s->regions[i].edge != want[i];
        }
    }
    check_int((long)wrong, 0, "edge areas are those of the nearest side in the 9 x 9 window");
    check_true(owned > 1000, "the maps hold transition pixels that regions own (%zu)", owned);
    free(m.plane[0]);
    lam_segmentation_free(s);
}

/* lam__region_statistics against its definition: per region, the count,
 * sum and sum of squares of the contrasts of its pixels at least
 * LAM_INTERIOR_DEPTH deep and not clipped, added pixel by pixel in double
 * in raster order (exact here, so any exact method must give the same
 * bits), the clipped interior count and the deepest pixel. Random labels
 * (rectangles), contrasts over the map's whole range (glare to black)
 * and clip bits; 1 and 2 threads. */
static void region_sums_match_definition(void)
{
    lam_segmentation *s = NULL;
    lam_error err;
    lam_contrast_map m;
    memset(&m, 0, sizeof m);
    m.width = EW, m.height = EH, m.clip_stride = (EW + 7) / 8;
    m.plane[0] = malloc(3 * EW * EH * sizeof *m.plane[0]);
    m.clip_bits = calloc(EH, m.clip_stride);
    lam_region_stats R[EREGIONS], want[EREGIONS];
    if (!check_true(m.plane[0] && m.clip_bits && !lam_segmentation_alloc(EW, EH, &s, &err),
                    "statistics maps allocated")) {
        free(m.plane[0]);
        free(m.clip_bits);
        lam_segmentation_free(s);
        return;
    }
    m.plane[1] = m.plane[0] + EW * EH, m.plane[2] = m.plane[1] + EW * EH;
    unsigned long st = 77;
    size_t wrong = 0, interior = 0;
    for (int trial = 0; trial < 6; trial++) {
        memset(s->label, 0, EW * EH * sizeof *s->label);
        memset(s->cls, 1, EW * EH);
        random_labels(s->label, EW, EH, 10, 6, 30, 25, EREGIONS, &st);
        for (int c = 0; c < 3; c++)
            for (size_t k = 0; k < EW * EH; k++)
                m.plane[c][k] = (uint16_t)(trial % 2 ? edge_rand(&st) % 65536
                                                     : LAM_CONTRAST_UNIT - edge_rand(&st) % 900);
        memset(m.clip_bits, 0, EH * m.clip_stride);
        m.clipped_count = 0;
        for (size_t y = 0; trial >= 2 && y < EH; y++)
            for (size_t x = 0; x < EW; x++)
                if (edge_rand(&st) % 7 == 0)
                    m.clip_bits[y * m.clip_stride + x / 8] |= (uint8_t)(1u << (x % 8)),
                        m.clipped_count++;
        uint8_t *depth = lam__boundary_depth(s->label, EW, EH, 1);
        if (!depth) {
            wrong++;
            continue;
        }
        memset(want, 0, sizeof want);
        for (size_t y = 0; y < EH; y++)
            for (size_t x = 0; x < EW; x++) {
                size_t k = y * EW + x;
                uint32_t l = s->label[k];
                if (!l || l > EREGIONS)
                    continue;
                lam_region_stats *r = &want[l - 1];
                r->depth_max = depth[k] > r->depth_max ? depth[k] : r->depth_max;
                if (depth[k] < LAM_INTERIOR_DEPTH)
                    continue;
                if (lam_contrast_clipped(&m, x, y)) {
                    r->clipped++;
                    continue;
                }
                r->interior++;
                for (size_t c = 0; c < 3; c++) {
                    double v = lam_contrast_value(&m, c, k);
                    r->sum[c] += v;
                    r->sumsq[c] += v * v;
                }
            }
        for (size_t threads = 1; threads <= 2; threads++) {
            memset(R, 0, sizeof R);
            lam__region_statistics(&m, s->cls, s->label, depth, R, EREGIONS, threads);
            for (size_t i = 0; i < EREGIONS; i++) {
                int same = R[i].interior == want[i].interior && R[i].clipped == want[i].clipped &&
                           R[i].depth_max == want[i].depth_max;
                for (int c = 0; c < 3; c++)
                    same &= R[i].sum[c] == want[i].sum[c] && R[i].sumsq[c] == want[i].sumsq[c];
                wrong += !same;
                interior += R[i].interior;
            }
        }
        free(depth);
    }
    check_int((long)wrong, 0, "region sums are the pixel-by-pixel sums of the interior");
    check_true(interior > 5000, "the maps hold interior pixels (%zu)", interior);
    free(m.plane[0]);
    free(m.clip_bits);
    lam_segmentation_free(s);
}

/* lam_usable_rectangle against its definition: the largest area of an
 * axis-aligned rectangle of pixels that are the region's with their four
 * neighbours (so none on the image's edge), found here by trying every
 * rectangle with prefix sums; the one returned must be such a rectangle
 * of that area. Random rectangles of labels on maps of several sizes,
 * down to 1 and 2 px wide. */
static size_t interior_count(const size_t *P, size_t w, size_t x0, size_t y0, size_t x1,
                             size_t y1)
{
    return P[y1 * (w + 1) + x1] - P[y0 * (w + 1) + x1] - P[y1 * (w + 1) + x0] +
           P[y0 * (w + 1) + x0];
}

static size_t usable_brute(const lam_segmentation *s, uint32_t l, size_t *P)
{
    size_t w = s->width, h = s->height, best = 0;
    for (size_t y = 0; y <= h; y++)
        for (size_t x = 0; x <= w; x++) {
            size_t in = 0;
            if (x && y) {
                size_t k = (y - 1) * w + (x - 1), px = x - 1, py = y - 1;
                in = px > 0 && py > 0 && px + 1 < w && py + 1 < h && s->label[k] == l &&
                     s->label[k - 1] == l && s->label[k + 1] == l && s->label[k - w] == l &&
                     s->label[k + w] == l;
            }
            P[y * (w + 1) + x] = in + (y ? P[(y - 1) * (w + 1) + x] : 0) +
                                 (x ? P[y * (w + 1) + x - 1] : 0) -
                                 (x && y ? P[(y - 1) * (w + 1) + x - 1] : 0);
        }
    for (size_t y0 = 0; y0 < h; y0++)
        for (size_t y1 = y0 + 1; y1 <= h; y1++)
            for (size_t x0 = 0; x0 < w; x0++)
                for (size_t x1 = x0 + 1; x1 <= w; x1++) {
                    size_t area = (y1 - y0) * (x1 - x0);
                    if (area > best && interior_count(P, w, x0, y0, x1, y1) == area)
                        best = area;
                }
    return best;
}

static void usable_rectangle_matches_definition(void)
{
    const size_t sizes[][2] = {{1, 9}, {2, 7}, {3, 5}, {23, 17}, {31, 29}};
    unsigned long st = 4242;
    size_t wrong = 0, nonzero = 0;
    for (size_t z = 0; z < sizeof sizes / sizeof sizes[0]; z++) {
        size_t w = sizes[z][0], h = sizes[z][1];
        lam_segmentation *s = NULL;
        lam_error err;
        size_t *P = malloc((w + 1) * (h + 1) * sizeof *P);
        if (!P || lam_segmentation_alloc(w, h, &s, &err)) {
            wrong++;
            free(P);
            continue;
        }
        for (int trial = 0; trial < 8; trial++) {
            memset(s->label, 0, w * h * sizeof *s->label);
            random_labels(s->label, w, h, 6, 1, w + 1, h + 1, 3, &st);
            for (uint32_t l = 1; l <= 3; l++) {
                lam_region_stats r;
                memset(&r, 0, sizeof r);
                r.id = l, r.bbox[0] = w, r.bbox[1] = h;
                for (size_t y = 0; y < h; y++)
                    for (size_t x = 0; x < w; x++)
                        if (s->label[y * w + x] == l) {
                            r.bbox[0] = x < r.bbox[0] ? x : r.bbox[0];
                            r.bbox[1] = y < r.bbox[1] ? y : r.bbox[1];
                            r.bbox[2] = x > r.bbox[2] ? x : r.bbox[2];
                            r.bbox[3] = y > r.bbox[3] ? y : r.bbox[3];
                        }
                if (r.bbox[0] == w)
                    continue; /* no pixel of l */
                size_t wh[2], xy[2], want = usable_brute(s, l, P);
                lam_usable_rectangle(s, &r, wh, xy);
                int ok = wh[0] * wh[1] == want;
                if (ok && want) /* the rectangle returned is one of interior pixels */
                    ok = xy[0] + wh[0] <= w && xy[1] + wh[1] <= h &&
                         interior_count(P, w, xy[0], xy[1], xy[0] + wh[0], xy[1] + wh[1]) == want;
                wrong += !ok;
                nonzero += want > 0;
            }
        }
        free(P);
        lam_segmentation_free(s);
    }
    check_int((long)wrong, 0, "usable rectangles are the largest of interior pixels");
    check_true(nonzero > 20, "the maps have usable rectangles (%zu)", nonzero);
}

/* An image wider than 32768 px (strips of 8 rows, pair lists of 32-bit
 * pixel indices, not 16-bit codes), with a band border every 64 rows: a
 * monolayer block across 72 rows is one region of its area, the same for
 * 1 and 2 threads. */
static void wide_image(void)
{
    const size_t w = 40000, h = 72, x0 = 1000, x1 = 39000;
    lam_image *img = NULL;
    lam_segmentation *seg[2] = {NULL, NULL};
    lam_error err;
    if (!check_true(!lam_image_alloc(w, h, &img, &err), "wide image allocated"))
        return;
    memset(img->clip_bits, 0, h * img->clip_stride);
    for (size_t y = 0; y < h; y++)
        for (size_t x = 0; x < w; x++)
            for (int c = 0; c < 3; c++)
                img->plane[c][y * w + x] = x >= x0 && x < x1 ? (float)MONO[c] : 0.0f;
    lam_contrast_map map;
    lam_contrast_compact(img, &map, 2);
    lam_segment_options so = lam_segment_options_default();
    double noise[3] = {0.002, 0.002, 0.002}, scatter[3] = {0.0005, 0.0005, 0.0005};
    int ok = 1;
    for (size_t t = 0; t < 2; t++) {
        so.threads = t + 1;
        ok = ok && !lam_segmentation_alloc(w, h, &seg[t], &err) &&
             !lam_segment_uniform(&map, 3, MONO, noise, scatter, &so, seg[t], &err);
    }
    if (check_true(ok, "wide image segmented with 1 and 2 threads")) {
        uint32_t l = seg[0]->label[36 * w + 20000];
        /* out: the 2-pixel frame and the block's 2 edge columns either side
         * (the 4-pixel test), each with the 1-pixel dilation */
        size_t want = (x1 - x0 - 6) * (h - 6), area = l ? seg[0]->regions[l - 1].area : 0;
        check_true(l && area == want, "the block is one region of %zu px (%zu)", want, area);
        check_true(!memcmp(seg[0]->label, seg[1]->label, w * h * sizeof *seg[0]->label),
                   "the same labels with 2 threads as with 1");
    }
    lam_segmentation_free(seg[0]);
    lam_segmentation_free(seg[1]);
    lam_contrast_map_free(&map);
    lam_image_free(img);
}

/* Hole filling (segment_join.c) against the definition of a hole: free
 * pixels in a region's box that cannot reach the box's border. A flake
 * with a notch cut into its left side and one into its right side, each a
 * region of its own whose contrast is close to the flake's (within the
 * fill tolerance) and of no confident count (key -1), so that nothing but
 * hole filling could join them: each reaches the border of the flake's box
 * and stays out. A pocket of the same kind enclosed by the flake is a hole
 * and joins. */
static void border_pockets_stay_out(void)
{
    const double zero[3] = {0, 0, 0};
    const double pocket[3] = {MONO[0], MONO[1] + 0.02, MONO[2]};
    lam_image *img = NULL;
    lam_contrast_map map;
    lam_segmentation *seg = NULL;
    lam_error err;
    if (!check_true(!lam_image_alloc(W, H, &img, &err), "pocket image allocated"))
        return;
    paint(img, 0, 0, W, H, zero);
    paint(img, 40, 30, 200, 130, MONO);
    paint(img, 40, 60, 54, 78, pocket);   /* a notch in the left side */
    paint(img, 186, 60, 200, 78, pocket); /* and one in the right side */
    paint(img, 110, 70, 126, 86, pocket); /* a pocket inside */
    add_noise(img);
    lam_contrast_compact(img, &map, 1);
    lam_image_free(img);
    lam_segment_options so = lam_segment_options_default();
    double noise[3] = {0.002, 0.002, 0.002}, scatter[3] = {0.0005, 0.0005, 0.0005};
    int ok = !lam_segmentation_alloc(W, H, &seg, &err) &&
             !lam_segment_uniform(&map, 3, MONO, noise, scatter, &so, seg, &err);
    check_true(ok, "pocket scene segmented");
    uint32_t flake = ok ? label_at(seg, 80, 45) : 0, left = ok ? label_at(seg, 46, 69) : 0;
    uint32_t right = ok ? label_at(seg, 193, 69) : 0, inside = ok ? label_at(seg, 118, 78) : 0;
    check_true(flake && left && right && inside && left != flake && right != flake &&
                   inside != flake,
               "the pockets are regions apart from the flake before joining (%u %u %u %u)",
               flake, left, right, inside);
    int *key = ok ? malloc(seg->count * sizeof *key) : NULL;
    uint32_t *idmap = ok ? malloc(seg->count * sizeof *idmap) : NULL;
    size_t joined = 0;
    if (key && idmap) {
        for (size_t i = 0; i < seg->count; i++) { /* the flake's parts: count 1; others none */
            const lam_region_stats *r = &seg->regions[i];
            double g = r->interior ? r->sum[1] / (double)r->interior : 0;
            key[i] = fabs(g - MONO[1]) < 0.006 ? 1 : -1;
        }
        double fill[3] = {0.3 * MONO[1] + 0.002, 0.3 * MONO[1] + 0.002, 0.3 * MONO[1] + 0.002};
        check_int(lam_segment_join(&map, 3, key, fill, 1, seg, idmap, &joined, &err), LAM_OK,
                  "pocket scene joined");
        flake = label_at(seg, 80, 45);
        check_true(label_at(seg, 46, 69) != flake, "the notch on the box's left border stays out");
        check_true(label_at(seg, 193, 69) != flake,
                   "the notch on the box's right border stays out");
        check_true(label_at(seg, 118, 78) == flake, "the enclosed pocket is a hole and joins");
    }
    free(key);
    free(idmap);
    lam_segmentation_free(seg);
    lam_contrast_map_free(&map);
}

/* lam__region_depth against its definition: each pixel of region l gets
 * the city-block distance to the nearest pixel not in l or outside the
 * map, counted to LAM_DEPTH_CAP (found here by brute force), and no other
 * pixel is written. Random maps of overlapping rectangles (regions of
 * several parts and holes), every label alone; then a large region
 * against lam__boundary_depth (the whole map's rows: another way to the
 * same values). */
static unsigned brute_depth(const uint32_t *lab, size_t w, size_t h, size_t x, size_t y)
{
    uint32_t l = lab[y * w + x];
    size_t best = x + 1; /* the map's edges */
    best = w - x < best ? w - x : best;
    best = y + 1 < best ? y + 1 : best;
    best = h - y < best ? h - y : best;
    for (size_t v = 0; v < h; v++)
        for (size_t u = 0; u < w; u++)
            if (lab[v * w + u] != l) {
                size_t d = (u > x ? u - x : x - u) + (v > y ? v - y : y - v);
                best = d < best ? d : best;
            }
    return best > LAM_DEPTH_CAP ? LAM_DEPTH_CAP : (unsigned)best;
}

static void region_box(const uint32_t *lab, size_t w, size_t h, uint32_t l, size_t box[4])
{
    box[0] = w, box[1] = h, box[2] = box[3] = 0;
    for (size_t y = 0; y < h; y++)
        for (size_t x = 0; x < w; x++)
            if (lab[y * w + x] == l) {
                box[0] = x < box[0] ? x : box[0], box[1] = y < box[1] ? y : box[1];
                box[2] = x > box[2] ? x : box[2], box[3] = y > box[3] ? y : box[3];
            }
}

static size_t depth_errors(const uint32_t *lab, size_t w, size_t h, uint32_t regions,
                           const uint8_t *whole, size_t *checked)
{
    uint8_t *d = malloc(w * h);
    size_t wrong = 0;
    for (uint32_t l = 1; d && l <= regions; l++) {
        size_t box[4];
        region_box(lab, w, h, l, box);
        if (box[0] > box[2])
            continue;
        memset(d, 0xAA, w * h);
        wrong += lam__region_depth(lab, w, l, box, d) != 0;
        for (size_t y = 0; y < h; y++)
            for (size_t x = 0; x < w; x++) {
                size_t k = y * w + x;
                unsigned want = lab[k] != l ? 0xAA : whole ? whole[k] : brute_depth(lab, w, h, x, y);
                wrong += d[k] != want;
                *checked += lab[k] == l;
            }
    }
    free(d);
    return wrong + !d;
}

/* lam__boundary_depth against the same definition, pixel by pixel (0 off
 * regions): random maps of several sizes, down to narrower and lower than
 * the rows and pixels a depth looks at, 1-3 threads (slices whose rows
 * look into their neighbours'). */
static void boundary_depth_matches_definition(void)
{
    static const size_t size[][2] = {{EW, EH}, {31, 17}, {7, 5}, {5, 9}, {1, 12}, {12, 1}, {2, 2}};
    uint32_t *lab = calloc(EW * EH, sizeof *lab);
    unsigned long st = 777;
    size_t wrong = 0, checked = 0;
    for (size_t i = 0; lab && i < sizeof size / sizeof size[0]; i++)
        for (int trial = 0; trial < 4; trial++) {
            size_t w = size[i][0], h = size[i][1];
            for (size_t k = 0; k < w * h; k++) /* specks and runs: labels 0..3 */
                lab[k] = trial % 2 && k && edge_rand(&st) % 4 ? lab[k - 1]
                                                                : (uint32_t)(edge_rand(&st) % 4);
            if (trial >= 2 && w * h > 1)
                random_labels(lab, w, h, 6, 1, w, h, 3, &st);
            for (size_t threads = 1; threads <= 3; threads++) {
                uint8_t *d = lam__boundary_depth(lab, w, h, threads);
                wrong += !d;
                for (size_t k = 0; d && k < w * h; k++) {
                    unsigned want = lab[k] ? brute_depth(lab, w, h, k % w, k / w) : 0;
                    wrong += d[k] != want;
                    checked++;
                }
                free(d);
            }
        }
    check_int((long long)wrong, 0, "the whole map's depths are the city-block distances to each "
                                   "region's outside, counted to the cap (%zu pixels)", checked);
    free(lab);
}

static void region_depth_matches_definition(void)
{
    uint32_t *lab = calloc(EW * EH, sizeof *lab);
    unsigned long st = 4242;
    size_t wrong = 0, checked = 0;
    for (int trial = 0; lab && trial < 8; trial++) {
        memset(lab, 0, EW * EH * sizeof *lab);
        random_labels(lab, EW, EH, 12, 3, 30, 25, EREGIONS, &st);
        wrong += depth_errors(lab, EW, EH, EREGIONS, NULL, &checked);
    }
    check_int((long long)wrong, 0, "a region's depth is the city-block distance to its outside "
                                   "(%zu pixels of random maps)", checked);
    enum { BW = 620, BH = 560 };
    uint32_t *big = calloc(BW * BH, sizeof *big);
    size_t deep = 0, big_checked = 0, big_wrong = 1;
    if (big) {
        for (size_t y = 5; y < BH - 5; y++)
            for (size_t x = 7; x < BW - 3; x++)
                big[y * BW + x] = (x - 60) * (x - 60) + (y - 60) * (y - 60) < 400 ? 2 : 1;
        uint8_t *whole = lam__boundary_depth(big, BW, BH, 2);
        big_wrong = whole ? depth_errors(big, BW, BH, 2, whole, &big_checked) : 1;
        for (size_t k = 0; whole && k < (size_t)BW * BH; k++)
            deep += whole[k] == LAM_DEPTH_CAP;
        free(whole);
    }
    check_true(!big_wrong && deep > 0,
               "a wide region's depth is the whole map's, counted to the cap (%zu pixels at it)",
               deep);
    free(big);
    free(lab);
}

/* The merging's test of one channel (lam__channel_agrees) against its
 * definition, the quotients' difference |sa/na - sb/nb| compared with
 * delta and with delta + noise sqrt(1/na + 1/nb): the same decision on
 * 2.8 million pairs, most of them placed exactly at a threshold or a few
 * units in the last place either side, where the reciprocals it starts
 * from can differ from the quotients. Sums are floats of region means in
 * -0.4..0.8 over 1 to 2^31 pixels, as the merging has them. */
static int agrees_by_division(double sa, double sb, double na, double nb, double delta,
                              double noise)
{
    double d = fabs(sa / na - sb / nb);
    return d <= delta || !(d > delta + noise * sqrt(1 / na + 1 / nb));
}

static double uniform01(unsigned long long *s)
{
    *s = *s * 6364136223846793005ull + 1442695040888963407ull;
    return (double)(*s >> 11) / 9007199254740992.0;
}

static double random_count(unsigned long long *s)
{
    static const double fixed[] = {1, 2, 3, 7, 255, 65536, 2147483648.0};
    double u = uniform01(s);
    return u < 0.3 ? fixed[(size_t)(uniform01(s) * 7)] : floor(exp(uniform01(s) * 21.5)) + 1;
}

static void merge_test_matches_division(void)
{
    unsigned long long s = 2026;
    size_t cases = 0, wrong = 0;
    for (int t = 0; t < 100000; t++) {
        double na = random_count(&s), nb = random_count(&s);
        double sa = (float)((uniform01(&s) * 1.2 - 0.4) * na);
        double sb = (float)((uniform01(&s) * 1.2 - 0.4) * nb);
        if (uniform01(&s) < 0.2) /* nearly equal means */
            sb = (float)(sa / na * nb * (1 + 1e-7 * (uniform01(&s) - 0.5)));
        double d = fabs(sa / na - sb / nb), se_exact = sqrt(1 / na + 1 / nb);
        double deltas[2] = {d, 0.5 * d};
        for (int which = 0; which < 2; which++)
            for (int k = -3; k <= 3; k++) {
                /* which 0: delta at d (no noise term); 1: the noise term's
                 * threshold at d, delta below it */
                double delta = deltas[which], noise = which ? (d - delta) / se_exact : 0;
                double *moved = which ? &noise : &delta;
                for (int step = 0; step < (k < 0 ? -k : k); step++)
                    *moved = nextafter(*moved, k < 0 ? 0 : INFINITY);
                for (int twice = 0; twice < 2; twice++, cases++) {
                    double se = -1;
                    int fast = lam__channel_agrees(sa, sb, na, nb, 1 / na, 1 / nb, delta, noise,
                                                   &se);
                    wrong += fast != agrees_by_division(sa, sb, na, nb, delta, noise);
                    double *other = which ? &delta : &noise; /* then a random other threshold */
                    *other = which ? delta * uniform01(&s) : d * uniform01(&s);
                }
            }
    }
    check_int((long long)wrong, 0,
              "the merging's channel test decides as the quotients do on %zu pairs at its "
              "thresholds",
              cases);
}

/* ---- flat blocks first against the pixel order ----
 * segment_grow.c makes flat 2 x 2 and 4 x 4 blocks one region each before
 * the sorted merging (premerge_blocks). The reference is the published
 * method's order, pixel pair by pixel pair (R. Nock, F. Nielsen, IEEE
 * TPAMI 26, 1452 (2004); so.pixel_order). On the drawn maps every region
 * of 40 px or more of either must have its match in the other: one
 * region holding at least 97 % of its pixels and made of them for at
 * least 97 % of its own. */
#define MATCH_MIN_PX 40
#define MATCH_SHARE 0.97

/* The region of b holding most of a's region l (0: none), and how many. */
static uint32_t best_match(const lam_segmentation *a, const lam_segmentation *b, uint32_t l,
                           size_t *overlap, size_t *counts)
{
    const lam_region_stats *r = &a->regions[l - 1];
    size_t w = a->width;
    memset(counts, 0, (b->count + 1) * sizeof *counts);
    for (size_t y = r->bbox[1]; y <= r->bbox[3]; y++)
        for (size_t x = r->bbox[0]; x <= r->bbox[2]; x++)
            if (a->label[y * w + x] == l)
                counts[b->label[y * w + x]]++;
    uint32_t best = 0;
    for (uint32_t m = 1; m <= b->count; m++)
        if (counts[m] > counts[best] || !best)
            best = counts[m] ? m : best;
    *overlap = best ? counts[best] : 0;
    return best;
}

/* Regions of a (40 px or more) without their match in b. */
static size_t unmatched(const lam_segmentation *a, const lam_segmentation *b)
{
    size_t missing = 0, overlap = 0;
    size_t *counts = malloc((b->count + 1) * sizeof *counts);
    for (uint32_t l = 1; counts && l <= a->count; l++) {
        size_t area = a->regions[l - 1].area;
        if (area < MATCH_MIN_PX)
            continue;
        uint32_t m = best_match(a, b, l, &overlap, counts);
        missing += !m || overlap < MATCH_SHARE * (double)area ||
                   overlap < MATCH_SHARE * (double)b->regions[m - 1].area;
    }
    free(counts);
    return counts ? missing : 1;
}

/* A field of flakes of monolayer step 'step': 1L, 2L and 3L, a 1L flake
 * whose 8 x 8 blocks are offset by up to a tenth of a step (as a JPEG's
 * quantisation leaves them), a 4 px ribbon of 2L, a 6 x 6 speck, at odd
 * offsets from the blocks' grid; pixel noise of the given sigma. */
static const double FIELD_1L[3] = {0.06, 0.11, 0.08}; /* a step in every channel */

static int field_map(lam_contrast_map *out, size_t w, size_t h, const double *step,
                     double sigma)
{
    lam_image *img = NULL;
    lam_error err;
    if (lam_image_alloc(w, h, &img, &err))
        return 0;
    memset(img->clip_bits, 0, h * img->clip_stride);
    const double zero[3] = {0, 0, 0}, bi[3] = {2 * step[0], 2 * step[1], 2 * step[2]};
    const double tri[3] = {3 * step[0], 3 * step[1], 3 * step[2]};
    paint_wh(img, w, 0, 0, w, h, zero);
    paint_wh(img, w, 13, 11, 121, 99, step);
    paint_wh(img, w, 41, 37, 77, 71, bi);
    paint_wh(img, w, 150, 21, 301, 90, tri);
    paint_wh(img, w, 23, 131, 281, 135, bi); /* the ribbon */
    paint_wh(img, w, 203, 161, 209, 167, bi); /* the speck */
    unsigned s = 777;
    for (size_t y = 150; y < 240; y++)
        for (size_t x = 31; x < 171; x++)
            for (int k = 0; k < 3; k++) {
                size_t cell = (y / 8) * 64 + x / 8 + (size_t)k * 4096;
                s = (unsigned)cell * 2654435761u;
                double off = ((double)(s >> 8) / 16777216.0 - 0.5) * 0.2 * step[1];
                img->plane[k][y * w + x] = (float)(step[k] + off);
            }
    add_noise_wh(img, w, h, sigma, 4242);
    lam_contrast_compact(img, out, 1);
    lam_image_free(img);
    return 1;
}

/* One map segmented with and without the blocks: regions matched both
 * ways, and the blocks saved pairs (the map is mostly flat). */
static void compare_orders(const lam_contrast_map *map, const double *c1, const char *what)
{
    lam_segment_options so = lam_segment_options_default();
    double noise[3] = {0.002, 0.002, 0.002}, scatter[3] = {0.0005, 0.0005, 0.0005};
    lam_segmentation *seg[2] = {NULL, NULL};
    lam_error err;
    int ok = 1;
    for (int order = 0; order < 2; order++) {
        so.pixel_order = order;
        ok = ok && !lam_segmentation_alloc(map->width, map->height, &seg[order], &err) &&
             !lam_segment_uniform(map, 3, c1, noise, scatter, &so, seg[order], &err);
    }
    if (check_true(ok, "%s segmented with blocks and in pixel order", what)) {
        size_t big = 0;
        for (size_t i = 0; i < seg[1]->count; i++)
            big += seg[1]->regions[i].area >= MATCH_MIN_PX;
        check_true(big >= 3, "%s: %zu regions of %d px or more in pixel order", what, big,
                   MATCH_MIN_PX);
        check_int((long long)unmatched(seg[1], seg[0]), 0,
                  "%s: every region of the pixel order has its match with blocks", what);
        check_int((long long)unmatched(seg[0], seg[1]), 0,
                  "%s: every region with blocks has its match in the pixel order", what);
    }
    lam_segmentation_free(seg[0]);
    lam_segmentation_free(seg[1]);
}

static void blocks_match_pixel_order(void)
{
    lam_contrast_map map;
    if (check_true(scene(&map), "scene for the blocks allocated")) {
        compare_orders(&map, MONO, "flakes A and B");
        lam_contrast_map_free(&map);
    }
    /* the flakes' steps as the thresholds' scale: MONO's faint blue (its
     * delta then set by the noise) and one with a step in every channel;
     * at the lower noise most of the flat area is 4 x 4 squares */
    const double *steps[2] = {MONO, FIELD_1L}, sigma[2] = {0.002, 0.0005};
    for (int i = 0; i < 4; i++)
        if (check_true(field_map(&map, 320, 256, steps[i / 2], sigma[i % 2]),
                       "field allocated")) {
            char what[80];
            snprintf(what, sizeof what, "the field of flakes, blue step %g, noise %g",
                     steps[i / 2][2], sigma[i % 2]);
            compare_orders(&map, steps[i / 2], what);
            lam_contrast_map_free(&map);
        }
}

/* A faint step along the middle of the 8 x 8 squares: a 1L field and
 * patches at 1.2 and 0.8 steps whose sides run through x = 8k + 4 and
 * y = 8k + 4, where a square's quarters meet. The step (0.2 of a monolayer's) is above
 * the merging's delta (0.15) and below an edge's (0.3), so its pixels stay
 * provisional and only the pairs across it keep the sides apart: a square
 * whose quarters pass without the pairs between them would join them. */
static void squares_keep_faint_steps(void)
{
    const size_t w = 160, h = 128;
    lam_image *img = NULL;
    lam_error err;
    if (!check_int(lam_image_alloc(w, h, &img, &err), LAM_OK, "faint-step map allocated"))
        return;
    memset(img->clip_bits, 0, h * img->clip_stride);
    double above[3], below[3];
    for (int k = 0; k < 3; k++)
        above[k] = 1.2 * FIELD_1L[k], below[k] = 0.8 * FIELD_1L[k];
    paint_wh(img, w, 0, 0, w, h, FIELD_1L);
    paint_wh(img, w, 36, 28, 124, 92, above);
    paint_wh(img, w, 132, 12, 156, 116, below);
    add_noise_wh(img, w, h, 0.0005, 99);
    lam_contrast_map map;
    lam_contrast_compact(img, &map, 1);
    lam_image_free(img);
    compare_orders(&map, FIELD_1L, "a faint step through the squares' middles");
    lam_contrast_map_free(&map);
}

/* Hole filling's flood on winding paths (segment_join.c flood, a span
 * at a time): a flake with three serpentine channels 5 px wide, regions
 * of no confident count (as JPEG rings are), each turning back on itself
 * 6 times. One is closed inside the flake: a hole, so it joins; the others
 * lead by a channel to the last and the first row of the flake's box: they
 * reach the box's border, so every pixel of them stays out. The definition (free pixels of
 * the box that cannot reach its border) decides both; a flood that missed
 * a turn would leave part of the first out or take part of the second in. */
#define SNAKE_W 320
#define SNAKE_H 300
#define SNAKE_BAND 5

/* Class c over x0..x1, y0..y0 + SNAKE_BAND - 1 (a band of the snake). */
static void snake_band(uint8_t *cls, size_t x0, size_t x1, size_t y0, size_t y1, uint8_t c)
{
    for (size_t y = y0; y <= y1; y++)
        for (size_t x = x0; x <= x1; x++)
            cls[y * SNAKE_W + x] = c;
}

/* A serpentine of class c: bands every 2 SNAKE_BAND rows from y0 to y1,
 * each from x0 to x1, joined at alternate ends; then (open) a channel
 * beside the right end of the last band down to row exit_y, or (exit_y
 * < y0) of the first band up to it (0: closed). */
static void draw_snake(uint8_t *cls, size_t x0, size_t x1, size_t y0, size_t y1, size_t exit_y,
                       uint8_t c)
{
    const size_t b = SNAKE_BAND;
    int right = 1;
    size_t y = y0;
    for (; y + 2 * b <= y1; y += 2 * b, right = !right) {
        snake_band(cls, x0, x1, y, y + b - 1, c);
        size_t xc = right ? x1 - b + 1 : x0;
        snake_band(cls, xc, xc + b - 1, y, y + 2 * b - 1, c);
    }
    snake_band(cls, x0, x1, y, y + b - 1, c);
    size_t from = exit_y < y0 ? y0 : y; /* the band the channel leaves */
    if (exit_y) {
        snake_band(cls, x1 + 1, x1 + 2 * b, from, from + b - 1, c);
        snake_band(cls, x1 + b + 1, x1 + 2 * b, exit_y < y0 ? exit_y : from,
                   exit_y < y0 ? from : exit_y, c);
    }
}

static void hole_flood_winding(void)
{
    lam_image *img = NULL;
    lam_contrast_map map;
    lam_segmentation *seg = NULL;
    lam_error err;
    const size_t n = (size_t)SNAKE_W * SNAKE_H;
    if (!check_true(!lam_image_alloc(SNAKE_W, SNAKE_H, &img, &err), "snake image allocated"))
        return;
    memset(img->clip_bits, 0, SNAKE_H * img->clip_stride);
    paint_wh(img, SNAKE_W, 0, 0, SNAKE_W, SNAKE_H, MONO);
    lam_contrast_compact(img, &map, 1);
    lam_image_free(img);
    uint8_t *snake = calloc(n, 1);
    int ok = snake && !lam_segmentation_alloc(SNAKE_W, SNAKE_H, &seg, &err);
    if (ok) {
        for (size_t k = 0; k < n; k++) {
            size_t x = k % SNAKE_W, y = k / SNAKE_W;
            seg->cls[k] = x >= 10 && x < 310 && y >= 10 && y < 290 ? 1 : LAM_CLASS_SUBSTRATE;
        }
        draw_snake(snake, 30, 90, 30, 90, 0, 2);      /* closed */
        draw_snake(snake, 150, 210, 30, 90, 289, 3);  /* open to the flake's last row */
        draw_snake(snake, 235, 285, 130, 190, 10, 4); /* and to its first */
        for (size_t k = 0; k < n; k++)
            seg->cls[k] = snake[k] ? snake[k] : seg->cls[k];
    }
    lam_segment_options so = lam_segment_options_default();
    ok = ok && !lam_segment_regions(&map, &so, seg, &err) && seg->count == 4;
    if (check_true(ok, "the flake and its three channels are four regions")) {
        int key[4] = {1, -1, -1, -1}; /* ids in order of first pixel: the flake first */
        uint32_t idmap[4];
        size_t joined = 0, in[5] = {0, 0, 0, 0, 0}, all[5] = {0, 0, 0, 0, 0};
        double fill[3] = {0.3 * MONO[1] + 0.002, 0.3 * MONO[1] + 0.002, 0.3 * MONO[1] + 0.002};
        check_int(lam_segment_join(&map, 3, key, fill, 1, seg, idmap, &joined, &err), LAM_OK,
                  "snake flake joined");
        uint32_t flake = seg->label[15 * SNAKE_W + 15];
        for (size_t k = 0; k < n; k++)
            all[snake[k]]++, in[snake[k]] += seg->label[k] == flake;
        check_true(all[2] > 500 && in[2] == all[2],
                   "the closed serpentine is a hole and joins (%zu of %zu px)", in[2], all[2]);
        for (int c = 3; c <= 4; c++)
            check_true(all[c] > 500 && in[c] == 0,
                       "the serpentine open to the box's %s row stays out (%zu of %zu px in)",
                       c == 3 ? "last" : "first", in[c], all[c]);
    }
    free(snake);
    lam_segmentation_free(seg);
    lam_contrast_map_free(&map);
}

int main(void)
{
    check_begin("test_segment");
    merge_test_matches_division();
    blocks_match_pixel_order();
    squares_keep_faint_steps();
    region_depth_matches_definition();
    boundary_depth_matches_definition();
    test_rescue_cores();
    rescue_cores_match_definition();
    edge_areas_match_definition();
    region_sums_match_definition();
    usable_rectangle_matches_definition();
    wide_image();
    border_pockets_stay_out();
    hole_flood_winding();
    lam_contrast_map contrast;
    if (!check_true(scene(&contrast), "scene allocated"))
        return check_summary();
    lam_segmentation *seg = NULL;
    lam_error err;
    lam_segment_options so = lam_segment_options_default();
    double noise[3] = {0.002, 0.002, 0.002}, scatter[3] = {0.0005, 0.0005, 0.0005};
    check_int(lam_segmentation_alloc(W, H, &seg, &err), LAM_OK, "segmentation allocated");
    check_int(lam_segment_uniform(&contrast, 3, MONO, noise, scatter, &so, seg, &err), LAM_OK,
              "uniform segmentation");
    uint32_t left = label_at(seg, 30, 80), right = label_at(seg, 150, 80);
    check_true(left && right && left != right,
               "the cut splits flake A into two regions before joining (%u, %u)", left, right);
    int *key = malloc(seg->count * sizeof *key);
    uint32_t *map = malloc(seg->count * sizeof *map);
    for (size_t i = 0; i < seg->count; i++)
        key[i] = key_of(&seg->regions[i]);
    size_t joined = 0;
    double fill[3] = {0.3 * MONO[1] + 0.002, 0.3 * MONO[1] + 0.002, 0.3 * MONO[1] + 0.002};
    check_int(lam_segment_join(&contrast, 3, key, fill, 1, seg, map, &joined, &err), LAM_OK,
              "join");
    left = label_at(seg, 30, 80), right = label_at(seg, 150, 80);
    check_true(left && left == right, "after joining flake A is one region (%u, %u)", left, right);
    check_true(joined >= 1, "at least one region disappeared (%zu)", joined);
    check_true(label_at(seg, 89, 80) == left, "the cut's pixels close to the flake joined it");
    check_true(label_at(seg, 45, 55) != left, "the hole to the substrate stays out");
    uint32_t island = label_at(seg, 128, 98);
    check_true(island && island != left, "the bilayer island stays its own region (%u)", island);
    check_true(label_at(seg, 61, 101) != left, "the residue speck stays out");
    uint32_t b = label_at(seg, 200, 80);
    check_true(b && b != left, "flake B, 20 px away, stays a flake of its own (%u)", b);
    int consistent = 1;
    for (size_t i = 0; i < seg->count; i++)
        consistent &= seg->regions[i].id == i + 1 && seg->regions[i].area > 0;
    check_true(consistent, "regions renumbered 1..%zu with their statistics", seg->count);
    free(key);
    free(map);
    lam_segmentation_free(seg);
    lam_contrast_map_free(&contrast);
    join_threads();
    return check_summary();
}
