/*
 * lamina/outfile.h - atomic output files.
 *
 * Every result file is written under a temporary name in the target folder,
 * flushed, checked and closed, then renamed over the final name, so that a
 * crash, a full disk or an interrupt never leaves a half-written result.
 *
 * Usage: lam_outfile_open, write to .fp, then lam_outfile_commit (renames)
 * or lam_outfile_abort (removes the temporary file). Both release the
 * record; after either, the record must not be used again.
 */
#ifndef LAMINA_OUTFILE_H
#define LAMINA_OUTFILE_H

#include <stdio.h>
#include "lamina/error.h"

#define LAM_OUTFILE_PATH_MAX 4096

typedef struct lam_outfile {
    FILE *fp;
    char final_path[LAM_OUTFILE_PATH_MAX];
    char temp_path[LAM_OUTFILE_PATH_MAX];
    int slot;   /* where the temporary is tracked for lam_outfile_cleanup_all; -1: not */
} lam_outfile;

/* Create "PATH.tmp-PID-N" beside 'path' (mode 0644, N new for every file)
 * and open of->fp on it; a character device such as /dev/null is written
 * directly. LAM_EINVAL for a path longer than LAM_OUTFILE_PATH_MAX - 32,
 * LAM_EIO when the file cannot be created (the error names the path), or
 * once lam_outfile_cleanup_all has begun. */
lam_status lam_outfile_open(lam_outfile *of, const char *path, lam_error *err);

/* Flush, check for write errors, close and rename. On failure the
 * temporary file is removed and LAM_EIO is returned. */
lam_status lam_outfile_commit(lam_outfile *of, lam_error *err);

/* Close and remove the temporary file; nothing is written. Safe after a
 * failed lam_outfile_open. */
void lam_outfile_abort(lam_outfile *of);

/* Remove every temporary file still open, and refuse to create more
 * (for a signal handler before the process ends: it takes no lock).
 * Safe to call at any time; afterwards lam_outfile_open fails. */
void lam_outfile_cleanup_all(void);

/* Write a whole memory buffer atomically (open, write, commit); LAM_EIO
 * on any failure, with no file left behind. */
lam_status lam_outfile_write_buffer(const char *path, const void *data, size_t n,
                                    lam_error *err);

/* Create an output folder and its missing parents (mode 0755); an existing
 * folder is fine. LAM_EIO naming the path for an empty or over-long path,
 * a folder that cannot be created, or a path that is not a folder. */
lam_status lam_outfile_make_dir(const char *path, lam_error *err);

#endif
