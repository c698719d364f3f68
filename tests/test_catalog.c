/* test_catalog.c - the catalogue scripts read: CSV and JSON agree row for
 * row under one schema (docs/catalog.md), no trap values (layers only for
 * the "layers" class, a probability on every row, inclusive boxes), and the
 * stage convention (axis directions, units, rotation, origin) worked by
 * hand. The analyses are small hand-written lamina-analysis/1 documents. */
#include "check.h"
#include "lamina/catalog.h"
#include "lamina/stage.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cjson/cJSON.h>

static void test_stage(void)
{
    lam_stage s = lam_stage_default();
    lam_position p = {"t.png", 100, 200, 0};
    double r[2];
    /* pixel 369 of 640: centre 369.5, 49.5 px right of the middle (320) */
    lam_stage_reading(&s, &p, 640, 480, 0.2, 369, 239, r);
    check_abs(r[0], 109.9, 1e-9, "49.5 px right at 0.2 um/px: +9.9 um");
    check_abs(r[1], 199.9, 1e-9, "row 239's centre is half a pixel above the middle of 480 rows");
    lam_stage_set(&s, "axes", "left,up", NULL);
    lam_stage_reading(&s, &p, 640, 480, 0.2, 369, 289, r);
    check_abs(r[0], 100 - 9.9, 1e-9, "axes left: readings shrink to the right");
    check_abs(r[1], 200 - 9.9, 1e-9, "axes up: readings shrink downward (row 289: 49.5 px down)");
    s = lam_stage_default();
    lam_stage_set(&s, "rotation", "90", NULL);
    lam_stage_reading(&s, &p, 640, 480, 0.2, 369, 239, r);
    /* turned 90 degrees counter-clockwise on screen, "right" becomes "up" */
    /* offset (9.9, -0.1) um turned: (cos t dx + sin t dy, -sin t dx + cos t dy) = (-0.1, -9.9) */
    check_abs(r[0], 100 - 0.1, 1e-9, "rotation 90: the half-pixel row offset turns into x");
    check_abs(r[1], 200 - 9.9, 1e-9, "rotation 90: right in the picture is up on the stage");
    check_int(lam_stage_set(&s, "axes", "right", NULL), LAM_EINVAL, "axes need two directions");
    check_int(lam_stage_set(&s, "units", "inch", NULL), LAM_EINVAL, "units um or mm only");
    check_int(lam_stage_set(&s, "origin", "t.png:x,3", NULL), LAM_EINVAL, "origin pixel numbers");
    check_int(lam_stage_set(&s, "origin", "1.5,2", NULL), LAM_OK, "origin as a reading");
    lam_stage_set(&s, "units", "mm", NULL);
    lam_stage_resolve(&s, NULL, 0, 0, 0, NULL);
    check_abs(s.origin_um[0], 1500, 1e-9, "origin 1.5 mm = 1500 um");
    char path[1200];
    snprintf(path, sizeof path, "%s/pos-mm.csv", check_tmpdir());
    FILE *f = fopen(path, "w");
    fputs("# stage export\nfile,x_mm,y_mm\nt.png,0.1,0.2\n", f);
    fclose(f);
    lam_positions P;
    if (check_int(lam_positions_load(path, &P, NULL), LAM_OK, "positions in mm")) {
        check_abs(P.items[0].x_um, 100, 1e-9, "0.1 mm read as 100 um");
        check_str(lam_stage_unit_name(&s, &P), "mm", "go-to unit as asked");
        lam_stage t = lam_stage_default();
        check_str(lam_stage_unit_name(&t, &P), "mm", "go-to unit defaults to the file's");
        lam_stage_set(&t, "origin", "t.png:320,240", NULL);
        check_int(lam_stage_resolve(&t, &P, 640, 480, 0.2, NULL), LAM_OK, "origin at a tile pixel");
        check_abs(t.origin_um[0], 100.1, 1e-9,
                  "pixel 320 of 640: its centre 0.5 px right of the middle");
        lam_stage_set(&t, "origin", "u.png:1,1", NULL);
        check_int(lam_stage_resolve(&t, &P, 640, 480, 0.2, NULL), LAM_EINVAL,
                  "an origin in a tile without position is an error");
        lam_positions_clear(&P);
    }
}

/* A small analysis with one region of each kind (hand-written). */
static cJSON *analysis(const char *file, int with_lead_keys)
{
    char text[4096];
    snprintf(text, sizeof text,
        "{\"schema\":\"lamina-analysis/1\",\"image\":{\"file\":\"%s\",\"path\":\"scan/%s\","
        "\"width\":640,\"height\":480,\"um_per_px\":0.2},"
        "\"substrate\":{\"oxide_nm\":{\"nominal\":285,\"estimate\":286.5}},%s"
        "\"regions\":["
        "{\"id\":1,\"layers\":1,\"label\":\"1L\",\"p_layers\":{\"1\":0.97,\"2\":0.03},"
        "\"area_px\":5000,\"area_um2\":200,\"bbox\":[100,100,199,179],\"centroid\":[150,140],"
        "\"usable_rect_px\":[120,110,50,40],\"usable_rect_um\":[10,8],\"flags\":[]},"
        "{\"id\":2,\"layers\":null,\"label\":\"thick\",\"p_layers\":{\"thick\":0.99,\"6\":0.01},"
        "\"area_px\":900,\"area_um2\":36,\"bbox\":[300,50,329,79],\"centroid\":[315,65],"
        "\"usable_rect_px\":[305,55,20,20],\"usable_rect_um\":[4,4],\"flags\":[]},"
        "{\"id\":3,\"layers\":null,\"label\":\"unassigned\",\"p_layers\":{\"1\":0.4,\"2\":0.35,\"0\":0.25},"
        "\"area_px\":400,\"area_um2\":16,\"bbox\":[400,300,419,319],\"centroid\":[410,310],"
        "\"usable_rect_px\":[0,0,0,0],\"usable_rect_um\":null,\"flags\":[\"ambiguous\",\"touches_border\"]},"
        "{\"id\":4,\"layers\":null,\"label\":\"unassigned\",\"p_layers\":{\"3\":0.6,\"4\":0.4},"
        "\"area_px\":300,\"area_um2\":12,\"bbox\":[500,400,519,414],\"centroid\":[510,407],"
        "\"usable_rect_px\":[505,402,5,5],\"usable_rect_um\":[1,1],\"flags\":[\"unmodelled\"]%s},"
        "{\"id\":5,\"layers\":2,\"label\":\"2L\",\"p_layers\":{\"2\":0.999},"
        "\"area_px\":20,\"area_um2\":0.8,\"bbox\":[10,10,14,13],\"centroid\":[12,11],"
        "\"usable_rect_px\":[11,11,2,2],\"usable_rect_um\":[0.4,0.4],\"flags\":[\"small\"]}]}",
        file, file,
        with_lead_keys ? "\"warnings\":[{\"code\":\"flatfield\",\"message\":\"strong fall-off\"}]," : "",
        with_lead_keys ? ",\"class\":\"unmodelled\",\"p_label\":0.5" : "");
    return cJSON_Parse(text);
}

/* CSV fields of one line (RFC 4180 quotes), in place. */
static int split_csv(char *line, char **f, int max)
{
    int n = 0;
    char *p = line;
    while (n < max) {
        char *o = p;
        f[n++] = o;
        if (*p == '"') {
            p++;
            for (;;) {
                if (*p == '"' && p[1] == '"')
                    *o++ = '"', p += 2;
                else if (*p == '"') {
                    p++;
                    break;
                } else if (!*p)
                    break;
                else
                    *o++ = *p++;
            }
        } else {
            while (*p && *p != ',' && *p != '\n')
                *o++ = *p++;
        }
        int end = *p != ',';
        if (*p)
            p++;
        *o = '\0';
        if (end)
            break;
    }
    return n;
}

/* Does a CSV field say what the JSON value says? */
static int same_value(const char *csv, const cJSON *v)
{
    if (cJSON_IsNull(v))
        return csv[0] == '\0';
    if (cJSON_IsNumber(v))
        return csv[0] && fabs(atof(csv) - v->valuedouble) <= 1e-9 * fmax(1, fabs(v->valuedouble));
    if (cJSON_IsString(v))
        return !strcmp(csv, v->valuestring);
    if (cJSON_IsArray(v)) {
        char joined[2048] = "";
        const cJSON *e;
        cJSON_ArrayForEach(e, v) {
            char t[1100];
            if (cJSON_IsNumber(e))
                snprintf(t, sizeof t, "%.0f", e->valuedouble);
            else
                snprintf(t, sizeof t, "%s", e->valuestring);
            size_t n = strlen(joined);
            snprintf(joined + n, sizeof joined - n, "%s%s", n ? ";" : "", t);
        }
        return !strcmp(csv, joined);
    }
    return 0;
}

static void compare_files(const char *dir)
{
    char p[1200];
    snprintf(p, sizeof p, "%s/catalog.json", dir);
    char *jt = check_slurp(p, NULL);
    cJSON *root = jt ? cJSON_Parse(jt) : NULL;
    free(jt);
    snprintf(p, sizeof p, "%s/catalog.csv", dir);
    FILE *f = fopen(p, "r");
    if (!check_true(root && f, "catalog.json and catalog.csv written")) {
        if (f)
            fclose(f);
        cJSON_Delete(root);
        return;
    }
    char line[8192], *h[64], *v[64];
    char header[8192];
    fgets(header, sizeof header, f);
    int nh = split_csv(header, h, 64);
    const cJSON *cols = cJSON_GetObjectItemCaseSensitive(root, "columns");
    int same_cols = cJSON_GetArraySize(cols) == nh;
    for (int k = 0; k < nh && same_cols; k++)
        same_cols = !strcmp(cJSON_GetArrayItem(cols, k)->valuestring, h[k]);
    check_true(same_cols, "CSV header = JSON columns");
    const cJSON *rows = cJSON_GetObjectItemCaseSensitive(root, "regions"), *r;
    int row = 0, agree = 1;
    cJSON_ArrayForEach(r, rows) {
        if (!fgets(line, sizeof line, f)) {
            agree = 0;
            break;
        }
        int nv = split_csv(line, v, 64);
        for (int k = 0; k < nh && k < nv; k++) {
            const cJSON *jv = cJSON_GetObjectItemCaseSensitive(r, h[k]);
            if (!jv || !same_value(v[k], jv)) {
                printf("test_catalog: row %d column %s: CSV '%s' vs JSON %s\n", row, h[k], v[k],
                       jv ? cJSON_PrintUnformatted(jv) : "(missing)");
                agree = 0;
            }
        }
        agree &= nv == nh;
        row++;
    }
    check_true(agree && !fgets(line, sizeof line, f), "CSV and JSON agree row for row (%d rows)", row);
    fclose(f);
    cJSON_ArrayForEach(r, rows) {
        const char *cls = cJSON_GetObjectItemCaseSensitive(r, "class")->valuestring;
        const cJSON *L = cJSON_GetObjectItemCaseSensitive(r, "layers");
        const cJSON *pr = cJSON_GetObjectItemCaseSensitive(r, "probability");
        check_true((strcmp(cls, "layers") == 0) == (cJSON_IsNumber(L) != 0), "layers given only for class "
                   "layers (%s)", cls);
        check_true(cJSON_IsNumber(pr) && pr->valuedouble >= 0 && pr->valuedouble <= 1,
                   "probability defined for %s", cls);
        check_true(cJSON_IsArray(cJSON_GetObjectItemCaseSensitive(r, "flags")), "flags a list");
    }
    const cJSON *first = cJSON_GetArrayItem(rows, 0);
    const cJSON *u = cJSON_GetObjectItemCaseSensitive(first, "usable_rect_px");
    check_true(cJSON_GetArrayItem(u, 2)->valuedouble == 120 + 50 - 1 &&
                   cJSON_GetArrayItem(u, 3)->valuedouble == 110 + 40 - 1,
               "usable rectangle x,y,w,h 120,110,50,40 -> inclusive box 120,110,169,149");
    check_abs(cJSON_GetObjectItemCaseSensitive(first, "probability")->valuedouble, 0.97, 1e-9,
              "a monolayer's probability is its posterior");
    cJSON_Delete(root);
}

static void test_catalog(void)
{
    char path[1200], dir[1100];
    snprintf(dir, sizeof dir, "%s/cat", check_tmpdir());
    snprintf(path, sizeof path, "mkdir -p %s", dir);
    if (system(path))
        return;
    snprintf(path, sizeof path, "%s/pos.csv", check_tmpdir());
    FILE *f = fopen(path, "w");
    fputs("file,x_um,y_um\nt1.png,1000,2000\nt2.png,1010,2000\n", f);
    fclose(f);
    lam_positions P;
    check_int(lam_positions_load(path, &P, NULL), LAM_OK, "positions load");
    lam_catalog c;
    lam_catalog_init(&c);
    lam_stage st = lam_stage_default();
    lam_catalog_set_stage(&c, &P, &st);
    const char *names[3] = {"t1.png", "t2.png", "t3.png"};
    for (int k = 0; k < 3; k++) {
        cJSON *a = analysis(names[k], k == 2);
        char ip[64];
        snprintf(ip, sizeof ip, "scan/%s", names[k]);
        check_int(lam_catalog_add(&c, a, ip, lam_positions_find(&P, ip), NULL), LAM_OK, "add %s", ip);
        cJSON_Delete(a);
    }
    check_int(lam_catalog_finish(&c, NULL), LAM_OK, "finish");
    check_true(strstr(c.images[2].warnings, "not in the positions file") != NULL,
               "a tile missing from the positions file is a warning naming it");
    check_true(strstr(c.images[2].warnings, "strong fall-off") != NULL, "the analysis's own warnings kept");
    /* t1 and t2 overlap by 10 um: the monolayer at chip (1000 - 64 + 30.1, ...) is seen twice */
    size_t dups = 0;
    for (size_t i = 0; i < c.count; i++)
        dups += c.entries[i].duplicate_of != 0;
    check_true(dups >= 1, "the same flake in overlapping tiles listed once (%zu merged)", dups);
    int lead = 0;
    for (size_t i = 0; i < c.count; i++)
        if (c.entries[i].image == 2 && c.entries[i].region == 4)
            lead = !strcmp(c.entries[i].class_, "unmodelled") && c.entries[i].probability == 0.5;
    check_true(lead, "the analysis's own class and p_label are used when present");
    check_int(lam_catalog_write(&c, dir, NULL), LAM_OK, "write the catalogue");
    compare_files(dir);
    snprintf(path, sizeof path, "%s/goto.csv", dir);
    char *g = check_slurp(path, NULL);
    check_true(g && !strncmp(g, "rank,image,region,label,probability,area_um2,stage_x_um,stage_y_um",
                             66), "goto.csv header in the stage's unit");
    free(g);
    lam_catalog_clear(&c);
    lam_positions_clear(&P);
}

int main(void)
{
    check_begin("test_catalog");
    test_stage();
    test_catalog();
    return check_summary();
}
