/* cli/common.c - option parsing helpers and error reporting for the CLI. */
#include "cli.h"

#include <stdarg.h>
#include <string.h>
#ifdef __GLIBC__
#include <malloc.h>
#endif

int cli_quiet, cli_verbose;

int cli_usage_error(const char *command, const char *fmt, ...)
{
    va_list ap;
    fputs("lamina: ", stderr);
    va_start(ap, fmt);
    vfprintf(stderr, fmt, ap);
    va_end(ap);
    if (command)
        fprintf(stderr, "\nTry 'lamina help %s'.\n", command);
    else
        fputs("\nTry 'lamina help'.\n", stderr);
    return CLI_EUSAGE;
}

int cli_exit_code(lam_status status)
{
    if (status == LAM_OK)
        return CLI_OK;
    return status == LAM_EINVAL ? CLI_EUSAGE : CLI_EFILE;
}

int cli_report(const lam_error *err, const char *fallback_file)
{
    const char *file = err->file[0] ? err->file : fallback_file;
    const char *msg = err->message[0] ? err->message : lam_strerror(err->status);
    if (file && *file && !strstr(msg, file))
        fprintf(stderr, "lamina: %s: %s\n", file, msg);
    else
        fprintf(stderr, "lamina: %s\n", msg);
    return err->status == LAM_OK ? CLI_EFILE : cli_exit_code(err->status);
}

int cli_parse_double(const char *command, const char *option, const char *text,
                     double lo, double hi, double *out)
{
    lam_error err;
    if (!lam_parse_number(&err, option, text, lo, hi, out))
        return 0;
    cli_usage_error(command, "%s", err.message);
    return -1;
}

int cli_parse_long(const char *command, const char *option, const char *text, long lo,
                   long hi, long *out)
{
    lam_error err;
    if (!lam_parse_integer(&err, option, text, lo, hi, out))
        return 0;
    cli_usage_error(command, "%s", err.message);
    return -1;
}

int cli_setup_build(const char *command, const lam_setup_overrides *o, lam_setup *s)
{
    lam_error err;
    lam_error_clear(&err);
    if (!lam_setup_build(o, s, &err))
        return CLI_OK;
    if (err.status == LAM_EINVAL && !err.file[0])
        return cli_usage_error(command, "%s", err.message);
    return cli_report(&err, NULL);
}

int cli_catalog_done(lam_catalog *cat, lam_status st, const lam_error *err)
{
    /* the analyses' own warnings were printed as each image finished */
    for (size_t k = 0; k < cat->n_images; k++)
        if (cat->images[k].own_warnings[0])
            fprintf(stderr, "lamina: %s: warning: %s\n", cat->images[k].path,
                    cat->images[k].own_warnings);
    lam_catalog_clear(cat);
    return st ? cli_report(err, NULL) : CLI_OK;
}

int cli_positions_need_scale(const char *command, const char *positions, const lam_setup *s)
{
    if (!positions || s->um_per_px > 0)
        return CLI_OK;
    return cli_usage_error(command, "--positions needs the pixel size: give --um-per-px or "
                                    "um_per_px in the setup");
}

void cli_one_malloc_arena(void)
{
#ifdef __GLIBC__
    (void)mallopt(M_ARENA_MAX, 1);
#endif
}
