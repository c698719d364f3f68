/* crystals.c - render hBN scenes with the independent generator, analyse
 * them with lamina, score the thickness of every flake. */
#include "crystals.h"
#include "lamina/analyze.h"
#include "lamina/setup.h"
#include "lamina/warnings.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

/* Every scored flake as a row (crystals_flake_table), or NULL. */
static FILE *flake_table;

void crystals_flake_table(FILE *f)
{
    flake_table = f;
    if (f)
        fprintf(f, "image,source,oxide_true_nm,oxide_found_nm,"
                   "pupil(1 sincos 2 sin 3 annular 4 filled),pupil_f,na,si,sio2,format_jpeg,"
                   "thickness_nm,estimate_nm,lo_nm,hi_nm,ambiguous,area_px\n");
}

/* One row of the flake table. */
static void table_row(const synth_scene *sc, const lam_analysis *a, const synth_object *ob,
                      const lam_thickness_result *th, const char *name)
{
    const synth_physics *p = &sc->phys;
    int found = th && th->evaluated;
    fprintf(flake_table, "%s,%d,%.2f,%.2f,%d,%.3f,%.3f,%d,%d,%d,%.3f,%.3f,%.3f,%.3f,%d,%ld\n",
            name, p->nk_source, p->oxide_nm, a->oxide.estimate, (int)p->pupil,
            p->pupil_f, p->na, (int)p->si, (int)p->sio2, strstr(name, ".jpg") != NULL,
            ob->thickness_nm, found ? th->estimate : NAN, found ? th->lo : NAN,
            found ? th->hi : NAN, found && th->order_ambiguous, ob->area_px);
}

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* The thickness bin of a flake: below 3, 3-10, 10-30, 30 nm and more. */
static int bin_of(double nm)
{
    return nm < 3 ? 0 : nm < 10 ? 1 : nm < 30 ? 2 : 3;
}

static void score_one(const synth_object *ob, const lam_thickness_result *th, hbn_tally *t,
                      FILE *log, const char *name)
{
    double d = ob->thickness_nm;
    int b = bin_of(d), within = 0, covered = 0;
    t->flakes++;
    t->bin_flakes[b]++;
    if (th && th->evaluated) {
        t->found++;
        double rel = th->estimate / d - 1;
        t->abs_rel_err_sum += fabs(rel);
        within = fabs(rel) <= 0.10;
        for (size_t k = 0; k < th->modes; k++)
            covered |= d >= th->mode[k].lo && d <= th->mode[k].hi;
        t->ambiguous += th->order_ambiguous != 0;
    }
    int ok = within || (th && th->evaluated && th->order_ambiguous);
    t->within10 += within;
    t->right += ok;
    t->bin_right[b] += ok;
    t->covered += covered;
    if (!ok && log)
        fprintf(log, "%s: %.2f nm flake (%ld px) found %s%.2f nm [%.2f, %.2f]\n", name, d,
                ob->area_px, th && th->evaluated ? "" : "nothing; ",
                th ? th->estimate : NAN, th ? th->lo : NAN, th ? th->hi : NAN);
}

static void score(const synth_scene *sc, const lam_analysis *a, hbn_tally *t, FILE *log,
                  const char *name)
{
    for (int o = 0; o < sc->nobj; o++) {
        const synth_object *ob = &sc->obj[o];
        if (ob->kind != SYNTH_OBJ_FLAKE || !(ob->thickness_nm > 0) || ob->area_px < 200)
            continue;
        uint32_t id = robust_flake_region(sc, o, a);
        int hit = id && a->thickness;
        score_one(ob, hit ? &a->thickness[id - 1] : NULL, t, log, name);
        if (flake_table)
            table_row(sc, a, ob, hit ? &a->thickness[id - 1] : NULL, name);
    }
    if (a->oxide.fitted) {
        t->oxide_n++;
        t->oxide_abs_sum += fabs(a->oxide.estimate - sc->phys.oxide_nm);
    }
}

static int analyse(const char *img, const char *setup_path, const synth_scene *sc, hbn_tally *t,
                   FILE *log)
{
    lam_setup s;
    lam_error err;
    lam_error_clear(&err);
    lam_setup_default(&s);
    if (lam_setup_load(setup_path, &s, &err)) {
        fprintf(stderr, "crystals: %s: %s\n", setup_path, err.message);
        lam_setup_clear(&s);
        return -1;
    }
    lam_analysis_options opt = lam_analysis_options_default();
    opt.threads = 1;
    lam_analysis *a = NULL;
    double t0 = now_s();
    int rc = 0;
    if (lam_analyze(img, &s, &opt, &a, &err)) {
        fprintf(stderr, "crystals: %s: %s\n", img, err.message);
        rc = -1;
    } else {
        t->seconds += now_s() - t0;
        t->images++;
        t->oxide_warned += lam_warnings_find(&a->warnings, "oxide-off-nominal") ||
                           lam_warnings_find(&a->warnings, "oxide-ambiguous");
        score(sc, a, t, log, img);
    }
    lam_analysis_free(a);
    lam_setup_clear(&s);
    return rc;
}

int crystals_run_hbn(const robust_case *c, unsigned long long seed, const char *dir,
                     hbn_tally *t, FILE *log)
{
    synth_scene sc;
    synth_image im;
    if (synth_scene_make(&c->cfg, seed, &sc)) {
        fprintf(stderr, "crystals: scene %llu: %s\n", seed, synth_error());
        return -1;
    }
    char stem[1024], img[1100], setup[1100];
    snprintf(stem, sizeof stem, "%s/h%llu-%d", dir, seed, (int)c->fmt);
    snprintf(img, sizeof img, "%s.%s", stem, synth_format_ext(c->fmt));
    snprintf(setup, sizeof setup, "%s.setup.json", stem);
    int rc = synth_render(&sc, &im);
    if (!rc) {
        rc = synth_save(&im, c->fmt, c->quality, img) ||
             synth_write_setup(&sc, c->fmt, c->informed, setup) || synth_write_truth(&sc, stem);
        synth_image_free(&im);
    }
    if (rc)
        fprintf(stderr, "crystals: scene %llu: %s\n", seed, synth_error());
    else
        rc = analyse(img, setup, &sc, t, log);
    synth_scene_free(&sc);
    return rc;
}

void crystals_add(hbn_tally *into, const hbn_tally *t)
{
    into->images += t->images;
    into->flakes += t->flakes;
    into->found += t->found;
    into->within10 += t->within10;
    into->ambiguous += t->ambiguous;
    into->right += t->right;
    into->covered += t->covered;
    for (int b = 0; b < CRYSTALS_BINS; b++) {
        into->bin_flakes[b] += t->bin_flakes[b];
        into->bin_right[b] += t->bin_right[b];
    }
    into->abs_rel_err_sum += t->abs_rel_err_sum;
    into->oxide_n += t->oxide_n;
    into->oxide_abs_sum += t->oxide_abs_sum;
    into->oxide_warned += t->oxide_warned;
    into->seconds += t->seconds;
}

static double pct(size_t a, size_t b)
{
    return b ? 100.0 * (double)a / (double)b : NAN;
}

void crystals_print(FILE *f, const char *label, const hbn_tally *t)
{
    fprintf(f, "%-30s %3zu img %4zu flakes: right %5.1f %% (within 10 %% %5.1f, ambiguous %zu) "
               "[1-3 %.0f, 3-10 %.0f, 10-30 %.0f, 30-100 nm %.0f %%]  in a 95 %% interval "
               "%5.1f %%  mean |err| %.1f %%  oxide |err| %.1f nm (warned %zu img)  %.2f s/img\n",
            label, t->images, t->flakes, pct(t->right, t->flakes), pct(t->within10, t->flakes),
            t->ambiguous, pct(t->bin_right[0], t->bin_flakes[0]),
            pct(t->bin_right[1], t->bin_flakes[1]), pct(t->bin_right[2], t->bin_flakes[2]),
            pct(t->bin_right[3], t->bin_flakes[3]), pct(t->covered, t->flakes),
            t->found ? 100 * t->abs_rel_err_sum / (double)t->found : NAN,
            t->oxide_n ? t->oxide_abs_sum / (double)t->oxide_n : NAN, t->oxide_warned,
            t->images ? t->seconds / (double)t->images : NAN);
}
