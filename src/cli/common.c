/* cli/common.c - option parsing helpers and error reporting for the CLI. */
#include "cli.h"

#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

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
    char *end = NULL;
    errno = 0;
    double v = strtod(text, &end);
    if (end == text || *end != '\0' || errno == ERANGE || !isfinite(v)) {
        cli_usage_error(command, "%s: '%s' is not a number", option, text);
        return -1;
    }
    if (v < lo || v > hi) {
        cli_usage_error(command, "%s: %g is outside %g to %g", option, v, lo, hi);
        return -1;
    }
    *out = v;
    return 0;
}

int cli_parse_long(const char *command, const char *option, const char *text, long lo,
                   long hi, long *out)
{
    char *end = NULL;
    errno = 0;
    long v = strtol(text, &end, 10);
    if (end == text || *end != '\0' || errno == ERANGE) {
        cli_usage_error(command, "%s: '%s' is not a whole number", option, text);
        return -1;
    }
    if (v < lo || v > hi) {
        cli_usage_error(command, "%s: %ld is outside %ld to %ld", option, v, lo, hi);
        return -1;
    }
    *out = v;
    return 0;
}

int cli_make_dir(const char *path)
{
    char buf[4096];
    size_t n = strlen(path);
    if (n == 0 || n >= sizeof buf) {
        fprintf(stderr, "lamina: %s: invalid output folder\n", path);
        return -1;
    }
    memcpy(buf, path, n + 1);
    for (size_t i = 1; i <= n; i++) {
        if (buf[i] == '/' || buf[i] == '\0') {
            char c = buf[i];
            buf[i] = '\0';
            if (mkdir(buf, 0755) != 0 && errno != EEXIST) {
                fprintf(stderr, "lamina: %s: cannot create folder: %s\n", buf,
                        strerror(errno));
                return -1;
            }
            buf[i] = c;
        }
    }
    struct stat sb;
    if (stat(path, &sb) != 0 || !S_ISDIR(sb.st_mode)) {
        fprintf(stderr, "lamina: %s: not a folder\n", path);
        return -1;
    }
    return 0;
}
