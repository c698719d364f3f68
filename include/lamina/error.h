/*
 * lamina/error.h - status codes and the error record.
 *
 * Every fallible lamina function returns a lam_status (LAM_OK = 0) and, on
 * failure, fills the caller's lam_error record (which may be NULL) with a
 * message written once, where the problem was detected. Callers that get a
 * non-zero status pass it on unchanged and add nothing; only the command
 * line prints, as "lamina: FILE: message".
 *
 * The record is caller-owned storage (no allocation), so it is safe to use
 * one record per thread.
 */
#ifndef LAMINA_ERROR_H
#define LAMINA_ERROR_H

#include <stddef.h>

typedef enum lam_status {
    LAM_OK = 0,
    LAM_EINVAL,     /* an argument or option value is invalid */
    LAM_ENOMEM,     /* memory could not be allocated */
    LAM_EIO,        /* a file could not be opened, read or written */
    LAM_EFORMAT,    /* a file is corrupt, truncated or of an unsupported kind */
    LAM_ETOOBIG,    /* an image or table exceeds a configured limit */
    LAM_ESIZE,      /* sizes of two inputs do not match */
    LAM_ERANGE,     /* a value lies outside its physical or modelled range */
    LAM_ENOCONV,    /* an iterative fit did not converge */
    LAM_EGSL,       /* GSL reported a numerical failure */
    LAM_EINTERNAL   /* an internal invariant was broken (a bug) */
} lam_status;

#define LAM_ERROR_MSG_MAX 512
#define LAM_ERROR_FILE_MAX 256

typedef struct lam_error {
    lam_status status;
    int sys_errno;                    /* errno at detection, or 0 */
    char file[LAM_ERROR_FILE_MAX];    /* file concerned, or "" */
    char message[LAM_ERROR_MSG_MAX];  /* one line, no trailing newline */
} lam_error;

/* Short fixed phrase for a status ("out of memory"). Never NULL. */
const char *lam_strerror(lam_status status);

/* Reset a record to LAM_OK with empty texts. err may be NULL. */
void lam_error_clear(lam_error *err);

/* Fill err (may be NULL) with status and a printf-style message; returns
 * status so that a failing line reads "return lam_error_set(err, ...)". */
lam_status lam_error_set(lam_error *err, lam_status status, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

/* Put a printf-style prefix in front of the message already in err (may be
 * NULL) and set its status; returns status. The old message is copied
 * before it is rewritten, so callers that add context to a failure from a
 * lower level ("key setup: ...", "flakes[2]: ...") never pass err->message
 * back into lam_error_set, whose source and destination would overlap. */
lam_status lam_error_prefix(lam_error *err, lam_status status, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

/* Record the file a failure concerns, unless one is already recorded. */
void lam_error_set_file(lam_error *err, const char *file);

/* The first failure of n items done apart (on several threads, each into
 * st[i] and errs[i]), in item order: its status, its error copied to err
 * (err may be NULL); LAM_OK when every item succeeded. */
lam_status lam_error_first(const lam_status *st, const lam_error *errs, size_t n,
                           lam_error *err);

/* Checks of a value against its allowed set. Each returns LAM_OK, or
 * LAM_ERANGE with a message that starts with 'name' (e.g. "key fermi_eV",
 * "--oxide", "oxide thickness"), so a message is written once, where the
 * value is checked:
 *   lam_check_finite    "NAME: expected a finite number"
 *   lam_check_positive  "NAME: V is not a positive number" (0, NaN, inf)
 *   lam_check_range     "NAME: V is outside LO to HI" (lo <= v <= hi; NaN
 *                       fails) */
lam_status lam_check_finite(lam_error *err, const char *name, double v);
lam_status lam_check_positive(lam_error *err, const char *name, double v);
lam_status lam_check_range(lam_error *err, const char *name, double v, double lo, double hi);

/* Read a value from a whole text (an option's argument, a field): a
 * finite number (strtod) or a whole number (strtol, base 10), checked
 * against [lo, hi]. LAM_ERANGE with "NAME: 'TEXT' is not a number" ("...
 * not a whole number") or "NAME: V is outside LO to HI". *out is set only
 * on success. */
lam_status lam_parse_number(lam_error *err, const char *name, const char *text, double lo,
                            double hi, double *out);
lam_status lam_parse_integer(lam_error *err, const char *name, const char *text, long lo,
                             long hi, long *out);

/* Numbers separated by sep ("0.333,10,30" with ','), each read as
 * lam_parse_number; at most max of them into out, their count in *count
 * (LAM_ERANGE naming NAME for none, too many or a bad one). */
lam_status lam_parse_numbers(lam_error *err, const char *name, const char *text, char sep,
                             double lo, double hi, double *out, size_t max, size_t *count);

/* A range "A-B" with lo <= A <= B <= hi into out[0], out[1] (both
 * positive: the dash separates, it is no sign). LAM_ERANGE "NAME:
 * expected A-B ..." otherwise. */
lam_status lam_parse_range(lam_error *err, const char *name, const char *text, double lo,
                           double hi, double out[2]);

/* Turn off GSL's aborting error handler; call once at program start. */
void lam_error_init_gsl(void);

/* Map a GSL status to LAM_EGSL with GSL's text and a context phrase. */
lam_status lam_error_gsl(lam_error *err, int gsl_status, const char *context);

#endif
