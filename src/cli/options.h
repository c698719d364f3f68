/* cli/options.h - a command's options as a table: one line per option says
 * its name, what it takes, where the value goes and its help line; one
 * parser for every command (with the shared physics and stage options
 * when the command takes them), the check of the operand count, and the
 * help listing from the same table. */
#ifndef LAMINA_CLI_OPTIONS_H
#define LAMINA_CLI_OPTIONS_H

#include <getopt.h> /* optind: the first operand after parsing */
#include <stdio.h>
#include "lamina/setup.h"
#include "lamina/stage.h"

typedef enum cli_kind {
    CLI_FLAG,       /* no argument: *(int *)target = 1 */
    CLI_UNSET,      /* no argument: *(int *)target = 0 */
    CLI_TEXT,       /* *(const char **)target = the argument */
    CLI_NUMBER,     /* *(double *)target, finite, in [lo, hi] */
    CLI_INTEGER,    /* *(long *)target, in [lo, hi] */
    CLI_SIZE,       /* *(size_t *)target, in [lo, hi] (lo >= 0) */
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

typedef struct cli_command_options {
    const char *command;
    const cli_option *own;
    lam_setup_overrides *setup; /* --setup, --oxide, ... (CLI_SETUP_HELP) when not NULL */
    lam_stage *stage;           /* --stage-axes, ... (CLI_STAGE_HELP) when not NULL */
    int *stage_given;           /* set when a stage option was given; may be NULL */
    int min_args, max_args;     /* operands allowed; max_args < 0: no limit */
    const char *args_error;     /* the usage error for too few or too many operands
                                 * (NULL with max_args 0: "unexpected argument") */
} cli_command_options;

/* Parse argv[first..] (getopt_long; operands stay where getopt puts them,
 * optind is the first) and check the operand count. Returns CLI_OK or
 * CLI_EUSAGE after printing why. */
int cli_options_parse(const cli_command_options *o, int argc, char **argv, int first);

/* The table's help lines: "  --name ARG   help" aligned at column 24. */
void cli_options_help(FILE *out, const cli_option *own);

/* CLI_CALL parsers shared by several commands: --encoding (target a
 * lam_transfer), --max-megapixels (target a size_t of pixels), --min-area
 * (target a lam_analysis_options: both area limits). */
int cli_parse_encoding(const char *command, const char *arg, void *target);
int cli_parse_megapixels(const char *command, const char *arg, void *target);
int cli_parse_min_area(const char *command, const char *arg, void *target);

/* The help of the shared options (their table is in options.c). */
#define CLI_SETUP_HELP                                                                     \
    "  --setup FILE          setup profile (lamina-setup/1)\n"                             \
    "  --oxide NM, --na X, --fermi EV, --um-per-px X, --material NAME\n"                   \
    "                        override the setup's nominal SiO2 thickness, illumination\n" \
    "                        NA, Fermi level, pixel size and flake material\n"             \
    "  --stack FILE          substrate {\"stack\": [...], \"base\": ...}\n"

#define CLI_STAGE_HELP                                                                       \
    "  --stage-axes X,Y      where stage readings grow in the image: right|left,down|up\n"  \
    "                        (default right,down)\n"                                        \
    "  --stage-units U       um or mm for goto.csv and --stage-origin (default: as in the\n" \
    "                        positions file's header)\n"                                     \
    "  --stage-rotation DEG  turn the pictures DEG counter-clockwise onto the stage axes\n"  \
    "  --stage-origin X,Y|TILE:PX,PY  chip (0,0): a stage reading, or a pixel of a tile\n"

#endif
