/*
 * cli/cli.h - the command-line front end's one header.
 *
 * The CLI is a thin layer over the library: each subcommand is described
 * as data (its options as a table, its operands), parsed by one parser
 * (options.c, with the shared physics and stage options when it takes
 * them), calls library functions, prints what they return and maps
 * statuses to exit codes; the help comes from the same description.
 * Exit codes: 0 success, 1 a file could not be processed, 2 usage error
 * (a bad option or argument, which the library reports as LAM_EINVAL).
 * Diagnostics go to stderr as "lamina: FILE: reason".
 */
#ifndef LAMINA_CLI_H
#define LAMINA_CLI_H

#include <getopt.h> /* optind: the first operand after parsing */
#include <stdio.h>
#include "lamina/catalog.h"
#include "lamina/error.h"
#include "lamina/setup.h"
#include "lamina/stage.h"

enum { CLI_OK = 0, CLI_EFILE = 1, CLI_EUSAGE = 2 };

typedef enum cli_kind {
    CLI_FLAG,       /* no argument: *(int *)target = 1 */
    CLI_UNSET,      /* no argument: *(int *)target = 0 */
    CLI_TEXT,       /* *(const char **)target = the argument */
    CLI_NUMBER,     /* *(double *)target, finite, in [lo, hi] */
    CLI_SIZE,       /* *(size_t *)target, in [lo, hi] (lo >= 0) */
    CLI_RANGE,      /* "A-B": *(double (*)[2])target, lo <= A <= B <= hi */
    CLI_ANALYSIS,   /* lam_analysis_options_set(target, name, argument) */
    CLI_STAGE,      /* lam_stage_set(target, name without "stage-", argument) */
    CLI_CALL        /* call(command, argument, target): 0, or -1 after a usage error */
} cli_kind;

typedef struct cli_option {
    const char *name;   /* long name without "--"; NULL ends a table */
    char letter;        /* a one-letter alias ('o' for -o), or 0 */
    cli_kind kind;
    void *target;
    double lo, hi;
    int (*call)(const char *command, const char *arg, void *target);
    const char *arg;    /* the argument's name in the help ("NM"); NULL for flags */
    const char *help;   /* its help line(s); NULL: not listed */
} cli_option;

#define CLI_END {NULL, 0, 0, NULL, 0, 0, NULL, NULL, NULL}

/* A subcommand: what it is called, how it runs, and its options and
 * operands as data, so that one parser and one help serve every command
 * and the help cannot disagree with the parser. A command keeps the
 * values its options set in variables of its own file, which the
 * table's targets point to. */
typedef struct cli_command {
    const char *name;
    const char *summary;        /* one line of the overview */
    int (*run)(int argc, char **argv);
    const char *usage;          /* help: "Usage: ..." and what the command does */
    const cli_option *options;  /* its own options (ends with CLI_END) */
    lam_setup_overrides *setup; /* takes --setup, --oxide, ... (CLI_SETUP_HELP) when set */
    lam_stage *stage;           /* takes --stage-axes, ... (CLI_STAGE_HELP) when set */
    int *stage_given;           /* set when a stage option was given; may be NULL */
    int min_args, max_args;     /* operands allowed; max_args < 0: no limit */
    const char *args_error;     /* the usage error for too few or too many operands
                                 * (NULL with max_args 0: "unexpected argument") */
    const char *footer;         /* help: printed after the options; may be NULL */
} cli_command;

/* Parse argv[1..] (argv[0] is the command's name; getopt_long, operands
 * stay where getopt puts them, optind is the first) and check the operand
 * count; c->setup starts as lam_setup_overrides_init leaves it. Returns
 * CLI_OK or CLI_EUSAGE after printing why. */
int cli_options_parse(const cli_command *c, int argc, char **argv);

/* The command's help: usage, the shared options it takes and its table
 * ("  --name ARG   help" aligned at column 24), then the footer. */
void cli_help(FILE *out, const cli_command *c);

/* Rows of a table for the commands that analyse images (analyze, watch):
 * the analysis options O (a lam_analysis_options). */
#define CLI_ANALYSIS_OPTIONS(O)                                                                  \
    {"max-layers", 0, CLI_SIZE, &(O).max_layers, 1, 20, NULL, "K",                               \
     "layer counts modelled (default 6; thicker = \"thick\")"},                                  \
    {"min-area", 0, CLI_ANALYSIS, &(O), 0, 0, NULL, "A",                                         \
     "regions below A um^2 (or px without a pixel size) are 'small'"},                          \
    {"substrate-roi", 0, CLI_ANALYSIS, &(O), 0, 0, NULL, "X,Y,W,H",                              \
     "where the bare substrate is, if not found automatically"},                                \
    {"oxide-tolerance", 0, CLI_NUMBER, &(O).oxide_tolerance_nm, 0, 500, NULL, "NM",              \
     "pass/fail of the oxide check (default 10)"},                                              \
    {"no-oxide-fit", 0, CLI_UNSET, &(O).fit_oxide, 0, 0, NULL, NULL, "keep the nominal oxide"}, \
    {"encoding", 0, CLI_ANALYSIS, &(O), 0, 0, NULL, "E",                                         \
     "srgb, linear or a gamma value (default: from the file)"},                                 \
    {"max-megapixels", 0, CLI_ANALYSIS, &(O), 0, 0, NULL, "MP",                                  \
     "refuse larger images"},                                                                    \
    {"annotated-format", 0, CLI_ANALYSIS, &(O), 0, 0, NULL, "F",                                 \
     "auto (a JPEG input's picture a JPEG, others PNG), png or jpeg"}

/* The help of the shared options (their table is in options.c). */
#define CLI_SETUP_HELP                                                                     \
    "  --setup FILE          setup profile (lamina-setup/1)\n"                             \
    "  --oxide NM, --na X, --fermi EV, --um-per-px X, --material NAME\n"                   \
    "                        override the setup's nominal SiO2 thickness, illumination\n" \
    "                        NA, Fermi level, pixel size and flake material (graphene,\n"   \
    "                        hBN, MoS2, WS2, WSe2; a source after a slash: MoS2/Song)\n"    \
    "  --stack FILE          substrate {\"stack\": [...], \"base\": ...}\n"

#define CLI_STAGE_HELP                                                                       \
    "  --stage-axes X,Y      where stage readings grow in the image: right|left,down|up\n"  \
    "                        (default right,down)\n"                                        \
    "  --stage-units U       um or mm for goto.csv and --stage-origin (default: as in the\n" \
    "                        positions file's header)\n"                                     \
    "  --stage-rotation DEG  turn the pictures DEG counter-clockwise onto the stage axes\n"  \
    "  --stage-origin X,Y|TILE:PX,PY  chip (0,0): a stage reading, or a pixel of a tile\n"

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

/* All threads allocate from one malloc arena (glibc; elsewhere nothing),
 * for a run of one image: glibc gives each thread an arena of its own,
 * whose pages are fresh although the main thread has just freed the
 * analysis' buffers, and the annotated picture's encoder on its thread
 * raised a 12 MP image's peak by ~14 MB (189 -> 175 MB). Not for a batch,
 * whose images run side by side: sharing one arena's lock slowed its two
 * threads from 4.5 to 6.0 s (bench/bench_batch.sh). Call before any
 * thread starts. */
void cli_one_malloc_arena(void);

/* Parse a finite number in [lo, hi]; 0 on success, else prints a usage
 * error naming the option and returns -1. */
int cli_parse_double(const char *command, const char *option, const char *text,
                     double lo, double hi, double *out);
int cli_parse_long(const char *command, const char *option, const char *text, long lo,
                   long hi, long *out);

/* lam_setup_build, its errors printed: a refused option value as a usage
 * error of 'command'. Returns the exit code (0: *s is the caller's). */
int cli_setup_build(const char *command, const lam_setup_overrides *o, lam_setup *s);

/* A usage error when positions are given without a pixel size (the setup's
 * um_per_px or --um-per-px); 0 otherwise. */
int cli_positions_need_scale(const char *command, const char *positions, const lam_setup *s);

/* After a catalogue's outputs were written (status st, err): its
 * warnings for images printed, an error reported, the catalogue cleared.
 * Returns the exit code. */
int cli_catalog_done(lam_catalog *cat, lam_status st, const lam_error *err);

extern int cli_quiet, cli_verbose;

#endif
