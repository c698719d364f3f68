/*
 * tests/check.h - the test harness shared by every test program.
 *
 * Each check is numbered; a failure prints the check number, description,
 * observed and expected values (17 significant digits) and the tolerance.
 * Passes print only when LAM_TEST_VERBOSE=1. check_summary() prints
 * "N passed, N failed" and returns the exit status for main.
 * NaN and infinity compare by kind: NaN equals only NaN, inf only inf of
 * the same sign.
 */
#ifndef LAMINA_TESTS_CHECK_H
#define LAMINA_TESTS_CHECK_H

#include <stddef.h>

void check_begin(const char *program);
int check_true(int ok, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
int check_int(long long observed, long long expected, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
int check_abs(double observed, double expected, double tol, const char *fmt, ...)
    __attribute__((format(printf, 4, 5)));
int check_rel(double observed, double expected, double tol, const char *fmt, ...)
    __attribute__((format(printf, 4, 5)));
int check_str(const char *observed, const char *expected, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
int check_summary(void);

/* Path of the reference data folder: LAMINA_REFDATA, else tests/data (the
 * published n,k tables copied into the repository), or NULL when absent. */
const char *check_refdata_dir(void);

/* Build "dir/name" into buf; returns buf. */
char *check_path(char *buf, size_t n, const char *dir, const char *name);

/* A whole file, NUL-terminated (malloc'd; NULL when it cannot be read);
 * *len (may be NULL) receives its size in bytes. */
char *check_slurp(const char *path, size_t *len);

/* 1 when two files exist and hold the same bytes. */
int check_same_file(const char *a, const char *b);

/* A per-run scratch folder (created on first use; check_summary removes
 * it when every check passed and keeps it when one failed). */
const char *check_tmpdir(void);

/* Report that prerequisites are missing and exit 77 (skip). */
void check_skip(const char *why) __attribute__((noreturn));

#endif
