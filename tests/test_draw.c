/* test_draw.c - what people look at: the layer palette against colour
 * science (Little CMS as an independent sRGB -> CIELAB and CIEDE2000), the
 * outlines against hand-computed geometry, the annotated picture's size,
 * marks and label layout on the bundled samples, and well-formed SVG. */
#include "check.h"
#include "lamina/analyze.h"
#include "lamina/contour.h"
#include "lamina/draw.h"
#include "lamina/image.h"
#include "lamina/model.h"
#include "lamina/plot.h"
#include "lamina/report.h"

#include <lcms2.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

/* Simulated dichromacy on linear sRGB, severity 1: Machado, Oliveira and
 * Fernandes, IEEE TVCG 15, 1291 (2009), Table 1 (values from memory; each
 * row sums to 1, as the published matrices keep greys grey - checked
 * below). */
static const double machado[3][3][3] = {
    {{0.152286, 1.052583, -0.204868}, {0.114503, 0.786281, 0.099216}, {-0.003882, -0.048116, 1.051998}},
    {{0.367322, 0.860646, -0.227968}, {0.280085, 0.672501, 0.047413}, {-0.011820, 0.042940, 0.968881}},
    {{1.255528, -0.076749, -0.178779}, {-0.078411, 0.930809, 0.147602}, {0.004733, 0.691367, 0.303900}},
};
static const char *const vision[4] = {"normal", "protanopia", "deuteranopia", "tritanopia"};

/* sRGB decoding, IEC 61966-2-1. */
static double lin(double v)
{
    return v <= 0.04045 ? v / 12.92 : pow((v + 0.055) / 1.055, 2.4);
}

static double enc(double v)
{
    v = v < 0 ? 0 : v > 1 ? 1 : v;
    return v <= 0.0031308 ? 12.92 * v : 1.055 * pow(v, 1 / 2.4) - 0.055;
}

static cmsHTRANSFORM to_lab;

/* CIELAB (lcms, D50) of a linear-RGB colour seen with the given vision. */
static cmsCIELab lab_of(const double linear[3], int v)
{
    double l[3], rgb[3];
    for (int i = 0; i < 3; i++) {
        l[i] = linear[i];
        if (v > 0)
            l[i] = machado[v - 1][i][0] * linear[0] + machado[v - 1][i][1] * linear[1] +
                   machado[v - 1][i][2] * linear[2];
        rgb[i] = enc(l[i]);
    }
    cmsCIELab out;
    cmsDoTransform(to_lab, rgb, &out, 1);
    return out;
}

static void hex_linear(uint32_t c, double out[3])
{
    out[0] = lin((c >> 16 & 255) / 255.0), out[1] = lin((c >> 8 & 255) / 255.0);
    out[2] = lin((c & 255) / 255.0);
}

/* The substrate as the camera sees it, from the model: channel
 * reflectances at that oxide, scaled so the brightest reads 0.55 (a
 * typical exposure). */
static int substrate_colour(double oxide, double out[3])
{
    lam_setup s;
    lam_setup_default(&s);
    lam_model *m = NULL;
    lam_prediction *p = malloc(sizeof *p);
    int ok = p && lam_model_alloc(&s, 1, 0, &m, NULL) == LAM_OK &&
             lam_model_eval(m, oxide, s.sheet.fermi_ev, p, NULL) == LAM_OK;
    if (ok) {
        double mx = fmax(p->substrate[0], fmax(p->substrate[1], p->substrate[2]));
        for (int c = 0; c < 3; c++)
            out[c] = 0.55 * p->substrate[c] / mx;
    }
    lam_model_free(m);
    lam_setup_clear(&s);
    free(p);
    return ok;
}

static void test_palette(void)
{
    cmsHPROFILE srgb = cmsCreate_sRGBProfile(), lab = cmsCreateLab4Profile(NULL);
    to_lab = cmsCreateTransform(srgb, TYPE_RGB_DBL, lab, TYPE_Lab_DBL, INTENT_RELATIVE_COLORIMETRIC, 0);
    for (int v = 0; v < 3; v++)
        for (int i = 0; i < 3; i++)
            check_abs(machado[v][i][0] + machado[v][i][1] + machado[v][i][2], 1, 2e-6,
                      "%s matrix row %d keeps grey grey", vision[v + 1], i);
    int idx[7] = {1, 2, 3, 4, 5, 6, LAM_DRAW_THICK};
    double col[7][3];
    for (int k = 0; k < 7; k++)
        hex_linear(lam_draw_layer_colour(idx[k]), col[k]);
    /* design goal: every pair of layer colours (and thick) apart by >= 12
     * CIEDE2000 for all four visions; 1L, 2L and 3L by >= 18. (Around 2.3
     * is a just-noticeable difference: Sharma, Digital Color Imaging
     * Handbook, 2003, from memory; the thresholds are our choice.) */
    for (int v = 0; v < 4; v++) {
        double worst = INFINITY, worst3 = INFINITY;
        for (int a = 0; a < 7; a++)
            for (int b = a + 1; b < 7; b++) {
                cmsCIELab la = lab_of(col[a], v), lb = lab_of(col[b], v);
                double d = cmsCIE2000DeltaE(&la, &lb, 1, 1, 1);
                worst = fmin(worst, d);
                if (a < 3 && b < 3)
                    worst3 = fmin(worst3, d);
            }
        check_true(worst >= 12, "%s: layer colours apart by >= 12 CIEDE2000 (worst %.1f)",
                   vision[v], worst);
        check_true(worst3 >= 18, "%s: 1L, 2L, 3L apart by >= 18 CIEDE2000 (worst %.1f)",
                   vision[v], worst3);
    }
    static const double oxides[3] = {285, 300, 90}; /* violet, blue, purple-brown */
    for (int o = 0; o < 3; o++) {
        double sub[3];
        if (!check_true(substrate_colour(oxides[o], sub), "model substrate at %.0f nm", oxides[o]))
            continue;
        cmsCIELab ls = lab_of(sub, 0);
        double worst = INFINITY;
        for (int k = 0; k < 7; k++) {
            cmsCIELab lk = lab_of(col[k], 0);
            worst = fmin(worst, cmsCIE2000DeltaE(&ls, &lk, 1, 1, 1));
        }
        check_true(worst >= 20, "every layer colour stands out from the %.0f nm substrate "
                                "(worst %.1f CIEDE2000)", oxides[o], worst);
    }
    cmsDeleteTransform(to_lab);
    cmsCloseProfile(srgb);
    cmsCloseProfile(lab);
}

static double loop_area(const lam_contours *c, size_t l)
{
    double a = 0;
    size_t s = c->point_start[l], e = c->point_start[l + 1];
    for (size_t k = s; k < e; k++) {
        size_t n = k + 1 < e ? k + 1 : s;
        a += (double)c->xy[2 * k] * c->xy[2 * n + 1] - (double)c->xy[2 * n] * c->xy[2 * k + 1];
    }
    return a / 2;
}

/* The iso-line at half height between pixel centres cuts each convex
 * corner of a block by a right triangle of legs 1/2 (area 1/8): a 3x3
 * block gives 9 - 4/8 = 8.5 px^2; a one-pixel hole is a diamond of 0.5. */
static void test_contours(void)
{
    uint32_t lab[7 * 7];
    memset(lab, 0, sizeof lab);
    for (int y = 1; y <= 3; y++)
        for (int x = 1; x <= 3; x++)
            lab[y * 7 + x] = 1;
    lam_contours *c = NULL;
    if (!check_int(lam_contours_trace(lab, 7, 0, 0, 7, 7, 1, &c, NULL), LAM_OK, "trace a block"))
        return;
    check_int((long long)(c->loop_start[1] - c->loop_start[0]), 1, "a block has one outline");
    check_abs(fabs(loop_area(c, 0)), 8.5, 1e-9, "3x3 block outline encloses 8.5 px^2");
    check_int((long long)(c->point_start[1] - c->point_start[0]), 8, "an octagon: 8 corners kept");
    lam_contours_free(c);
    memset(lab, 0, sizeof lab);
    for (int y = 1; y <= 5; y++)
        for (int x = 1; x <= 5; x++)
            lab[y * 7 + x] = (x == 3 && y == 3) ? 0 : 1;
    lam_contours_trace(lab, 7, 0, 0, 7, 7, 1, &c, NULL);
    if (check_int((long long)c->loops, 2, "a ring has two outlines")) {
        double a0 = loop_area(c, 0), a1 = loop_area(c, 1);
        check_abs(fmax(fabs(a0), fabs(a1)), 24.5, 1e-9, "ring outer outline 25 - 4/8");
        check_abs(fmin(fabs(a0), fabs(a1)), 0.5, 1e-9, "ring hole: a diamond of 0.5");
        check_true(a0 * a1 < 0, "the hole runs the other way round (fills leave it open)");
    }
    lam_contours_free(c);
    memset(lab, 0, sizeof lab);
    lab[1 * 7 + 1] = lab[2 * 7 + 2] = 1; /* diagonal neighbours: not 4-connected */
    lam_contours_trace(lab, 7, 0, 0, 7, 7, 1, &c, NULL);
    check_int((long long)c->loops, 2, "diagonal pixels get separate outlines");
    lam_contours_free(c);
    /* a long edge with one-pixel noise becomes straight when simplified */
    uint32_t big[60 * 20];
    memset(big, 0, sizeof big);
    for (int y = 5; y < 15; y++)
        for (int x = 5; x < 55; x++)
            big[y * 60 + x] = (y == 5 && x % 7 == 3) ? 0 : 1;
    lam_contours_trace(big, 60, 0, 0, 60, 20, 1, &c, NULL);
    size_t before = c->points;
    lam_contours_simplify(c, 1.0, NULL);
    check_true(c->points <= 12 && c->points < before, "noisy edge simplified: %zu -> %zu points",
               before, c->points);
    lam_contours_free(c);
}

static int boxes_overlap(const lam_annotation_box *p, const lam_annotation_box *q)
{
    return p->x < q->x + q->w && q->x < p->x + p->w && p->y < q->y + q->h && q->y < p->y + p->h;
}

/* Labels: none for small regions, one for every candidate, none overlapping. */
static void check_layout(lam_analysis *a, const char *name)
{
    lam_annotation_box b[512];
    size_t n = lam_report_annotation_layout(a, b, 512), small_labelled = 0, missing = 0, over = 0;
    for (size_t k = 0; k < n; k++)
        if (b[k].region && (a->results[b[k].region - 1].flags & LAM_FLAG_SMALL))
            small_labelled++;
    for (size_t i = 0; i < a->count; i++) {
        if (a->results[i].layers <= 0 || (a->results[i].flags & LAM_FLAG_SMALL))
            continue;
        int found = 0;
        for (size_t k = 0; k < n; k++)
            found |= b[k].region == a->seg->regions[i].id;
        missing += !found;
    }
    for (size_t p = 0; p < n; p++)
        for (size_t q = p + 1; q < n; q++)
            over += boxes_overlap(&b[p], &b[q]);
    check_int((long long)small_labelled, 0, "%s: no label on a small region", name);
    check_int((long long)missing, 0, "%s: every candidate labelled", name);
    check_int((long long)over, 0, "%s: labels, legend and scale bar do not overlap", name);
    for (size_t k = 0; k < n; k++)
        check_true(b[k].x >= 0 && b[k].y >= 0 && b[k].x + b[k].w <= (double)a->width &&
                       b[k].y + b[k].h <= (double)a->height,
                   "%s: box %zu inside the picture", name, k);
}

/* A pixel 20 px away from every region's box and outside every panel. */
static long far_pixel(const lam_analysis *a, const lam_annotation_box *b, size_t nb)
{
    for (size_t y = 0; y < a->height; y += 7)
        for (size_t x = 0; x < a->width; x += 7) {
            int ok = 1;
            for (size_t i = 0; i < a->count && ok; i++) {
                const size_t *bb = a->seg->regions[i].bbox;
                ok = x + 20 < bb[0] || x > bb[2] + 20 || y + 20 < bb[1] || y > bb[3] + 20;
            }
            for (size_t k = 0; k < nb && ok; k++)
                ok = !((double)x >= b[k].x - 5 && (double)x <= b[k].x + b[k].w + 5 &&
                       (double)y >= b[k].y - 5 && (double)y <= b[k].y + b[k].h + 5);
            if (ok)
                return (long)(y * a->width + x);
        }
    return -1;
}

/* The picture drawn into path from a copy of the display, which is given
 * back afterwards (drawing consumes the display); 1 when written. */
static int draw_keeping_display(lam_analysis *a, const char *path)
{
    lam_error err;
    size_t n = 3 * a->width * a->height;
    uint8_t *display = malloc(n);
    if (!display || lam_analysis_display(a, &err)) { /* a JPEG's is decoded on demand */
        free(display);
        return 0;
    }
    memcpy(display, a->display, n);
    lam_status st = lam_report_write_annotated(a, path, &err);
    free(a->display);
    a->display = display;
    return st == LAM_OK;
}

/* Amber pixels (the legend's warnings line, 0xffc040 on the dark panel)
 * inside the legend of the annotated picture written for a (which draws
 * on a's display copy: restored after). */
static size_t amber_in_legend(lam_analysis *a, const char *path)
{
    lam_annotation_box b[512];
    lam_error err;
    lam_image *img = NULL;
    lam_load_options lo = lam_load_options_default();
    lo.keep_display8 = 1;
    size_t nb = lam_report_annotation_layout(a, b, 512), amber = 0;
    if (!nb || !draw_keeping_display(a, path) || lam_image_load(path, &lo, &img, &err))
        return (size_t)-1;
    for (size_t y = (size_t)b[0].y; y < (size_t)(b[0].y + b[0].h) && y < img->height; y++)
        for (size_t x = (size_t)b[0].x; x < (size_t)(b[0].x + b[0].w) && x < img->width; x++) {
            const uint8_t *p = img->display8 + 3 * (y * img->width + x);
            amber += p[0] > 200 && p[1] > 140 && p[1] < 215 && p[2] < 110;
        }
    lam_image_free(img);
    return amber;
}

/* Someone who looks only at the picture must see that its answers are
 * doubted: the legend (the first box of the layout) gains an amber
 * warnings line exactly when the analysis has warnings. */
static void check_warning_mark(lam_analysis *a, const char *name)
{
    lam_warnings kept = a->warnings;
    char path[1200];
    snprintf(path, sizeof path, "%s/%s.warn.png", check_tmpdir(), name);
    lam_annotation_box b[512];
    a->warnings.count = 0;
    lam_report_annotation_layout(a, b, 512);
    double plain_h = b[0].h;
    size_t plain = amber_in_legend(a, path);
    lam_warnings_add(&a->warnings, "two-readings", "a test warning");
    lam_report_annotation_layout(a, b, 512);
    size_t marked = amber_in_legend(a, path);
    check_true(b[0].h > plain_h, "%s: the legend grows a line for a warning (%.0f -> %.0f px)",
               name, plain_h, b[0].h);
    check_true(plain != (size_t)-1 && marked != (size_t)-1 && marked > plain + 200,
               "%s: amber warning text in the legend only with a warning (%zu, %zu px)", name,
               plain, marked);
    a->warnings = kept;
}

/* A sample analysed with its setup (loaded into s, which the caller clears
 * after freeing the analysis); NULL, with s cleared, when either fails. */
static lam_analysis *analyse_sample(const char *image, const char *setup_file, lam_setup *s)
{
    lam_analysis *a = NULL;
    lam_error err;
    lam_setup_default(s);
    if (!check_int(lam_setup_load(setup_file, s, &err), LAM_OK, "load %s", setup_file))
        return NULL;
    if (!check_int(lam_analyze(image, s, NULL, &a, &err), LAM_OK, "analyse %s", image)) {
        lam_setup_clear(s);
        return NULL;
    }
    return a;
}

/* The annotated picture: the input's size, marked along the largest
 * monolayer's edge, untouched far from every region and panel. */
static void test_annotated(const char *image, const char *setup_file)
{
    lam_setup s;
    lam_error err;
    lam_analysis *a = analyse_sample(image, setup_file, &s);
    if (!a)
        return;
    const char *name = strrchr(image, '/') + 1;
    check_layout(a, name);
    check_warning_mark(a, name);
    lam_annotation_box boxes[512];
    size_t nb = lam_report_annotation_layout(a, boxes, 512);
    size_t n = a->width * a->height, big = 0;
    uint8_t *before = malloc(n * 3);
    check_int(lam_analysis_display(a, &err), LAM_OK, "%s: the picture to draw on", name);
    memcpy(before, a->display, n * 3);
    for (size_t i = 0; i < a->count; i++)
        if (a->results[i].layers == 1 && a->seg->regions[i].area > a->seg->regions[big].area)
            big = i;
    char out[1200];
    snprintf(out, sizeof out, "%s/%s.annotated.png", check_tmpdir(), name);
    check_int(lam_report_write_annotated(a, out, &err), LAM_OK, "%s: write annotated", name);
    check_true(a->display == NULL, "%s: the display consumed by the drawing", name);
    if (a->source) { /* a JPEG's: decoded again, undrawn */
        int again = lam_analysis_display(a, &err) == LAM_OK;
        check_true(again && !memcmp(a->display, before, n * 3),
                   "%s: the display decoded again from the kept JPEG", name);
    } else {
        check_int(lam_analysis_display(a, &err), LAM_EINVAL, "%s: no display left", name);
    }
    lam_load_options lo = lam_load_options_default();
    lo.keep_display8 = 1;
    lam_image *img = NULL;
    if (check_int(lam_image_load(out, &lo, &img, &err), LAM_OK, "%s: annotated reads back", name)) {
        check_true(img->width == a->width && img->height == a->height,
                   "%s: annotated is %zux%zu like the input", name, img->width, img->height);
        /* the top edge of the largest monolayer's box: the outline is drawn there */
        const lam_region_stats *r = &a->seg->regions[big];
        size_t changed = 0, total = 0;
        for (size_t x = r->bbox[0]; x <= r->bbox[2]; x++)
            for (size_t y = r->bbox[1]; y <= r->bbox[3]; y++) {
                size_t k = y * a->width + x;
                if (a->seg->label[k] != r->id)
                    continue;
                total++;
                changed += memcmp(img->display8 + 3 * k, before + 3 * k, 3) != 0;
                break; /* the first region pixel of each column: on the outline */
            }
        check_true(total > 0 && changed >= 0.9 * (double)total,
                   "%s: outline drawn along the largest monolayer (%zu of %zu)", name, changed, total);
        long quiet = far_pixel(a, boxes, nb);
        check_true(quiet >= 0 && !memcmp(img->display8 + 3 * quiet, before + 3 * quiet, 3),
                   "%s: untouched far from every region and panel", name);
    }
    lam_image_free(img);
    free(before);
    lam_analysis_free(a);
    lam_setup_clear(&s);
}

/* The components' sampling factors of a baseline or progressive JPEG
 * (its SOF segment), packed as in the file (0x11: 1 x 1), into f[0..2];
 * the number of components, 0 when there is no SOF. */
static int jpeg_sampling(const char *path, unsigned f[3])
{
    FILE *fp = fopen(path, "rb");
    unsigned char b[4096];
    size_t n = fp ? fread(b, 1, sizeof b, fp) : 0;
    if (fp)
        fclose(fp);
    for (size_t i = 2; i + 9 < n;) {
        if (b[i] != 0xff)
            return 0;
        unsigned marker = b[i + 1], len = (unsigned)b[i + 2] << 8 | b[i + 3];
        if (marker == 0xc0 || marker == 0xc2) {
            int nc = b[i + 9];
            for (int c = 0; c < nc && c < 3 && i + 11 + 3 * (size_t)c < n; c++)
                f[c] = b[i + 11 + 3 * (size_t)c];
            return nc;
        }
        i += 2 + len;
    }
    return 0;
}

/* A JPEG input's annotated picture as a JPEG (lam_report_jpeg_path): the
 * same picture as the PNG drawn from the same analysis, each channel's
 * chroma kept at full resolution (so the 1-pixel outlines keep their
 * colour, which 4:2:0 smears into the flake beside them), a fraction of
 * the PNG's bytes. */
static void test_annotated_jpeg(void)
{
    lam_setup s;
    lam_error err;
    lam_analysis *a =
        analyse_sample("samples/HT285-D04-tile21.jpg", "samples/bench3-setup.json", &s);
    if (!a)
        return;
    char png[1200], jpg[1200];
    snprintf(png, sizeof png, "%s/D04.annotated.png", check_tmpdir());
    snprintf(jpg, sizeof jpg, "%s/D04.annotated.jpg", check_tmpdir());
    check_true(lam_report_jpeg_path(jpg) && lam_report_jpeg_path("x.JPEG") &&
                   !lam_report_jpeg_path(png) && !lam_report_jpeg_path("jpg"),
               "the annotated picture's format by its extension");
    int drawn = draw_keeping_display(a, png) && draw_keeping_display(a, jpg);
    lam_load_options lo = lam_load_options_default();
    lo.keep_display8 = 1;
    lam_image *p = NULL, *j = NULL;
    if (check_true(drawn, "D04: both pictures drawn") &&
        check_int(lam_image_load(png, &lo, &p, &err), LAM_OK, "D04: the PNG reads back") &&
        check_int(lam_image_load(jpg, &lo, &j, &err), LAM_OK, "D04: the JPEG reads back")) {
        unsigned f[3] = {0, 0, 0};
        int components = jpeg_sampling(jpg, f);
        check_true(lam_image_block_coded(j) && components == 3 && f[0] == 0x11 &&
                       f[1] == 0x11 && f[2] == 0x11,
                   "D04: a JPEG without chroma subsampling (%02x %02x %02x)", f[0], f[1], f[2]);
        check_true(j->width == p->width && j->height == p->height, "D04: the input's size");
        uint32_t yellow = lam_draw_layer_colour(1);
        double all = 0, line = 0;
        size_t n = p->width * p->height, on_line = 0;
        for (size_t k = 0; k < n; k++) {
            const uint8_t *q = p->display8 + 3 * k, *r = j->display8 + 3 * k;
            double d = 0;
            for (int c = 0; c < 3; c++)
                d += fabs((double)q[c] - r[c]) / 3;
            all += d;
            uint32_t v = (uint32_t)q[0] << 16 | (uint32_t)q[1] << 8 | q[2];
            if (v == yellow)
                line += d, on_line++;
        }
        check_true(all / (double)n < 1.5, "D04: the JPEG is the PNG's picture (mean |difference| "
                   "%.2f codes, bound 1.5)", all / (double)n);
        check_true(on_line > 1000 && line / (double)on_line < 12,
                   "D04: the monolayers' outlines keep their colour (%zu px, mean |difference| "
                   "%.1f codes, bound 12)", on_line, on_line ? line / (double)on_line : 0.0);
        struct stat sp, sj;
        int sized = !stat(png, &sp) && !stat(jpg, &sj);
        check_true(sized && sj.st_size * 2 < sp.st_size,
                   "D04: the JPEG under half the PNG's size (%lld against %lld bytes)",
                   sized ? (long long)sj.st_size : -1LL, sized ? (long long)sp.st_size : -1LL);
    }
    lam_image_free(p);
    lam_image_free(j);
    lam_analysis_free(a);
    lam_setup_clear(&s);
}

/* The legend goes where it hides least, and a film with a thickness
 * answer weighs like a counted flake: on the hBN demo tile every place
 * for the legend hides something, and it must take the unmodelled patch
 * (a polymer residue) rather than part of an answered hBN flake, as it
 * did when only layer counts were weighed. */
static void test_legend_spares_films(void)
{
    const char *image = "samples/HT285-N05-tile04.png", *setup = "samples/bench3-setup-hbn.json";
    lam_setup s;
    lam_analysis *a = analyse_sample(image, setup, &s);
    if (!a)
        return;
    if (check_true(a->thickness != NULL, "hBN tile: thickness results")) {
        lam_annotation_box b[512];
        lam_report_annotation_layout(a, b, 512); /* b[0]: the legend */
        size_t film = 0, other = 0;
        for (size_t y = (size_t)b[0].y; y < (size_t)(b[0].y + b[0].h); y++)
            for (size_t x = (size_t)b[0].x; x < (size_t)(b[0].x + b[0].w); x++) {
                uint32_t l = a->seg->label[y * a->width + x];
                if (l && a->thickness[l - 1].evaluated && a->results[l - 1].layers >= 0)
                    film++;
                else if (l)
                    other++;
            }
        check_true(other > film, "hBN tile: the legend hides more of unanswered regions than of "
                   "answered films (%zu against %zu px)", other, film);
    }
    lam_analysis_free(a);
    lam_setup_clear(&s);
}

/* Well-formed XML: every element closed in order (a small checker, enough
 * for what cairo writes: declarations, comments, quoted attributes). */
static int xml_well_formed(const char *t)
{
    char stack[64][32];
    int depth = 0, roots = 0;
    for (const char *p = t; *p; p++) {
        if (*p != '<')
            continue;
        if (!strncmp(p, "<?", 2) || !strncmp(p, "<!--", 4)) {
            const char *e = strstr(p, p[1] == '?' ? "?>" : "-->");
            if (!e)
                return 0;
            p = e;
            continue;
        }
        const char *e = p + 1;
        char q = 0;
        for (; *e && (q || *e != '>'); e++)
            if (*e == '"' || *e == '\'')
                q = q == *e ? 0 : (q ? q : *e);
        if (!*e)
            return 0;
        int closing = p[1] == '/', empty = e[-1] == '/';
        char name[32];
        size_t n = 0;
        for (const char *c = p + 1 + closing; *c && !strchr(" \t\r\n/>", *c) && n < 31; c++)
            name[n++] = *c;
        name[n] = '\0';
        if (closing) {
            if (depth == 0 || strcmp(stack[--depth], name))
                return 0;
        } else if (!empty) {
            if (depth == 64)
                return 0;
            roots += depth == 0;
            snprintf(stack[depth++], sizeof stack[0], "%s", name);
        } else {
            roots += depth == 0;
        }
        p = e;
    }
    return depth == 0 && roots == 1;
}

static void test_svg(void)
{
    check_true(!xml_well_formed("<svg><g></svg></g>"), "the XML checker rejects crossed tags");
    double grid[5] = {280, 283, 285, 287, 290}, chi[5] = {30, 8, 2, 9, 31};
    lam_oxide_plot_image im[2] = {{"a.png", 284.5, 1.2, 1, 3}, {"b<&>.png", NAN, NAN, 0, 0}};
    lam_oxide_plot p = {grid, chi, 5, 285, 10, 285.2, 0.8, 283.6, 286.8, "pass", NULL, 0, NAN,
                        im, 2};
    char path[1200];
    snprintf(path, sizeof path, "%s/oxide.svg", check_tmpdir());
    check_int(lam_plot_oxide(&p, path, NULL), LAM_OK, "oxide plot written");
    char *t = check_slurp(path, NULL);
    check_true(t && xml_well_formed(t), "oxide.svg is well-formed XML (a file name with & and <)");
    free(t);
    lam_canvas cv;
    snprintf(path, sizeof path, "%s/x.gif", check_tmpdir());
    check_int(lam_canvas_open(&cv, path, 10, 10, NULL), LAM_EINVAL, "unknown picture format refused");
    double ticks[16], step;
    size_t n = lam_nice_ticks(0.013, 0.171, 3, ticks, 16, &step);
    check_abs(step, 0.05, 1e-12, "ticks over 0.013..0.171 step 0.05");
    check_true(n == 3 && fabs(ticks[0] - 0.05) < 1e-12, "ticks 0.05, 0.10, 0.15");
    char lab[32];
    lam_draw_probability(0.9999, 2, lab, sizeof lab);
    check_str(lab, ">0.99", "a posterior of 0.9999 reads >0.99, never 1.00");
    lam_draw_probability(0.876, 2, lab, sizeof lab);
    check_str(lab, "0.87", "probabilities are rounded down");
}

int main(void)
{
    lam_error_init_gsl();
    check_begin("test_draw");
    test_palette();
    test_contours();
    test_svg();
    test_annotated("samples/HT285-A07-tile12.png", "samples/bench3-setup.json");
    test_annotated("samples/HT285-C11-tile07.png", "samples/bench3-setup.json");
    test_annotated("samples/HT285-D04-tile21.jpg", "samples/bench3-setup.json");
    test_annotated("samples/HT090-B02-tile03.png", "samples/bench3-setup-90nm.json");
    test_annotated_jpeg();
    test_legend_spares_films();
    lam_draw_shutdown();
    return check_summary();
}
