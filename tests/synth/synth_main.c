/* synth_main.c - the command build/tests/synth: writes a set of synthetic
 * micrographs with their truth and setup files so people can look at them.
 *
 *   synth --out DIR [--count N] [--seed S] [--response R] [--oxide NM]
 *         [--true-oxide NM] [--na X] [--camera gauss|dye|mono]
 *         [--lamp blackbody|led|cie-a] [--format F] [--doped] [--tag]
 *         [--crystal graphene|hBN|MoS2|WSe2|WS2] [--source N] [--hbn-range A-B]
 *
 * Scene i has seed S + i and files DIR/synth-SEED.EXT, .truth.png,
 * .truth.json, .setup.json (+ .camera.csv, .lamp.csv) and
 * .uninformed.setup.json. Exit status 0, 1 (a file could not be written),
 * 2 (usage). */
#include "synth.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>

typedef struct opts {
    const char *out, *format;
    long count;
    unsigned long long seed;
    int tag;
    synth_config cfg;
} opts;

static int usage(const char *msg)
{
    fprintf(stderr, "synth: %s\nusage: synth --out DIR [--count N] [--seed S] [--response "
                    "sigma0|weber|song|elsayed|lamina-default] [--oxide NM] [--true-oxide NM] "
                    "[--na X] [--camera gauss|dye|mono] [--lamp blackbody|led|cie-a] "
                    "[--format png|jpegQ|bayer|bayer-jpegQ|png16|gamma22|grey8|grey16|tiff16] "
                    "[--doped] [--tag] [--crystal graphene|hBN|MoS2|WSe2|WS2] [--source N] "
                    "[--hbn-range A-B]\n", msg);
    return 2;
}

static int number(const char *s, double lo, double hi, double *out)
{
    char *end;
    errno = 0;
    double v = strtod(s, &end);
    if (errno || end == s || *end || !(v >= lo && v <= hi))
        return -1;
    *out = v;
    return 0;
}

static int named(const char *s, const char *const *names, int n, int *out)
{
    for (int i = 0; i < n; i++)
        if (!strcmp(s, names[i])) {
            *out = i + 1;
            return 0;
        }
    return -1;
}

/* --crystal NAME, --source N, --hbn-range A-B */
static int crystal_option(opts *o, const char *key, const char *val)
{
    double v, w;
    synth_crystal x;
    if (!strcmp(key, "--crystal") && !synth_crystal_parse(val, &x))
        o->cfg.crystal = x;
    else if (!strcmp(key, "--source") && !number(val, 0, 2, &v))
        o->cfg.nk_source = (int)v;
    else if (!strcmp(key, "--hbn-range") && sscanf(val, "%lf-%lf", &v, &w) == 2 && v >= 0.3 &&
             w >= v && w <= 1000)
        o->cfg.hbn_min_nm = v, o->cfg.hbn_max_nm = w;
    else
        return -1;
    return 0;
}

static int option(opts *o, const char *key, const char *val)
{
    static const char *const cams[] = {"gauss", "dye", "mono"};
    static const char *const lamps[] = {"blackbody", "led", "cie-a"};
    double v;
    int k;
    synth_response r;
    if (!strcmp(key, "--out"))
        o->out = val;
    else if (!strcmp(key, "--format"))
        o->format = val;
    else if (!strcmp(key, "--count") && !number(val, 1, 100000, &v))
        o->count = (long)v;
    else if (!strcmp(key, "--seed") && !number(val, 0, 1e15, &v))
        o->seed = (unsigned long long)v;
    else if (!strcmp(key, "--response") && !synth_response_parse(val, &r))
        o->cfg.response = r;
    else if (!strcmp(key, "--oxide") && !number(val, 1, 2000, &v))
        o->cfg.nominal_oxide_nm = v;
    else if (!strcmp(key, "--true-oxide") && !number(val, 0, 2000, &v))
        o->cfg.oxide_nm = v;
    else if (!strcmp(key, "--na") && !number(val, 0, 0.95, &v))
        o->cfg.na = v;
    else if (!strcmp(key, "--camera") && !named(val, cams, 3, &k))
        o->cfg.camera = (synth_camera_kind)k;
    else if (!strcmp(key, "--lamp") && !named(val, lamps, 3, &k))
        o->cfg.lamp = (synth_lamp_kind)k;
    else
        return crystal_option(o, key, val);
    return 0;
}

static int parse(int argc, char **argv, opts *o)
{
    static const double doped[4] = {0, 0.3, 0.9, 1.05};
    memset(o, 0, sizeof *o);
    synth_config_init(&o->cfg);
    o->count = 1;
    o->seed = 1;
    o->format = "png";
    for (int i = 1; i < argc; i++) {
        if (!strcmp(argv[i], "--doped")) {
            o->cfg.n_doped = 4;
            memcpy(o->cfg.doped_eV, doped, sizeof doped);
        } else if (!strcmp(argv[i], "--tag")) {
            o->tag = 1;
        } else if (i + 1 >= argc || option(o, argv[i], argv[i + 1])) {
            fprintf(stderr, "synth: bad option or value: %s %s\n", argv[i],
                    i + 1 < argc ? argv[i + 1] : "");
            return -1;
        } else {
            i++;
        }
    }
    return o->out ? 0 : -1;
}

static int write_all(const opts *o, const synth_scene *sc, const synth_image *im,
                     synth_format fmt, int quality, const char *stem)
{
    char path[1100];
    snprintf(path, sizeof path, "%s.%s", stem, synth_format_ext(fmt));
    if (synth_save_ex(im, fmt, quality, o->tag ? SYNTH_SAVE_TAG : 0, path))
        return -1;
    snprintf(path, sizeof path, "%s.setup.json", stem);
    if (synth_write_setup(sc, fmt, 1, path))
        return -1;
    snprintf(path, sizeof path, "%s.uninformed.setup.json", stem);
    if (synth_write_setup(sc, fmt, 0, path))
        return -1;
    return synth_write_truth(sc, stem);
}

static int one_scene(const opts *o, synth_format fmt, int quality, int channels, long i)
{
    uint64_t seed = o->seed + (uint64_t)i;
    char stem[1024];
    snprintf(stem, sizeof stem, "%s/synth-%06llu", o->out, (unsigned long long)seed);
    clock_t t0 = clock();
    synth_scene sc;
    if (synth_scene_make(&o->cfg, seed, &sc)) {
        fprintf(stderr, "synth: scene %llu: %s\n", (unsigned long long)seed, synth_error());
        return 1;
    }
    if (channels && channels != sc.phys.cam.nc) {
        fprintf(stderr, "synth: format %s needs a %s camera\n", o->format,
                channels == 1 ? "mono" : "colour");
        synth_scene_free(&sc);
        return 1;
    }
    synth_image im;
    int rendered = synth_render(&sc, &im) == 0, st = !rendered;
    double ms = 1000.0 * (double)(clock() - t0) / CLOCKS_PER_SEC;
    if (!st && write_all(o, &sc, &im, fmt, quality, stem))
        st = -1;
    if (st)
        fprintf(stderr, "synth: %s\n", synth_error());
    else
        printf("%s  %-14s oxide %.1f (nominal %g) nm  NA %.2f  camera %s  %d objects  "
               "%.0f ms\n", stem, sc.phys.crystal ? synth_crystal_file(sc.phys.crystal,
                                                                     sc.phys.nk_source, 1)
                                                  : synth_response_name(sc.phys.response),
               sc.phys.oxide_nm,
               sc.phys.nominal_oxide_nm, sc.phys.na, synth_camera_name(sc.phys.cam.kind),
               sc.nobj, ms);
    if (rendered)
        synth_image_free(&im);
    synth_scene_free(&sc);
    return st ? 1 : 0;
}

/* mkdir -p */
static int make_dirs(const char *path)
{
    char buf[1024];
    snprintf(buf, sizeof buf, "%s", path);
    for (char *p = buf + 1; *p; p++)
        if (*p == '/') {
            *p = '\0';
            if (mkdir(buf, 0755) != 0 && errno != EEXIST)
                return -1;
            *p = '/';
        }
    return mkdir(buf, 0755) != 0 && errno != EEXIST ? -1 : 0;
}

int main(int argc, char **argv)
{
    opts o;
    if (parse(argc, argv, &o))
        return usage("--out DIR is required; options take one value each");
    synth_format fmt;
    int quality, channels;
    if (synth_format_parse(o.format, &fmt, &quality, &channels))
        return usage(synth_error());
    if (make_dirs(o.out)) {
        fprintf(stderr, "synth: %s: cannot create: %s\n", o.out, strerror(errno));
        return 1;
    }
    for (long i = 0; i < o.count; i++)
        if (one_scene(&o, fmt, quality, channels, i))
            return 1;
    return 0;
}
