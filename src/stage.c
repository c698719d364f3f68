/* stage.c - positions files and the stage's coordinate convention (axis
 * directions, units, rotation, origin): see lamina/stage.h. */
#include "lamina/stage.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

void lam_positions_clear(lam_positions *p)
{
    if (!p)
        return;
    free(p->items);
    p->items = NULL;
    p->count = 0;
}

static const char *base_name(const char *path)
{
    const char *b = strrchr(path, '/');
    return b ? b + 1 : path;
}

/* The header names the unit: file,x_um,y_um or file,x_mm,y_mm. */
static lam_status parse_header(const char *line, double *unit, int *has_rot, lam_error *err)
{
    if (!strncasecmp(line, "file,x_um,y_um", 14))
        *unit = 1;
    else if (!strncasecmp(line, "file,x_mm,y_mm", 14))
        *unit = 1000;
    else
        return lam_error_set(err, LAM_EFORMAT, "line 1: expected the header "
                                               "file,x_um,y_um[,rotation_deg] (or x_mm,y_mm)");
    *has_rot = strstr(line, "rotation_deg") != NULL;
    return LAM_OK;
}

static lam_status parse_row(char *line, size_t lineno, int has_rot, double unit, lam_position *q,
                            lam_error *err)
{
    memset(q, 0, sizeof *q);
    char *comma = strchr(line, ',');
    if (!comma || comma == line || comma - line >= (long)sizeof q->file)
        return lam_error_set(err, LAM_EFORMAT, "line %zu: expected file,x,y", lineno);
    memcpy(q->file, line, (size_t)(comma - line));
    char *s = comma + 1, *end;
    double v[3] = {0, 0, 0};
    int need = has_rot ? 3 : 2;
    for (int i = 0; i < need; i++) {
        errno = 0;
        v[i] = strtod(s, &end);
        if (end == s || errno || !isfinite(v[i]) || (i + 1 < need && *end != ','))
            return lam_error_set(err, LAM_EFORMAT, "line %zu: column %d is not a number", lineno,
                                 i + 2);
        s = end + 1;
    }
    q->x_um = v[0] * unit, q->y_um = v[1] * unit, q->rotation_deg = v[2];
    return LAM_OK;
}

lam_status lam_positions_load(const char *path, lam_positions *out, lam_error *err)
{
    FILE *fp = fopen(path, "r");
    if (!fp) {
        lam_error_set(err, LAM_EIO, "cannot open positions: %s", strerror(errno));
        lam_error_set_file(err, path);
        return LAM_EIO;
    }
    lam_positions p;
    memset(&p, 0, sizeof p);
    snprintf(p.path, sizeof p.path, "%s", path);
    size_t cap = 0, lineno = 0;
    int has_rot = 0, header = 0;
    char line[2048];
    lam_status st = LAM_OK;
    while (!st && fgets(line, sizeof line, fp)) {
        lineno++;
        line[strcspn(line, "\r\n")] = '\0';
        if (!line[0] || line[0] == '#')
            continue;
        if (!header) {
            header = 1;
            st = parse_header(line, &p.unit_um, &has_rot, err);
            continue;
        }
        if (p.count == cap) {
            cap = cap ? 2 * cap : 64;
            lam_position *n = cap <= 1000000 ? realloc(p.items, cap * sizeof *n) : NULL;
            if (!n) {
                st = lam_error_set(err, cap > 1000000 ? LAM_ETOOBIG : LAM_ENOMEM,
                                   "cannot hold more than %zu positions", p.count);
                break;
            }
            p.items = n;
        }
        if (!(st = parse_row(line, lineno, has_rot, p.unit_um, &p.items[p.count], err)))
            p.count++;
    }
    fclose(fp);
    if (!st && !header)
        st = lam_error_set(err, LAM_EFORMAT, "empty: expected the header file,x_um,y_um");
    if (st) {
        lam_positions_clear(&p);
        lam_error_set_file(err, path);
        return st;
    }
    *out = p;
    return LAM_OK;
}

const lam_position *lam_positions_find(const lam_positions *p, const char *image_path)
{
    if (!p)
        return NULL;
    const char *b = base_name(image_path);
    for (size_t i = 0; i < p->count; i++)
        if (!strcmp(base_name(p->items[i].file), b))
            return &p->items[i];
    return NULL;
}

lam_stage lam_stage_default(void)
{
    lam_stage s;
    memset(&s, 0, sizeof s);
    s.x_sign = s.y_sign = 1;
    return s;
}

static int parse_pair(const char *t, double v[2])
{
    char *end;
    errno = 0;
    v[0] = strtod(t, &end);
    if (end == t || *end != ',' || errno || !isfinite(v[0]))
        return -1;
    const char *u = end + 1;
    v[1] = strtod(u, &end);
    return end == u || *end || errno || !isfinite(v[1]) ? -1 : 0;
}

static lam_status set_origin(lam_stage *s, const char *v, lam_error *err)
{
    snprintf(s->origin_text, sizeof s->origin_text, "%s", v);
    const char *colon = strrchr(v, ':');
    if (colon) {
        size_t n = (size_t)(colon - v);
        if (!n || n >= sizeof s->origin_tile || parse_pair(colon + 1, s->origin) ||
            s->origin[0] < 0 || s->origin[1] < 0)
            return lam_error_set(err, LAM_EINVAL, "stage origin '%s': expected X,Y (a stage "
                                                  "reading) or TILE:PX,PY (a pixel of a tile)", v);
        memcpy(s->origin_tile, v, n);
        s->origin_tile[n] = '\0';
        s->origin_kind = 2;
        return LAM_OK;
    }
    if (parse_pair(v, s->origin))
        return lam_error_set(err, LAM_EINVAL, "stage origin '%s': expected X,Y (a stage reading) "
                                              "or TILE:PX,PY (a pixel of a tile)", v);
    s->origin_kind = 1;
    return LAM_OK;
}

lam_status lam_stage_set(lam_stage *s, const char *key, const char *v, lam_error *err)
{
    if (!strcmp(key, "axes")) {
        char a[16], b[16], tail;
        if (sscanf(v, "%15[a-z],%15[a-z]%c", a, b, &tail) == 2 &&
            (!strcmp(a, "right") || !strcmp(a, "left")) &&
            (!strcmp(b, "down") || !strcmp(b, "up"))) {
            s->x_sign = !strcmp(a, "right") ? 1 : -1;
            s->y_sign = !strcmp(b, "down") ? 1 : -1;
            return LAM_OK;
        }
        return lam_error_set(err, LAM_EINVAL, "stage axes '%s': expected right|left,down|up "
                                              "(where the readings grow in the image)", v);
    }
    if (!strcmp(key, "units")) {
        if (!strcmp(v, "um") || !strcmp(v, "mm")) {
            s->unit_um = v[0] == 'u' ? 1 : 1000;
            return LAM_OK;
        }
        return lam_error_set(err, LAM_EINVAL, "stage units '%s': expected um or mm", v);
    }
    if (!strcmp(key, "rotation")) {
        char *end;
        errno = 0;
        double r = strtod(v, &end);
        if (end == v || *end || errno || !isfinite(r) || fabs(r) > 360)
            return lam_error_set(err, LAM_EINVAL, "stage rotation '%s': expected degrees "
                                                  "between -360 and 360", v);
        s->rotation_deg = r;
        return LAM_OK;
    }
    if (!strcmp(key, "origin"))
        return set_origin(s, v, err);
    return lam_error_set(err, LAM_EINVAL, "unknown stage key '%s'", key);
}

double lam_stage_unit_um(const lam_stage *s, const lam_positions *p)
{
    return s->unit_um > 0 ? s->unit_um : p && p->unit_um > 0 ? p->unit_um : 1;
}

const char *lam_stage_unit_name(const lam_stage *s, const lam_positions *p)
{
    return lam_stage_unit_um(s, p) == 1000 ? "mm" : "um";
}

void lam_stage_reading(const lam_stage *s, const lam_position *pos, double w, double h,
                       double u, double px, double py, double out[2])
{
    double dx = (px + 0.5 - w / 2) * u, dy = (py + 0.5 - h / 2) * u;
    double t = (s->rotation_deg + pos->rotation_deg) * M_PI / 180, c = cos(t), sn = sin(t);
    /* counter-clockwise as seen on screen, where y points down */
    double rx = c * dx + sn * dy, ry = -sn * dx + c * dy;
    out[0] = pos->x_um + s->x_sign * rx;
    out[1] = pos->y_um + s->y_sign * ry;
}

lam_status lam_stage_resolve(lam_stage *s, const lam_positions *p, double w, double h,
                             double u, lam_error *err)
{
    s->resolved = 1;
    s->origin_um[0] = s->origin_um[1] = 0;
    if (s->origin_kind == 1) {
        double unit = lam_stage_unit_um(s, p);
        s->origin_um[0] = s->origin[0] * unit, s->origin_um[1] = s->origin[1] * unit;
    } else if (s->origin_kind == 2) {
        const lam_position *pos = lam_positions_find(p, s->origin_tile);
        if (!pos) {
            s->resolved = 0;
            return lam_error_set(err, LAM_EINVAL, "stage origin: tile %s is not in the "
                                                  "positions file", s->origin_tile);
        }
        lam_stage_reading(s, pos, w, h, u, s->origin[0], s->origin[1], s->origin_um);
    }
    return LAM_OK;
}

void lam_stage_chip(const lam_stage *s, const double reading[2], double chip[2])
{
    chip[0] = reading[0] - s->origin_um[0];
    chip[1] = reading[1] - s->origin_um[1];
}
