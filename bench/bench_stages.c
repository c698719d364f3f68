/* bench_stages.c - the per-image profile behind docs/performance.md: each
 * pixel stage of one analysis of the 12 MP benchmark JPEG timed on its
 * own (median of 3) with 1 and 2 threads, then the whole analysis, the
 * part that is not pixel passes (fits, posteriors, joining: the analysis
 * minus the stages above) and each output writer. Renders
 * BUILD/bench/big12mp.jpg from bench/big-scene.json when it is missing.
 * Usage: bench_stages [BUILD_DIR] [IMAGE] */
#include "lamina/contrast.h"
#include "lamina/analyze.h"
#include "lamina/parallel.h"
#include "lamina/render.h"
#include "lamina/report.h"
#include "lamina/segment.h"
#include "lamina/substrate.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>

static double now(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

static double median3(double a, double b, double c)
{
    return a > b ? (b > c ? b : (a > c ? c : a)) : (a > c ? a : (b > c ? c : b));
}

typedef struct ctx {
    const char *path;
    const lam_analysis *a;
    size_t threads;
    lam_image *img;          /* the stage's input, prepared before the clock starts */
    lam_segmentation *seg;
    lam_error err;
} ctx;

enum { LOAD, SUBSTRATE, CONTRAST, DENOISE, COMPACT, SEGMENT, STAGES };
static const char *stage_name[STAGES] = {"load (decode, linearise, clip mask)",
                                         "substrate (tiles, modes, flat field)",
                                         "contrast in place", "denoise 3x3",
                                         "fixed-point map (compact in place)",
                                         "segment (edges, thresholds, merging, stats)"};

static int load(ctx *c, lam_image **out)
{
    lam_load_options lo = lam_load_options_default();
    lo.keep_display8 = 1;
    return lam_image_load(c->path, &lo, out, &c->err) != LAM_OK;
}

/* Prepare the input of stage s (untimed), run it (timed). */
static double run_stage(ctx *c, int s)
{
    lam_substrate_options so = lam_substrate_options_default();
    so.threads = c->threads;
    lam_segment_options sg = lam_segment_options_default();
    sg.threads = c->threads;
    lam_image *img = NULL;
    lam_parallel_set_default(c->threads); /* image conversion takes no count */
    double t0 = now(), t = -1;
    if (s == LOAD) {
        if (!load(c, &img))
            t = now() - t0;
        lam_image_free(img);
        return t;
    }
    if (load(c, &img))
        return -1;
    lam_substrate sub = c->a->substrate;
    if (s > SUBSTRATE)
        lam_contrast_in_place(img, &sub, c->threads);
    if (s > CONTRAST && lam_contrast_denoise(img, c->threads, &c->err))
        return -1;
    lam_contrast_map map = {0};
    if (s > COMPACT)
        lam_contrast_compact(img, &map, c->threads);
    lam_segmentation *seg = NULL;
    if (lam_segmentation_alloc(img->width, img->height, &seg, &c->err))
        return -1;
    t0 = now();
    int bad = 0;
    if (s == SUBSTRATE)
        bad = lam_substrate_estimate(img, &so, &sub, &c->err) != LAM_OK;
    else if (s == CONTRAST)
        lam_contrast_in_place(img, &sub, c->threads);
    else if (s == DENOISE)
        bad = lam_contrast_denoise(img, c->threads, &c->err) != LAM_OK;
    else if (s == COMPACT)
        lam_contrast_compact(img, &map, c->threads);
    else
        bad = lam_segment_uniform(&map, c->a->channels, c->a->ladder.contrast[1],
                                  c->a->substrate.noise, c->a->substrate.tile_scatter, &sg,
                                  seg, &c->err) != LAM_OK;
    t = bad ? -1 : now() - t0;
    lam_segmentation_free(seg);
    lam_contrast_map_free(&map);
    lam_image_free(img);
    return t;
}

static int ensure_image(const char *build, const char *path)
{
    struct stat sb;
    if (stat(path, &sb) == 0)
        return 0;
    lam_scene scene;
    lam_image *img = NULL;
    uint8_t *truth = NULL;
    lam_error err;
    char dir[4096];
    snprintf(dir, sizeof dir, "%s/bench", build);
    mkdir(dir, 0777);
    int bad = lam_scene_load("bench/big-scene.json", &scene, &err) != LAM_OK;
    if (!bad) {
        bad = lam_render(&scene, &img, &truth, &err) ||
              lam_render_save(img, path, 0, scene.jpeg_quality, &err);
        lam_scene_clear(&scene);
    }
    lam_image_free(img);
    free(truth);
    if (bad)
        fprintf(stderr, "bench_stages: %s\n", err.message);
    return bad;
}

static double analyze_once(const char *path, const lam_setup *s, size_t threads, lam_analysis **a)
{
    lam_analysis_options o = lam_analysis_options_default();
    o.threads = threads;
    lam_error err;
    double t0 = now();
    if (lam_analyze(path, s, &o, a, &err)) {
        fprintf(stderr, "bench_stages: %s\n", err.message);
        return -1;
    }
    return now() - t0;
}

/* Each writer on a fresh analysis (the annotated picture uses up the
 * display copy), median of 3. */
static void time_writers(const char *path, const lam_setup *s, const char *dir)
{
    static const char *names[4] = {"layer map PNG", "annotated picture", "contrast SVG",
                                   "JSON"};
    double t[4][3];
    for (int r = 0; r < 3; r++) {
        lam_analysis *a = NULL;
        if (analyze_once(path, s, 2, &a) < 0)
            return;
        char p[4200];
        lam_error err;
        for (int k = 0; k < 4; k++) {
            static const char *ext[4] = {"layers.png", "annotated.", "contrast.svg", "json"};
            snprintf(p, sizeof p, "%s/stages.%s%s", dir, ext[k],
                     k == 1 ? lam_annotated_extension(a, LAM_ANNOTATED_AUTO) : "");
            double t0 = now();
            lam_status st = k == 0   ? lam_report_write_layers(a, p, &err)
                            : k == 1 ? lam_report_write_annotated(a, p, &err)
                            : k == 2 ? lam_report_write_svg(a, p, &err)
                                     : lam_report_write_json(a, p, &err);
            t[k][r] = st ? -1 : now() - t0;
        }
        lam_analysis_free(a);
    }
    for (int k = 0; k < 4; k++)
        printf("bench_stages:   write %-36s %7.3f s\n", names[k],
               median3(t[k][0], t[k][1], t[k][2]));
}

int main(int argc, char **argv)
{
    const char *build = argc > 1 ? argv[1] : "build";
    char path[4200], dir[4096];
    snprintf(dir, sizeof dir, "%s/bench", build);
    snprintf(path, sizeof path, "%s", argc > 2 ? argv[2] : "");
    if (!path[0])
        snprintf(path, sizeof path, "%s/big12mp.jpg", dir);
    lam_error_init_gsl();
    if (ensure_image(build, path))
        return 1;
    lam_setup s;
    lam_setup_default(&s);
    lam_analysis *a = NULL;
    double whole[2][3];
    for (int r = 0; r < 3; r++)
        for (size_t th = 1; th <= 2; th++) {
            lam_analysis_free(a);
            a = NULL;
            if ((whole[th - 1][r] = analyze_once(path, &s, th, &a)) < 0)
                return 1;
        }
    printf("bench_stages: %s, %zu x %zu; seconds, median of 3 (1 thread / 2 threads)\n", path,
           a->width, a->height);
    double sum[2] = {0, 0};
    for (int s0 = 0; s0 < STAGES; s0++) {
        double m[2];
        for (size_t th = 1; th <= 2; th++) {
            ctx c = {path, a, th, NULL, NULL, {0}};
            double t[3];
            for (int r = 0; r < 3; r++)
                t[r] = run_stage(&c, s0);
            m[th - 1] = median3(t[0], t[1], t[2]);
            sum[th - 1] += m[th - 1];
        }
        printf("bench_stages:   %-42s %7.3f %7.3f\n", stage_name[s0], m[0], m[1]);
    }
    double w1 = median3(whole[0][0], whole[0][1], whole[0][2]);
    double w2 = median3(whole[1][0], whole[1][1], whole[1][2]);
    printf("bench_stages:   %-42s %7.3f %7.3f\n", "rest of the analysis (fits, posteriors, joins)",
           w1 - sum[0], w2 - sum[1]);
    printf("bench_stages:   %-42s %7.3f %7.3f\n", "whole analysis (lam_analyze)", w1, w2);
    lam_analysis_free(a);
    time_writers(path, &s, dir);
    return 0;
}
