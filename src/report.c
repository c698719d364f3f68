/* report.c - JSON analysis, layer map, annotated image and contrast plot. */
#include "lamina/report.h"
#include "lamina/font.h"
#include "lamina/outfile.h"
#include "lamina/png.h"
#include "lamina/version.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cjson/cJSON.h>

/* Saturated colours that stay legible on violet, blue, gold or grey
 * substrates; every outline is drawn over a black halo. */
void lam_report_palette(unsigned v, uint8_t rgb[3])
{
    static const uint8_t pal[8][3] = {
        {255, 214, 0},   /* 1L gold */
        {0, 229, 255},   /* 2L cyan */
        {255, 64, 200},  /* 3L magenta */
        {120, 255, 60},  /* 4L lime */
        {255, 138, 0},   /* 5L orange */
        {170, 120, 255}, /* 6L lavender */
        {255, 255, 255}, /* 7L+ white */
        {255, 40, 40},   /* unassigned red */
    };
    const uint8_t *p = v == 255 ? pal[7] : v == 254 ? pal[6] : pal[v >= 1 && v <= 6 ? v - 1 : 6];
    memcpy(rgb, p, 3);
}

unsigned lam_report_layer_value(const lam_region_result *r)
{
    if (r->flags & (LAM_FLAG_UNMODELLED | LAM_FLAG_SATURATED))
        return 255u;
    if (r->layers > 0)
        return (unsigned)r->layers;
    return r->thick ? 254u : 255u;
}

static cJSON *triple(const double v[3])
{
    return cJSON_CreateDoubleArray(v, 3);
}

static cJSON *num_or_null(double v)
{
    return isfinite(v) ? cJSON_CreateNumber(v) : cJSON_CreateNull();
}

static const char *flag_names[] = {"ambiguous", "unmodelled", "saturated", "touches_border", "small"};

cJSON *lam_report_json(const lam_analysis *a)
{
    cJSON *root = cJSON_CreateObject();
    cJSON_AddStringToObject(root, "schema", "lamina-analysis/1");
    cJSON *tool = cJSON_AddObjectToObject(root, "tool");
    cJSON_AddStringToObject(tool, "name", "lamina");
    cJSON_AddStringToObject(tool, "version", LAMINA_VERSION);
    cJSON *im = cJSON_AddObjectToObject(root, "image");
    const char *base = strrchr(a->file, '/');
    cJSON_AddStringToObject(im, "file", base ? base + 1 : a->file);
    cJSON_AddStringToObject(im, "path", a->file);
    if (a->content_hash[0])
        cJSON_AddStringToObject(im, "content_hash", a->content_hash);
    if (a->setup_hash[0])
        cJSON_AddStringToObject(root, "setup_hash", a->setup_hash);
    cJSON_AddNumberToObject(im, "width", (double)a->width);
    cJSON_AddNumberToObject(im, "height", (double)a->height);
    cJSON_AddStringToObject(im, "encoding", lam_transfer_name(&a->transfer));
    cJSON_AddNumberToObject(im, "bit_depth", a->bit_depth);
    cJSON_AddItemToObject(im, "um_per_px", a->um_per_px > 0 ? cJSON_CreateNumber(a->um_per_px)
                                                            : cJSON_CreateNull());
    cJSON_AddNumberToObject(im, "saturated_pixels", (double)a->clipped_pixels);
    cJSON_AddStringToObject(root, "contrast_convention", "(substrate - flake) / substrate");
    cJSON *model = cJSON_AddObjectToObject(root, "model");
    cJSON_AddStringToObject(model, "conductivity", a->conductivity);
    cJSON_AddNumberToObject(model, "illumination_na", a->illumination_na);
    cJSON_AddStringToObject(model, "pupil_weight", a->pupil);
    cJSON_AddStringToObject(model, "camera", a->camera);
    cJSON_AddNumberToObject(model, "max_layers", (double)a->max_layers);
    cJSON_AddStringToObject(model, "prior", "uniform over 1..K layers and thicker");
    cJSON *dl = cJSON_AddArrayToObject(model, "defaults_used");
    for (size_t i = 0; i < a->defaulted_count; i++)
        cJSON_AddItemToArray(dl, cJSON_CreateString(a->defaulted[i]));
    cJSON *lad = cJSON_AddArrayToObject(model, "ladder");
    for (size_t N = 1; N <= a->max_layers; N++)
        cJSON_AddItemToArray(lad, triple(a->ladder.contrast[N]));
    cJSON *sub = cJSON_AddObjectToObject(root, "substrate");
    cJSON_AddItemToObject(sub, "level", triple(a->substrate.level));
    cJSON_AddItemToObject(sub, "noise", triple(a->substrate.noise));
    cJSON_AddNumberToObject(sub, "flatfield_falloff", a->substrate.falloff);
    cJSON_AddNumberToObject(sub, "area_fraction", a->substrate.fraction);
    cJSON_AddNumberToObject(sub, "noise_correlation", a->substrate.kappa);
    cJSON *ox = cJSON_AddObjectToObject(sub, "oxide_nm");
    cJSON_AddItemToObject(ox, "nominal", num_or_null(a->oxide.nominal));
    cJSON_AddItemToObject(ox, "estimate", a->oxide.fitted ? num_or_null(a->oxide.estimate)
                                                         : cJSON_CreateNull());
    cJSON_AddItemToObject(ox, "sigma", a->oxide.fitted ? num_or_null(a->oxide.sigma)
                                                      : cJSON_CreateNull());
    cJSON_AddStringToObject(ox, "method", a->oxide.method);
    cJSON_AddNumberToObject(ox, "regions_used", (double)a->oxide.regions_used);
    cJSON_AddItemToObject(ox, "pass", a->oxide.fitted ? cJSON_CreateBool(a->oxide.pass)
                                                      : cJSON_CreateNull());
    cJSON *regs = cJSON_AddArrayToObject(root, "regions");
    size_t by[LAM_MODEL_MAX_LAYERS + 1] = {0}, thick = 0, unassigned = 0;
    double mono_px = 0;
    for (size_t i = 0; i < a->count; i++) {
        const lam_region_result *r = &a->results[i];
        const lam_region_stats *s = &a->seg->regions[i];
        cJSON *o = cJSON_CreateObject();
        cJSON_AddNumberToObject(o, "id", (double)s->id);
        cJSON_AddItemToObject(o, "layers", r->layers > 0 ? cJSON_CreateNumber(r->layers)
                                                         : cJSON_CreateNull());
        cJSON_AddStringToObject(o, "label", r->label);
        cJSON *p = cJSON_AddObjectToObject(o, "p_layers");
        for (size_t N = 1; N <= a->max_layers; N++)
            if (r->p[N] >= 1e-4) {
                char k[8];
                snprintf(k, sizeof k, "%zu", N);
                cJSON_AddNumberToObject(p, k, round(r->p[N] * 1e4) / 1e4);
            }
        if (r->p_substrate >= 1e-4)
            cJSON_AddNumberToObject(p, "0", round(r->p_substrate * 1e4) / 1e4);
        if (r->p[a->max_layers + 1] >= 1e-4)
            cJSON_AddNumberToObject(p, "thick", round(r->p[a->max_layers + 1] * 1e4) / 1e4);
        cJSON_AddNumberToObject(o, "area_px", (double)s->area);
        double u2 = a->um_per_px * a->um_per_px;
        cJSON_AddItemToObject(o, "area_um2", a->um_per_px > 0 ? cJSON_CreateNumber((double)s->area * u2)
                                                             : cJSON_CreateNull());
        double bb[4] = {(double)s->bbox[0], (double)s->bbox[1], (double)s->bbox[2], (double)s->bbox[3]};
        cJSON_AddItemToObject(o, "bbox", cJSON_CreateDoubleArray(bb, 4));
        double cen[2] = {s->sx / (double)s->area, s->sy / (double)s->area};
        cJSON_AddItemToObject(o, "centroid", cJSON_CreateDoubleArray(cen, 2));
        cJSON_AddItemToObject(o, "contrast", triple(r->mean));
        cJSON_AddItemToObject(o, "contrast_sigma", triple(r->sigma));
        cJSON_AddItemToObject(o, "model_contrast", triple(r->model));
        cJSON_AddNumberToObject(o, "chi2", r->chi2);
        cJSON_AddNumberToObject(o, "interior_px", (double)s->interior);
        if (r->fermi.evaluated) {
            cJSON *f = cJSON_AddObjectToObject(o, "fermi_eV");
            cJSON_AddItemToObject(f, "estimate", num_or_null(r->fermi.estimate));
            cJSON_AddNumberToObject(f, "lo", r->fermi.lo);
            cJSON_AddNumberToObject(f, "hi", r->fermi.hi);
            cJSON_AddBoolToObject(f, "constrained", r->fermi.constrained);
            cJSON_AddStringToObject(f, "interval", r->fermi.constrained ? "68 % (chi2 + 1)"
                                                                        : "allowed range (chi2 + 4)");
        } else {
            cJSON_AddNullToObject(o, "fermi_eV");
        }
        double upx[4] = {(double)r->usable_at[0], (double)r->usable_at[1],
                         (double)r->usable_px[0], (double)r->usable_px[1]};
        cJSON_AddItemToObject(o, "usable_rect_px", cJSON_CreateDoubleArray(upx, 4));
        if (a->um_per_px > 0 && r->usable_px[0]) {
            double uum[2] = {upx[2] * a->um_per_px, upx[3] * a->um_per_px};
            cJSON_AddItemToObject(o, "usable_rect_um", cJSON_CreateDoubleArray(uum, 2));
        } else {
            cJSON_AddNullToObject(o, "usable_rect_um");
        }
        cJSON *fl = cJSON_AddArrayToObject(o, "flags");
        for (int k = 0; k < 5; k++)
            if (r->flags & (1u << k))
                cJSON_AddItemToArray(fl, cJSON_CreateString(flag_names[k]));
        cJSON_AddItemToArray(regs, o);
        if (r->layers > 0)
            by[r->layers]++;
        else if (r->thick)
            thick++;
        else
            unassigned++;
        if (r->layers == 1)
            mono_px += (double)s->area;
    }
    cJSON *sum = cJSON_AddObjectToObject(root, "summary");
    cJSON_AddNumberToObject(sum, "regions", (double)a->count);
    cJSON *byl = cJSON_AddObjectToObject(sum, "by_layers");
    for (size_t N = 1; N <= a->max_layers; N++) {
        char k[8];
        snprintf(k, sizeof k, "%zu", N);
        cJSON_AddNumberToObject(byl, k, (double)by[N]);
    }
    cJSON_AddNumberToObject(byl, "thick", (double)thick);
    cJSON_AddNumberToObject(byl, "unassigned", (double)unassigned);
    cJSON_AddNumberToObject(sum, "monolayer_area_px", mono_px);
    cJSON_AddItemToObject(sum, "monolayer_area_um2",
                          a->um_per_px > 0 ? cJSON_CreateNumber(mono_px * a->um_per_px * a->um_per_px)
                                           : cJSON_CreateNull());
    cJSON_AddStringToObject(sum, "caution", "layer counts are model estimates: confirm by Raman "
                                            "spectroscopy or AFM before fabrication");
    return root;
}

lam_status lam_report_write_json(const lam_analysis *a, const char *path, lam_error *err)
{
    cJSON *root = lam_report_json(a);
    if (!root)
        return lam_error_set(err, LAM_ENOMEM, "cannot format the JSON report");
    lam_status st = lam_report_save_json(root, path, err);
    cJSON_Delete(root);
    return st;
}

lam_status lam_report_save_json(const cJSON *root, const char *path, lam_error *err)
{
    char *text = cJSON_Print(root);
    if (!text)
        return lam_error_set(err, LAM_ENOMEM, "cannot format the JSON report");
    size_t n = strlen(text);
    text[n] = '\n';
    lam_status st = lam_outfile_write_buffer(path, text, n + 1, err);
    free(text);
    return st;
}

lam_status lam_report_write_layers(const lam_analysis *a, const char *path, lam_error *err)
{
    size_t n = a->width * a->height;
    uint8_t *map = malloc(n);
    if (!map)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate the layer map");
    for (size_t k = 0; k < n; k++) {
        uint32_t l = a->seg->label[k];
        map[k] = l ? (uint8_t)lam_report_layer_value(&a->results[l - 1])
                   : (a->seg->cls[k] == LAM_CLASS_SUBSTRATE ? 0 : 255);
    }
    lam_status st = lam_png_save_grey8(path, map, a->width, a->height, err);
    free(map);
    return st;
}

static void fill_rect(uint8_t *rgb, size_t w, size_t h, long x0, long y0, long x1, long y1,
                      const uint8_t c[3], int blend)
{
    for (long y = y0 < 0 ? 0 : y0; y < y1 && y < (long)h; y++)
        for (long x = x0 < 0 ? 0 : x0; x < x1 && x < (long)w; x++) {
            uint8_t *p = rgb + ((size_t)y * w + (size_t)x) * 3;
            for (int k = 0; k < 3; k++)
                p[k] = blend ? (uint8_t)((p[k] + 3 * c[k]) / 4) : c[k];
        }
}

static void text_box(uint8_t *rgb, size_t w, size_t h, long x, long y, const char *text, int s,
                     const uint8_t fg[3])
{
    static const uint8_t black[3] = {0, 0, 0};
    long tw = (long)lam_font_text_width(text, s);
    fill_rect(rgb, w, h, x - s, y - s, x + tw + s, y + (LAM_FONT_H + 1) * s, black, 1);
    lam_font_draw(rgb, w, h, x, y, text, s, fg);
}

lam_status lam_report_write_annotated(lam_analysis *a, const char *path, lam_error *err)
{
    size_t w = a->width, h = a->height;
    uint8_t *rgb = a->display; /* drawn over in place: no second 3 B/px buffer */
    if (!rgb)
        return lam_error_set(err, LAM_EINVAL, "the display copy was already used");
    const uint32_t *lab = a->seg->label;
    int s = w >= 1600 ? (int)(w / 800) : 1;
    /* outlines: region pixels with a 4-neighbour outside the region, drawn
     * max(1, s/2) pixels thick over a black halo so they stay visible on any
     * substrate and when the image is viewed scaled down */
    long r_out = s / 2 > 1 ? s / 2 : 1;
    static const uint8_t black[3] = {0, 0, 0};
    for (int pass = 0; pass < 2; pass++)
        for (size_t y = 0; y < h; y++)
            for (size_t x = 0; x < w; x++) {
                size_t k = y * w + x;
                uint32_t l = lab[k];
                if (!l)
                    continue;
                const lam_region_result *r = &a->results[l - 1];
                if ((r->flags & LAM_FLAG_SMALL) && r->layers == 0)
                    continue;
                int edge = x == 0 || y == 0 || x + 1 == w || y + 1 == h || lab[k - 1] != l ||
                           lab[k + 1] != l || lab[k - w] != l || lab[k + w] != l;
                if (!edge)
                    continue;
                uint8_t c[3];
                lam_report_palette(lam_report_layer_value(r), c);
                /* pass 0: halo one pixel wider; pass 1: the colour */
                long rr = pass == 0 ? r_out : r_out - 1;
                fill_rect(rgb, w, h, (long)x - rr, (long)y - rr, (long)x + rr + 1, (long)y + rr + 1,
                          pass == 0 ? black : c, 0);
            }
    /* labels at the top-left of each region's box */
    for (size_t i = 0; i < a->count; i++) {
        const lam_region_result *r = &a->results[i];
        const lam_region_stats *rs = &a->seg->regions[i];
        if ((r->flags & LAM_FLAG_SMALL) && r->layers != 1 && r->layers != 2)
            continue;
        char text[48];
        unsigned value = lam_report_layer_value(r);
        const char *lab_txt = value == 255 ? "?" : (value == 254 ? "THICK" : r->label);
        snprintf(text, sizeof text, "%s%s #%u", lab_txt,
                 (r->flags & LAM_FLAG_AMBIGUOUS) && r->layers > 0 ? "?" : "", rs->id);
        uint8_t c[3];
        lam_report_palette(lam_report_layer_value(r), c);
        /* at the centre of the usable rectangle (always inside the region,
         * unlike the centroid of a ring), kept inside the image */
        long tw = (long)lam_font_text_width(text, s);
        long tx = (long)(r->usable_at[0] + r->usable_px[0] / 2) - tw / 2;
        long ty = (long)(r->usable_at[1] + r->usable_px[1] / 2) - LAM_FONT_H * s / 2;
        if (tx < s)
            tx = s;
        if (tx + tw + s > (long)w)
            tx = (long)w - tw - s;
        text_box(rgb, w, h, tx, ty, text, s, c);
    }
    /* legend, top-left */
    long lx = 4 * s, ly = 4 * s;
    static const uint8_t white[3] = {255, 255, 255};
    size_t shown = a->max_layers < 6 ? a->max_layers : 6;
    for (size_t N = 1; N <= shown + 2; N++) {
        unsigned v = N <= shown ? (unsigned)N : (N == shown + 1 ? 254u : 255u);
        char t[32];
        if (v == 254)
            snprintf(t, sizeof t, "THICK");
        else if (v == 255)
            snprintf(t, sizeof t, "UNASSIGNED");
        else
            snprintf(t, sizeof t, "%uL", v);
        uint8_t c[3];
        lam_report_palette(v, c);
        text_box(rgb, w, h, lx, ly, t, s, c);
        ly += (LAM_FONT_H + 4) * s;
    }
    char ox[64];
    if (a->oxide.fitted)
        snprintf(ox, sizeof ox, "SIO2 %.1f NM (FIT)", a->oxide.estimate);
    else
        snprintf(ox, sizeof ox, "SIO2 %.0f NM (NOMINAL)", a->oxide.nominal);
    text_box(rgb, w, h, lx, ly, ox, s, white);
    /* scale bar, bottom-right */
    if (a->um_per_px > 0) {
        static const double nice[] = {1, 2, 5, 10, 20, 50, 100, 200, 500, 1000};
        double target = (double)w * a->um_per_px / 5, len = nice[0];
        for (size_t k = 0; k < sizeof nice / sizeof nice[0]; k++)
            if (nice[k] <= target)
                len = nice[k];
        long px = (long)lround(len / a->um_per_px);
        long x1 = (long)w - 8 * s, x0 = x1 - px, y1 = (long)h - 8 * s, y0 = y1 - 3 * s;
        fill_rect(rgb, w, h, x0 - s, y0 - s, x1 + s, y1 + s, black, 0);
        fill_rect(rgb, w, h, x0, y0, x1, y1, white, 0);
        char t[32];
        snprintf(t, sizeof t, "%.0f UM", len);
        text_box(rgb, w, h, x0, y0 - (LAM_FONT_H + 3) * s, t, s, white);
    }
    return lam_png_save_rgb8(path, rgb, w, h, 3, err);
}

lam_status lam_report_write_svg(const lam_analysis *a, const char *path, lam_error *err)
{
    lam_outfile of;
    lam_status st = lam_outfile_open(&of, path, err);
    if (st)
        return st;
    FILE *f = of.fp;
    const double pw = 300, ph = 260, m = 50;
    size_t K = a->max_layers;
    double cmin = 0, cmax = 0;
    for (size_t N = 0; N <= K; N++)
        for (int c = 0; c < 3; c++)
            cmin = fmin(cmin, a->ladder.contrast[N][c]), cmax = fmax(cmax, a->ladder.contrast[N][c]);
    for (size_t i = 0; i < a->count; i++)
        for (int c = 0; c < 3; c++)
            cmin = fmin(cmin, a->results[i].mean[c]), cmax = fmax(cmax, a->results[i].mean[c]);
    cmin -= 0.02, cmax += 0.02;
    fprintf(f, "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<svg xmlns=\"http://www.w3.org/2000/svg\" "
               "width=\"%.0f\" height=\"%.0f\" font-family=\"sans-serif\" font-size=\"11\">\n"
               "<rect width=\"100%%\" height=\"100%%\" fill=\"white\"/>\n"
               "<text x=\"%.0f\" y=\"18\" font-size=\"13\">region contrast (substrate - flake)/substrate "
               "against the model ladder, oxide %.1f nm%s</text>\n",
            3 * (pw + m) + m, ph + 2 * m, m, a->oxide.estimate, a->oxide.fitted ? " (fitted)" : "");
    static const char *names[3] = {"R", "G", "B"}, *col[3] = {"#c0392b", "#27ae60", "#2e5cb8"};
    for (int c = 0; c < 3; c++) {
        double x0 = m + (double)c * (pw + m), y0 = m;
#define PX(N) (x0 + (double)(N) / (double)(K + 1) * pw)
#define PY(v) (y0 + ph - ((v) - cmin) / (cmax - cmin) * ph)
        fprintf(f, "<rect x=\"%.1f\" y=\"%.1f\" width=\"%.0f\" height=\"%.0f\" fill=\"none\" "
                   "stroke=\"#444\"/>\n<text x=\"%.1f\" y=\"%.1f\" fill=\"%s\">channel %s</text>\n",
                x0, y0, pw, ph, x0 + 4, y0 + 14, col[c], names[c]);
        fprintf(f, "<line x1=\"%.1f\" x2=\"%.1f\" y1=\"%.1f\" y2=\"%.1f\" stroke=\"#bbb\"/>\n", x0,
                x0 + pw, PY(0.0), PY(0.0));
        fprintf(f, "<polyline fill=\"none\" stroke=\"%s\" points=\"", col[c]);
        for (size_t N = 0; N <= K; N++)
            fprintf(f, "%.1f,%.1f ", PX(N), PY(a->ladder.contrast[N][c]));
        fprintf(f, "\"/>\n");
        for (size_t N = 0; N <= K; N++)
            fprintf(f, "<circle cx=\"%.1f\" cy=\"%.1f\" r=\"2.5\" fill=\"%s\"/>"
                       "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"middle\">%zu</text>\n",
                    PX(N), PY(a->ladder.contrast[N][c]), col[c], PX(N), y0 + ph + 14, N);
        for (size_t i = 0; i < a->count; i++) {
            const lam_region_result *r = &a->results[i];
            if (r->flags & LAM_FLAG_SMALL)
                continue;
            double N = r->layers > 0 ? (double)r->layers : (double)K + 0.7;
            double jitter = ((double)(i % 7) - 3) * 0.03;
            double x = PX(N + jitter), y = PY(r->mean[c]);
            double e = r->sigma[c] / (cmax - cmin) * ph;
            fprintf(f, "<line x1=\"%.1f\" x2=\"%.1f\" y1=\"%.1f\" y2=\"%.1f\" stroke=\"black\"/>"
                       "<circle cx=\"%.1f\" cy=\"%.1f\" r=\"3\" fill=\"%s\" stroke=\"black\">"
                       "<title>region %u %s</title></circle>\n",
                    x, x, y - e, y + e, x, y, r->layers > 0 ? "white" : "#ff6060",
                    a->seg->regions[i].id, r->label);
        }
        fprintf(f, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"middle\">layers</text>\n", x0 + pw / 2,
                y0 + ph + 28);
        fprintf(f, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"end\">%.2f</text><text x=\"%.1f\" "
                   "y=\"%.1f\" text-anchor=\"end\">%.2f</text>\n",
                x0 - 3, y0 + 10, cmax, x0 - 3, y0 + ph, cmin);
#undef PX
#undef PY
    }
    fprintf(f, "<text x=\"%.0f\" y=\"%.0f\">white: assigned regions (error bar 1 sigma incl. model "
               "floor); red: unassigned or thick (right edge)</text>\n</svg>\n",
            m, ph + 2 * m - 6);
    return lam_outfile_commit(&of, err);
}
