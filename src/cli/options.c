/* cli/options.c - the table-driven option parser and help (cli.h). */
#include "cli.h"
#include "lamina/analyze.h"
#include "lamina/transfer.h"

#include <stdlib.h>
#include <string.h>

#define OPT_CODE 3000 /* getopt code of the i-th option of the joined table: OPT_CODE + i */
#define MAX_OPTIONS 64

/* The options every physics command shares (help: CLI_SETUP_HELP). */
#define SETUP_OPTIONS(O)                                                                 \
    {"setup", 0, CLI_TEXT, &(O)->setup_file, 0, 0, NULL, NULL, NULL},                   \
    {"stack", 0, CLI_TEXT, &(O)->stack_file, 0, 0, NULL, NULL, NULL},                   \
    {"material", 0, CLI_TEXT, &(O)->material, 0, 0, NULL, NULL, NULL},                  \
    {"oxide", 0, CLI_NUMBER, &(O)->oxide_nm, 0, 5000, NULL, NULL, NULL},                \
    {"na", 0, CLI_NUMBER, &(O)->na, 0, 1.6, NULL, NULL, NULL},                          \
    {"fermi", 0, CLI_NUMBER, &(O)->fermi_ev, -2, 2, NULL, NULL, NULL},                  \
    {"um-per-px", 0, CLI_NUMBER, &(O)->um_per_px, 1e-4, 1000, NULL, NULL, NULL}

/* The stage convention of the commands that write a catalogue or map
 * (help: CLI_STAGE_HELP). */
#define STAGE_OPTIONS(S)                                                                 \
    {"stage-axes", 0, CLI_STAGE, (S), 0, 0, NULL, NULL, NULL},                          \
    {"stage-units", 0, CLI_STAGE, (S), 0, 0, NULL, NULL, NULL},                         \
    {"stage-rotation", 0, CLI_STAGE, (S), 0, 0, NULL, NULL, NULL},                      \
    {"stage-origin", 0, CLI_STAGE, (S), 0, 0, NULL, NULL, NULL}

/* A library status as an option's result: 0, or -1 after printing the
 * library's message as a usage error (prefixed with the option's name
 * when the message lacks it). */
static int usage_of(const char *command, lam_status st, const lam_error *err, const char *prefix)
{
    if (!st)
        return 0;
    cli_usage_error(command, "%s%s%s", prefix ? prefix : "", prefix ? ": " : "", err->message);
    return -1;
}

static int apply(const char *command, const cli_option *op, const char *arg)
{
    char name[64];
    long v;
    lam_error err;
    lam_error_clear(&err);
    snprintf(name, sizeof name, "--%s", op->name);
    switch (op->kind) {
    case CLI_FLAG: *(int *)op->target = 1; return 0;
    case CLI_UNSET: *(int *)op->target = 0; return 0;
    case CLI_TEXT: *(const char **)op->target = arg; return 0;
    case CLI_NUMBER: return cli_parse_double(command, name, arg, op->lo, op->hi, op->target);
    case CLI_SIZE:
        if (cli_parse_long(command, name, arg, (long)op->lo, (long)op->hi, &v))
            return -1;
        *(size_t *)op->target = (size_t)v;
        return 0;
    case CLI_RANGE:
        return usage_of(command, lam_parse_range(&err, name, arg, op->lo, op->hi, op->target),
                        &err, NULL);
    case CLI_ANALYSIS:
        return usage_of(command, lam_analysis_options_set(op->target, op->name, arg, &err), &err,
                        NULL);
    case CLI_STAGE: /* the stage's messages do not name the option */
        return usage_of(command, lam_stage_set(op->target, op->name + strlen("stage-"), arg, &err),
                        &err, name);
    default: return op->call(command, arg, op->target);
    }
}

/* Append the first m options of t (m = 0: up to CLI_END) to all[*n]. */
static void append(cli_option *all, size_t *n, const cli_option *t, size_t m)
{
    for (size_t i = 0; (m ? i < m : t[i].name != NULL) && *n < MAX_OPTIONS; i++)
        all[(*n)++] = t[i];
}

/* The command's table, then the shared ones it takes, into one table. */
static size_t join(const cli_command *o, cli_option *all)
{
    size_t n = 0;
    append(all, &n, o->options, 0);
    if (o->setup) {
        const cli_option t[] = {SETUP_OPTIONS(o->setup)};
        append(all, &n, t, sizeof t / sizeof *t);
    }
    if (o->stage) {
        const cli_option t[] = {STAGE_OPTIONS(o->stage)};
        append(all, &n, t, sizeof t / sizeof *t);
    }
    return n;
}

/* getopt's long options and letters ("o:") of a joined table. */
static void getopt_tables(const cli_option *all, size_t n, struct option *lo, char *letters,
                          size_t cap)
{
    size_t l = 0;
    for (size_t i = 0; i < n; i++) {
        int takes = all[i].kind != CLI_FLAG && all[i].kind != CLI_UNSET;
        lo[i] = (struct option){all[i].name, takes ? required_argument : no_argument, 0,
                                OPT_CODE + (int)i};
        if (all[i].letter && l + 3 < cap) {
            letters[l++] = all[i].letter;
            if (takes)
                letters[l++] = ':';
        }
    }
    lo[n] = (struct option){0, 0, 0, 0};
    letters[l] = '\0';
}

/* The operand count against what the command allows. */
static int check_operands(const cli_command *o, int argc, char **argv)
{
    int n = argc - optind;
    if (n >= o->min_args && (o->max_args < 0 || n <= o->max_args))
        return CLI_OK;
    if (!o->args_error)
        return cli_usage_error(o->name, "unexpected argument '%s'", argv[optind]);
    return cli_usage_error(o->name, "%s", o->args_error);
}

int cli_options_parse(const cli_command *o, int argc, char **argv)
{
    cli_option all[MAX_OPTIONS];
    struct option lo[MAX_OPTIONS + 1];
    char letters[64];
    size_t n = join(o, all);
    getopt_tables(all, n, lo, letters, sizeof letters);
    int c;
    if (o->setup)
        lam_setup_overrides_init(o->setup);
    optind = 1;
    opterr = 0;
    while ((c = getopt_long(argc, argv, letters, lo, NULL)) != -1) {
        const cli_option *op = NULL;
        for (size_t i = 0; i < n && !op; i++)
            if (c == OPT_CODE + (int)i || (all[i].letter && c == all[i].letter))
                op = &all[i];
        if (!op)
            return cli_usage_error(o->name, "unknown or incomplete option '%s'",
                                   argv[optind - 1]);
        if (apply(o->name, op, optarg))
            return CLI_EUSAGE;
        if (op->kind == CLI_STAGE && o->stage_given)
            *o->stage_given = 1;
    }
    return check_operands(o, argc, argv);
}

/* The table's help lines: "  --name ARG   help" aligned at column 24. */
static void options_help(FILE *out, const cli_option *own)
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

void cli_help(FILE *out, const cli_command *c)
{
    fputs(c->usage, out);
    if (c->setup)
        fputs(CLI_SETUP_HELP, out);
    options_help(out, c->options);
    if (c->stage)
        fputs(CLI_STAGE_HELP, out);
    if (c->footer)
        fputs(c->footer, out);
}
