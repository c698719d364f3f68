/* batch_resume.c - what a resumed run compares (lamina/batch.h): content
 * and setup hashes, results kept on disk, pool.json; and how far a pooled
 * prior moved. */
#include "batch_internal.h"
#include "lamina/jsonfile.h"
#include "lamina/outfile.h"
#include "lamina/version.h"

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cjson/cJSON.h>

#define FNV_OFFSET 1469598103934665603ull
#define POOL_SCHEMA "lamina-pool/1"

static uint64_t fnv1a(uint64_t h, const void *data, size_t n)
{
    const unsigned char *p = data;
    for (size_t i = 0; i < n; i++) {
        h ^= p[i];
        h *= 1099511628211ull;
    }
    return h;
}

static void hash_text(uint64_t h, char out[LAM_BATCH_HASH_LEN])
{
    snprintf(out, LAM_BATCH_HASH_LEN, "fnv1a64:%016llx", (unsigned long long)h);
}

void lam__batch_hash_text(const char *text, char out[LAM_BATCH_HASH_LEN])
{
    hash_text(fnv1a(FNV_OFFSET, text, strlen(text)), out);
}

lam_status lam_batch_hash_file(const char *path, char out[LAM_BATCH_HASH_LEN], lam_error *err)
{
    FILE *fp = fopen(path, "rb");
    if (!fp) {
        lam_error_set(err, LAM_EIO, "cannot read the file");
        lam_error_set_file(err, path);
        return LAM_EIO;
    }
    unsigned char buf[65536];
    uint64_t h = FNV_OFFSET;
    size_t k;
    while ((k = fread(buf, 1, sizeof buf, fp)) > 0)
        h = fnv1a(h, buf, k);
    int bad = ferror(fp);
    fclose(fp);
    hash_text(h, out);
    if (bad) {
        lam_error_set(err, LAM_EIO, "cannot read the file");
        lam_error_set_file(err, path);
        return LAM_EIO;
    }
    return LAM_OK;
}

void lam_batch_setup_hash(const char *setup_file, const lam_analysis_options *opt,
                          const char *extra, char out[LAM_BATCH_HASH_LEN])
{
    uint64_t h = FNV_OFFSET;
    char fh[LAM_BATCH_HASH_LEN];
    if (setup_file && lam_batch_hash_file(setup_file, fh, NULL) == LAM_OK)
        h = fnv1a(h, fh, strlen(fh));
    char opts[512];
    snprintf(opts, sizeof opts,
             "%s K=%zu area=%.6g/%.6g roi=%d:%zu,%zu,%zu,%zu tol=%.6g fit=%d,%d enc=%d:%.6g v=%s",
             extra ? extra : "", opt->max_layers, opt->min_area_um2, opt->min_area_px,
             opt->substrate.has_roi, opt->substrate.roi[0], opt->substrate.roi[1],
             opt->substrate.roi[2], opt->substrate.roi[3], opt->oxide_tolerance_nm,
             opt->fit_oxide, opt->fit_fermi, (int)opt->load.transfer.kind,
             opt->load.transfer.gamma, LAMINA_VERSION);
    hash_text(fnv1a(h, opts, strlen(opts)), out);
}

void lam_batch_overrides_hash(const lam_setup_overrides *o, const lam_analysis_options *opt,
                              char out[LAM_BATCH_HASH_LEN])
{
    char extra[160];
    snprintf(extra, sizeof extra, "ox=%.6g na=%.6g mu=%.6g um=%.6g", o->oxide_nm, o->na,
             o->fermi_ev, o->um_per_px);
    lam_batch_setup_hash(o->setup_file, opt, extra, out);
}

void lam_batch_prior_hash(const char *base, const lam_shared_prior *p,
                          char out[LAM_BATCH_HASH_LEN])
{
    if (!p || !p->set) {
        snprintf(out, LAM_BATCH_HASH_LEN, "%s", base);
        return;
    }
    uint64_t h = fnv1a(FNV_OFFSET, base, strlen(base));
    /* the numbers' bits: equal priors, equal hashes, on every machine of
     * one byte order (the doubles are read back exactly from pool.json) */
    h = fnv1a(h, p->mean, sizeof p->mean);
    h = fnv1a(h, p->sd, sizeof p->sd);
    h = fnv1a(h, &p->floor_rel, sizeof p->floor_rel);
    uint64_t n[2] = {p->images, p->regions};
    hash_text(fnv1a(h, n, sizeof n), out);
}

cJSON *lam_batch_existing(const char *out_dir, const char *stem, const char *hash,
                          const char *setup_hash)
{
    char p[4096];
    snprintf(p, sizeof p, "%s/%s.json", out_dir, stem);
    cJSON *root = NULL;
    if (lam_json_load(p, 64u << 20, "result", NULL, &root, NULL))
        return NULL;
    const cJSON *img = cJSON_GetObjectItemCaseSensitive(root, "image");
    const cJSON *h = cJSON_GetObjectItemCaseSensitive(img, "content_hash");
    const cJSON *sh = cJSON_GetObjectItemCaseSensitive(root, "setup_hash");
    if (cJSON_IsString(h) && cJSON_IsString(sh) && !strcmp(h->valuestring, hash) &&
        !strcmp(sh->valuestring, setup_hash))
        return root;
    cJSON_Delete(root);
    return NULL;
}

/* Numbers as raw JSON text with 17 significant digits: one number, or an
 * array of n. */
static cJSON *exact_array(const double *v, size_t n, int array)
{
    char text[LAM_NU_COUNT * 28 + 4];
    size_t len = 0;
    if (array)
        text[len++] = '[';
    for (size_t k = 0; k < n; k++)
        len += (size_t)snprintf(text + len, sizeof text - len, "%s%.17g", k ? ", " : "",
                                isfinite(v[k]) ? v[k] : 0.0);
    if (array)
        snprintf(text + len, sizeof text - len, "]");
    return cJSON_CreateRaw(text);
}

lam_status lam_batch_pool_write(const char *path, const lam_shared_prior *p,
                                const char *setup_hash, const char *key, lam_error *err)
{
    cJSON *root = cJSON_CreateObject();
    if (!root)
        return lam_error_set(err, LAM_ENOMEM, "cannot format pool.json");
    cJSON_AddStringToObject(root, "schema", POOL_SCHEMA);
    cJSON_AddStringToObject(root, "setup_hash", setup_hash);
    cJSON_AddStringToObject(root, "key", key);
    cJSON_AddBoolToObject(root, "set", p->set);
    cJSON_AddNumberToObject(root, "images", (double)p->images);
    cJSON_AddNumberToObject(root, "regions", (double)p->regions);
    /* 17 significant digits read back bit for bit (cJSON's own printing
     * stops at 15 when those are within an epsilon), so a resumed run
     * analyses with exactly the prior of the uninterrupted one */
    cJSON_AddItemToObject(root, "floor_rel", exact_array(&p->floor_rel, 1, 0));
    cJSON_AddItemToObject(root, "mean", exact_array(p->mean, LAM_NU_COUNT, 1));
    cJSON_AddItemToObject(root, "sd", exact_array(p->sd, LAM_NU_COUNT, 1));
    char *text = cJSON_Print(root);
    cJSON_Delete(root);
    if (!text)
        return lam_error_set(err, LAM_ENOMEM, "cannot format pool.json");
    lam_status st = lam_outfile_write_buffer(path, text, strlen(text), err);
    free(text);
    return st;
}

typedef struct pool_read {
    lam_shared_prior *p;
    char *key, *setup;
} pool_read;

static lam_status read_array(const cJSON *root, const char *name, double *v, lam_error *err)
{
    const cJSON *a = cJSON_GetObjectItemCaseSensitive(root, name), *x;
    if (!cJSON_IsArray(a) || cJSON_GetArraySize(a) != LAM_NU_COUNT)
        return lam_error_set(err, LAM_EFORMAT, "key %s: expected %d numbers", name,
                             LAM_NU_COUNT);
    int k = 0;
    cJSON_ArrayForEach(x, a) {
        if (!cJSON_IsNumber(x))
            return lam_error_set(err, LAM_EFORMAT, "key %s[%d]: expected a number", name, k);
        v[k++] = x->valuedouble;
    }
    return LAM_OK;
}

static lam_status read_pool(const cJSON *root, const char *dir, void *ctx, lam_error *err)
{
    static const char *const known[] = {"schema", "setup_hash", "key", "set", "images",
                                        "regions", "floor_rel", "mean", "sd", NULL};
    (void)dir;
    pool_read *r = ctx;
    lam_status st = lam_json_check_keys(root, "", known, err);
    const cJSON *key = cJSON_GetObjectItemCaseSensitive(root, "key");
    const cJSON *sh = cJSON_GetObjectItemCaseSensitive(root, "setup_hash");
    const cJSON *set = cJSON_GetObjectItemCaseSensitive(root, "set");
    if (!st && (!cJSON_IsString(key) || !cJSON_IsString(sh) || !cJSON_IsBool(set)))
        st = lam_error_set(err, LAM_EFORMAT, "expected the strings key and setup_hash and "
                                             "the boolean set");
    double images = 0, regions = 0;
    memset(r->p, 0, sizeof *r->p);
    if (!st)
        st = lam_json_number(root, "images", NULL, 0, 1e9, &images, NULL, err);
    if (!st)
        st = lam_json_number(root, "regions", NULL, 0, 1e12, &regions, NULL, err);
    if (!st)
        st = lam_json_number(root, "floor_rel", NULL, 0, 1e3, &r->p->floor_rel, NULL, err);
    if (!st)
        st = read_array(root, "mean", r->p->mean, err);
    if (!st)
        st = read_array(root, "sd", r->p->sd, err);
    if (st)
        return st;
    r->p->set = cJSON_IsTrue(set);
    r->p->images = (size_t)images;
    r->p->regions = (size_t)regions;
    if (r->key)
        snprintf(r->key, LAM_BATCH_HASH_LEN, "%s", key->valuestring);
    if (r->setup)
        snprintf(r->setup, LAM_BATCH_HASH_LEN, "%s", sh->valuestring);
    return LAM_OK;
}

lam_status lam_batch_pool_read(const char *path, lam_shared_prior *prior,
                               char key_out[LAM_BATCH_HASH_LEN],
                               char setup_out[LAM_BATCH_HASH_LEN], lam_error *err)
{
    pool_read r = {prior, key_out, setup_out};
    return lam_json_read_file(path, 1u << 20, "pool file", POOL_SCHEMA, read_pool, &r, err);
}

double lam_batch_prior_shift(const lam_shared_prior *a, const lam_shared_prior *b, int *which)
{
    double worst = 0;
    if (which)
        *which = -1;
    if (!a || !b || !a->set || !b->set)
        return 0;
    for (int k = 0; k < LAM_NU_COUNT; k++) {
        if (!(a->sd[k] > 0))
            continue;
        double z = fabs(b->mean[k] - a->mean[k]) / a->sd[k];
        if (z > worst) {
            worst = z;
            if (which)
                *which = k;
        }
    }
    return worst;
}

const char *lam_batch_nuisance_name(int k, char *buf, size_t n)
{
    static const char *const fixed[] = {"response continuum", "response resonance",
                                        "response background", "NA"};
    static const char *const per[] = {"shift", "width", "gain", "offset"};
    if (k >= 0 && k < LAM_NU_SHIFT)
        snprintf(buf, n, "%s", fixed[k]);
    else if (k >= LAM_NU_SHIFT && k < LAM_NU_COUNT)
        snprintf(buf, n, "channel %d %s", (k - LAM_NU_SHIFT) % LAM_MAX_CHANNELS + 1,
                 per[(k - LAM_NU_SHIFT) / LAM_MAX_CHANNELS]);
    else
        snprintf(buf, n, "?");
    return buf;
}
