/* crops.c - candidate crops with outline, usable rectangle and scale bar,
 * and the contact sheet of the top candidates (lamina/crops.h). */
#include "lamina/crops.h"
#include "lamina/contour.h"
#include "lamina/draw.h"
#include "lamina/image.h"
#include "lamina/parallel.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

typedef struct source {
    size_t image;           /* catalogue image index loaded, or SIZE_MAX */
    size_t w, h;
    uint8_t *rgb;           /* 8-bit sRGB, interleaved */
    uint8_t *map;           /* layer-map values, or NULL */
} source;

void lam_crop_name(const lam_catalog *c, size_t i, char *out, size_t n)
{
    const lam_catalog_entry *e = &c->entries[i];
    snprintf(out, n, "crops/%s.r%u.png", c->images[e->image].stem, e->region);
}

static void source_clear(source *s)
{
    free(s->rgb);
    free(s->map);
    s->rgb = s->map = NULL;
    s->image = (size_t)-1;
}

/* The file's 8-bit codes (a JPEG's or 8-bit PNG's decoded alone, without
 * the planes), or its linear planes encoded to sRGB. */
static uint8_t *load_rgb(const char *path, size_t *w, size_t *h)
{
    lam_load_options lo = lam_load_options_default();
    lo.display8_only = 1;
    lam_image *img = NULL;
    lam_status st = lam_image_load(path, &lo, &img, NULL);
    lo.display8_only = 0;
    lo.keep_display8 = 1;
    if (st == LAM_EINVAL) /* no codes to decode alone: a TIFF or a 16-bit PNG */
        st = lam_image_load(path, &lo, &img, NULL);
    if (st != LAM_OK)
        return NULL;
    uint8_t *rgb = img->display8;
    img->display8 = NULL;
    size_t n = img->width * img->height;
    if (!rgb && (rgb = malloc(n * 3))) {
        lam_transfer srgb = {LAM_TRANSFER_SRGB, 0};
        for (size_t k = 0; k < n; k++)
            for (int ch = 0; ch < 3; ch++) {
                double v = img->plane[ch][k];
                rgb[3 * k + (size_t)ch] =
                    (uint8_t)lround(255 * lam_transfer_encode(&srgb, v < 0 ? 0 : v > 1 ? 1 : v));
            }
    }
    *w = img->width, *h = img->height;
    lam_image_free(img);
    return rgb;
}

static void load_source(const lam_catalog *c, size_t image, source *s)
{
    if (s->image == image)
        return;
    source_clear(s);
    s->image = image;
    const lam_catalog_image *im = &c->images[image];
    char p[4096];
    size_t w = 0, h = 0, mw = 0, mh = 0;
    s->rgb = load_rgb(im->path, &w, &h);
    if (!s->rgb && im->results[0]) {
        snprintf(p, sizeof p, "%s/%s", im->results, im->annotated);
        s->rgb = load_rgb(p, &w, &h);
    }
    s->w = w, s->h = h;
    if (!s->rgb || !im->results[0])
        return;
    snprintf(p, sizeof p, "%s/%s.layers.png", im->results, im->stem);
    uint8_t *m3 = load_rgb(p, &mw, &mh);
    if (m3 && mw == w && mh == h && (s->map = malloc(w * h)))
        for (size_t k = 0; k < w * h; k++)
            s->map[k] = m3[3 * k];
    free(m3);
}

/* The region as a 0/1 label window over its box: the pixels of its layer
 * value connected (4-neighbour) to a seed inside its usable rectangle. */
static uint32_t *region_mask(const source *s, const lam_catalog_entry *e, size_t bx, size_t by,
                             size_t bw, size_t bh)
{
    uint8_t v = (uint8_t)e->layers;
    uint32_t *mask = calloc(bw * bh, sizeof *mask);
    size_t *stack = malloc(bw * bh * sizeof *stack);
    if (!mask || !stack) {
        free(mask);
        free(stack);
        return NULL;
    }
    size_t top = 0, sx = (size_t)e->usable[0], sy = (size_t)e->usable[1];
    if (sx < bx || sy < by || sx >= bx + bw || sy >= by + bh || s->map[sy * s->w + sx] != v)
        sx = (size_t)lround(e->centroid[0]), sy = (size_t)lround(e->centroid[1]);
    if (sx >= bx && sy >= by && sx < bx + bw && sy < by + bh && s->map[sy * s->w + sx] == v) {
        mask[(sy - by) * bw + sx - bx] = 1;
        stack[top++] = (sy - by) * bw + sx - bx;
    }
    while (top) {
        size_t k = stack[--top], x = k % bw, y = k / bw;
        size_t nb[4] = {x ? k - 1 : k, x + 1 < bw ? k + 1 : k, y ? k - bw : k,
                        y + 1 < bh ? k + bw : k};
        for (int q = 0; q < 4; q++) {
            size_t m = nb[q];
            if (!mask[m] && s->map[(by + m / bw) * s->w + bx + m % bw] == v) {
                mask[m] = 1;
                stack[top++] = m;
            }
        }
    }
    free(stack);
    return mask;
}

static void crop_outline(cairo_t *cr, const source *s, const lam_catalog_entry *e, double scale)
{
    size_t bx = (size_t)e->bbox[0], by = (size_t)e->bbox[1];
    size_t bw = (size_t)(e->bbox[2] - e->bbox[0]) + 1, bh = (size_t)(e->bbox[3] - e->bbox[1]) + 1;
    if (!s->map || bx + bw > s->w || by + bh > s->h)
        return;
    uint32_t *mask = region_mask(s, e, bx, by, bw, bh);
    lam_contours *ct = NULL;
    if (!mask || lam_contours_trace(mask, bw, 0, 0, bw, bh, 1, &ct, NULL) != LAM_OK) {
        free(mask);
        return;
    }
    free(mask);
    lam_contours_simplify(ct, 0.6 / scale, NULL);
    cairo_new_path(cr);
    for (size_t l = 0; l < ct->loops; l++) {
        for (size_t k = ct->point_start[l]; k < ct->point_start[l + 1]; k++)
            cairo_line_to(cr, ct->xy[2 * k] + (double)bx, ct->xy[2 * k + 1] + (double)by);
        cairo_close_path(cr);
        cairo_new_sub_path(cr);
    }
    lam_contours_free(ct);
    cairo_set_line_join(cr, CAIRO_LINE_JOIN_ROUND);
    cairo_set_line_width(cr, 3.2 / scale);
    lam_draw_rgba(cr, 0x000000, 0.8);
    cairo_stroke_preserve(cr);
    cairo_set_line_width(cr, 1.6 / scale);
    lam_draw_rgb(cr, lam_draw_result_colour(e->layers, e->thickness_nm[0]));
    cairo_stroke(cr);
}

static void crop_scale_bar(cairo_t *cr, double u, double side, double S)
{
    if (!(u > 0))
        return;
    static const double nice[] = {0.5, 1, 2, 5, 10, 20, 50, 100, 200, 500};
    double len = nice[0];
    for (size_t k = 0; k < sizeof nice / sizeof nice[0]; k++)
        if (nice[k] <= side * u / 3.5)
            len = nice[k];
    double px = len / u * S / side;
    char t[32];
    snprintf(t, sizeof t, len < 1 ? "%.1f \u00b5m" : "%.0f \u00b5m", len);
    lam_text_style ts = {10, 1, 0xffffff, 0.5, 1, 0};
    lam_draw_round_rect(cr, S - px - 14, S - 30, px + 10, 26, 3);
    lam_draw_rgba(cr, 0x101014, 0.8);
    cairo_fill(cr);
    lam_draw_text(cr, S - 9 - px / 2, S - 11, &ts, t);
    cairo_rectangle(cr, S - 9 - px, S - 10, px, 3);
    lam_draw_rgb(cr, 0xffffff);
    cairo_fill(cr);
}

/* One crop of S x S at the current origin: the region's box with a margin,
 * scaled to fit; outside the image is dark grey. */
static void draw_crop(cairo_t *cr, const lam_catalog *c, size_t i, const source *s, double S)
{
    const lam_catalog_entry *e = &c->entries[i];
    double cx = 0.5 * (e->bbox[0] + e->bbox[2] + 1), cy = 0.5 * (e->bbox[1] + e->bbox[3] + 1);
    double side = fmax(32, fmax(e->bbox[2] - e->bbox[0], e->bbox[3] - e->bbox[1]) * 1.4 + 16);
    double scale = S / side;
    cairo_save(cr);
    cairo_matrix_t base;
    cairo_get_matrix(cr, &base);
    cairo_rectangle(cr, 0, 0, S, S);
    cairo_clip(cr);
    lam_draw_rgb(cr, 0x303030);
    cairo_paint(cr);
    long x0 = (long)floor(cx - side / 2), y0 = (long)floor(cy - side / 2), n = (long)ceil(side) + 1;
    long ax = x0 < 0 ? 0 : x0, ay = y0 < 0 ? 0 : y0;
    long bx = x0 + n > (long)s->w ? (long)s->w : x0 + n;
    long by = y0 + n > (long)s->h ? (long)s->h : y0 + n;
    cairo_scale(cr, scale, scale);
    cairo_translate(cr, -(cx - side / 2), -(cy - side / 2));
    if (bx > ax && by > ay) {
        cairo_surface_t *img = cairo_image_surface_create(CAIRO_FORMAT_RGB24, (int)(bx - ax),
                                                          (int)(by - ay));
        unsigned char *d = cairo_image_surface_get_data(img);
        int stride = cairo_image_surface_get_stride(img);
        for (long y = ay; d && y < by; y++)
            for (long x = ax; x < bx; x++) {
                const uint8_t *p = s->rgb + ((size_t)y * s->w + (size_t)x) * 3;
                ((uint32_t *)(void *)(d + (y - ay) * stride))[x - ax] =
                    (uint32_t)p[0] << 16 | (uint32_t)p[1] << 8 | p[2];
            }
        cairo_surface_mark_dirty(img);
        cairo_set_source_surface(cr, img, (double)ax, (double)ay);
        cairo_pattern_set_filter(cairo_get_source(cr), scale > 1.5 ? CAIRO_FILTER_NEAREST
                                                                   : CAIRO_FILTER_GOOD);
        cairo_rectangle(cr, (double)ax, (double)ay, (double)(bx - ax), (double)(by - ay));
        cairo_fill(cr);
        cairo_surface_destroy(img);
    }
    crop_outline(cr, s, e, scale);
    if (e->usable[2] >= e->usable[0]) {
        double dsh[2] = {4 / scale, 3 / scale};
        cairo_set_dash(cr, dsh, 2, 0);
        cairo_set_line_width(cr, 1.2 / scale);
        lam_draw_rgb(cr, lam_draw_result_colour(e->layers, e->thickness_nm[0]));
        cairo_rectangle(cr, e->usable[0], e->usable[1], e->usable[2] - e->usable[0] + 1,
                        e->usable[3] - e->usable[1] + 1);
        cairo_stroke(cr);
        cairo_set_dash(cr, NULL, 0, 0);
    }
    cairo_set_matrix(cr, &base);
    crop_scale_bar(cr, c->images[e->image].um_per_px, side, S);
    cairo_restore(cr);
}

static int crop_is_fresh(const lam_catalog *c, size_t i, const char *path)
{
    const lam_catalog_image *im = &c->images[c->entries[i].image];
    struct stat a, b;
    char j[4096];
    snprintf(j, sizeof j, "%s/%s.json", im->results, im->stem);
    return im->results[0] && stat(path, &a) == 0 && stat(j, &b) == 0 && a.st_mtime > b.st_mtime;
}

/* Candidates in catalogue order (at most max), then grouped by image so
 * each image is read once. */
static size_t pick(const lam_catalog *c, size_t max, size_t *out)
{
    size_t n = 0;
    for (size_t i = 0; i < c->count && n < max; i++)
        if (lam_catalog_is_candidate(c, i))
            out[n++] = i;
    return n;
}

/* One image's share of the work: its candidates drawn from one read of
 * its sources; the crops written, the contact sheet's cells kept. */
typedef struct crop_job {
    const lam_catalog *c;
    const char *dir;
    const size_t *idx;     /* candidates in catalogue order */
    size_t n, max_crops, max_sheet;
    const size_t *images;  /* the images that have candidates, in order */
    uint32_t **cell;       /* per candidate k < max_sheet: its picture, or NULL */
    lam_status *st;        /* per image */
    lam_error *err;        /* per image */
} crop_job;

/* Candidate k drawn at LAM_CROP_PX in a new xRGB buffer (NULL: no memory). */
static uint32_t *draw_cell(const lam_catalog *c, size_t entry, const source *s)
{
    uint32_t *px = malloc((size_t)LAM_CROP_PX * LAM_CROP_PX * sizeof *px);
    lam_canvas cv;
    if (!px || lam_canvas_open_buffer(&cv, px, LAM_CROP_PX, LAM_CROP_PX, NULL)) {
        free(px);
        return NULL;
    }
    draw_crop(cv.cr, c, entry, s, LAM_CROP_PX);
    if (lam_canvas_finish(&cv, NULL)) {
        free(px);
        return NULL;
    }
    return px;
}

static void crop_image(size_t item, void *ctx)
{
    crop_job *j = ctx;
    size_t img = j->images[item];
    source s = {(size_t)-1, 0, 0, NULL, NULL};
    for (size_t k = 0; k < j->n && !j->st[item]; k++) {
        if (j->c->entries[j->idx[k]].image != img)
            continue;
        char name[1200], path[4096];
        lam_crop_name(j->c, j->idx[k], name, sizeof name);
        snprintf(path, sizeof path, "%s/%s", j->dir, name);
        int crop = k < j->max_crops && !crop_is_fresh(j->c, j->idx[k], path);
        if (!crop && k >= j->max_sheet)
            continue;
        load_source(j->c, img, &s);
        if (!s.rgb)
            break; /* the image is gone: no crops for it, empty cells */
        uint32_t *px = draw_cell(j->c, j->idx[k], &s);
        if (!px)
            j->st[item] = lam_error_set(&j->err[item], LAM_ENOMEM, "cannot draw a crop");
        else if (crop)
            j->st[item] = lam_canvas_save_xrgb(px, LAM_CROP_PX, LAM_CROP_PX, LAM_CROP_PX, path,
                                               &j->err[item]);
        if (px && k < j->max_sheet)
            j->cell[k] = px;
        else
            free(px);
    }
    source_clear(&s);
}

/* The images that have one of the n candidates, in image order. */
static size_t candidate_images(const lam_catalog *c, const size_t *idx, size_t n, size_t *out)
{
    size_t m = 0;
    for (size_t img = 0; img < c->n_images; img++)
        for (size_t k = 0; k < n; k++)
            if (c->entries[idx[k]].image == img) {
                out[m++] = img;
                break;
            }
    return m;
}

/* Every image's crops and cells on the threads; the first image's error
 * (in image order) is returned. */
static lam_status crop_images(crop_job *j, lam_error *err)
{
    size_t m = 0, *images = malloc((j->c->n_images ? j->c->n_images : 1) * sizeof *images);
    j->st = calloc(j->c->n_images ? j->c->n_images : 1, sizeof *j->st);
    j->err = calloc(j->c->n_images ? j->c->n_images : 1, sizeof *j->err);
    lam_status st = images && j->st && j->err
                        ? LAM_OK
                        : lam_error_set(err, LAM_ENOMEM, "cannot list the crops");
    if (!st) {
        m = candidate_images(j->c, j->idx, j->n, images);
        j->images = images;
        lam_parallel_each(m, lam_parallel_default(), crop_image, j);
    }
    if (!st)
        st = lam_error_first(j->st, j->err, m, err);
    free(images);
    free(j->st);
    free(j->err);
    return st;
}

/* Cell k's picture onto the sheet at the current origin (a pixel-exact
 * copy: the origin is a whole pixel and nothing is scaled). */
static void paint_cell(cairo_t *cr, uint32_t *px)
{
    cairo_surface_t *cs = cairo_image_surface_create_for_data(
        (unsigned char *)px, CAIRO_FORMAT_RGB24, LAM_CROP_PX, LAM_CROP_PX, 4 * LAM_CROP_PX);
    cairo_set_source_surface(cr, cs, 0, 0);
    cairo_rectangle(cr, 0, 0, LAM_CROP_PX, LAM_CROP_PX);
    cairo_fill(cr);
    cairo_surface_destroy(cs);
}

/* Two lines under a cell, cut at the cell's width so that a long name
 * does not run into the next cell: rank, count and probability; the
 * image and region. */
static void cell_caption(cairo_t *cr, const lam_catalog *c, size_t entry, double w)
{
    const lam_catalog_entry *e = &c->entries[entry];
    char cap[600], esc[400], prob[24], pe[40];
    lam_draw_escape(c->images[e->image].stem, esc, sizeof esc);
    lam_draw_probability(e->probability, 2, prob, sizeof prob);
    lam_draw_escape(prob, pe, sizeof pe);
    lam_text_style ts = {11, 0, 0xffffff, 0, 0, 0};
    cairo_save(cr);
    cairo_rectangle(cr, 0, w, w, 40);
    cairo_clip(cr);
    snprintf(cap, sizeof cap, "%zu. <span foreground=\"#%06x\" weight=\"bold\">%s</span> %s",
             lam_catalog_rank(c, entry),
             (unsigned)lam_draw_result_colour(e->layers, e->thickness_nm[0]), e->label, pe);
    lam_draw_text(cr, 0, w + 3, &ts, cap);
    snprintf(cap, sizeof cap, "%s #%u", esc, e->region);
    lam_draw_text(cr, 0, w + 18, &ts, cap);
    cairo_restore(cr);
}

static lam_status sheet_write(const lam_catalog *c, const size_t *idx, size_t n,
                              uint32_t *const *cell, const char *path, lam_error *err)
{
    enum { COLS = 4, PAD = 10, CAP = 34 };
    size_t rows = n ? (n + COLS - 1) / COLS : 1;
    double w = LAM_CROP_PX;
    lam_canvas cv;
    lam_status st = lam_canvas_open(&cv, path, COLS * (w + PAD) + PAD,
                                    (double)rows * (w + CAP + PAD) + PAD + 30, err);
    if (st)
        return st;
    cairo_t *cr = cv.cr;
    lam_draw_rgb(cr, 0x202024);
    cairo_paint(cr);
    lam_text_style title = {13, 1, 0xffffff, 0, 0, 0};
    lam_draw_text(cr, PAD, 8, &title, n ? "Top candidates (catalogue rank, image, region)"
                                        : "No layer candidates");
    for (size_t img = 0; img < c->n_images; img++)
        for (size_t k = 0; k < n; k++) {
            const lam_catalog_entry *e = &c->entries[idx[k]];
            if (e->image != img)
                continue;
            cairo_save(cr);
            cairo_translate(cr, PAD + (double)(k % COLS) * (w + PAD),
                            30 + PAD + (double)(k / COLS) * (w + CAP + PAD));
            if (cell[k])
                paint_cell(cr, cell[k]);
            cell_caption(cr, c, idx[k], w);
            cairo_restore(cr);
        }
    return lam_canvas_finish(&cv, err);
}

lam_status lam_crops_and_sheet_write(const lam_catalog *c, const char *dir, size_t max_crops,
                                     const char *sheet_path, size_t max_sheet, lam_error *err)
{
    char path[4096];
    snprintf(path, sizeof path, "%s/crops", dir);
    if (mkdir(path, 0755) != 0 && errno != EEXIST)
        return lam_error_set(err, LAM_EIO, "cannot create %s: %s", path, strerror(errno));
    size_t *idx = malloc((c->count ? c->count : 1) * sizeof *idx);
    uint32_t **cell = calloc(max_sheet ? max_sheet : 1, sizeof *cell);
    lam_status st = idx && cell ? LAM_OK : lam_error_set(err, LAM_ENOMEM, "cannot list the crops");
    if (!st) {
        crop_job j = {c, dir, idx, pick(c, max_crops > max_sheet ? max_crops : max_sheet, idx),
                      max_crops, max_sheet, NULL, cell, NULL, NULL};
        st = crop_images(&j, err);
        if (!st)
            st = sheet_write(c, idx, j.n < max_sheet ? j.n : max_sheet, cell, sheet_path, err);
    }
    for (size_t k = 0; cell && k < max_sheet; k++)
        free(cell[k]);
    free(cell);
    free(idx);
    return st;
}
