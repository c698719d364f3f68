/*
 * lamina/textfile.h - reading small text inputs (JSON profiles, scenes)
 * whole, with a size limit, and the folder that relative paths inside them
 * are resolved against.
 *
 * lam_text_load returns a NUL-terminated malloc'd buffer the caller frees.
 */
#ifndef LAMINA_TEXTFILE_H
#define LAMINA_TEXTFILE_H

#include <stddef.h>
#include "lamina/error.h"

/* Read all of 'path' (at most max_bytes). 'what' names the kind of file in
 * messages ("setup", "scene"). LAM_EIO, LAM_ETOOBIG or LAM_ENOMEM; the
 * error record names the file. */
lam_status lam_text_load(const char *path, size_t max_bytes, const char *what, char **out,
                         lam_error *err);

/* The folder part of a path ("." when there is none). */
void lam_path_dir(const char *path, char *dir, size_t n);

/* A file named in another file, relative to that file's folder dir: an
 * absolute name (or an empty dir) is taken as it is. */
void lam_path_join(char *buf, size_t n, const char *dir, const char *file);

/* The inverse: how a file written into another file in folder dir names
 * the existing file 'path', so that lam_path_join(dir, ...) finds it again
 * from any working folder ("../tables/camera.csv"). Both are resolved
 * first (symbolic links, "."); when either cannot be, path is written
 * absolute if it exists, else as given. */
void lam_path_relative(char *buf, size_t n, const char *dir, const char *path);

#endif
