/* test_crashers.c - replay every input the fuzzers ever found troublesome
 * (every file in tests/crashers/<target>/) and the seed corpora (tests/fuzz/corpus/):
 * each must return a status without a crash (run under ASan by make asan). */
#include "check.h"
#include "fuzz/targets.h"

#include <dirent.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <gsl/gsl_errno.h>

static size_t replay_dir(const char *dir, int (*fn)(const uint8_t *, size_t))
{
    DIR *d = opendir(dir);
    if (!d)
        return 0;
    size_t count = 0;
    struct dirent *e;
    while ((e = readdir(d))) {
        if (e->d_name[0] == '.')
            continue;
        char path[1024];
        snprintf(path, sizeof path, "%s/%s", dir, e->d_name);
        FILE *fp = fopen(path, "rb");
        if (!fp)
            continue;
        uint8_t *buf = malloc(1 << 22);
        size_t n = buf ? fread(buf, 1, 1 << 22, fp) : 0;
        fclose(fp);
        if (buf)
            fn(buf, n);
        free(buf);
        count++;
    }
    closedir(d);
    return count;
}

int main(void)
{
    check_begin("test_crashers");
    gsl_set_error_handler_off();
    static const struct { const char *name; int (*fn)(const uint8_t *, size_t); } t[] = {
        {"image", fuzz_image}, {"tiff", fuzz_tiff}, {"setup", fuzz_setup},
        {"scene", fuzz_scene}, {"csv", fuzz_csv}, {"labels", fuzz_labels},
        {"deflate", fuzz_deflate}};
    for (size_t i = 0; i < sizeof t / sizeof t[0]; i++) {
        char dir[256];
        snprintf(dir, sizeof dir, "tests/crashers/%s", t[i].name);
        size_t a = replay_dir(dir, t[i].fn);
        snprintf(dir, sizeof dir, "tests/fuzz/corpus/%s", t[i].name);
        size_t b = replay_dir(dir, t[i].fn);
        check_true(b > 0, "%s: replayed %zu crasher(s) and %zu seed(s) without a crash", t[i].name,
                   a, b);
    }
    return check_summary();
}
