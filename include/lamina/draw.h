/*
 * lamina/draw.h - what every picture lamina draws shares: cairo canvases
 * that end in an atomic file, text through Pango (DejaVu Sans, a Debian
 * font), plot axes with ticks, the layer palette and line styles.
 *
 * Units: canvas coordinates are pixels for raster output and CSS pixels
 * (1/96 inch) for SVG and PDF; text sizes are in the same units.
 * Drawing is single-threaded per canvas (cairo and Pango are deterministic:
 * the same calls give the same bytes). Several threads may each draw their
 * own canvas.
 *
 * Ownership: lam_canvas_open* fill a caller-owned lam_canvas; exactly one
 * of lam_canvas_finish (writes the file) or lam_canvas_abort releases it.
 * Errors: LAM_EINVAL for an unsupported file ending, LAM_ENOMEM, LAM_EIO.
 */
#ifndef LAMINA_DRAW_H
#define LAMINA_DRAW_H

#include <pthread.h>
#include <stddef.h>
#include <stdint.h>
#include <cairo.h>
#include "lamina/error.h"

typedef enum lam_canvas_kind {
    LAM_CANVAS_SVG,
    LAM_CANVAS_PDF,
    LAM_CANVAS_PNG,    /* drawn into memory, written with lamina/png.h */
    LAM_CANVAS_BUFFER  /* over a caller's pixel buffer; finish writes nothing */
} lam_canvas_kind;

typedef struct lam_canvas {
    lam_canvas_kind kind;
    cairo_surface_t *surface;
    cairo_t *cr;
    double width, height;
    unsigned char *data;    /* vector output collected in memory */
    size_t len, cap;
    int failed;             /* the memory stream could not grow */
    char path[4096];
} lam_canvas;

/* The kind a file name asks for (.svg, .pdf, .png, any case); -1 if none. */
int lam_canvas_kind_of(const char *path);

/* A canvas of width x height for a file; the format from the path's ending.
 * The background is white. */
lam_status lam_canvas_open(lam_canvas *c, const char *path, double width, double height,
                           lam_error *err);

/* A canvas over a caller's xRGB buffer (cairo's CAIRO_FORMAT_RGB24, native
 * 32-bit words 0x00RRGGBB, stride 4 * width); nothing is cleared. */
lam_status lam_canvas_open_buffer(lam_canvas *c, uint32_t *pixels, size_t width, size_t height,
                                  lam_error *err);

/* Packed xRGB words (w x h, rows stride_words apart) to an 8-bit RGB PNG
 * file, atomically: what lam_canvas_finish writes for a PNG canvas, for a
 * picture drawn in a buffer canvas. */
lam_status lam_canvas_save_xrgb(const uint32_t *px, size_t w, size_t h, size_t stride_words,
                                const char *path, lam_error *err);

/* End drawing and write the file atomically (none for a buffer canvas). */
lam_status lam_canvas_finish(lam_canvas *c, lam_error *err);
void lam_canvas_abort(lam_canvas *c);

/* Release Pango's default font map (call once at exit, after every
 * drawing thread has ended) and, when the environment has
 * LAMINA_RELEASE_FONT_CACHES=1 (make asan, make valgrind), also the font
 * and glyph caches of fontconfig and cairo, so leak checkers see only real
 * leaks. */
void lam_draw_shutdown(void);

/* Colours as 0xRRGGBB. */
void lam_draw_rgb(cairo_t *cr, uint32_t rgb);
void lam_draw_rgba(cairo_t *cr, uint32_t rgb, double alpha);

/* The layer palette (designed for lamina, see docs/user-guide.md):
 * distinguishable from each other for normal vision and the three
 * dichromacies, and from the violet, blue and purple-brown substrates of
 * 285, 300 and 90 nm oxide. Index 1..6 = 1L..6L (6 for more), 0 = thick,
 * -1 = unassigned or unmodelled (drawn dashed). */
uint32_t lam_draw_layer_colour(int layers);
#define LAM_DRAW_THICK 0
#define LAM_DRAW_UNASSIGNED (-1)

/* Films of continuous thickness (hBN): colours by thickness band, the
 * layer palette's first five in order; band edges 5, 10, 30 and 60 nm
 * (10-30 nm is the common choice for encapsulation). */
#define LAM_DRAW_THICKNESS_BANDS 5
extern const double lam_draw_thickness_edges[LAM_DRAW_THICKNESS_BANDS - 1];
int lam_draw_thickness_band(double nm);
uint32_t lam_draw_thickness_colour(int band);

/* A result's colour: its thickness band's when thickness_nm is a number (a
 * film of continuous thickness), else its layer count's (as
 * lam_draw_layer_colour), so that the annotated picture, the contrast
 * plot, the run report, the crops and the chip map agree. */
uint32_t lam_draw_result_colour(int layers, double thickness_nm);

/* Text. 'markup' is Pango markup (escape user text with lam_draw_escape).
 * Anchor: which point of the text's ink box lies at (x, y): ax = 0 left,
 * 0.5 centre, 1 right; ay likewise from the top. 'size' is the font size
 * (pixel em); bold selects DejaVu Sans Bold. */
typedef struct lam_text_style {
    double size;
    int bold;
    uint32_t colour;
    double ax, ay;
    double angle_deg;       /* counter-clockwise rotation about (x, y) */
} lam_text_style;

/* Draw Pango markup (escape plain text with lam_draw_escape) at (x, y),
 * anchored by st->ax, st->ay (0 left/top, 0.5 centre, 1 right/bottom). */
void lam_draw_text(cairo_t *cr, double x, double y, const lam_text_style *st,
                   const char *markup);
/* Logical width and height of the text at that style. */
void lam_draw_text_size(cairo_t *cr, const lam_text_style *st, const char *markup, double *w,
                        double *h);

/* Text made ready ahead. The first text a process sets waits ~10 ms for
 * fontconfig's configuration and caches, the font files and their shaping
 * tables (process-wide, kept). A caller with other work meanwhile (the
 * analysis of an image) starts that on a thread of its own, and joins it
 * before it returns; drawing need not wait for it (the libraries lock
 * what they share) and draws the same bytes either way. Join after a
 * failed start does nothing. */
typedef struct lam_draw_warm_up {
    pthread_t thread;
    int started;
} lam_draw_warm_up;
/* Start the loading on a thread of its own (w->started: whether it did;
 * never when LAMINA_RELEASE_FONT_CACHES=1, where lam_draw_shutdown resets
 * the caches for the leak checkers and a run that failed early raced it). */
void lam_draw_warm_up_start(lam_draw_warm_up *w);
/* Wait for it (nothing after a failed start). */
void lam_draw_warm_up_join(lam_draw_warm_up *w);

/* Copy 'text' into 'out' with Pango markup's special characters escaped. */
void lam_draw_escape(const char *text, char *out, size_t n);

/* A rectangle with rounded corners (radius r) as the current path. */
void lam_draw_round_rect(cairo_t *cr, double x, double y, double w, double h, double r);

/* Plot axes. */
typedef struct lam_axis {
    double lo, hi;         /* data range */
    double p0, p1;         /* canvas coordinates of lo and hi */
    const char *const *cats; /* when set: ticks at 0 .. ncats-1 labelled cats[k] */
    size_t ncats;
    int hide_ticks;          /* frame and title only */
} lam_axis;

/* The canvas coordinate of data value v (linear between p0 and p1). */
double lam_axis_map(const lam_axis *a, double v);

/* "Nice" tick values (1, 2, 5 x 10^k steps) covering [lo, hi] with about
 * 'target' ticks; returns the count (<= max) and the step. */
size_t lam_nice_ticks(double lo, double hi, size_t target, double *ticks, size_t max,
                      double *step);

/* Widen [lo, hi] outward to multiples of a nice step (about 'target' ticks). */
void lam_nice_range(double *lo, double *hi, size_t target);

/* A plot frame with ticks, tick labels, grid lines and axis titles (Pango
 * markup; either title may be NULL). */
void lam_draw_axes(cairo_t *cr, const lam_axis *x, const lam_axis *y, const char *x_title,
                   const char *y_title, double font_size);

/* A probability for people: rounded down to 'digits' decimals, and
 * ">0.99" (for 2 digits) above that, so a posterior never reads as certain. */
void lam_draw_probability(double p, int digits, char *out, size_t n);

/* Format a tick value with the decimals its step needs. */
void lam_draw_tick_label(double v, double step, char *out, size_t n);

#endif
