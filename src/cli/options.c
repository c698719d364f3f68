/* cli/options.c - the table-driven option parser and help (options.h). */
#include "options.h"
#include "cli.h"
#include "run_opts.h"

#include <getopt.h>
#include <stdlib.h>
#include <string.h>

#define OWN_CODE 3000 /* getopt codes of a table's options: OWN_CODE + index */

static const struct option shared_setup[] = {CLI_SETUP_LONGOPTS};
static const struct option shared_stage[] = {CLI_STAGE_LONGOPTS};
#define N_SETUP (sizeof shared_setup / sizeof shared_setup[0])
#define N_STAGE (sizeof shared_stage / sizeof shared_stage[0])

static int apply(const char *command, const cli_option *op, const char *arg)
{
    char name[64];
    snprintf(name, sizeof name, "--%s", op->name);
    switch (op->kind) {
    case CLI_FLAG: *(int *)op->target = 1; return 0;
    case CLI_UNSET: *(int *)op->target = 0; return 0;
    case CLI_TEXT: *(const char **)op->target = arg; return 0;
    case CLI_NUMBER: return cli_parse_double(command, name, arg, op->lo, op->hi, op->target);
    case CLI_INTEGER:
        return cli_parse_long(command, name, arg, (long)op->lo, (long)op->hi, op->target);
    default: return op->call(command, arg, op->target);
    }
}

/* The long options of a command: its table, then the shared ones. */
static struct option *long_options(const cli_command_options *o, char *letters, size_t n)
{
    size_t own = 0, k = 0, l = 0;
    while (o->own && o->own[own].name)
        own++;
    struct option *lo = calloc(own + N_SETUP + N_STAGE + 1, sizeof *lo);
    for (size_t i = 0; lo && i < own; i++) {
        const cli_option *op = &o->own[i];
        int takes = op->kind != CLI_FLAG && op->kind != CLI_UNSET;
        lo[k++] = (struct option){op->name, takes ? required_argument : no_argument, 0,
                                  OWN_CODE + (int)i};
        if (op->letter && l + 3 < n) {
            letters[l++] = op->letter;
            if (takes)
                letters[l++] = ':';
        }
    }
    for (size_t i = 0; lo && o->setup && i < N_SETUP; i++)
        lo[k++] = shared_setup[i];
    for (size_t i = 0; lo && o->stage && i < N_STAGE; i++)
        lo[k++] = shared_stage[i];
    letters[l] = '\0';
    return lo;
}

/* The table entry of a getopt code (a letter or OWN_CODE + index). */
static const cli_option *own_option(const cli_command_options *o, int c)
{
    for (size_t i = 0; o->own && o->own[i].name; i++)
        if (c == OWN_CODE + (int)i || (o->own[i].letter && c == o->own[i].letter))
            return &o->own[i];
    return NULL;
}

int cli_options_parse(const cli_command_options *o, int argc, char **argv, int first)
{
    char letters[64];
    struct option *lo = long_options(o, letters, sizeof letters);
    if (!lo) {
        fprintf(stderr, "lamina: out of memory\n");
        return CLI_EUSAGE;
    }
    int c, r = 0;
    optind = first;
    opterr = 0;
    while (!r && (c = getopt_long(argc, argv, letters, lo, NULL)) != -1) {
        const cli_option *op = own_option(o, c);
        if (op) {
            r = apply(o->command, op, optarg);
            continue;
        }
        r = o->stage ? cli_stage_option(o->stage, o->command, c, optarg) : 0;
        if (r > 0 && o->stage_given)
            *o->stage_given = 1;
        if (r == 0 && o->setup)
            r = cli_setup_option(o->setup, o->command, c, optarg);
        if (r == 0)
            r = cli_usage_error(o->command, "unknown or incomplete option '%s'",
                                argv[optind - 1]);
        r = r < 0 || r == CLI_EUSAGE ? -1 : 0;
    }
    free(lo);
    return r ? CLI_EUSAGE : CLI_OK;
}

void cli_options_help(FILE *out, const cli_option *own)
{
    for (size_t i = 0; own[i].name; i++) {
        if (!own[i].help)
            continue;
        char head[64];
        const char *sp = own[i].arg ? " " : "", *arg = own[i].arg ? own[i].arg : "";
        if (own[i].letter)
            snprintf(head, sizeof head, "-%c, --%s%s%s", own[i].letter, own[i].name, sp, arg);
        else
            snprintf(head, sizeof head, "--%s%s%s", own[i].name, sp, arg);
        if (strlen(head) > 20)
            fprintf(out, "  %s\n%24s", head, "");
        else
            fprintf(out, "  %-20s  ", head);
        for (const char *p = own[i].help; *p; p++) {
            fputc(*p, out);
            if (*p == '\n' && p[1])
                fprintf(out, "%24s", "");
        }
        fputc('\n', out);
    }
}
