/* textfile.c - whole-file reads of small text inputs, and path folders. */
#include "lamina/textfile.h"

#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

lam_status lam_text_load(const char *path, size_t max_bytes, const char *what, char **out,
                         lam_error *err)
{
    FILE *fp = fopen(path, "rb");
    if (!fp) {
        lam_error_set(err, LAM_EIO, "cannot open %s: %s", what, strerror(errno));
        lam_error_set_file(err, path);
        return LAM_EIO;
    }
    char *buf = malloc(max_bytes + 1);
    size_t n = buf ? fread(buf, 1, max_bytes, fp) : 0;
    int too_big = buf && n == max_bytes && fgetc(fp) != EOF;
    int bad = ferror(fp);
    fclose(fp);
    lam_status st = LAM_OK;
    if (!buf)
        st = lam_error_set(err, LAM_ENOMEM, "cannot read %s", what);
    else if (bad)
        st = lam_error_set(err, LAM_EIO, "cannot read %s", what);
    else if (too_big)
        st = lam_error_set(err, LAM_ETOOBIG, "%s file larger than %zu bytes", what, max_bytes);
    if (st) {
        free(buf);
        lam_error_set_file(err, path);
        return st;
    }
    buf[n] = '\0';
    *out = buf;
    return LAM_OK;
}

void lam_path_join(char *buf, size_t n, const char *dir, const char *file)
{
    if (file[0] == '/' || !dir || !dir[0])
        snprintf(buf, n, "%s", file);
    else
        snprintf(buf, n, "%s/%s", dir, file);
}

void lam_path_dir(const char *path, char *dir, size_t n)
{
    snprintf(dir, n, "%s", path);
    char *slash = strrchr(dir, '/');
    if (slash && slash != dir)
        *slash = '\0';
    else if (slash)
        slash[1] = '\0';
    else
        snprintf(dir, n, ".");
}

/* The number of '/'-separated components of an absolute path. */
static size_t components(const char *p)
{
    size_t k = 0;
    for (; *p; p++)
        k += p[0] == '/' && p[1] && p[1] != '/';
    return k;
}

void lam_path_relative(char *buf, size_t n, const char *dir, const char *path)
{
    char *d = realpath(dir, NULL), *f = realpath(path, NULL);
    if (!d || !f) {
        snprintf(buf, n, "%s", f ? f : path);
        free(d);
        free(f);
        return;
    }
    /* the common folder: up to the last '/' before the first difference,
     * or all of dir when the file lies inside it */
    size_t common = 0;
    while (d[common] && d[common] == f[common])
        common++;
    if (d[common] || f[common] != '/')
        while (common > 0 && d[common] != '/')
            common--;
    size_t up = components(d + common), used = 0;
    buf[0] = '\0';
    for (size_t i = 0; i < up && used + 3 < n; i++)
        used += (size_t)snprintf(buf + used, n - used, "../");
    snprintf(buf + used, n - used, "%s", f + common + (f[common] == '/'));
    free(d);
    free(f);
}
