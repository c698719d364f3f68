/* robust.c - render with the independent generator, analyse with lamina,
 * score the layer counts, the oxide and the Fermi levels. */
#include "robust.h"
#include "lamina/analyze.h"
#include "lamina/pool.h"
#include "lamina/calibrate.h"
#include "lamina/setup.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <errno.h>
#include <fcntl.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

static double now_s(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

uint32_t robust_covering_region(const synth_scene *sc, int o, const lam_analysis *a,
                                size_t *covered)
{
    size_t n = (size_t)sc->width * (size_t)sc->height, best = 0;
    uint32_t best_id = 0;
    size_t *count = calloc(a->count + 1, sizeof *count);
    if (!count)
        return 0;
    for (size_t k = 0; k < n; k++)
        if (sc->owner[k] == o)
            count[a->seg->label[k]]++;
    for (uint32_t id = 1; id <= a->count; id++)
        if (count[id] > best)
            best = count[id], best_id = id;
    free(count);
    *covered = best;
    return best_id;
}

uint32_t robust_flake_region(const synth_scene *sc, int o, const lam_analysis *a)
{
    size_t cov = 0, area = (size_t)sc->obj[o].area_px;
    uint32_t id = robust_covering_region(sc, o, a, &cov);
    if (!id)
        return 0;
    const lam_region_stats *r = &a->seg->regions[id - 1];
    int most = cov * 10 >= area * 3;
    int extent = cov * 5 >= r->area * 4 && lam_region_area(r) * 10 >= (double)area * 3;
    return most || extent ? id : 0;
}

static void score_fermi(const synth_object *ob, const lam_region_result *r, robust_tally *t)
{
    const lam_fermi_estimate *f = &r->fermi;
    if (!f->evaluated)
        return;
    double mu = fabs(ob->fermi_eV);
    t->fermi_n++;
    if (f->constrained) {
        t->fermi_seen++;
        t->fermi_width_sum += f->hi - f->lo;
        t->fermi_covered += mu >= f->lo && mu <= f->hi;
    } else {
        t->fermi_covered += mu <= f->upper;
    }
}

/* A warning that tells the reader not to trust the counts as they stand. */
static int doubted(const lam_analysis *a)
{
    static const char *const codes[] = {"poor-fit",        "two-readings",
                                        "oxide-off-nominal", "oxide-ambiguous",
                                        "monochrome",      "pooled-readings",
                                        "crystal-camera-unknown", "calibration-scale"};
    for (size_t k = 0; k < sizeof codes / sizeof codes[0]; k++)
        if (lam_warnings_find(&a->warnings, codes[k]))
            return 1;
    return 0;
}

static void score_flakes(const synth_scene *sc, const lam_analysis *a, robust_tally *t,
                         FILE *log, const char *name)
{
    int doubt = doubted(a);
    for (int o = 0; o < sc->nobj; o++) {
        const synth_object *ob = &sc->obj[o];
        if ((ob->kind != SYNTH_OBJ_FLAKE && ob->kind != SYNTH_OBJ_FOLD) || ob->layers > 3 ||
            ob->layers < 1 || ob->area_px < 50)
            continue;
        uint32_t id = robust_flake_region(sc, o, a);
        const lam_region_result *r = id ? &a->results[id - 1] : NULL;
        if (ob->doped && r) {
            score_fermi(ob, r, t);
            continue; /* doped flakes are scored for their Fermi level */
        }
        t->flakes++;
        t->by_n[ob->layers]++;
        int ok = r && r->layers == ob->layers;
        t->right += ok;
        t->right_n[ob->layers] += ok;
        if (r && r->layers > 0 && r->p_label >= 0.95) {
            t->confident++;
            t->confident_right += ok;
            t->warned += doubt;
            t->warned_right += doubt && ok;
        }
        if (!ok && log)
            fprintf(log, "%s: %dL flake (%ld px) found %s (p %.3f)%s\n", name, ob->layers,
                    ob->area_px, r ? r->label : "nothing", r ? r->p_label : 0.0,
                    doubt ? " [warned]" : "");
    }
}

/* What the substrate's colour said, for the log ("" when not read). */
static const char *colour_note(const lam_colour_oxide *c)
{
    static _Thread_local char t[256];
    if (!c->checked)
        return "";
    snprintf(t, sizeof t, "%s; colour %.2f +- %.2f nm, chi2 %.1f, reference %.1f nm%s%s",
             c->used ? " [colour]" : "", c->estimate, c->sigma, c->chi2, c->reference_nm,
             c->note[0] ? ": " : "", c->note);
    return t;
}

static void score_oxide(const synth_scene *sc, const lam_analysis *a, robust_tally *t,
                        FILE *log, const char *name)
{
    if (!a->oxide.fitted)
        return;
    double err = fabs(a->oxide.estimate - sc->phys.oxide_nm);
    if (log) /* every image's oxide, to see a bias or a spread */
        fprintf(log, "%s: oxide true %.2f found %.2f +- %.2f nm%s\n", name, sc->phys.oxide_nm,
                a->oxide.estimate, a->oxide.sigma, colour_note(&a->oxide.colour));
    t->oxide_n++;
    t->oxide_abs_sum += err;
    t->oxide_abs_max = fmax(t->oxide_abs_max, err);
    t->oxide_within_3 += err <= 3;
    t->oxide_within_1_5 += err <= 1.5;
    t->colour_used += a->oxide.colour.used;
    int colour_warned = lam_warnings_find(&a->warnings, "substrate-colour") != NULL;
    t->colour_warned += colour_warned;
    t->oxide_silent += err > 3 * a->oxide.sigma && !colour_warned &&
                       !lam_warnings_find(&a->warnings, "oxide-off-nominal") &&
                       !lam_warnings_find(&a->warnings, "oxide-ambiguous");
    t->oxide_covered += err <= 2 * a->oxide.sigma;
}

static int load_setup(const char *path, lam_setup *s)
{
    lam_error err;
    lam_error_clear(&err);
    lam_setup_default(s);
    if (lam_setup_load(path, s, &err)) {
        fprintf(stderr, "robust: %s: %s\n", path, err.message);
        return -1;
    }
    return 0;
}

/* Analyse one image (with a pooled prior when given), score it, and hand
 * the analysis to the pool when one is given. */
static int analyse(const char *img, const lam_setup *s, const lam_shared_prior *prior,
                   const synth_scene *sc, robust_tally *t, FILE *log, lam_pool *pool)
{
    char name[1200];
    snprintf(name, sizeof name, "%s [%s%s]", img,
             lam_setup_is_default(s, "camera") ? "uninformed" : "informed",
             prior ? " pooled" : "");
    lam_error err;
    lam_error_clear(&err);
    lam_analysis_options opt = lam_analysis_options_default();
    opt.threads = 1;
    opt.shared_prior = prior;
    lam_analysis *a = NULL;
    double t0 = now_s();
    int rc = 0;
    if (lam_analyze(img, s, &opt, &a, &err)) {
        fprintf(stderr, "robust: %s: %s\n", img, err.message);
        rc = -1;
    } else {
        t->seconds += now_s() - t0;
        t->images++;
        score_flakes(sc, a, t, log, name);
        score_oxide(sc, a, t, log, name);
        if (pool && lam_pool_add(pool, a, &err)) {
            fprintf(stderr, "robust: %s: %s\n", img, err.message);
            rc = -1;
        }
    }
    lam_analysis_free(a);
    return rc;
}

/* Render one tile: physics from physics_seed, flakes from layout_seed; the
 * image, its setup (written when 'setup' is not NULL) and its truth. */
static int render_tile(const robust_case *c, unsigned long long physics_seed,
                       unsigned long long layout_seed, const char *dir, synth_scene *sc,
                       char *img, size_t img_size, const char *setup)
{
    synth_image im;
    if (synth_scene_make2(&c->cfg, physics_seed, layout_seed, sc)) {
        fprintf(stderr, "robust: scene %llu: %s\n", layout_seed, synth_error());
        return -1;
    }
    char stem[1024];
    snprintf(stem, sizeof stem, "%s/s%llu-%llu-%d", dir, physics_seed, layout_seed, (int)c->fmt);
    snprintf(img, img_size, "%s.%s", stem, synth_format_ext(c->fmt));
    int rc = synth_render(sc, &im);
    if (!rc) {
        rc = synth_save(&im, c->fmt, c->quality, img) ||
             (setup && synth_write_setup(sc, c->fmt, c->informed, setup)) ||
             synth_write_truth(sc, stem);
        synth_image_free(&im);
    }
    if (rc) {
        fprintf(stderr, "robust: scene %llu: %s\n", layout_seed, synth_error());
        synth_scene_free(sc);
    }
    return rc;
}

int robust_run(const robust_case *c, unsigned long long seed, const char *dir, robust_tally *t,
               FILE *log)
{
    synth_scene sc;
    char img[1100], setup[1100];
    snprintf(setup, sizeof setup, "%s/s%llu-%d.setup.json", dir, seed, (int)c->fmt);
    if (render_tile(c, seed, seed, dir, &sc, img, sizeof img, setup))
        return -1;
    lam_setup s;
    int rc = load_setup(c->pooled_setup ? c->pooled_setup : setup, &s);
    if (!rc && c->oxide_known_nm > 0) { /* a measured oxide: its value and uncertainty */
        lam_error err;
        rc = lam_setup_set_oxide(&s, sc.phys.oxide_nm, &err) ? -1 : 0;
        s.sigma.oxide_nm = c->oxide_known_nm;
    }
    if (!rc)
        rc = analyse(img, &s, NULL, &sc, t, log, NULL);
    lam_setup_clear(&s);
    synth_scene_free(&sc);
    return rc;
}

/* A chip scan: 'tiles' scenes sharing the physics of 'seed', each with its
 * own flakes, rendered into dir; the setup is written beside the first
 * (PREFIXseed-format.setup.json). */
typedef struct scan {
    synth_scene sc[LAM_POOL_MAX];
    char img[LAM_POOL_MAX][1100], setup[1100];
    int made;
} scan;

/* A uniform number in [lo, hi) from a seed (splitmix64), for the harness'
 * own draws, apart from the renderer's streams. */
static double harness_uniform(unsigned long long *state, double lo, double hi)
{
    unsigned long long z = (*state += 0x9e3779b97f4a7c15ULL);
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    z ^= z >> 31;
    return lo + (hi - lo) * (double)(z >> 11) / 9007199254740992.0;
}

/* Tile k of a scan taken on other days with the same microscope: every
 * other tile on another chip (its oxide 3-12 nm off the first's), each
 * with its own exposure and a white balance drifted by up to 0.8 % per
 * channel (the lamp and camera settings kept, as a calibration needs), or
 * changed by the case's session_wb factors. */
static void other_session(robust_case *t, const synth_scene *first, unsigned long long seed,
                          int k)
{
    unsigned long long st = seed * 7919 + (unsigned long long)k;
    double off = harness_uniform(&st, 3, 12) * (harness_uniform(&st, 0, 1) < 0.5 ? -1 : 1);
    t->cfg.oxide_nm = first->phys.oxide_nm + (k % 2 ? off : 0);
    t->cfg.exposure = harness_uniform(&st, 0.35, 0.8);
    for (int c = 0; c < 3; c++)
        t->cfg.wb_drift[c] = t->session_wb[c] > 0 ? t->session_wb[c]
                                                  : 1 + harness_uniform(&st, -0.008, 0.008);
}

/* The tiles of one scan (one physics seed); with 'sessions', tiles after
 * the first as other_session draws them. */
static int render_scan(const robust_case *c, unsigned long long seed, int tiles, const char *dir,
                       char prefix, int sessions, scan *sn)
{
    snprintf(sn->setup, sizeof sn->setup, "%s/%c%llu-%d.setup.json", dir, prefix, seed,
             (int)c->fmt);
    int rc = 0;
    for (sn->made = 0; sn->made < tiles && !rc; sn->made++) {
        robust_case t = *c;
        if (sessions && sn->made)
            other_session(&t, &sn->sc[0], seed, sn->made);
        rc = render_tile(&t, seed, seed * 1000 + (unsigned long long)sn->made, dir,
                         &sn->sc[sn->made], sn->img[sn->made], sizeof sn->img[0],
                         sn->made ? NULL : sn->setup);
    }
    if (rc)
        sn->made--;
    return rc;
}

static void scan_free(scan *sn)
{
    for (int k = 0; k < sn->made; k++)
        synth_scene_free(&sn->sc[k]);
}

int robust_run_batch(const robust_case *c, unsigned long long seed, int tiles, const char *dir,
                     robust_tally *alone, robust_tally *pooled, FILE *log)
{
    if (tiles < 1 || tiles > LAM_POOL_MAX)
        return -1;
    scan sn;
    int rc = render_scan(c, seed, tiles, dir, 'b', 0, &sn);
    lam_setup s;
    lam_pool *pool = NULL;
    lam_shared_prior prior;
    lam_error err;
    lam_error_clear(&err);
    if (!rc && !(rc = load_setup(sn.setup, &s))) {
        lam_analysis_options opt = lam_analysis_options_default();
        rc = lam_pool_alloc(&s, &opt, &pool, &err) ? -1 : 0;
        if (!rc)
            lam_pool_analyse_again(pool, 1);
        for (int k = 0; k < tiles && !rc; k++)
            rc = analyse(sn.img[k], &s, NULL, &sn.sc[k], alone, log, pool);
        if (!rc && lam_pool_fit(pool, &prior, &err)) {
            fprintf(stderr, "robust: pool: %s\n", err.message);
            rc = -1;
        }
        for (int k = 0; k < tiles && !rc; k++)
            rc = analyse(sn.img[k], &s, &prior, &sn.sc[k], pooled, log, NULL);
        lam_pool_free(pool);
        lam_setup_clear(&s);
    }
    scan_free(&sn);
    return rc;
}

void robust_add(robust_tally *into, const robust_tally *t)
{
    into->flakes += t->flakes;
    into->right += t->right;
    for (int n = 0; n < 4; n++) {
        into->by_n[n] += t->by_n[n];
        into->right_n[n] += t->right_n[n];
    }
    into->confident += t->confident;
    into->confident_right += t->confident_right;
    into->warned += t->warned;
    into->warned_right += t->warned_right;
    into->images += t->images;
    into->oxide_n += t->oxide_n;
    into->oxide_within_3 += t->oxide_within_3;
    into->oxide_within_1_5 += t->oxide_within_1_5;
    into->colour_used += t->colour_used;
    into->colour_warned += t->colour_warned;
    into->oxide_silent += t->oxide_silent;
    into->oxide_covered += t->oxide_covered;
    into->oxide_abs_sum += t->oxide_abs_sum;
    into->oxide_abs_max = fmax(into->oxide_abs_max, t->oxide_abs_max);
    into->fermi_n += t->fermi_n;
    into->fermi_covered += t->fermi_covered;
    into->fermi_seen += t->fermi_seen;
    into->fermi_width_sum += t->fermi_width_sum;
    into->seconds += t->seconds;
}

static double pct(size_t a, size_t b)
{
    return b ? 100.0 * (double)a / (double)b : NAN;
}

void robust_print(FILE *f, const char *label, const robust_tally *t)
{
    size_t quiet = t->confident - t->warned, quiet_right = t->confident_right - t->warned_right;
    fprintf(f, "%-34s %4zu img  1-3L %5.1f %% (%zu/%zu: 1L %.1f 2L %.1f 3L %.1f)  p>=0.95 %5.1f %% "
               "of %zu (unwarned %.1f %% of %zu)  oxide |err| mean %.2f max %.2f nm, <=3 nm %.0f %%, in 2 sigma %.0f %%",
            label, t->images, pct(t->right, t->flakes), t->right, t->flakes,
            pct(t->right_n[1], t->by_n[1]), pct(t->right_n[2], t->by_n[2]),
            pct(t->right_n[3], t->by_n[3]), pct(t->confident_right, t->confident), t->confident,
            pct(quiet_right, quiet), quiet, t->oxide_n ? t->oxide_abs_sum / (double)t->oxide_n : NAN, t->oxide_abs_max,
            pct(t->oxide_within_3, t->oxide_n), pct(t->oxide_covered, t->oxide_n));
    fprintf(f, ", <=1.5 nm %.0f %%, beyond 3 sigma unwarned %zu", pct(t->oxide_within_1_5, t->oxide_n),
            t->oxide_silent);
    if (t->colour_used || t->colour_warned)
        fprintf(f, "  substrate colour used %zu, refused %zu", t->colour_used, t->colour_warned);
    if (t->fermi_n)
        fprintf(f, "  Fermi: covered %.0f %% of %zu, blocking seen %zu, mean width %.2f eV",
                pct(t->fermi_covered, t->fermi_n), t->fermi_n, t->fermi_seen,
                t->fermi_seen ? t->fermi_width_sum / (double)t->fermi_seen : NAN);
    fprintf(f, "  %.2f s/img\n", t->images ? t->seconds / (double)t->images : NAN);
}

/* The label map of one flake: its pixels carry its layer count, the rest
 * is ignored (255). */
static uint8_t *one_flake_labels(const synth_scene *sc, int obj)
{
    size_t n = (size_t)sc->width * (size_t)sc->height;
    uint8_t *map = malloc(n);
    for (size_t k = 0; map && k < n; k++)
        map[k] = sc->owner[k] == obj ? (uint8_t)sc->obj[obj].layers : 255;
    return map;
}

static int largest_monolayer(const synth_scene *sc)
{
    int best = -1;
    for (int o = 0; o < sc->nobj; o++)
        if (sc->obj[o].kind == SYNTH_OBJ_FLAKE && sc->obj[o].layers == 1 &&
            (best < 0 || sc->obj[o].area_px > sc->obj[best].area_px))
            best = o;
    return best;
}

/* Calibrate the setup on one flake of the first tile (and its other
 * regions, latent, unless ROBUST_CAL_LABELLED_ONLY), with its oxide given
 * as measured (ellipsometry) with ROBUST_CAL_OXIDE, and with second_img
 * (may be NULL) a second chip of oxide second_oxide for the substrate's
 * colour, as `calibrate --second-chip` takes it; fills 'out'. */
static int calibrate_on_flake(const char *img, const synth_scene *sc, const lam_setup *start,
                              int flags, const char *second_img, double second_oxide,
                              lam_calib_result *out)
{
    int obj = largest_monolayer(sc);
    uint8_t *map = obj >= 0 ? one_flake_labels(sc, obj) : NULL;
    lam_calib_set set;
    lam_calib_set_init(&set);
    lam_error err;
    lam_error_clear(&err);
    int rc = !map || lam_calib_measure_labels(&set, img, map, (size_t)sc->width,
                                              (size_t)sc->height, start, &err) ||
             (!(flags & ROBUST_CAL_LABELLED_ONLY) &&
              lam_calib_add_unlabelled(&set, 0, map, (size_t)sc->width, (size_t)sc->height, start,
                                       &err)) ||
             (second_img &&
              lam_calib_add_second_chip(&set, second_img, second_oxide, start, &err)) ||
             lam_calibrate(start, &set, flags & ROBUST_CAL_OXIDE ? &sc->phys.oxide_nm : NULL, NAN,
                           out, &err);
    if (rc)
        fprintf(stderr, "robust: calibration on %s: %s\n", img, err.message);
    lam_calib_set_clear(&set);
    free(map);
    return rc ? -1 : 0;
}

/* The profile as a user gets it: written by lam_setup_save as `lamina
 * calibrate` does, in a folder of its own, and read back. */
static int round_trip(const lam_setup *fitted, const char *dir, unsigned long long seed,
                      const char *kind, lam_setup *out)
{
    char sub[1024], path[1100];
    snprintf(sub, sizeof sub, "%s/profiles", dir);
    mkdir(sub, 0755);
    snprintf(path, sizeof path, "%s/%s%llu-%s.profile.json", sub, kind, seed,
             lam_setup_is_default(fitted, "camera") ? "uninformed" : "informed");
    lam_error err;
    lam_error_clear(&err);
    if (lam_setup_save(fitted, path, NULL, &err)) {
        fprintf(stderr, "robust: %s: %s\n", path, err.message);
        return -1;
    }
    lam_setup_clear(out);
    return load_setup(path, out);
}

void robust_case_init(robust_case *c)
{
    memset(c, 0, sizeof *c);
    synth_config_init(&c->cfg);
}

int robust_run_calibrated(const robust_case *c, unsigned long long seed, int tiles, int flags,
                          const char *dir, robust_tally *alone, robust_tally *calibrated,
                          FILE *log)
{
    if (tiles < 2 || tiles > LAM_POOL_MAX)
        return -1;
    scan sn;
    int rc = render_scan(c, seed, tiles, dir, 'c', flags & ROBUST_CAL_SESSIONS, &sn);
    lam_setup s, profile;
    lam_calib_result cal;
    memset(&cal, 0, sizeof cal);
    lam_setup_default(&profile);
    if (!rc && !(rc = load_setup(sn.setup, &s))) {
        rc = calibrate_on_flake(sn.img[0], &sn.sc[0], &s, flags, NULL, NAN, &cal);
        if (!rc && (flags & ROBUST_CAL_NO_COLOUR))
            cal.setup.substrate_colour.oxide_nm = NAN;
        if (!rc)
            rc = round_trip(&cal.setup, dir, seed, "c", &profile);
        for (int k = 1; k < tiles && !rc; k++)
            rc = analyse(sn.img[k], &s, NULL, &sn.sc[k], alone, log, NULL) ||
                 analyse(sn.img[k], &profile, NULL, &sn.sc[k], calibrated, log, NULL);
        lam_calib_result_clear(&cal);
        lam_setup_clear(&s);
    }
    lam_setup_clear(&profile);
    scan_free(&sn);
    return rc;
}

int robust_run_two_chips(const robust_case *c, unsigned long long seed, int tiles,
                         const char *dir, robust_tally *one, robust_tally *two, FILE *log)
{
    if (tiles < 3 || tiles > LAM_POOL_MAX)
        return -1;
    scan sn;
    int rc = render_scan(c, seed, tiles, dir, 'c', 1, &sn);
    lam_setup s, p1, p2;
    lam_calib_result cal;
    memset(&cal, 0, sizeof cal);
    lam_setup_default(&p1);
    lam_setup_default(&p2);
    if (!rc && !(rc = load_setup(sn.setup, &s))) {
        /* the second chip adds only a colour record: without it the fit
         * is the one-chip calibration's */
        rc = calibrate_on_flake(sn.img[0], &sn.sc[0], &s, ROBUST_CAL_OXIDE, sn.img[1],
                                sn.sc[1].phys.oxide_nm, &cal) ||
             round_trip(&cal.setup, dir, seed, "t", &p2);
        cal.setup.substrate_colour.second_oxide_nm = NAN;
        rc = rc || round_trip(&cal.setup, dir, seed, "c", &p1);
        for (int k = 2; k < tiles && !rc; k++)
            rc = analyse(sn.img[k], &p1, NULL, &sn.sc[k], one, log, NULL) ||
                 analyse(sn.img[k], &p2, NULL, &sn.sc[k], two, log, NULL);
        lam_calib_result_clear(&cal);
        lam_setup_clear(&s);
    }
    lam_setup_clear(&p1);
    lam_setup_clear(&p2);
    scan_free(&sn);
    return rc;
}

int robust_claim_dir(const char *dir)
{
    char path[1100];
    mkdir(dir, 0755);
    snprintf(path, sizeof path, "%s/.lock", dir);
    int fd = open(path, O_RDWR | O_CREAT, 0644); /* held open until exit */
    if (fd < 0) {
        fprintf(stderr, "robust: %s: %s\n", path, strerror(errno));
        return -1;
    }
    if (flock(fd, LOCK_EX | LOCK_NB)) {
        fprintf(stderr, "robust: %s is in use by another run of the harness (two runs in one "
                "directory overwrite each other's tiles and profiles): run the other one from "
                "its own directory\n", dir);
        close(fd);
        return -1;
    }
    return 0;
}
