/* cli/run_opts.c - stage options and the run outputs shared by analyze,
 * catalog merge and map. */
#include "run_opts.h"
#include "cli.h"
#include "lamina/runreport.h"


int cli_stage_option(lam_stage *s, const char *command, int code, const char *arg)
{
    static const char *const keys[] = {"axes", "units", "rotation", "origin"};
    if (code < CLI_OPT_STAGE_AXES || code > CLI_OPT_STAGE_ORIGIN)
        return 0;
    lam_error err;
    lam_error_clear(&err);
    if (lam_stage_set(s, keys[code - CLI_OPT_STAGE_AXES], arg, &err)) {
        cli_usage_error(command, "--stage-%s: %s", keys[code - CLI_OPT_STAGE_AXES], err.message);
        return -1;
    }
    return 1;
}

int cli_run_outputs(lam_catalog *cat, const char *out_dir, double refresh_s)
{
    lam_error err;
    lam_error_clear(&err);
    if (lam_catalog_finish(cat, &err))
        return cli_report(&err, NULL);
    /* the analyses' own warnings were printed as each image finished */
    for (size_t k = 0; k < cat->n_images; k++)
        if (cat->images[k].own_warnings[0])
            fprintf(stderr, "lamina: %s: warning: %s\n", cat->images[k].path,
                    cat->images[k].own_warnings);
    lam_run_report_options ro = {NULL, 0, refresh_s};
    if (lam_catalog_write(cat, out_dir, &err) || lam_run_report_write(cat, out_dir, &ro, &err))
        return cli_report(&err, out_dir);
    return CLI_OK;
}

int cli_parse_target(const char *command, const char *arg, double out[2])
{
    double a, b;
    char tail;
    if (sscanf(arg, "%lf-%lf%c", &a, &b, &tail) != 2 || !(a > 0) || !(b >= a) || !(b <= 1000))
        return cli_usage_error(command, "--target-thickness: expected A-B in nm with "
                                        "0 < A <= B <= 1000, e.g. 10-30");
    out[0] = a, out[1] = b;
    return 0;
}

int cli_option_target(const char *command, const char *arg, void *target)
{
    return cli_parse_target(command, arg, target) ? -1 : 0;
}
