/* render.c - synthetic micrographs: scene reading, polygon rasterisation,
 * per-class reflectance from the optics model, flat field, blur, noise. */
#include "lamina/render.h"
#include "lamina/jpeg.h"
#include "lamina/jsonfile.h"
#include "lamina/model.h"
#include "lamina/png.h"
#include "lamina/raster.h"
#include "lamina/textfile.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <cjson/cJSON.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

void lam_scene_clear(lam_scene *s)
{
    if (!s)
        return;
    lam_setup_clear(&s->setup);
    free(s->objects);
    s->objects = NULL;
    s->count = 0;
}

#define SCENE_SCHEMA "lamina-scene/1"
#define SCENE_MAX_BYTES (4u << 20)

static const char *const scene_keys[] = {
    "schema", "setup", "width", "height", "oxide_nm", "exposure", "vignetting", "blur_px",
    "full_well", "read_noise", "seed", "jpeg_quality", "absolute", "gradient", "flakes",
    "residue", "dust", NULL};
/* keys of an object of each list (flakes, residue, dust) */
static const char *const object_keys[3][7] = {
    {"layers", "fermi_eV", "polygon", "circle", "material", "thickness_nm", NULL},
    {"thickness_nm", "polygon", "circle", NULL},
    {"polygon", "circle", NULL}};

/* A number at the top level of a scene (its key is its path). */
static lam_status num(const cJSON *o, const char *name, double lo, double hi, double *out,
                      lam_error *err)
{
    return lam_json_number(o, name, NULL, lo, hi, out, NULL, err);
}

static lam_status read_polygon(const cJSON *item, const char *what, size_t idx,
                               lam_scene_object *o, lam_error *err)
{
    const cJSON *poly = cJSON_GetObjectItemCaseSensitive(item, "polygon");
    const cJSON *circ = cJSON_GetObjectItemCaseSensitive(item, "circle");
    if (cJSON_IsArray(circ) && cJSON_GetArraySize(circ) == 3) {
        double cx = cJSON_GetArrayItem(circ, 0)->valuedouble;
        double cy = cJSON_GetArrayItem(circ, 1)->valuedouble;
        double r = cJSON_GetArrayItem(circ, 2)->valuedouble;
        if (!(r > 0) || !isfinite(cx) || !isfinite(cy))
            return lam_error_set(err, LAM_ERANGE, "%s[%zu].circle: need [x, y, r > 0]", what, idx);
        o->vertices = 32;
        for (size_t k = 0; k < 32; k++) {
            o->x[k] = cx + r * cos(2 * M_PI * (double)k / 32);
            o->y[k] = cy + r * sin(2 * M_PI * (double)k / 32);
        }
        return LAM_OK;
    }
    int n = cJSON_GetArraySize(poly);
    if (!cJSON_IsArray(poly) || n < 3 || n > LAM_SCENE_MAX_VERTICES)
        return lam_error_set(err, LAM_EFORMAT,
                             "%s[%zu].polygon: expected 3 to %d [x, y] points (or a circle)", what,
                             idx, LAM_SCENE_MAX_VERTICES);
    o->vertices = (size_t)n;
    for (int k = 0; k < n; k++) {
        const cJSON *p = cJSON_GetArrayItem(poly, k);
        const cJSON *px = cJSON_GetArrayItem(p, 0), *py = cJSON_GetArrayItem(p, 1);
        if (!cJSON_IsNumber(px) || !cJSON_IsNumber(py) || !isfinite(px->valuedouble) ||
            !isfinite(py->valuedouble))
            return lam_error_set(err, LAM_EFORMAT, "%s[%zu].polygon[%d]: expected [x, y]", what,
                                 idx, k);
        o->x[k] = px->valuedouble;
        o->y[k] = py->valuedouble;
    }
    return LAM_OK;
}

static lam_status read_setup(const cJSON *setup, const char *dir, lam_scene *s, lam_error *err)
{
    if (cJSON_IsString(setup)) {
        char path[2200];
        lam_path_join(path, sizeof path, dir, setup->valuestring);
        return lam_setup_load(path, &s->setup, err);
    }
    if (!cJSON_IsObject(setup))
        return lam_error_set(err, LAM_EFORMAT, "key setup: expected a path or an object");
    lam_status st = lam_setup_from_json(setup, dir, &s->setup, err);
    return st ? lam_error_prefix(err, st, "key setup: ") : LAM_OK;
}

static lam_status read_frame(const cJSON *root, lam_scene *s, lam_error *err)
{
    double w = 640, h = 480, seed = 1, q = 92;
    lam_status st;
    s->oxide_nm = lam_setup_oxide(&s->setup);
    if (s->oxide_nm < 0)
        s->oxide_nm = 0; /* no SiO2 in the stack (nitride, a stamp): the value is unused */
    if ((st = num(root, "width", 8, 20000, &w, err)) ||
        (st = num(root, "height", 8, 20000, &h, err)) ||
        (st = num(root, "oxide_nm", 0, 2000, &s->oxide_nm, err)) ||
        (st = num(root, "exposure", 0.01, 0.95, &s->exposure, err)) ||
        (st = num(root, "vignetting", 0, 0.6, &s->vignetting, err)) ||
        (st = num(root, "blur_px", 0, 20, &s->blur_px, err)) ||
        (st = num(root, "full_well", 0, 1e7, &s->full_well, err)) ||
        (st = num(root, "read_noise", 0, 0.2, &s->read_noise, err)) ||
        (st = num(root, "seed", 0, 4e9, &seed, err)) ||
        (st = num(root, "jpeg_quality", 1, 100, &q, err)))
        return st;
    s->width = (size_t)w;
    s->height = (size_t)h;
    s->seed = (unsigned long)seed;
    s->jpeg_quality = (int)q;
    const cJSON *abs_ = cJSON_GetObjectItemCaseSensitive(root, "absolute");
    if (abs_ && !cJSON_IsBool(abs_))
        return lam_error_set(err, LAM_EFORMAT, "key absolute: expected true or false");
    s->absolute = cJSON_IsTrue(abs_);
    const cJSON *g = cJSON_GetObjectItemCaseSensitive(root, "gradient");
    if (g) {
        if (!cJSON_IsArray(g) || cJSON_GetArraySize(g) != 2)
            return lam_error_set(err, LAM_EFORMAT, "key gradient: expected [gx, gy]");
        for (int i = 0; i < 2; i++) {
            double v = cJSON_GetArrayItem(g, i)->valuedouble;
            if ((st = lam_check_range(err, "key gradient", v, -0.5, 0.5)))
                return st;
            s->gradient[i] = v;
        }
    }
    return LAM_OK;
}

/* A flake's "material" (default: the setup's): a crystal name or
 * "graphite"; a film material (hBN, graphite) needs its thickness_nm. */
static lam_status read_flake_material(const cJSON *item, const char *path, const lam_scene *s,
                                      lam_scene_object *o, int has_t, lam_error *err)
{
    const cJSON *m = cJSON_GetObjectItemCaseSensitive(item, "material");
    if (m && !cJSON_IsString(m))
        return lam_error_set(err, LAM_EFORMAT, "%s.material: expected a string", path);
    snprintf(o->material, sizeof o->material, "%s", m ? m->valuestring : "");
    const char *name = o->material[0] ? o->material : s->setup.flake;
    int graphite = !strcasecmp(name, "graphite");
    const lam_crystal *c = graphite ? NULL : lam_crystal_find(name);
    if (!graphite && !c)
        return lam_error_set(err, LAM_ERANGE, "%s.material: '%s' is not a flake material "
                                              "(graphene, hBN, MoS2, WS2, WSe2, graphite, ...)",
                             path, name);
    int film = graphite || c->kind == LAM_CRYSTAL_CONTINUOUS;
    if (film && !has_t)
        return lam_error_set(err, LAM_EFORMAT, "%s.thickness_nm: needed for a %s flake", path,
                             name);
    if (!film && has_t)
        return lam_error_set(err, LAM_EFORMAT,
                             "%s.thickness_nm: a %s flake is given by its layers", path, name);
    return LAM_OK;
}

static lam_status read_object(const cJSON *item, int list, size_t idx, lam_scene *s,
                              lam_error *err)
{
    static const char *const lists[3] = {"flakes", "residue", "dust"};
    char path[48], key[3][64];
    snprintf(path, sizeof path, "%s[%zu]", lists[list], idx);
    snprintf(key[0], sizeof key[0], "%s.layers", path);
    snprintf(key[1], sizeof key[1], "%s.fermi_eV", path);
    snprintf(key[2], sizeof key[2], "%s.thickness_nm", path);
    lam_scene_object *o = &s->objects[s->count];
    o->kind = (lam_scene_kind)list;
    double layers = 1, fermi = s->setup.sheet.fermi_ev, t = list ? 3 : NAN;
    int has_t = 0;
    lam_status st;
    if ((st = lam_json_check_keys(item, path, object_keys[list], err)) ||
        (st = lam_json_number(item, "layers", key[0], 1, LAM_MODEL_MAX_LAYERS, &layers, NULL,
                              err)) ||
        (st = lam_json_number(item, "fermi_eV", key[1], -2, 2, &fermi, NULL, err)) ||
        (st = lam_json_number(item, "thickness_nm", key[2], 0.1, list ? 200 : 1000, &t, &has_t,
                              err)) ||
        (st = read_polygon(item, lists[list], idx, o, err)) ||
        (list == 0 && (st = read_flake_material(item, path, s, o, has_t, err))))
        return st;
    o->layers = (int)layers;
    o->fermi_ev = fermi;
    o->thickness_nm = t;
    s->count++;
    return LAM_OK;
}

static lam_status read_objects(const cJSON *root, lam_scene *s, lam_error *err)
{
    static const char *const lists[3] = {"flakes", "residue", "dust"};
    size_t total = 0;
    for (int l = 0; l < 3; l++)
        total += (size_t)cJSON_GetArraySize(cJSON_GetObjectItemCaseSensitive(root, lists[l]));
    if (total > LAM_SCENE_MAX_OBJECTS)
        return lam_error_set(err, LAM_ETOOBIG, "more than %d objects", LAM_SCENE_MAX_OBJECTS);
    s->objects = calloc(total ? total : 1, sizeof *s->objects);
    if (!s->objects)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate scene objects");
    for (int l = 0; l < 3; l++) {
        const cJSON *arr = cJSON_GetObjectItemCaseSensitive(root, lists[l]), *item;
        size_t idx = 0;
        cJSON_ArrayForEach(item, arr) {
            lam_status st = read_object(item, l, idx++, s, err);
            if (st)
                return st;
        }
    }
    return LAM_OK;
}

static lam_status parse_scene(const cJSON *root, const char *dir, lam_scene *s, lam_error *err)
{
    lam_status st;
    const cJSON *setup = cJSON_GetObjectItemCaseSensitive(root, "setup");
    if ((st = lam_json_check_keys(root, "", scene_keys, err)) ||
        (setup && (st = read_setup(setup, dir, s, err))) || (st = read_frame(root, s, err)))
        return st;
    return read_objects(root, s, err);
}

/* Defaults, then the tree; on failure nothing is left allocated. */
static lam_status scene_reader(const cJSON *root, const char *dir, void *vs, lam_error *err)
{
    lam_scene *s = vs;
    memset(s, 0, sizeof *s);
    lam_setup_default(&s->setup);
    s->exposure = 0.55;
    lam_status st = parse_scene(root, dir, s, err);
    if (!st && (size_t)s->width * s->height > LAM_IMAGE_DEFAULT_MAX_PIXELS)
        st = lam_error_set(err, LAM_ETOOBIG, "scene of %zux%zu pixels is too large", s->width,
                           s->height);
    if (st)
        lam_scene_clear(s);
    return st;
}

lam_status lam_scene_parse(const char *json, const char *dir, lam_scene *s, lam_error *err)
{
    memset(s, 0, sizeof *s);
    return lam_json_read_text(json, SCENE_SCHEMA, dir, scene_reader, s, err);
}

lam_status lam_scene_load(const char *path, lam_scene *s, lam_error *err)
{
    memset(s, 0, sizeof *s);
    return lam_json_read_file(path, SCENE_MAX_BYTES, "scene", SCENE_SCHEMA, scene_reader, s, err);
}

/* The setup a flake is drawn with: the scene's, its material replaced
 * (a crystal), or graphite / hBN of the flake's thickness as one film (the
 * model's film of one "layer" of that thickness). Tables are built in, so
 * the shallow copy owns nothing new. */
static lam_status flake_setup(const lam_scene *s, const lam_scene_object *o, lam_setup *su,
                              size_t *layers, lam_error *err)
{
    *su = s->setup;
    *layers = (size_t)o->layers;
    const char *name = o->material[0] ? o->material : s->setup.flake;
    int graphite = !strcasecmp(name, "graphite");
    const lam_crystal *c = graphite ? NULL : lam_crystal_find(name);
    if (!graphite && o->material[0]) {
        su->flake_layer_films = 0; /* the copy must not clear the scene's films */
        lam_status st = lam_setup_set_material(su, name, err);
        if (st)
            return st;
    }
    if (graphite || (c && c->kind == LAM_CRYSTAL_CONTINUOUS)) {
        lam_status st = lam_material_builtin(graphite ? "graphite" : c->bulk, &su->flake_film, err);
        if (st)
            return st;
        su->flake_as_film = 1;
        su->flake_layer_films = 0;
        su->interlayer_nm = o->thickness_nm;
        *layers = 1;
    }
    return LAM_OK;
}

/* Channel c of a model's per-channel values; a one-channel camera gives
 * every plane its one channel (a grey picture). */
static double chan(const double *v, size_t channels, size_t c)
{
    return v[c < channels ? c : 0];
}

static lam_status flake_reflectance(const lam_scene *s, const lam_scene_object *o, double top,
                                    double out[3], lam_error *err)
{
    lam_setup su;
    size_t layers = 0;
    lam_model *m = NULL;
    lam_prediction *p = malloc(sizeof *p);
    lam_status st = p ? flake_setup(s, o, &su, &layers, err)
                      : lam_error_set(err, LAM_ENOMEM, "cannot allocate");
    if (!st && !(st = lam_model_alloc(&su, layers, 0, &m, err)))
        st = lam_model_eval(m, s->oxide_nm, o->fermi_ev, p, err);
    for (size_t c = 0; !st && c < 3; c++)
        out[c] = chan(p->reflectance[layers], p->channels, c) / top;
    lam_model_free(m);
    free(p);
    return st;
}

/* Reflectance per channel of each object (rel[i]) and of the bare
 * substrate (rel[count]), scaled so that the substrate's brightest channel
 * is 1: the camera is white-balanced on the lamp, so the substrate keeps
 * its interference colour (in transmission: the transmittance). */
static lam_status class_reflectance(const lam_scene *s, double (*rel)[3], lam_error *err)
{
    lam_setup su = s->setup;
    lam_model *m = NULL;
    lam_prediction *p = malloc(sizeof *p);
    if (!p)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate");
    lam_status st = LAM_OK;
    if (!(st = lam_model_alloc(&su, 1, 0, &m, err)))
        st = lam_model_eval(m, s->oxide_nm, su.sheet.fermi_ev, p, err);
    lam_model_free(m);
    m = NULL;
    double sub[3] = {0, 0, 0}, top = 0;
    for (size_t c = 0; !st && c < 3; c++) {
        sub[c] = chan(p->substrate, p->channels, c);
        top = fmax(top, sub[c]);
    }
    if (s->absolute)
        top = 1.0; /* absolute: the same exposure means the same light, any substrate */
    for (size_t c = 0; !st && c < 3; c++)
        rel[s->count][c] = sub[c] / top;
    for (size_t i = 0; i < s->count && !st; i++) {
        const lam_scene_object *o = &s->objects[i];
        if (o->kind == LAM_SCENE_FLAKE) {
            st = flake_reflectance(s, o, top, rel[i], err);
        } else if (o->kind == LAM_SCENE_RESIDUE) {
            /* a PMMA film on top of the substrate stack */
            lam_setup r = su;
            if (r.layers >= LAM_SETUP_MAX_LAYERS) {
                st = lam_error_set(err, LAM_ETOOBIG, "substrate stack too deep for residue");
                break;
            }
            memmove(&r.layer_material[1], &r.layer_material[0], r.layers * sizeof r.layer_material[0]);
            memmove(&r.layer_nm[1], &r.layer_nm[0], r.layers * sizeof r.layer_nm[0]);
            lam_material_builtin("PMMA", &r.layer_material[0], NULL);
            r.layer_nm[0] = o->thickness_nm;
            r.layers++;
            if (!(st = lam_model_alloc(&r, 1, 0, &m, err)))
                st = lam_model_eval(m, s->oxide_nm, 0.2, p, err);
            for (size_t c = 0; !st && c < 3; c++)
                rel[i][c] = chan(p->substrate, p->channels, c) / top;
        } else {
            for (size_t c = 0; c < 3; c++)
                rel[i][c] = 0.45 * sub[c] / top; /* dust: a grey absorber */
        }
        lam_model_free(m);
        m = NULL;
    }
    free(p);
    return st;
}

static void blur_plane(float *p, float *tmp, size_t w, size_t h, double sigma)
{
    int r = (int)ceil(3 * sigma);
    if (r < 1)
        return;
    double k[64];
    if (r > 31)
        r = 31;
    double sum = 0;
    for (int i = -r; i <= r; i++)
        sum += k[i + r] = exp(-0.5 * i * i / (sigma * sigma));
    for (int i = 0; i <= 2 * r; i++)
        k[i] /= sum;
    for (size_t y = 0; y < h; y++)
        for (size_t x = 0; x < w; x++) {
            double a = 0;
            for (int i = -r; i <= r; i++) {
                long xx = (long)x + i;
                xx = xx < 0 ? 0 : (xx >= (long)w ? (long)w - 1 : xx);
                a += k[i + r] * p[y * w + (size_t)xx];
            }
            tmp[y * w + x] = (float)a;
        }
    for (size_t y = 0; y < h; y++)
        for (size_t x = 0; x < w; x++) {
            double a = 0;
            for (int i = -r; i <= r; i++) {
                long yy = (long)y + i;
                yy = yy < 0 ? 0 : (yy >= (long)h ? (long)h - 1 : yy);
                a += k[i + r] * tmp[(size_t)yy * w + x];
            }
            p[y * w + x] = (float)a;
        }
}

/* The truth map's value of a flake: its layers, or for a film of a given
 * thickness its layer count (thickness / layer thickness, at most 253). */
static uint8_t truth_value(const lam_setup *setup, const lam_scene_object *o)
{
    if (!(o->thickness_nm > 0))
        return (uint8_t)o->layers;
    const char *name = o->material[0] ? o->material : setup->flake;
    const lam_crystal *c = lam_crystal_find(name);
    double per = c ? c->layer_nm : 0.335;
    long n = lround(o->thickness_nm / per);
    return (uint8_t)(n < 1 ? 1 : n > 253 ? 253 : n);
}

lam_status lam_render(const lam_scene *s, lam_image **image, uint8_t **truth, lam_error *err)
{
    size_t w = s->width, h = s->height, n = w * h;
    double (*rel)[3] = calloc(s->count + 1, sizeof *rel);
    uint16_t *cls = calloc(n, sizeof *cls);
    uint8_t *tr = malloc(n);
    float *tmp = malloc(n * sizeof *tmp);
    lam_image *img = NULL;
    lam_status st = LAM_OK;
    if (!rel || !cls || !tr || !tmp) {
        st = lam_error_set(err, LAM_ENOMEM, "cannot allocate a %zux%zu render", w, h);
        goto done;
    }
    if ((st = class_reflectance(s, rel, err)) || (st = lam_image_alloc(w, h, &img, err)))
        goto done;
    /* later objects cover earlier ones; code 0 = substrate, i+1 = object i */
    for (size_t i = 0; i < s->count; i++)
        lam_raster_fill_u16(s->objects[i].x, s->objects[i].y, s->objects[i].vertices, w, h, cls,
                            (uint16_t)(i + 1));
    double cx = (double)w / 2, cy = (double)h / 2, rmax2 = cx * cx + cy * cy;
    for (size_t y = 0; y < h; y++)
        for (size_t x = 0; x < w; x++) {
            size_t k = y * w + x;
            double dx = (double)x + 0.5 - cx, dy = (double)y + 0.5 - cy;
            double flat = (1 - s->vignetting * (dx * dx + dy * dy) / rmax2) *
                          (1 + s->gradient[0] * dx / (double)w + s->gradient[1] * dy / (double)h);
            unsigned code = cls[k];
            const lam_scene_object *o = code ? &s->objects[code - 1] : NULL;
            tr[k] = !o ? 0 : (o->kind == LAM_SCENE_FLAKE ? truth_value(&s->setup, o) : 255);
            for (int c = 0; c < 3; c++)
                img->plane[c][k] = (float)(s->exposure * flat * rel[o ? code - 1 : s->count][c]);
        }
    if (s->blur_px > 0)
        for (int c = 0; c < 3; c++)
            blur_plane(img->plane[c], tmp, w, h, s->blur_px);
    if (s->full_well > 0 || s->read_noise > 0) {
        gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
        if (!rng) {
            st = lam_error_set(err, LAM_ENOMEM, "cannot allocate a random generator");
            goto done;
        }
        gsl_rng_set(rng, s->seed);
        for (int c = 0; c < 3; c++)
            for (size_t k = 0; k < n; k++) {
                double v = img->plane[c][k], var = s->read_noise * s->read_noise;
                if (s->full_well > 0)
                    var += (v > 0 ? v : 0) / s->full_well;
                v += gsl_ran_gaussian_ziggurat(rng, sqrt(var));
                img->plane[c][k] = (float)(v < 0 ? 0 : (v > 1 ? 1 : v));
            }
        gsl_rng_free(rng);
    }
    if (s->setup.camera.channels == 1) { /* a monochrome camera: one picture, R = G = B */
        memcpy(img->plane[1], img->plane[0], n * sizeof *img->plane[0]);
        memcpy(img->plane[2], img->plane[0], n * sizeof *img->plane[0]);
        img->channels = 1;
    }
    *image = img;
    img = NULL;
    *truth = tr;
    tr = NULL;
done:
    lam_image_free(img);
    free(rel);
    free(cls);
    free(tr);
    free(tmp);
    return st;
}

lam_status lam_render_save(const lam_image *img, const char *path, int linear16,
                           int jpeg_quality, lam_error *err)
{
    size_t w = img->width, h = img->height, n = w * h;
    const char *dot = strrchr(path, '.');
    int jpeg = dot && (!strcasecmp(dot, ".jpg") || !strcasecmp(dot, ".jpeg"));
    if (!dot || (!jpeg && strcasecmp(dot, ".png")))
        return lam_error_set(err, LAM_EINVAL, "%s: output must end in .png, .jpg or .jpeg", path);
    lam_status st;
    if (linear16 && !jpeg) { /* grey pictures as one-channel PNG */
        size_t nc = img->channels == 1 ? 1 : 3;
        uint16_t *px = malloc(n * nc * sizeof *px);
        if (!px)
            return lam_error_set(err, LAM_ENOMEM, "cannot allocate an output buffer");
        for (size_t k = 0; k < n; k++)
            for (size_t c = 0; c < nc; c++)
                px[k * nc + c] = (uint16_t)lround(65535.0 * img->plane[c][k]);
        st = lam_png_save_16(path, px, w, h, (int)nc, err);
        free(px);
        return st;
    }
    uint8_t *px = malloc(n * 3);
    if (!px)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate an output buffer");
    lam_transfer t = {LAM_TRANSFER_SRGB, 0};
    for (size_t k = 0; k < n; k++)
        for (int c = 0; c < 3; c++)
            px[k * 3 + (size_t)c] = (uint8_t)lround(255.0 * lam_transfer_encode(&t, img->plane[c][k]));
    st = jpeg ? lam_jpeg_save_rgb8(path, px, w, h, jpeg_quality, err)
              : lam_png_save_rgb8(path, px, w, h, 3, err);
    free(px);
    return st;
}
