/*
 * lamina/batch.h - many images of one setup: analysis on a pool of threads,
 * the pooled fit of what they share, the result files, resumable runs.
 *
 * A run (lam_batch_run) analyses every input and writes, per image,
 * STEM.annotated.png (encoded on a second thread), STEM.layers.png,
 * STEM.contrast.svg and, last, STEM.json: its presence means the image's
 * results are complete, which --resume relies on. Threads go across images
 * first; what is left over goes inside each image (lam_analysis_options
 * .threads). Results do not depend on the thread count: outputs are
 * byte-identical for any number of threads.
 *
 * Pooled fit (lamina/pool.h). A run of several images of one setup first
 * analyses up to LAM_POOL_SAMPLE of them (lam_pool_sample: evenly spread,
 * deterministic), in parallel like the rest, adds each to a pool in input
 * order, fits it, and then analyses EVERY image (the sampled ones again)
 * with the pooled prior (lam_analysis_options.shared_prior). The sample's
 * analyses are not written. When no sampled image informs the fit, every
 * image is analysed on its own. pool = 0 analyses each image on its own,
 * as a run of that image alone would.
 *
 * pool.json (schema "lamina-pool/1", written atomically into the output
 * folder before the images are analysed): the prior's numbers, the setup
 * hash and a key over the sampled images' content hashes. A resumed run
 * whose key matches re-uses it, so resumed and uninterrupted runs give the
 * same bytes; one whose inputs changed fits again. Each image's
 * setup_hash (in its JSON, what --resume compares) covers the prior too.
 * pool_from names a pool.json to use instead of fitting: shards of a
 * cluster run take one prior (see docs/user-guide.md, "Cluster runs").
 *
 * Hashes: FNV-1a 64 of a file's bytes ("fnv1a64:<16 hex>").
 *
 * Ownership: lam_batch_run fills a caller-owned lam_batch released with
 * lam_batch_clear; paths, setup and options are borrowed for the call.
 * Errors: the run fails only for what stops every image (memory, the
 * output folder, a bad pool_from), leaving nothing to release; an image
 * that cannot be analysed or written is marked failed with its own error
 * and the run goes on.
 */
#ifndef LAMINA_BATCH_H
#define LAMINA_BATCH_H

#include <stddef.h>
#include "lamina/analyze.h"
#include "lamina/catalog.h"
#include "lamina/error.h"
#include "lamina/setup.h"
#include "lamina/stage.h"

struct cJSON;

#define LAM_BATCH_HASH_LEN 32

typedef struct lam_batch_item {
    const char *path;               /* borrowed from the caller's list */
    char stem[512];                 /* output name: the base name without extension */
    char hash[LAM_BATCH_HASH_LEN];  /* content hash of the input file */
    lam_analysis *a;                /* the analysis (display freed); NULL if resumed/failed */
    struct cJSON *json;             /* the analysis as written or as kept */
    lam_error err;
    int failed, resumed;
} lam_batch_item;

typedef struct lam_batch lam_batch;

/* Called once per image when it is done (analysed, kept or failed), under
 * the run's lock, so calls never overlap: the place to print. 'done' of
 * 'count' images are finished. */
typedef void (*lam_batch_image_fn)(const lam_batch *b, const lam_batch_item *it, size_t done,
                                   void *user);

typedef struct lam_batch_options {
    const lam_setup *setup;
    lam_analysis_options analysis;  /* copied; the run sets threads and shared_prior */
    const char *out_dir;            /* created when missing */
    const char *setup_hash;         /* lam_batch_setup_hash of what besides the images
                                     * decides the results */
    size_t threads;                 /* in all (>= 1) */
    int resume;                     /* keep results whose hashes match */
    int pool;                       /* pooled fit when there are >= 2 images (default 1) */
    const char *pool_from;          /* a pool.json to use instead of fitting, or NULL */
    int pool_only;                  /* stop after writing pool.json */
    lam_batch_image_fn on_image;    /* may be NULL */
    void *user;
} lam_batch_options;

struct lam_batch {
    size_t count;
    lam_batch_item *items;
    lam_shared_prior prior;         /* the pooled prior used (prior.set = 0: none) */
    int pool_reused;                /* taken from pool.json or pool_from, not fitted */
    size_t pool_sampled;            /* images analysed for the fit */
};

/* Defaults: threads = all cores, pool on, nothing else set. */
lam_batch_options lam_batch_options_default(void);

/* Run over n paths (see above). */
lam_status lam_batch_run(lam_batch *b, const char *const *paths, size_t n,
                         const lam_batch_options *opt, lam_error *err);
void lam_batch_clear(lam_batch *b);

/* Add every finished item's JSON to a catalogue (positions may be NULL). */
lam_status lam_batch_catalog_add(const lam_batch *b, lam_catalog *cat,
                                 const lam_positions *pos, lam_error *err);

/* The run's catalogue and outputs: every finished item in a catalogue
 * (cat: initialised here, the caller's to clear, also on failure) with
 * the positions (may be NULL), stage convention and hBN target window
 * (target: A-B nm, lam_catalog_set_target; NULL or NAN for none), and the
 * files of lam_run_outputs_write into out_dir. The catalogue's warnings
 * for images (own_warnings) are the caller's to show. */
lam_status lam_batch_write_outputs(const lam_batch *b, const lam_positions *pos,
                                   const lam_stage *stage, const double *target,
                                   const char *out_dir, lam_catalog *cat, lam_error *err);

/* An item's warnings: its analysis', or for a kept result those recorded
 * in its JSON (code and message; at most LAM_MAX_WARNINGS). */
void lam_batch_item_warnings(const lam_batch_item *it, lam_warnings *out);

/* ---- the pieces, for callers that drive images one at a time (watch) ---- */

/* Output stem of an input: its base name without the extension. */
void lam_batch_stem(const char *path, char *stem, size_t n);

/* Content hash of a file's bytes; LAM_EIO with the file named when it
 * cannot be read. */
lam_status lam_batch_hash_file(const char *path, char out[LAM_BATCH_HASH_LEN], lam_error *err);

/* Hash of what decides the results besides the image: the setup file's
 * bytes (setup_file may be NULL), the analysis options that change
 * results, the caller's own text (command-line values; may be NULL) and
 * the library version. */
void lam_batch_setup_hash(const char *setup_file, const lam_analysis_options *opt,
                          const char *extra, char out[LAM_BATCH_HASH_LEN]);

/* lam_batch_setup_hash of a setup built by lam_setup_build: the setup
 * file and the single values given beside it (oxide, NA, Fermi level,
 * pixel size); the stack file and material are not part of it. */
void lam_batch_overrides_hash(const lam_setup_overrides *o, const lam_analysis_options *opt,
                              char out[LAM_BATCH_HASH_LEN]);

/* The setup hash of results analysed with a prior: base hash and the
 * prior's numbers (the base hash itself when prior is NULL or unset). */
void lam_batch_prior_hash(const char *base, const lam_shared_prior *prior,
                          char out[LAM_BATCH_HASH_LEN]);

/* out_dir/STEM.json when its content and setup hashes match; NULL
 * otherwise (the caller deletes it). */
struct cJSON *lam_batch_existing(const char *out_dir, const char *stem, const char *hash,
                                 const char *setup_hash);

/* Analyse one image and write its four result files into out_dir (the
 * annotated picture on a second thread, the JSON last). On success *a and
 * *json are the caller's. */
lam_status lam_batch_analyse_one(const char *path, const lam_setup *setup,
                                 const lam_analysis_options *opt, const char *out_dir,
                                 const char *hash, const char *setup_hash, lam_analysis **a,
                                 struct cJSON **json, lam_error *err);

/* pool.json: write the prior with its setup hash and key; read one back.
 * lam_batch_pool_read fails with LAM_EFORMAT (file named) for a file that
 * is not lamina-pool/1; *key_out and *setup_out receive its key and setup
 * hash (either may be NULL). */
lam_status lam_batch_pool_write(const char *path, const lam_shared_prior *prior,
                                const char *setup_hash, const char *key, lam_error *err);
lam_status lam_batch_pool_read(const char *path, lam_shared_prior *prior,
                               char key_out[LAM_BATCH_HASH_LEN],
                               char setup_out[LAM_BATCH_HASH_LEN], lam_error *err);

/* How far a prior moved from the previous one: the largest |change of a
 * mean| in units of the previous sd over the fitted parameters, and its
 * index (LAM_NU_*) in *which. 0 when either is unset. */
double lam_batch_prior_shift(const lam_shared_prior *before, const lam_shared_prior *after,
                             int *which);

/* A short name of a shared parameter (LAM_NU_* index): "NA", "resonance",
 * "shift[1]" ... */
const char *lam_batch_nuisance_name(int k, char *buf, size_t n);

#endif
