/* draw.c - cairo canvases ending in atomic files, Pango text, plot axes
 * and the layer palette shared by every picture lamina draws. */
#include "lamina/draw.h"
#include "lamina/parallel.h"
#include "lamina/bigalloc.h"
#include "lamina/outfile.h"
#include "lamina/png.h"

#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <unistd.h>
#include <cairo-pdf.h>
#include <cairo-svg.h>
#include <fontconfig/fontconfig.h>
#include <pango/pangocairo.h>

int lam_canvas_kind_of(const char *path)
{
    size_t n = strlen(path);
    if (n > 4 && !strcasecmp(path + n - 4, ".svg"))
        return LAM_CANVAS_SVG;
    if (n > 4 && !strcasecmp(path + n - 4, ".pdf"))
        return LAM_CANVAS_PDF;
    if (n > 4 && !strcasecmp(path + n - 4, ".png"))
        return LAM_CANVAS_PNG;
    return -1;
}

/* cairo's vector surfaces write through this into memory, so the file is
 * written in one atomic step at the end. */
static cairo_status_t collect(void *closure, const unsigned char *data, unsigned int length)
{
    lam_canvas *c = closure;
    if (c->len + length > c->cap) {
        size_t cap = c->cap ? c->cap : 65536;
        while (cap < c->len + length)
            cap *= 2;
        unsigned char *d = realloc(c->data, cap);
        if (!d) {
            c->failed = 1;
            return CAIRO_STATUS_WRITE_ERROR;
        }
        c->data = d;
        c->cap = cap;
    }
    memcpy(c->data + c->len, data, length);
    c->len += length;
    return CAIRO_STATUS_SUCCESS;
}

static lam_status canvas_start(lam_canvas *c, lam_error *err)
{
    if (cairo_surface_status(c->surface) != CAIRO_STATUS_SUCCESS) {
        cairo_surface_destroy(c->surface);
        c->surface = NULL;
        return lam_error_set(err, LAM_ENOMEM, "cannot create a %.0fx%.0f drawing", c->width,
                             c->height);
    }
    c->cr = cairo_create(c->surface);
    if (cairo_status(c->cr) != CAIRO_STATUS_SUCCESS) {
        lam_canvas_abort(c);
        return lam_error_set(err, LAM_ENOMEM, "cannot start a drawing");
    }
    return LAM_OK;
}

lam_status lam_canvas_open(lam_canvas *c, const char *path, double width, double height,
                           lam_error *err)
{
    memset(c, 0, sizeof *c);
    int kind = lam_canvas_kind_of(path);
    if (kind < 0)
        return lam_error_set(err, LAM_EINVAL, "%s: the file name must end in .svg, .pdf or .png",
                             path);
    if (!(width >= 1 && height >= 1 && width <= 32767 && height <= 32767))
        return lam_error_set(err, LAM_EINVAL, "cannot draw a %.0fx%.0f picture", width, height);
    snprintf(c->path, sizeof c->path, "%s", path);
    c->kind = (lam_canvas_kind)kind;
    c->width = width;
    c->height = height;
    if (kind == LAM_CANVAS_SVG) {
        c->surface = cairo_svg_surface_create_for_stream(collect, c, width, height);
        cairo_svg_surface_restrict_to_version(c->surface, CAIRO_SVG_VERSION_1_1);
        cairo_svg_surface_set_document_unit(c->surface, CAIRO_SVG_UNIT_PX);
    } else if (kind == LAM_CANVAS_PDF) {
        /* 1 CSS px = 0.75 pt; fixed dates keep the bytes reproducible */
        c->surface = cairo_pdf_surface_create_for_stream(collect, c, width * 0.75, height * 0.75);
        cairo_pdf_surface_set_metadata(c->surface, CAIRO_PDF_METADATA_CREATOR, "lamina");
        cairo_pdf_surface_set_metadata(c->surface, CAIRO_PDF_METADATA_CREATE_DATE,
                                       "2000-01-01T00:00:00Z");
    } else {
        c->surface = cairo_image_surface_create(CAIRO_FORMAT_RGB24, (int)ceil(width),
                                                (int)ceil(height));
    }
    lam_status st = canvas_start(c, err);
    if (st)
        return st;
    if (kind == LAM_CANVAS_PDF)
        cairo_scale(c->cr, 0.75, 0.75);
    lam_draw_rgb(c->cr, 0xffffff);
    cairo_paint(c->cr);
    return LAM_OK;
}

lam_status lam_canvas_open_buffer(lam_canvas *c, uint32_t *pixels, size_t width, size_t height,
                                  lam_error *err)
{
    memset(c, 0, sizeof *c);
    if (width < 1 || height < 1 || width > 32767 || height > 32767)
        return lam_error_set(err, LAM_ETOOBIG, "cannot draw over a %zux%zu image (at most "
                                               "32767 px a side)", width, height);
    c->kind = LAM_CANVAS_BUFFER;
    c->width = (double)width;
    c->height = (double)height;
    c->surface = cairo_image_surface_create_for_data((unsigned char *)pixels, CAIRO_FORMAT_RGB24,
                                                     (int)width, (int)height, (int)(4 * width));
    return canvas_start(c, err);
}

void lam_canvas_abort(lam_canvas *c)
{
    if (c->cr)
        cairo_destroy(c->cr);
    if (c->surface)
        cairo_surface_destroy(c->surface);
    free(c->data);
    memset(c, 0, sizeof *c);
}

lam_status lam_canvas_save_xrgb(const uint32_t *px, size_t w, size_t h, size_t stride_words,
                                const char *path, lam_error *err)
{
    uint8_t *rgb = lam_big_malloc(w * h * 3);
    if (!rgb)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate a %zux%zu picture", w, h);
    for (size_t y = 0; y < h; y++) {
        const uint32_t *row = px + y * stride_words;
        uint8_t *o = rgb + y * w * 3;
        for (size_t x = 0; x < w; x++) {
            o[3 * x] = (uint8_t)(row[x] >> 16);
            o[3 * x + 1] = (uint8_t)(row[x] >> 8);
            o[3 * x + 2] = (uint8_t)row[x];
        }
    }
    lam_status st = lam_png_save_rgb8(path, rgb, w, h, 3, err);
    free(rgb);
    return st;
}

/* An image surface's xRGB words to a PNG file. */
static lam_status save_image_surface(cairo_surface_t *s, const char *path, lam_error *err)
{
    cairo_surface_flush(s);
    size_t w = (size_t)cairo_image_surface_get_width(s);
    size_t h = (size_t)cairo_image_surface_get_height(s);
    size_t stride = (size_t)cairo_image_surface_get_stride(s);
    const unsigned char *data = cairo_image_surface_get_data(s);
    return lam_canvas_save_xrgb((const uint32_t *)(const void *)data, w, h, stride / 4, path,
                                err);
}

/* cairo's SVG names surfaces and images by process-wide counters, so the
 * same drawing would differ from run to run (and with the thread count):
 * number them in order of first appearance instead. */
static void renumber_svg_ids(lam_canvas *c)
{
    static const char *const prefixes[] = {"surface", "image", "source"};
    long old[256], seen = 0;
    size_t w = 0;
    for (size_t r = 0; r < c->len;) {
        size_t m = 0;
        int hit = -1;
        if (r > 0 && (c->data[r - 1] == '"' || c->data[r - 1] == '#'))
            for (int k = 0; k < 3 && hit < 0; k++) {
                m = strlen(prefixes[k]);
                if (r + m < c->len && !memcmp(c->data + r, prefixes[k], m) &&
                    c->data[r + m] >= '0' && c->data[r + m] <= '9')
                    hit = k;
            }
        if (hit < 0) {
            c->data[w++] = c->data[r++];
            continue;
        }
        long v = 0;
        size_t q = r + m;
        while (q < c->len && c->data[q] >= '0' && c->data[q] <= '9')
            v = v * 10 + (c->data[q++] - '0');
        long idx = 0;
        while (idx < seen && old[idx] != v)
            idx++;
        if (idx == seen && seen < 256)
            old[seen++] = v;
        char t[32];
        int n = snprintf(t, sizeof t, "%s%ld", prefixes[hit], idx + 1);
        if ((size_t)n <= q - r) { /* never longer than what it replaces */
            memcpy(c->data + w, t, (size_t)n);
            w += (size_t)n;
        } else {
            memmove(c->data + w, c->data + r, q - r);
            w += q - r;
        }
        r = q;
    }
    c->len = w;
}

lam_status lam_canvas_finish(lam_canvas *c, lam_error *err)
{
    lam_status st = LAM_OK;
    if (cairo_status(c->cr) != CAIRO_STATUS_SUCCESS)
        st = lam_error_set(err, LAM_EINTERNAL, "drawing failed: %s",
                           cairo_status_to_string(cairo_status(c->cr)));
    cairo_destroy(c->cr);
    c->cr = NULL;
    if (!st && c->kind == LAM_CANVAS_PNG)
        st = save_image_surface(c->surface, c->path, err);
    cairo_surface_finish(c->surface); /* vector surfaces emit their data here */
    if (!st && c->failed)
        st = lam_error_set(err, LAM_ENOMEM, "cannot hold the drawing in memory");
    if (!st && c->kind == LAM_CANVAS_SVG)
        renumber_svg_ids(c);
    if (!st && (c->kind == LAM_CANVAS_SVG || c->kind == LAM_CANVAS_PDF))
        st = lam_outfile_write_buffer(c->path, c->data, c->len, err);
    cairo_surface_destroy(c->surface);
    c->surface = NULL;
    lam_canvas_abort(c);
    return st;
}

/* Whether the process-wide font caches are to be released at exit
 * (LAMINA_RELEASE_FONT_CACHES=1: make asan and make valgrind). */
static int releasing_caches(void)
{
    const char *release = getenv("LAMINA_RELEASE_FONT_CACHES");
    return release && !strcmp(release, "1");
}

void lam_draw_shutdown(void)
{
    /* the loops' helper threads keep the font maps of the text they drew
     * (each thread has its own): they end first, and theirs go with them */
    lam_parallel_retire_helpers();
    pango_cairo_font_map_set_default(NULL);
    /* cairo's and fontconfig's process-wide caches are released only for
     * leak checkers (make asan and make valgrind set the variable): Pango
     * 1.50 loads fontconfig on a thread of its own, and a reset racing with
     * it aborted in cairo's hash-table assertion now and then at exit. */
    if (releasing_caches()) {
        cairo_debug_reset_static_data();
        FcFini();
    }
}

/* Sizes of text in both weights on a scratch surface: fontconfig's
 * configuration, the two DejaVu faces and their shaping tables get loaded.
 * The thread's own Pango font map goes with it. */
static void *warm_up(void *unused)
{
    (void)unused;
    cairo_surface_t *s = cairo_image_surface_create(CAIRO_FORMAT_RGB24, 1, 1);
    cairo_t *cr = cairo_create(s);
    lam_text_style st = {12, 0, 0, 0, 0, 0};
    double w, h;
    for (st.bold = 0; st.bold < 2; st.bold++)
        lam_draw_text_size(cr, &st, "0123456789 1L 2L um", &w, &h);
    cairo_destroy(cr);
    cairo_surface_destroy(s);
    pango_cairo_font_map_set_default(NULL);
    return NULL;
}

void lam_draw_warm_up_start(lam_draw_warm_up *w)
{
    /* not under the leak checkers: a run that failed before it drew (a
     * truncated JPEG) then reset cairo's caches while what the warm-up
     * had loaded was still live somewhere, and aborted in cairo's
     * hash-table assertion at exit in 5 of 320 runs of the asan build
     * (test_cli's truncated-JPEG case; 0 of 450 without the warm-up).
     * The warm-up only saves time. */
    w->started = !releasing_caches() && pthread_create(&w->thread, NULL, warm_up, NULL) == 0;
}

void lam_draw_warm_up_join(lam_draw_warm_up *w)
{
    if (w->started)
        pthread_join(w->thread, NULL);
    w->started = 0;
}

void lam_draw_rgb(cairo_t *cr, uint32_t rgb)
{
    cairo_set_source_rgb(cr, (rgb >> 16 & 255) / 255.0, (rgb >> 8 & 255) / 255.0,
                         (rgb & 255) / 255.0);
}

void lam_draw_rgba(cairo_t *cr, uint32_t rgb, double alpha)
{
    cairo_set_source_rgba(cr, (rgb >> 16 & 255) / 255.0, (rgb >> 8 & 255) / 255.0,
                          (rgb & 255) / 255.0, alpha);
}

/* Chosen by search over sRGB for the largest CIEDE2000 separation under
 * normal vision and simulated protanopia, deuteranopia and tritanopia,
 * then checked against the three substrates (tests/test_draw.c). Blue and
 * violet hues are avoided: they are the substrates' own. */
uint32_t lam_draw_layer_colour(int layers)
{
    static const uint32_t pal[6] = {
        0xffe000, /* 1L yellow */
        0x40e8ff, /* 2L light cyan */
        0xff5a3c, /* 3L vermilion */
        0x00a0a0, /* 4L teal */
        0xe000ff, /* 5L magenta */
        0xffffc0, /* 6L and more: cream */
    };
    if (layers >= 1)
        return pal[layers <= 6 ? layers - 1 : 5];
    return layers == LAM_DRAW_THICK ? 0xa0a080 : 0xd8d8d8;
}

const double lam_draw_thickness_edges[LAM_DRAW_THICKNESS_BANDS - 1] = {5, 10, 30, 60};

int lam_draw_thickness_band(double nm)
{
    int b = 0;
    while (b < LAM_DRAW_THICKNESS_BANDS - 1 && nm >= lam_draw_thickness_edges[b])
        b++;
    return b;
}

uint32_t lam_draw_thickness_colour(int band)
{
    return lam_draw_layer_colour(band < 0 ? 1 : band >= LAM_DRAW_THICKNESS_BANDS ? 5 : band + 1);
}

uint32_t lam_draw_result_colour(int layers, double thickness_nm)
{
    return isfinite(thickness_nm) ? lam_draw_thickness_colour(lam_draw_thickness_band(thickness_nm))
                                  : lam_draw_layer_colour(layers);
}

/* ---- the font ----
 * Text is set in DejaVu Sans (fonts-dejavu-core), and fontconfig is given
 * just its two faces: without them it read the system's configuration
 * (XML, every font directory's cache) in each process, and matched each
 * new size and weight against every installed font, on each thread that
 * drew; a 0.19 MP image spent more time on that than on its fit. The
 * faces are the ones the system's configuration chose for "DejaVu Sans"
 * (the pictures and plots are the same bytes). Where they are not at
 * LAM_FONT_DIR, the system's configuration is used as before. */
#ifndef LAM_FONT_DIR
#define LAM_FONT_DIR "/usr/share/fonts/truetype/dejavu"
#endif

static pthread_once_t font_once = PTHREAD_ONCE_INIT;

static void use_packaged_font(void)
{
    static const char *const files[] = {LAM_FONT_DIR "/DejaVuSans.ttf",
                                        LAM_FONT_DIR "/DejaVuSans-Bold.ttf"};
    FcConfig *config = FcConfigCreate();
    int ok = config != NULL;
    for (size_t i = 0; ok && i < sizeof files / sizeof files[0]; i++)
        ok = access(files[i], R_OK) == 0 &&
             FcConfigAppFontAddFile(config, (const FcChar8 *)files[i]);
    if (ok)
        FcConfigSetCurrent(config); /* takes a reference of its own */
    if (config)
        FcConfigDestroy(config);
}

static PangoLayout *make_layout(cairo_t *cr, const lam_text_style *st, const char *markup)
{
    pthread_once(&font_once, use_packaged_font);
    PangoLayout *l = pango_cairo_create_layout(cr);
    /* no hinting: the same layout at any position and on any machine's
     * fontconfig defaults */
    cairo_font_options_t *fo = cairo_font_options_create();
    cairo_font_options_set_antialias(fo, CAIRO_ANTIALIAS_GRAY);
    cairo_font_options_set_hint_style(fo, CAIRO_HINT_STYLE_NONE);
    cairo_font_options_set_hint_metrics(fo, CAIRO_HINT_METRICS_OFF);
    pango_cairo_context_set_font_options(pango_layout_get_context(l), fo);
    cairo_font_options_destroy(fo);
    pango_layout_context_changed(l);
    PangoFontDescription *fd = pango_font_description_from_string("DejaVu Sans");
    pango_font_description_set_absolute_size(fd, st->size * PANGO_SCALE);
    pango_font_description_set_weight(fd, st->bold ? PANGO_WEIGHT_BOLD : PANGO_WEIGHT_NORMAL);
    pango_layout_set_font_description(l, fd);
    pango_font_description_free(fd);
    pango_layout_set_markup(l, markup, -1);
    return l;
}

void lam_draw_text_size(cairo_t *cr, const lam_text_style *st, const char *markup, double *w,
                        double *h)
{
    PangoLayout *l = make_layout(cr, st, markup);
    PangoRectangle logical;
    pango_layout_get_extents(l, NULL, &logical);
    *w = (double)logical.width / PANGO_SCALE;
    *h = (double)logical.height / PANGO_SCALE;
    g_object_unref(l);
}

void lam_draw_text(cairo_t *cr, double x, double y, const lam_text_style *st, const char *markup)
{
    PangoLayout *l = make_layout(cr, st, markup);
    PangoRectangle logical;
    pango_layout_get_extents(l, NULL, &logical);
    double w = (double)logical.width / PANGO_SCALE, h = (double)logical.height / PANGO_SCALE;
    cairo_save(cr);
    cairo_translate(cr, x, y);
    if (st->angle_deg != 0)
        cairo_rotate(cr, -st->angle_deg * M_PI / 180);
    cairo_move_to(cr, -st->ax * w - (double)logical.x / PANGO_SCALE,
                  -st->ay * h - (double)logical.y / PANGO_SCALE);
    lam_draw_rgb(cr, st->colour);
    pango_cairo_show_layout(cr, l);
    cairo_restore(cr);
    cairo_new_path(cr); /* no current point left behind for the next line_to */
    g_object_unref(l);
}

void lam_draw_escape(const char *text, char *out, size_t n)
{
    size_t k = 0;
    for (const char *p = text; *p && k + 7 < n; p++) {
        const char *rep = *p == '&' ? "&amp;" : *p == '<' ? "&lt;" : *p == '>' ? "&gt;" : NULL;
        if (rep) {
            size_t m = strlen(rep);
            memcpy(out + k, rep, m);
            k += m;
        } else {
            out[k++] = *p;
        }
    }
    if (n)
        out[k < n ? k : n - 1] = '\0';
}

void lam_draw_round_rect(cairo_t *cr, double x, double y, double w, double h, double r)
{
    r = fmin(r, fmin(w, h) / 2);
    cairo_new_sub_path(cr);
    cairo_arc(cr, x + w - r, y + r, r, -M_PI / 2, 0);
    cairo_arc(cr, x + w - r, y + h - r, r, 0, M_PI / 2);
    cairo_arc(cr, x + r, y + h - r, r, M_PI / 2, M_PI);
    cairo_arc(cr, x + r, y + r, r, M_PI, 1.5 * M_PI);
    cairo_close_path(cr);
}

double lam_axis_map(const lam_axis *a, double v)
{
    if (a->hi == a->lo)
        return 0.5 * (a->p0 + a->p1);
    return a->p0 + (v - a->lo) / (a->hi - a->lo) * (a->p1 - a->p0);
}

static double nice_step(double lo, double hi, size_t target)
{
    double span = hi - lo;
    if (!(span > 0) || !isfinite(span))
        return 1;
    double raw = span / (double)(target ? target : 1), mag = pow(10, floor(log10(raw)));
    double f = raw / mag;
    return (f < 1.5 ? 1 : f < 3.5 ? 2 : f < 7.5 ? 5 : 10) * mag;
}

size_t lam_nice_ticks(double lo, double hi, size_t target, double *ticks, size_t max,
                      double *step)
{
    double s = nice_step(lo, hi, target);
    if (step)
        *step = s;
    size_t n = 0;
    double eps = 1e-9 * s;
    for (double k = ceil((lo - eps) / s); n < max && k * s <= hi + eps; k += 1)
        ticks[n++] = fabs(k * s) < eps ? 0 : k * s;
    return n;
}

void lam_nice_range(double *lo, double *hi, size_t target)
{
    if (!(*hi > *lo)) {
        double m = fabs(*lo) > 0 ? fabs(*lo) * 0.1 : 1;
        *lo -= m;
        *hi += m;
    }
    double s = nice_step(*lo, *hi, target);
    *lo = floor(*lo / s + 1e-9) * s;
    *hi = ceil(*hi / s - 1e-9) * s;
}

void lam_draw_tick_label(double v, double step, char *out, size_t n)
{
    int dec = step >= 1 ? 0 : (int)ceil(-log10(step) - 1e-9);
    if (dec > 6)
        dec = 6;
    if (fabs(v) < 0.5 * step * 1e-6)
        v = 0;
    /* a true minus sign reads better than a hyphen */
    char t[64];
    snprintf(t, sizeof t, "%.*f", dec, fabs(v));
    snprintf(out, n, "%s%s", v < 0 ? "\u2212" : "", t);
}

static void axis_ticks(cairo_t *cr, const lam_axis *a, const lam_axis *other, int vertical,
                       double fs)
{
    if (a->hide_ticks)
        return;
    double t[64], step = 1;
    double lo = fmin(a->lo, a->hi), hi = fmax(a->lo, a->hi);
    size_t n = 0;
    if (a->cats)
        for (size_t k = 0; k < a->ncats && n < 64; k++)
            t[n++] = (double)k;
    else
        n = lam_nice_ticks(lo, hi, 6, t, 64, &step);
    double o0 = fmin(other->p0, other->p1), o1 = fmax(other->p0, other->p1);
    double base = vertical ? o0 : o1; /* left edge, or bottom edge */
    lam_text_style ts = {fs, 0, 0x333333, 0, 0, 0};
    for (size_t i = 0; i < n; i++) {
        double p = lam_axis_map(a, t[i]);
        char lab[64];
        if (a->cats)
            snprintf(lab, sizeof lab, "%s", a->cats[i]);
        else
            lam_draw_tick_label(t[i], step, lab, sizeof lab);
        cairo_set_line_width(cr, 1);
        lam_draw_rgb(cr, 0xe4e4e4); /* grid */
        if (vertical) {
            cairo_move_to(cr, o0, p);
            cairo_line_to(cr, o1, p);
        } else {
            cairo_move_to(cr, p, o0);
            cairo_line_to(cr, p, o1);
        }
        cairo_stroke(cr);
        lam_draw_rgb(cr, 0x333333);
        if (vertical) {
            cairo_move_to(cr, base - 5, p);
            cairo_line_to(cr, base, p);
            ts.ax = 1, ts.ay = 0.5;
            cairo_stroke(cr);
            lam_draw_text(cr, base - 7, p, &ts, lab);
        } else {
            cairo_move_to(cr, p, base);
            cairo_line_to(cr, p, base + 5);
            ts.ax = 0.5, ts.ay = 0;
            cairo_stroke(cr);
            lam_draw_text(cr, p, base + 7, &ts, lab);
        }
    }
}

void lam_draw_axes(cairo_t *cr, const lam_axis *x, const lam_axis *y, const char *x_title,
                   const char *y_title, double fs)
{
    double x0 = fmin(x->p0, x->p1), x1 = fmax(x->p0, x->p1);
    double y0 = fmin(y->p0, y->p1), y1 = fmax(y->p0, y->p1);
    cairo_save(cr);
    axis_ticks(cr, x, y, 0, fs);
    axis_ticks(cr, y, x, 1, fs);
    cairo_set_line_width(cr, 1);
    lam_draw_rgb(cr, 0x333333);
    cairo_rectangle(cr, x0, y0, x1 - x0, y1 - y0);
    cairo_stroke(cr);
    lam_text_style ts = {fs * 1.08, 0, 0x111111, 0.5, 0, 0};
    if (x_title)
        lam_draw_text(cr, 0.5 * (x0 + x1), y1 + 9 + 1.5 * fs, &ts, x_title);
    if (y_title) {
        ts.ay = 1;
        ts.angle_deg = 90;
        lam_draw_text(cr, x0 - 14 - 3.2 * fs, 0.5 * (y0 + y1), &ts, y_title);
    }
    cairo_restore(cr);
}

void lam_draw_probability(double p, int digits, char *out, size_t n)
{
    double scale = pow(10, digits), top = 1 - 1 / scale;
    if (!isfinite(p))
        snprintf(out, n, "\u2014");
    else if (p > top)
        snprintf(out, n, ">%.*f", digits, top);
    else
        snprintf(out, n, "%.*f", digits, floor(p * scale) / scale);
}
