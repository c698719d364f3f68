/* cli/inputs.h - the list of images a batch command works on (files,
 * folders, list files, shards), names of outputs, and content hashes for
 * resumable runs. */
#ifndef LAMINA_CLI_INPUTS_H
#define LAMINA_CLI_INPUTS_H

#include <stddef.h>
#include "setup_opts.h"
#include "lamina/analyze.h"

struct cJSON;

typedef struct cli_inputs {
    size_t count, cap;
    char **paths;
} cli_inputs;

/* Files as given; folders expanded to their .png/.jpg/.jpeg/.tif/.tiff files
 * in name order (lamina's own result images skipped), descending into
 * subfolders when 'recursive' is set (depth first, in name order, at most
 * 16 levels). A folder that yields no image is a usage error that says
 * why (for instance "D holds no image files (3 subfolders; add
 * --recursive)"). 'list' (may be NULL) adds one path a line, relative to
 * the list's folder. Two inputs whose output names would clash are a usage
 * error. Prints problems; returns an exit code (0 on success). */
int cli_inputs_collect(cli_inputs *in, int argc, char **argv, const char *list, int recursive);

/* Keep the index-th of 'of' parts (1-based): items k with k % of == index-1. */
void cli_inputs_shard(cli_inputs *in, size_t index, size_t of);

void cli_inputs_free(cli_inputs *in);

/* Output stem of an input: its base name without the extension. */
void cli_stem_of(const char *path, char *stem, size_t n);

/* "fnv1a64:<16 hex>" of a file's bytes; 0 on success. */
int cli_hash_file(const char *path, char *out, size_t n);

/* Hash of what decides the results besides the image: the setup file's
 * bytes and the analysis options. */
void cli_setup_hash(const char *setup_file, const lam_analysis_options *opt,
                    const cli_setup_opts *so, char *out, size_t n);

/* Parse a JSON file (NULL when missing or invalid). */
struct cJSON *cli_read_json(const char *path);

#endif
