/* cli/options.h - a command's options as a table: one line per option says
 * its name, what it takes, where the value goes and its help line; one
 * parser for every command (with the shared physics and stage options
 * when the command takes them) and the help listing from the same table. */
#ifndef LAMINA_CLI_OPTIONS_H
#define LAMINA_CLI_OPTIONS_H

#include <getopt.h> /* optind: the first operand after parsing */
#include <stdio.h>
#include "setup_opts.h"
#include "lamina/stage.h"

typedef enum cli_kind {
    CLI_FLAG,       /* no argument: *(int *)target = 1 */
    CLI_UNSET,      /* no argument: *(int *)target = 0 */
    CLI_TEXT,       /* *(const char **)target = the argument */
    CLI_NUMBER,     /* *(double *)target, finite, in [lo, hi] */
    CLI_INTEGER,    /* *(long *)target, in [lo, hi] */
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

typedef struct cli_command_options {
    const char *command;
    const cli_option *own;
    cli_setup_opts *setup;  /* --setup, --oxide, ... when not NULL */
    lam_stage *stage;       /* --stage-axes, ... when not NULL */
    int *stage_given;       /* set when a stage option was given; may be NULL */
} cli_command_options;

/* Parse argv[first..] (getopt_long; operands stay where getopt puts them,
 * optind is the first). Returns CLI_OK or CLI_EUSAGE after printing why. */
int cli_options_parse(const cli_command_options *o, int argc, char **argv, int first);

/* The table's help lines: "  --name ARG   help" aligned at column 24. */
void cli_options_help(FILE *out, const cli_option *own);

#endif
