/*
 * cli/cli.h - shared pieces of the command-line front end.
 *
 * The CLI is a thin layer over the library: each subcommand parses its
 * options, calls library functions and maps statuses to exit codes.
 * Exit codes: 0 success, 1 a file could not be processed, 2 usage error
 * (a bad option or argument, which the library reports as LAM_EINVAL).
 * Diagnostics go to stderr as "lamina: FILE: reason".
 */
#ifndef LAMINA_CLI_H
#define LAMINA_CLI_H

#include <stdio.h>
#include "lamina/catalog.h"
#include "lamina/error.h"
#include "lamina/setup.h"

enum { CLI_OK = 0, CLI_EFILE = 1, CLI_EUSAGE = 2 };

typedef struct cli_command {
    const char *name;
    const char *summary;
    int (*run)(int argc, char **argv);
    void (*help)(FILE *out);
} cli_command;

extern const cli_command cli_analyze, cli_predict, cli_inspect, cli_map, cli_plan, cli_render,
    cli_oxide, cli_catalog, cli_calibrate, cli_watch;

/* Print "lamina: <msg>" for a usage problem with a hint; returns 2. */
int cli_usage_error(const char *command, const char *fmt, ...)
    __attribute__((format(printf, 2, 3)));

/* The exit code of a library status: 0 for LAM_OK, 2 for LAM_EINVAL (an
 * argument or option value is invalid), 1 for every other failure. */
int cli_exit_code(lam_status status);

/* Print a library error as "lamina: FILE: message"; returns
 * cli_exit_code(err->status). */
int cli_report(const lam_error *err, const char *fallback_file);

/* Parse a finite number in [lo, hi]; 0 on success, else prints a usage
 * error naming the option and returns -1. */
int cli_parse_double(const char *command, const char *option, const char *text,
                     double lo, double hi, double *out);
int cli_parse_long(const char *command, const char *option, const char *text, long lo,
                   long hi, long *out);

/* Create a folder (and parents) for outputs; returns 0 or prints and -1. */
int cli_make_dir(const char *path);

/* lam_setup_build, its errors printed: a refused option value as a usage
 * error of 'command'. Returns the exit code (0: *s is the caller's). */
int cli_setup_build(const char *command, const lam_setup_overrides *o, lam_setup *s);

/* A usage error when positions are given without a pixel size (the setup's
 * um_per_px or --um-per-px); 0 otherwise. */
int cli_positions_need_scale(const char *command, const char *positions, const lam_setup *s);

/* lam_run_outputs_write (catalogue, goto.csv, crops, report.html into
 * out_dir), the catalogue's warnings printed; returns the exit code. */
int cli_run_outputs(lam_catalog *cat, const char *out_dir);

extern int cli_quiet, cli_verbose;

#endif
