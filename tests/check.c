/* check.c - numbered checks with observed/expected reporting. */
#define _XOPEN_SOURCE 700 /* nftw */
#include "check.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <ftw.h>
#include <sys/stat.h>
#include <unistd.h>

static int n_pass, n_fail, n_check;
static int verbose;
static const char *prog = "test";

void check_begin(const char *program)
{
    prog = program;
    const char *v = getenv("LAM_TEST_VERBOSE");
    verbose = v && *v == '1';
}

static int report(int ok, const char *detail, const char *fmt, va_list ap)
{
    n_check++;
    if (ok)
        n_pass++;
    else
        n_fail++;
    if (!ok || verbose) {
        printf("%s #%d %s: ", prog, n_check, ok ? "PASS" : "FAIL");
        vprintf(fmt, ap);
        if (detail && *detail)
            printf(" (%s)", detail);
        putchar('\n');
    }
    return ok;
}

int check_true(int ok, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    report(ok, NULL, fmt, ap);
    va_end(ap);
    return ok;
}

int check_int(long long observed, long long expected, const char *fmt, ...)
{
    char d[160];
    snprintf(d, sizeof d, "observed %lld, expected %lld", observed, expected);
    int ok = observed == expected;
    va_list ap;
    va_start(ap, fmt);
    report(ok, d, fmt, ap);
    va_end(ap);
    return ok;
}

static int same_kind(double a, double b, int *decided)
{
    *decided = 1;
    if (isnan(a) || isnan(b))
        return isnan(a) && isnan(b);
    if (isinf(a) || isinf(b))
        return a == b;
    *decided = 0;
    return 0;
}

int check_abs(double observed, double expected, double tol, const char *fmt, ...)
{
    int decided, ok = same_kind(observed, expected, &decided);
    if (!decided)
        ok = fabs(observed - expected) <= tol;
    char d[200];
    snprintf(d, sizeof d, "observed %.17g, expected %.17g, |diff| %.3g, tol %.3g", observed,
             expected, fabs(observed - expected), tol);
    va_list ap;
    va_start(ap, fmt);
    report(ok, d, fmt, ap);
    va_end(ap);
    return ok;
}

int check_rel(double observed, double expected, double tol, const char *fmt, ...)
{
    int decided, ok = same_kind(observed, expected, &decided);
    double rel = expected != 0 ? fabs(observed / expected - 1.0) : fabs(observed);
    if (!decided)
        ok = rel <= tol;
    char d[200];
    snprintf(d, sizeof d, "observed %.17g, expected %.17g, rel %.3g, tol %.3g", observed,
             expected, rel, tol);
    va_list ap;
    va_start(ap, fmt);
    report(ok, d, fmt, ap);
    va_end(ap);
    return ok;
}

int check_str(const char *observed, const char *expected, const char *fmt, ...)
{
    int ok = observed && expected && !strcmp(observed, expected);
    char d[300];
    snprintf(d, sizeof d, "observed \"%.120s\", expected \"%.120s\"",
             observed ? observed : "(null)", expected ? expected : "(null)");
    va_list ap;
    va_start(ap, fmt);
    report(ok, d, fmt, ap);
    va_end(ap);
    return ok;
}

static char tmpdir[256]; /* "" until check_tmpdir makes it */

static int remove_entry(const char *path, const struct stat *sb, int flag, struct FTW *f)
{
    (void)sb, (void)flag, (void)f;
    return remove(path);
}

/* The scratch folder goes when every check passed, and stays to be looked
 * at when one failed (each run would otherwise leave its files behind). */
int check_summary(void)
{
    printf("%s: %d passed, %d failed\n", prog, n_pass, n_fail);
    if (tmpdir[0] && !n_fail)
        nftw(tmpdir, remove_entry, 16, FTW_DEPTH | FTW_PHYS);
    else if (tmpdir[0])
        printf("%s: scratch files kept in %s\n", prog, tmpdir);
    return n_fail ? 1 : 0;
}

const char *check_refdata_dir(void)
{
    static char buf[1024];
    /* the published tables copied into the repository (tests/data/nk,
     * sources in tests/data/nk/README.md); LAMINA_REFDATA may point elsewhere */
    const char *env = getenv("LAMINA_REFDATA");
    const char *cands[] = {env, "tests/data"};
    for (size_t i = 0; i < sizeof cands / sizeof cands[0]; i++) {
        struct stat sb;
        if (cands[i] && stat(cands[i], &sb) == 0 && S_ISDIR(sb.st_mode)) {
            snprintf(buf, sizeof buf, "%s", cands[i]);
            return buf;
        }
    }
    return NULL;
}

char *check_path(char *buf, size_t n, const char *dir, const char *name)
{
    snprintf(buf, n, "%s/%s", dir, name);
    return buf;
}

const char *check_tmpdir(void)
{
    if (!tmpdir[0]) {
        snprintf(tmpdir, sizeof tmpdir, "build/tests/tmp-%s-%ld", prog, (long)getpid());
        mkdir("build", 0755);
        mkdir("build/tests", 0755);
        mkdir(tmpdir, 0755);
    }
    return tmpdir;
}

void check_skip(const char *why)
{
    printf("%s: skipped: %s\n", prog, why);
    exit(77);
}

char *check_slurp(const char *path, size_t *len)
{
    FILE *fp = fopen(path, "rb");
    if (!fp)
        return NULL;
    fseek(fp, 0, SEEK_END);
    long n = ftell(fp);
    rewind(fp);
    char *b = n >= 0 ? malloc((size_t)n + 1) : NULL;
    size_t got = b ? fread(b, 1, (size_t)n, fp) : 0;
    if (b)
        b[got] = '\0';
    if (len)
        *len = got;
    fclose(fp);
    return b;
}

int check_same_file(const char *a, const char *b)
{
    size_t na = 0, nb = 0;
    char *x = check_slurp(a, &na), *y = check_slurp(b, &nb);
    int same = x && y && na == nb && !memcmp(x, y, na);
    free(x);
    free(y);
    return same;
}
