/* report_html.c - the run report page (lamina/runreport.h): chip map,
 * sortable candidate table with crops, images with links. Offline: inline
 * CSS and JavaScript, relative links only. */
#include "lamina/runreport.h"
#include "lamina/chipmap.h"
#include "lamina/crops.h"
#include "lamina/draw.h"
#include "lamina/outfile.h"
#include "lamina/version.h"

#include <limits.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

static void html(FILE *f, const char *t)
{
    for (; *t; t++)
        switch (*t) {
        case '&': fputs("&amp;", f); break;
        case '<': fputs("&lt;", f); break;
        case '>': fputs("&gt;", f); break;
        case '"': fputs("&quot;", f); break;
        case '\'': fputs("&#39;", f); break;
        default: fputc(*t, f);
        }
}

/* An image's warnings (the catalogue joins them with ';' and no space;
 * a message's own semicolons are followed by one): each on a line. */
static void html_warnings(FILE *f, const char *t)
{
    for (char one[2] = {0, 0}; *t; t++) {
        if (t[0] == ';' && t[1] && t[1] != ' ') {
            fputs("<br>", f);
            continue;
        }
        one[0] = *t;
        html(f, one);
    }
}

/* Item i (from 0) of an image's ';'-joined list (the separator rule of
 * html_warnings) into out; "" when there is none. */
static void list_item(const char *t, size_t i, char *out, size_t n)
{
    size_t at = 0, item = 0;
    for (; *t; t++) {
        if (t[0] == ';' && t[1] && t[1] != ' ') {
            if (item++ == i)
                break;
            continue;
        }
        if (item == i && at + 1 < n)
            out[at++] = *t;
    }
    out[at] = '\0';
}

/* The place of code in an image's ';'-joined codes, or -1. */
static long code_place(const char *codes, const char *code)
{
    char one[24];
    for (size_t i = 0;; i++) {
        list_item(codes, i, one, sizeof one);
        if (!one[0])
            return -1;
        if (!strcmp(one, code))
            return (long)i;
    }
}

#define BOX_CODES 24 /* distinct warning codes the box groups (there are fewer) */

typedef struct code_group {
    char code[24];
    size_t images, first; /* how many carry it; the first that does */
} code_group;

/* The run's warning codes, each with the images that carry it. */
static size_t group_codes(const lam_catalog *c, code_group *g)
{
    size_t ng = 0;
    for (size_t k = 0; k < c->n_images; k++)
        for (size_t i = 0;; i++) {
            char code[24];
            list_item(c->images[k].warning_codes, i, code, sizeof code);
            if (!code[0])
                break;
            size_t j = 0;
            while (j < ng && strcmp(g[j].code, code))
                j++;
            if (j == ng && ng == BOX_CODES)
                continue;
            if (j == ng) {
                snprintf(g[j].code, sizeof g[j].code, "%s", code);
                g[j].images = 0, g[j].first = k, ng++;
            }
            g[j].images++;
        }
    return ng;
}

/* How many items an image's ';'-joined list holds. */
static size_t list_count(const char *t)
{
    char one[2];
    size_t n = 0;
    for (;; n++) {
        list_item(t, n, one, sizeof one);
        if (!one[0])
            return n;
    }
}

/* One code's entry: how many images, one image's message for example, the
 * images' names folded. The example is taken by position only when the
 * image's codes and messages pair up one to one (a message with its own
 * ';', or a warning without a code, would shift them): else none. */
static void code_entry(FILE *f, const lam_catalog *c, const code_group *g)
{
    const lam_catalog_image *first = &c->images[g->first];
    char msg[1024] = "";
    size_t codes = list_count(first->warning_codes), own = list_count(first->own_warnings);
    if (list_count(first->warnings) == codes + own)
        list_item(first->warnings, (size_t)code_place(first->warning_codes, g->code), msg,
                  sizeof msg);
    fputs("<li><b>", f);
    html(f, g->code);
    fprintf(f, "</b>, %zu image%s; %s", g->images, g->images == 1 ? "" : "s",
            g->images == 1 ? "" : "e.g. ");
    html(f, first->stem);
    fputs(": ", f);
    html(f, msg[0] ? msg : "its message is in the images table");
    fputs("<details><summary>images</summary>", f);
    for (size_t k = 0, n = 0; k < c->n_images; k++)
        if (code_place(c->images[k].warning_codes, g->code) >= 0) {
            fputs(n++ ? ", " : "", f);
            html(f, c->images[k].stem);
        }
    fputs("</details></li>\n", f);
}

/* What the box lists for an image by itself: all its messages when its
 * results carry no codes, else the catalogue's own notes; NULL for none. */
static const char *loose_warnings(const lam_catalog_image *im)
{
    if (im->warnings[0] && !im->warning_codes[0])
        return im->warnings;
    return im->own_warnings[0] ? im->own_warnings : NULL;
}

/* The Warnings box: one entry per warning code (code_entry); then, image
 * by image, the catalogue's own notes and the messages of results written
 * without codes. A scan of a thousand tiles left to defaults would
 * otherwise open with a thousand paragraphs; every message stays in the
 * images table. */
static void warnings_box(FILE *f, const lam_catalog *c)
{
    code_group g[BOX_CODES];
    size_t ng = group_codes(c, g), loose = 0;
    for (size_t k = 0; k < c->n_images; k++)
        loose += loose_warnings(&c->images[k]) != NULL;
    if (!ng && !loose)
        return;
    fputs("<div class=\"warn\"><b>Warnings</b><ul>\n", f);
    for (size_t j = 0; j < ng; j++)
        code_entry(f, c, &g[j]);
    for (size_t k = 0; k < c->n_images; k++) {
        const char *t = loose_warnings(&c->images[k]);
        if (!t)
            continue;
        fputs("<li>", f);
        html(f, c->images[k].stem);
        fputs(": ", f);
        html_warnings(f, t);
        fputs("</li>\n", f);
    }
    fputs("</ul></div>\n", f);
}

/* A relative URL: path segments percent-encoded except unreserved bytes. */
static void url(FILE *f, const char *t)
{
    for (const unsigned char *p = (const unsigned char *)t; *p; p++)
        if ((*p >= 'a' && *p <= 'z') || (*p >= 'A' && *p <= 'Z') || (*p >= '0' && *p <= '9') ||
            strchr("-._~/", *p))
            fputc(*p, f);
        else
            fprintf(f, "%%%02X", *p);
}

/* An image's name linking to its annotated picture, and its JSON. */
static void image_links(FILE *f, const char *rel, const lam_catalog_image *im)
{
    const char *stem = im->stem;
    fputs("<a href=\"", f);
    url(f, rel);
    url(f, im->annotated);
    fputs("\">", f);
    html(f, stem);
    fputs("</a> (<a href=\"", f);
    url(f, rel);
    url(f, stem);
    fputs(".json\">JSON</a>)", f);
}

/* Split a resolved path into its components (in place). */
static size_t components(char *p, char **out, size_t max)
{
    size_t n = 0;
    for (char *save = NULL, *t = strtok_r(p, "/", &save); t && n < max;
         t = strtok_r(NULL, "/", &save))
        out[n++] = t;
    return n;
}

/* The path of folder 'to' relative to folder 'from' ("" when the same,
 * else ending in '/'), both resolved on disk; "" when either is unknown. */
static void relative_dir(const char *from, const char *to, char *out, size_t n)
{
    char a[PATH_MAX], b[PATH_MAX], *ca[256], *cb[256];
    out[0] = '\0';
    if (!to[0] || !realpath(from, a) || !realpath(to, b))
        return;
    size_t na = components(a, ca, 256), nb = components(b, cb, 256), m = 0;
    while (m < na && m < nb && !strcmp(ca[m], cb[m]))
        m++;
    size_t len = 0;
    for (size_t k = m; k < na && len + 4 < n; k++)
        len += (size_t)snprintf(out + len, n - len, "../");
    for (size_t k = m; k < nb && len < n; k++)
        len += (size_t)snprintf(out + len, n - len, "%s/", cb[k]);
}

static const char style[] =
    "body{font:14px/1.4 'DejaVu Sans',sans-serif;margin:24px;color:#1a1a1a;background:#fafafa}"
    "h1{font-size:22px;margin:0 0 4px}h2{font-size:17px;margin:28px 0 8px}"
    ".note{color:#555}.warn{background:#fff4e0;border:1px solid #e0b060;padding:8px 12px}"
    ".wc{color:#8a5a00;white-space:nowrap;cursor:help}"
    "table{border-collapse:collapse;background:#fff}th,td{border:1px solid #ddd;padding:4px 8px;"
    "vertical-align:middle;text-align:left}th{background:#eee;cursor:pointer;user-select:none;"
    "white-space:nowrap}th.asc:after{content:' \\25B2'}th.desc:after{content:' \\25BC'}"
    "td.n{text-align:right;font-variant-numeric:tabular-nums}td img{display:block;width:120px;"
    "height:120px}.sw{display:inline-block;width:12px;height:12px;border:1px solid #222;"
    "border-radius:6px;margin-right:5px;vertical-align:-1px}tr:target{outline:3px solid #c62828}"
    "svg a:hover circle{stroke:#c62828;stroke-width:3}";

/* Click a column head: sort by its cells' data-v (numbers when the head
 * says data-t="n"); a second click reverses. Sets a marker when ready. */
static const char script[] =
    "(function(){var t=document.getElementById('cand');if(t){var hs=t.tHead.rows[0].cells;"
    "for(var i=0;i<hs.length;i++)(function(i){hs[i].addEventListener('click',function(){"
    "var h=hs[i],asc=!h.classList.contains('asc');for(var k=0;k<hs.length;k++)"
    "hs[k].classList.remove('asc','desc');h.classList.add(asc?'asc':'desc');"
    "var num=h.getAttribute('data-t')==='n',b=t.tBodies[0],rows=Array.prototype.slice.call(b.rows);"
    "rows.sort(function(x,y){var a=x.cells[i].getAttribute('data-v'),"
    "c=y.cells[i].getAttribute('data-v');"
    "if(num){a=a===''?Infinity:parseFloat(a);c=c===''?Infinity:parseFloat(c);return asc?a-c:c-a;}"
    "return asc?a.localeCompare(c):c.localeCompare(a);});"
    "rows.forEach(function(r){b.appendChild(r);});});})(i);"
    "document.getElementById('status').textContent="
    "t.tBodies[0].rows.length+' candidates listed below, sortable';}"
    "document.documentElement.setAttribute('data-ready','1');})();";

/* Candidates: by[0] all, by[1..6] by layer count (6: six and more), by[7]
 * films (hBN) inside the thickness target. */
static void counts(const lam_catalog *c, size_t by[8])
{
    memset(by, 0, 8 * sizeof *by);
    for (size_t i = 0; i < c->count; i++)
        if (lam_catalog_is_candidate(c, i)) {
            int L = c->entries[i].layers;
            by[0]++, by[L <= 0 ? 7 : L < 6 ? L : 6]++;
        }
}

static void head(FILE *f, const lam_catalog *c, const lam_run_report_options *o, const char *title)
{
    size_t by[8];
    counts(c, by);
    fputs("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\n", f);
    if (o && o->refresh_s > 0)
        fprintf(f, "<meta http-equiv=\"refresh\" content=\"%.0f\">\n", o->refresh_s);
    fputs("<title>", f);
    html(f, title);
    fprintf(f, "</title>\n<style>%s</style></head>\n<body>\n<h1>", style);
    html(f, title);
    fprintf(f, "</h1>\n<p>%zu image%s, %zu candidate%s", c->n_images, c->n_images == 1 ? "" : "s",
            by[0], by[0] == 1 ? "" : "s");
    if (!by[7] || by[0] > by[7])
        fprintf(f, ": 1L %zu, 2L %zu, 3L %zu, 4L and more %zu", by[1], by[2], by[3],
                by[4] + by[5] + by[6]);
    if (by[7])
        fprintf(f, "%s%zu film%s inside the thickness target", by[0] > by[7] ? "; " : ": ", by[7],
                by[7] == 1 ? "" : "s");
    fprintf(f, ". <span id=\"status\"></span></p>\n<p class=\"note\">Written by lamina %s. %s "
               "are model estimates: confirm by Raman spectroscopy or AFM before "
               "fabrication. Click a column head to sort.</p>\n",
            LAMINA_VERSION, by[7] ? "Layer counts and thicknesses" : "Layer counts");
    warnings_box(f, c);
}

static void svg_tiles(FILE *f, const lam_catalog *c, const lam_chipmap_view *v, const char *dir)
{
    for (size_t k = 0; k < c->n_images; k++) {
        double q[4][2];
        if (!lam_chipmap_tile(c, v, k, q))
            continue;
        char rel[PATH_MAX];
        relative_dir(dir, c->images[k].results, rel, sizeof rel);
        fputs("<a href=\"", f);
        url(f, rel);
        url(f, c->images[k].annotated);
        fprintf(f, "\"><polygon points=\"%.1f,%.1f %.1f,%.1f %.1f,%.1f %.1f,%.1f\" "
                   "fill=\"#b8b0d8\" fill-opacity=\"0.35\" stroke=\"#6a6090\"><title>",
                q[0][0], q[0][1], q[1][0], q[1][1], q[2][0], q[2][1], q[3][0], q[3][1]);
        html(f, c->images[k].stem);
        fprintf(f, " (%zu candidates)</title></polygon></a>\n", c->images[k].candidates);
    }
}

static void svg_candidates(FILE *f, const lam_catalog *c, const lam_chipmap_view *v)
{
    for (size_t i = c->count; i-- > 0;) {
        const lam_catalog_entry *e = &c->entries[i];
        double p[2], r;
        if (!lam_chipmap_mark(v, c, i, p, &r))
            continue;
        size_t rank = lam_catalog_rank(c, i);
        fprintf(f, "<a href=\"#c%zu\"><circle cx=\"%.1f\" cy=\"%.1f\" r=\"%.1f\" fill=\"#%06x\" "
                   "stroke=\"#111\" stroke-width=\"1.3\"><title>%zu. %s p ",
                rank, p[0], p[1], r,
                (unsigned)lam_draw_result_colour(e->layers, e->thickness_nm[0]), rank, e->label);
        char prob[24];
        lam_draw_probability(e->probability, 2, prob, sizeof prob);
        html(f, prob);
        if (isfinite(e->area_um2))
            fprintf(f, ", %.0f \u00b5m\u00b2", e->area_um2);
        fputs(" \u2014 ", f);
        html(f, c->images[e->image].stem);
        fprintf(f, " #%u</title></circle>", e->region);
        if (e->layers <= 2)
            fprintf(f, "<text x=\"%.1f\" y=\"%.1f\" font-size=\"10\" font-weight=\"bold\">%zu"
                       "</text>", p[0] + r + 2, p[1] + 3.5, rank);
        fputs("</a>\n", f);
    }
}

static void chip_map(FILE *f, const lam_catalog *c, const char *dir)
{
    lam_chipmap_view v;
    lam_chipmap_layout(c, 900, &v);
    fputs("<h2 id=\"map\">Chip map</h2>\n", f);
    if (!v.tiles) {
        fputs("<p class=\"note\">No stage positions (--positions): the tiles are listed below "
              "instead of mapped.</p>\n", f);
        return;
    }
    fprintf(f, "<p class=\"note\">Oriented like the camera's pictures; chip coordinates in "
               "\u00b5m%s. Click a tile for its annotated picture, a candidate for its row."
               "</p>\n<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"%.0f\" height=\"%.0f\" "
               "font-family=\"DejaVu Sans,sans-serif\" style=\"background:#fff;border:1px solid "
               "#ccc\">\n", c->stage.origin_kind ? " from the origin" : "", v.width,
            v.height - 60);
    svg_tiles(f, c, &v, dir);
    svg_candidates(f, c, &v);
    fprintf(f, "<text x=\"%.0f\" y=\"%.0f\" font-size=\"11\" fill=\"#444\">x %.0f \u2026 %.0f "
               "\u00b5m, y %.0f \u2026 %.0f \u00b5m</text>\n</svg>\n", v.left, v.height - 70,
            v.lo[0], v.hi[0], v.lo[1], v.hi[1]);
}

static void num_cell(FILE *f, double v, int digits)
{
    if (isfinite(v))
        fprintf(f, "<td class=\"n\" data-v=\"%.6g\">%.*f</td>", v, digits, v);
    else
        fputs("<td class=\"n\" data-v=\"\">\u2014</td>", f);
}

/* A candidate's image's warnings, short: the analysis' codes and the
 * catalogue's own notes, the messages in a tooltip (and in full in the
 * Warnings box and the images table). A scan's rows would otherwise each
 * repeat their image's paragraphs. */
static void candidate_warnings(FILE *f, const lam_catalog_image *im, int after_flags)
{
    if (!im->warnings[0])
        return;
    fputs(after_flags ? "; " : "", f);
    if (!im->warning_codes[0]) { /* results without codes: the messages */
        html_warnings(f, im->warnings);
        return;
    }
    fputs("<span class=\"wc\" title=\"", f);
    html(f, im->warnings);
    fputs("\">\u26a0\u00a0", f);
    for (const char *t = im->warning_codes; *t; t++)
        if (*t == ';')
            fputs(", ", f);
        else
            html(f, (char[2]){*t, 0});
    if (im->own_warnings[0]) {
        fputs(", ", f);
        html(f, im->own_warnings);
    }
    fputs("</span>", f);
}

static void candidate_row(FILE *f, const lam_catalog *c, size_t i, const char *dir)
{
    const lam_catalog_entry *e = &c->entries[i];
    const lam_catalog_image *im = &c->images[e->image];
    size_t rank = lam_catalog_rank(c, i);
    char crop[1300], path[4096], rel[PATH_MAX];
    struct stat sb;
    lam_crop_name(c, i, crop, sizeof crop);
    snprintf(path, sizeof path, "%s/%s", dir, crop);
    relative_dir(dir, im->results, rel, sizeof rel);
    fprintf(f, "<tr id=\"c%zu\" data-image=\"", rank);
    html(f, im->stem);
    fprintf(f, "\" data-region=\"%u\"><td class=\"n\" data-v=\"%zu\">%zu</td><td data-v=\"\">",
            e->region, rank, rank);
    if (stat(path, &sb) == 0) {
        fputs("<img loading=\"lazy\" alt=\"\" src=\"", f);
        url(f, crop);
        fputs("\">", f);
    }
    fputs("</td><td data-v=\"", f);
    html(f, im->stem);
    fputs("\">", f);
    image_links(f, rel, im);
    fprintf(f, "</td><td class=\"n\" data-v=\"%u\">#%u</td>", e->region,
            e->region);
    if (isfinite(e->thickness_nm[0]))
        fprintf(f, "<td data-v=\"%.3f\">", e->thickness_nm[0]);
    else
        fprintf(f, "<td data-v=\"%d\">", e->layers);
    fprintf(f, "<span class=\"sw\" style=\"background:#%06x\"></span>%s</td>",
            (unsigned)lam_draw_result_colour(e->layers, e->thickness_nm[0]), e->label);
    char prob[24];
    lam_draw_probability(e->probability, 3, prob, sizeof prob);
    fprintf(f, "<td class=\"n\" data-v=\"%.6f\">", e->probability);
    html(f, prob);
    fputs("</td>", f);
    num_cell(f, e->area_um2, 1);
    num_cell(f, isfinite(e->usable_um[0]) ? e->usable_um[0] * e->usable_um[1] : NAN, 1);
    if (isfinite(e->usable_um[0]))
        fprintf(f, "<td data-v=\"%.3f\">%.1f \u00d7 %.1f \u00b5m<br><small>px %.0f,%.0f\u2013"
                   "%.0f,%.0f</small></td>", e->usable_um[0], e->usable_um[0], e->usable_um[1],
                e->usable[0], e->usable[1], e->usable[2], e->usable[3]);
    else
        fprintf(f, "<td data-v=\"\">px %.0f,%.0f\u2013%.0f,%.0f</td>", e->usable[0], e->usable[1],
                e->usable[2], e->usable[3]);
    num_cell(f, e->chip_um[0], 1);
    num_cell(f, e->chip_um[1], 1);
    fputs("<td data-v=\"", f);
    html(f, e->flags);
    fputs("\">", f);
    html(f, e->flags);
    candidate_warnings(f, im, e->flags[0] != 0);
    fputs("</td></tr>\n", f);
}

static void candidate_table(FILE *f, const lam_catalog *c, const char *dir)
{
    size_t by[8];
    counts(c, by);
    fprintf(f, "<h2 id=\"candidates\">Candidates</h2>\n<table id=\"cand\"><thead><tr>"
               "<th data-t=\"n\">rank</th><th>crop</th><th>image</th><th data-t=\"n\">region</th>"
               "<th data-t=\"n\">%s</th><th data-t=\"n\">probability</th>",
            !by[7] ? "layers" : by[0] > by[7] ? "layers, thickness" : "thickness");
    fputs("<th data-t=\"n\">area \u00b5m\u00b2</th><th data-t=\"n\">usable \u00b5m\u00b2</th>"
          "<th data-t=\"n\">usable rectangle</th><th data-t=\"n\">chip x \u00b5m</th>"
          "<th data-t=\"n\">chip y \u00b5m</th><th>flags, warnings</th></tr></thead><tbody>\n", f);
    for (size_t i = 0; i < c->count; i++)
        if (lam_catalog_is_candidate(c, i))
            candidate_row(f, c, i, dir);
    fputs("</tbody></table>\n", f);
}

static void image_table(FILE *f, const lam_catalog *c, const char *dir)
{
    fputs("<h2 id=\"images\">Images</h2>\n<table><thead><tr><th>image</th><th>oxide nm</th>"
          "<th>regions</th><th>candidates</th><th>stage position \u00b5m</th><th>warnings</th>"
          "</tr></thead><tbody>\n", f);
    for (size_t k = 0; k < c->n_images; k++) {
        const lam_catalog_image *im = &c->images[k];
        char rel[PATH_MAX];
        relative_dir(dir, im->results, rel, sizeof rel);
        fputs("<tr><td>", f);
        image_links(f, rel, im);
        fprintf(f, "</td><td class=\"n\">%.1f%s</td><td class=\"n\">%zu</td>"
                   "<td class=\"n\">%zu</td>", im->oxide_nm, im->oxide_fitted ? "" : " (nominal)",
                im->regions, im->candidates);
        if (im->pos)
            fprintf(f, "<td class=\"n\">%.1f, %.1f</td><td>", im->pos->x_um, im->pos->y_um);
        else
            fputs("<td>\u2014</td><td>", f);
        html_warnings(f, im->warnings);
        fputs("</td></tr>\n", f);
    }
    fputs("</tbody></table>\n", f);
}

lam_status lam_run_report_write(const lam_catalog *c, const char *dir,
                                const lam_run_report_options *o, lam_error *err)
{
    size_t max = o && o->max_crops ? o->max_crops : 400;
    char path[4096];
    snprintf(path, sizeof path, "%s/contact-sheet.png", dir);
    lam_status st = lam_crops_and_sheet_write(c, dir, max, path, 16, err);
    if (st)
        return st;
    snprintf(path, sizeof path, "%s/report.html", dir);
    lam_outfile of;
    if ((st = lam_outfile_open(&of, path, err)))
        return st;
    const char *title = o && o->title ? o->title : "lamina run report";
    head(of.fp, c, o, title);
    chip_map(of.fp, c, dir);
    candidate_table(of.fp, c, dir);
    image_table(of.fp, c, dir);
    fprintf(of.fp, "<script>%s</script>\n</body></html>\n", script);
    return lam_outfile_commit(&of, err);
}
