/* batch_image.c - one image of a batch: analyse it and write its result
 * files (lamina/batch.h). */
#include "lamina/batch.h"
#include "lamina/report.h"

#include <pthread.h>
#include <stdio.h>
#include <string.h>
#include <cjson/cJSON.h>

void lam_batch_stem(const char *path, char *stem, size_t n)
{
    const char *base = strrchr(path, '/');
    base = base ? base + 1 : path;
    snprintf(stem, n, "%s", base);
    char *dot = strrchr(stem, '.');
    if (dot && dot != stem)
        *dot = '\0';
}

typedef struct annot_job {
    lam_analysis *a;
    lam_contours *outlines; /* traced by trace_thread, drawn by write_annotated_thread */
    char path[4096];
    lam_error err;
    lam_status st;
} annot_job;

static void *trace_thread(void *arg)
{
    annot_job *aj = arg;
    aj->st = lam_report_trace_outlines(aj->a, &aj->outlines, &aj->err);
    return NULL;
}

static void *write_annotated_thread(void *arg)
{
    annot_job *aj = arg;
    if (!aj->st)
        aj->st = lam_report_write_annotated_with(aj->a, aj->outlines, aj->path, &aj->err);
    return NULL;
}

/* fn(aj) on a thread of its own when the image has two or more (a batch
 * on two cores runs two images on one thread each instead), else here:
 * 1 when it runs on a thread (join *t). */
static int run_beside(size_t threads, void *(*fn)(void *), annot_job *aj, pthread_t *t)
{
    if (threads > 1 && pthread_create(t, NULL, fn, aj) == 0)
        return 1;
    fn(aj);
    return 0;
}

/* A failed image's files that this call wrote (each was written whole,
 * by rename): removed, so that a failure leaves no partial result beside
 * the input. Files of an earlier run that this call did not replace stay. */
static void remove_written(char paths[][4096], size_t n)
{
    for (size_t i = 0; i < n; i++)
        remove(paths[i]);
}

/* The result files besides the annotated picture and the JSON, after
 * "STEM." (written here, and named in the JSON). */
#define LAYERS_FILE "layers.png"
#define PLOT_FILE "contrast.svg"

/* The result files' names, in the JSON (key "outputs"), so that the
 * catalogue and the run report link to them: the annotated picture's
 * extension follows the input's format. NULL when out of memory. */
static cJSON *add_outputs(cJSON *json, const char *stem, const char *annotated_ext)
{
    cJSON *o = cJSON_AddObjectToObject(json, "outputs");
    char name[600];
    snprintf(name, sizeof name, "%s.annotated.%s", stem, annotated_ext);
    int ok = o && cJSON_AddStringToObject(o, "annotated", name);
    snprintf(name, sizeof name, "%s." LAYERS_FILE, stem);
    ok = ok && cJSON_AddStringToObject(o, "layers", name);
    snprintf(name, sizeof name, "%s." PLOT_FILE, stem);
    ok = ok && cJSON_AddStringToObject(o, "contrast_plot", name);
    return ok ? json : NULL;
}

/* The annotated image (the largest file) is made on a second thread in two
 * parts: its outlines are traced while the display is decoded here, then
 * it is drawn and encoded while the layer map and the plot are written
 * here. The JSON goes last, after all, so its presence means the image's
 * results are complete (--resume). On failure nothing of this image
 * stays: the first error is returned. */
static lam_status write_reports(lam_analysis *a, const char *dir, const char *stem,
                                const lam_analysis_options *opt, cJSON **json, lam_error *err)
{
    char done[3][4096]; /* written by this call, for remove_written */
    size_t written = 0, threads = opt->threads;
    annot_job aj = {a, NULL, "", {0}, LAM_OK};
    lam_error_clear(&aj.err);
    const char *ext = lam_annotated_extension(a, opt->annotated);
    snprintf(aj.path, sizeof aj.path, "%s/%s.annotated.%s", dir, stem, ext);
    pthread_t t;
    int threaded = run_beside(threads, trace_thread, &aj, &t);
    /* the picture is decoded here, not on the second thread: memory a
     * thread allocates comes from an arena of its own, so a display
     * decoded there would not reuse what the analysis freed (its planes) */
    lam_status st = lam_analysis_display(a, err);
    if (threaded)
        pthread_join(t, NULL);
    if (!st && aj.st) { /* the outlines could not be traced: nothing written yet */
        *err = aj.err;
        st = aj.st;
    }
    if (st) {
        lam_contours_free(aj.outlines);
        return st;
    }
    threaded = run_beside(threads, write_annotated_thread, &aj, &t);
    snprintf(done[written], sizeof done[written], "%s/%s." LAYERS_FILE, dir, stem);
    if (!(st = lam_report_write_layers(a, done[written], err)))
        written++;
    snprintf(done[written], sizeof done[written], "%s/%s." PLOT_FILE, dir, stem);
    if (!st && !(st = lam_report_write_svg(a, done[written], err)))
        written++;
    if (threaded)
        pthread_join(t, NULL);
    lam_contours_free(aj.outlines);
    if (!aj.st) {
        snprintf(done[written], sizeof done[written], "%s", aj.path);
        written++;
    } else if (!st) {
        *err = aj.err;
        st = aj.st;
    }
    if (!st && (!(*json = lam_report_json(a)) || !add_outputs(*json, stem, ext)))
        st = lam_error_set(err, LAM_ENOMEM, "cannot format the JSON report");
    char p[4096];
    snprintf(p, sizeof p, "%s/%s.json", dir, stem);
    if (!st)
        st = lam_report_save_json(*json, p, err);
    if (st)
        remove_written(done, written);
    return st;
}

lam_status lam_batch_analyse_one(const char *path, const lam_setup *setup,
                                 const lam_analysis_options *opt, const char *out_dir,
                                 const char *hash, const char *setup_hash, lam_analysis **out,
                                 cJSON **json, lam_error *err)
{
    lam_analysis *a = NULL;
    *out = NULL;
    *json = NULL;
    lam_status st = lam_analyze(path, setup, opt, &a, err);
    if (st)
        return st;
    snprintf(a->content_hash, sizeof a->content_hash, "%s", hash ? hash : "");
    snprintf(a->setup_hash, sizeof a->setup_hash, "%s", setup_hash ? setup_hash : "");
    char stem[512];
    lam_batch_stem(path, stem, sizeof stem);
    if ((st = write_reports(a, out_dir, stem, opt, json, err))) {
        lam_error_set_file(err, path);
        lam_analysis_free(a);
        cJSON_Delete(*json);
        *json = NULL;
        return st;
    }
    *out = a;
    return LAM_OK;
}
