/* test_batch.c - a rendered 20-tile chip scan with stage positions: the
 * catalogue's top monolayer candidates must be the chip's, each flake seen
 * in two overlapping tiles listed once; a run interrupted and resumed with
 * --resume must end with outputs identical to an uninterrupted run; the
 * same results with 1 and 2 threads; shards on one pooled prior merge to
 * the catalogue of one run. The chip is invented test data. A kept
 * result's warnings are read back from its JSON. */
#include "check.h"
#include "lamina/batch.h"
#include "lamina/image.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <dirent.h>
#include <cjson/cJSON.h>

typedef struct chip_flake {
    double x, y, r; /* chip um: centre and radius of a hexagon */
    int layers;
} chip_flake;

/* 5 x 4 tiles of 640 x 480 px at 0.2 um/px (128 x 96 um), 100 x 76 um apart. */
#define TX 5
#define TY 4
#define PX 0.2
static const chip_flake flakes[] = {
    {60, 40, 14, 1},   {160, 50, 9, 2},  {290, 60, 12, 1}, {430, 45, 8, 3},  {95, 150, 7, 1},
    {250, 140, 10, 2}, {350, 170, 6, 1}, {480, 160, 11, 1}, {70, 250, 12, 3}, {200, 260, 8, 1},
    {330, 270, 15, 2}, {150, 76 + 10, 6, 25}, {400, 230, 5, 2},
};
#define NF (sizeof flakes / sizeof flakes[0])

/* A result kept from an earlier run has no analysis: its warnings come
 * from the JSON's "warnings" array (code and message, docs/user-guide.md). */
static void test_kept_warnings(void)
{
    cJSON *json = cJSON_Parse("{\"warnings\":[{\"code\":\"saturated\",\"message\":\"clipped\"},"
                              "{\"code\":\"poor-fit\",\"message\":\"no count fits\"},"
                              "{\"code\":\"x\"}]}");
    lam_batch_item it;
    memset(&it, 0, sizeof it);
    it.json = json;
    it.resumed = 1;
    lam_warnings w;
    lam_batch_item_warnings(&it, &w);
    check_int((long long)w.count, 2, "two warnings with a message");
    check_str(w.item[0].code, "saturated", "first code");
    check_str(w.item[1].message, "no count fits", "second message");
    it.json = NULL;
    lam_batch_item_warnings(&it, &w);
    check_int((long long)w.count, 0, "no JSON, no warnings");
    cJSON_Delete(json);
}

/* The contact sheet's first cell (its top-left 200 x 200 px at 10, 40:
 * the layout of src/crops.c) is, pixel for pixel, one of the crops beside
 * it: the sheet is made of the crops' own pictures. */
static int sheet_cell_is_a_crop(const char *out)
{
    char p[1200];
    snprintf(p, sizeof p, "%s/contact-sheet.png", out);
    lam_load_options lo = lam_load_options_default();
    lo.display8_only = 1;
    lam_image *sheet = NULL;
    if (lam_image_load(p, &lo, &sheet, NULL))
        return 0;
    snprintf(p, sizeof p, "%s/crops", out);
    DIR *d = opendir(p);
    int found = 0;
    for (struct dirent *e; d && !found && (e = readdir(d));) {
        lam_image *crop = NULL;
        snprintf(p, sizeof p, "%s/crops/%s", out, e->d_name);
        if (e->d_name[0] == '.' || lam_image_load(p, &lo, &crop, NULL))
            continue;
        found = crop->width == 200 && crop->height == 200;
        for (size_t y = 0; found && y < 200; y++)
            found = !memcmp(crop->display8 + y * 600, sheet->display8 + ((40 + y) * sheet->width + 10) * 3,
                            600);
        lam_image_free(crop);
    }
    if (d)
        closedir(d);
    lam_image_free(sheet);
    return found;
}

int main(void)
{
    check_begin("test_batch");
    test_kept_warnings();
    const char *bin_dir = getenv("BUILD") ? getenv("BUILD") : "build";
    char dir[512], cmd[4096], path[1024];
    snprintf(dir, sizeof dir, "%s/tiles", check_tmpdir());
    mkdir(dir, 0755);
    snprintf(path, sizeof path, "%s/positions.csv", dir);
    FILE *pos = fopen(path, "w");
    fprintf(pos, "file,x_um,y_um\n");
    for (int ty = 0; ty < TY; ty++)
        for (int tx = 0; tx < TX; tx++) {
            double cx = 64 + 100 * tx, cy = 48 + 76 * ty; /* tile centre, chip um */
            char scene[1024];
            snprintf(scene, sizeof scene, "%s/t%d%d.json", dir, ty, tx);
            FILE *f = fopen(scene, "w");
            fprintf(f, "{\"schema\":\"lamina-scene/1\",\"setup\":{\"schema\":\"lamina-setup/1\","
                       "\"um_per_px\":%g},\"width\":640,\"height\":480,\"oxide_nm\":287,"
                       "\"vignetting\":0.15,\"blur_px\":0.8,\"full_well\":10000,\"seed\":%d,"
                       "\"flakes\":[", PX, 10 * ty + tx);
            int first = 1;
            for (size_t i = 0; i < NF; i++) {
                fprintf(f, "%s{\"layers\":%d,\"polygon\":[", first ? "" : ",", flakes[i].layers);
                for (int k = 0; k < 6; k++) {
                    double a = k * M_PI / 3 + 0.3 * (double)i;
                    double x = (flakes[i].x + flakes[i].r * cos(a) - cx) / PX + 320;
                    double y = (flakes[i].y + flakes[i].r * sin(a) - cy) / PX + 240;
                    fprintf(f, "%s[%.1f,%.1f]", k ? "," : "", x, y);
                }
                fprintf(f, "]}");
                first = 0;
            }
            fprintf(f, "]}");
            fclose(f);
            snprintf(cmd, sizeof cmd, "%s/lamina render --quiet %s -o %s/t%d%d.png", bin_dir, scene,
                     dir, ty, tx);
            if (system(cmd) != 0)
                check_true(0, "render tile %d,%d", ty, tx);
            char truth[1024];
            snprintf(truth, sizeof truth, "%s/t%d%d.truth.png", dir, ty, tx);
            remove(truth);
            remove(scene);
            fprintf(pos, "t%d%d.png,%.1f,%.1f\n", ty, tx, cx, cy);
        }
    fclose(pos);
    char outA[600], outB[600], outC[600];
    snprintf(outA, sizeof outA, "%s/outA", check_tmpdir());
    snprintf(outB, sizeof outB, "%s/outB", check_tmpdir());
    snprintf(outC, sizeof outC, "%s/outC", check_tmpdir());
    snprintf(cmd, sizeof cmd, "%s/lamina analyze --quiet --um-per-px 0.2 --threads 2 --positions %s/positions.csv "
             "--out %s %s", bin_dir, dir, outA, dir);
    check_int(system(cmd), 0, "analyze the 20-tile scan with positions");
    snprintf(path, sizeof path, "%s/catalog.json", outA);
    char *text = check_slurp(path, NULL);
    cJSON *cat = text ? cJSON_Parse(text) : NULL;
    free(text);
    if (!check_true(cat != NULL, "catalog.json parses"))
        return check_summary();
    cJSON *regs = cJSON_GetObjectItemCaseSensitive(cat, "regions"), *r;
    /* expected monolayers, largest first by radius */
    size_t mono = 0, matched = 0, dup_mono = 0, seen_twice = 0, i = 0;
    for (size_t k = 0; k < NF; k++)
        mono += flakes[k].layers == 1;
    int used[NF] = {0};
    cJSON_ArrayForEach(r, regs) {
        if (i++ >= mono)
            break;
        cJSON *layers = cJSON_GetObjectItemCaseSensitive(r, "layers");
        cJSON *cx = cJSON_GetObjectItemCaseSensitive(r, "chip_x_um");
        cJSON *cy = cJSON_GetObjectItemCaseSensitive(r, "chip_y_um");
        if (!cJSON_IsNumber(layers) || layers->valueint != 1 || !cJSON_IsNumber(cx) || !cJSON_IsNumber(cy))
            continue;
        double x = cx->valuedouble, y = cy->valuedouble;
        for (size_t k = 0; k < NF; k++)
            if (flakes[k].layers == 1 && hypot(flakes[k].x - x, flakes[k].y - y) < 3) {
                dup_mono += used[k];
                used[k] = 1;
                matched++;
                if (cJSON_GetArraySize(cJSON_GetObjectItemCaseSensitive(r, "also_seen_in")) > 0)
                    seen_twice++;
            }
    }
    check_int((long long)matched, (long long)mono,
              "the top %zu catalogue entries are the chip's %zu monolayers (chip position within 3 um)",
              mono, mono);
    check_int((long long)dup_mono, 0, "no monolayer listed twice");
    check_true(seen_twice >= 1, "flakes in overlapping tiles merged (%zu with also_seen_in)", seen_twice);
    cJSON_Delete(cat);
    /* interrupted run, then --resume: same results as uninterrupted */
    snprintf(cmd, sizeof cmd, "timeout -s INT 0.6 %s/lamina analyze --quiet --um-per-px 0.2 --threads 1 --positions "
             "%s/positions.csv --out %s %s; %s/lamina analyze --quiet --um-per-px 0.2 --resume --threads 2 "
             "--positions %s/positions.csv --out %s %s", bin_dir, dir, outB, dir, bin_dir, dir, outB, dir);
    check_int(system(cmd), 0, "interrupted run resumed");
    const char *files[] = {"catalog.json", "catalog.csv", "t00.json", "t12.json", "t33.json",
                           "t21.layers.png", "t21.annotated.png", "t21.contrast.svg", "goto.csv",
                           "report.html", "contact-sheet.png"};
    int all_same = 1;
    for (size_t k = 0; k < sizeof files / sizeof files[0]; k++) {
        char a[1024], b[1024];
        snprintf(a, sizeof a, "%s/%s", outA, files[k]);
        snprintf(b, sizeof b, "%s/%s", outB, files[k]);
        if (!check_same_file(a, b)) {
            all_same = 0;
            printf("test_batch: %s differs after --resume\n", files[k]);
        }
    }
    check_true(all_same, "resumed outputs identical to the uninterrupted run");
    snprintf(cmd, sizeof cmd, "ls %s | grep -c tmp- > /dev/null", outB);
    check_true(system(cmd) != 0, "no temporary files left after the interrupt");
    snprintf(cmd, sizeof cmd, "%s/lamina analyze --quiet --um-per-px 0.2 --threads 1 --positions %s/positions.csv "
             "--out %s %s", bin_dir, dir, outC, dir);
    check_int(system(cmd), 0, "single-threaded run");
    char a[1024], b[1024];
    snprintf(a, sizeof a, "%s/catalog.json", outA);
    snprintf(b, sizeof b, "%s/catalog.json", outC);
    check_true(check_same_file(a, b), "catalogue identical with 1 and 2 threads");
    char sa[1024], sb[1024];
    snprintf(sa, sizeof sa, "%s/contact-sheet.png", outA);
    snprintf(sb, sizeof sb, "%s/contact-sheet.png", outC);
    check_true(check_same_file(sa, sb), "contact sheet identical with 1 and 2 threads (its images "
               "drawn on both)");
    snprintf(cmd, sizeof cmd, "diff -r %s/crops %s/crops > /dev/null", outA, outC);
    check_int(system(cmd), 0, "crops identical with 1 and 2 threads");
    check_true(sheet_cell_is_a_crop(outA), "the contact sheet's first cell is a crop, pixel for "
               "pixel");
    /* two shards on one pooled prior (--pool-only, then --pool-from: the
     * cluster recipe of docs/user-guide.md) merged give the catalogue of
     * one run */
    snprintf(cmd, sizeof cmd, "%s/lamina analyze --quiet --um-per-px 0.2 --pool-only --out %s/pool %s "
             "&& for i in 1 2; do %s/lamina analyze --quiet --um-per-px 0.2 --shard $i/2 "
             "--pool-from %s/pool/pool.json --out %s/shard$i %s || exit 1; done; %s/lamina catalog "
             "merge --quiet --positions %s/positions.csv --out %s/merged %s/shard1 %s/shard2",
             bin_dir, check_tmpdir(), dir, bin_dir, check_tmpdir(), check_tmpdir(), dir, bin_dir,
             dir, check_tmpdir(), check_tmpdir(), check_tmpdir());
    check_int(system(cmd), 0, "a pooled prior, two shards on it and a merge");
    snprintf(b, sizeof b, "%s/merged/catalog.json", check_tmpdir());
    check_true(check_same_file(a, b), "merged shards give the catalogue of a single run");
    /* one image alone has both threads: without a setup its wide oxide fit
     * is made beside the nominal one (analyze_oxide.c), and its results
     * must be those of the fits made one after the other. The demo's tile
     * of a 90 nm chip: without a setup (285 nm assumed) the wide fit finds
     * the chip's oxide and is the one reported (a wide fit with another
     * prior changes its JSON) */
    snprintf(cmd, sizeof cmd, "for t in 1 2; do %s/lamina analyze --quiet --threads $t --out "
             "%s/alone$t samples/HT090-B02-tile03.png 2>/dev/null || exit 1; done && cmp -s "
             "%s/alone1/HT090-B02-tile03.json %s/alone2/HT090-B02-tile03.json",
             bin_dir, check_tmpdir(), check_tmpdir(), check_tmpdir());
    check_int(system(cmd), 0, "one image without a setup: the same JSON with 1 and 2 threads");
    /* an hBN image: its oxide profile's points, its tables' film
     * evaluations and its regions are handed out to the threads
     * (thickness_stage.c, thickness.c), each worker with its own model */
    snprintf(cmd, sizeof cmd, "for t in 1 2; do %s/lamina analyze --quiet --threads $t --setup "
             "samples/bench3-setup-hbn.json --out %s/hbn$t samples/HT285-N05-tile04.png "
             "2>/dev/null || exit 1; done && cmp -s %s/hbn1/HT285-N05-tile04.json "
             "%s/hbn2/HT285-N05-tile04.json",
             bin_dir, check_tmpdir(), check_tmpdir(), check_tmpdir());
    check_int(system(cmd), 0, "an hBN image: the same JSON with 1 and 2 threads");
    return check_summary();
}
