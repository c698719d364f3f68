/* cli/setup_opts.c - build a setup from defaults, --setup and overrides. */
#include "setup_opts.h"
#include "cli.h"

#include "lamina/batch.h"

#include <math.h>
#include <stdio.h>

void cli_setup_opts_init(cli_setup_opts *o)
{
    o->setup_file = NULL;
    o->oxide_nm = -1;
    o->na = -1;
    o->fermi_ev = NAN;
    o->um_per_px = 0;
    o->stack_file = NULL;
    o->material = NULL;
}

int cli_setup_option(cli_setup_opts *o, const char *command, int code, const char *arg)
{
    switch (code) {
    case CLI_OPT_STACK: o->stack_file = arg; return 1;
    case CLI_OPT_MATERIAL: o->material = arg; return 1;
    case CLI_OPT_SETUP: o->setup_file = arg; return 1;
    case CLI_OPT_OXIDE: return cli_parse_double(command, "--oxide", arg, 0, 5000, &o->oxide_nm) ? -1 : 1;
    case CLI_OPT_NA: return cli_parse_double(command, "--na", arg, 0, 1.6, &o->na) ? -1 : 1;
    case CLI_OPT_FERMI: return cli_parse_double(command, "--fermi", arg, -2, 2, &o->fermi_ev) ? -1 : 1;
    case CLI_OPT_UM_PER_PX:
        return cli_parse_double(command, "--um-per-px", arg, 1e-4, 1000, &o->um_per_px) ? -1 : 1;
    }
    return 0;
}

/* A setter refused an option's value: a usage error naming the option. */
static int bad_option(const char *command, const char *option, lam_setup *s, const lam_error *err)
{
    lam_setup_clear(s);
    return cli_usage_error(command, "%s: %s", option, err->message);
}

int cli_setup_build(const char *command, const cli_setup_opts *o, lam_setup *s)
{
    lam_error err;
    lam_error_clear(&err);
    lam_setup_default(s);
    if (o->setup_file && lam_setup_load(o->setup_file, s, &err)) {
        lam_setup_clear(s);
        return cli_report(&err, o->setup_file);
    }
    if (o->stack_file && lam_setup_load_stack(o->stack_file, s, &err)) {
        lam_setup_clear(s);
        return cli_report(&err, o->stack_file);
    }
    if (o->material && lam_setup_set_material(s, o->material, &err))
        return bad_option(command, "--material", s, &err);
    if (o->oxide_nm >= 0 && lam_setup_set_oxide(s, o->oxide_nm, &err))
        return bad_option(command, "--oxide", s, &err);
    if (o->na >= 0 && lam_setup_set_na(s, o->na, &err))
        return bad_option(command, "--na", s, &err);
    if (!isnan(o->fermi_ev) && lam_setup_set_fermi(s, o->fermi_ev, &err))
        return bad_option(command, "--fermi", s, &err);
    if (o->um_per_px > 0 && lam_setup_set_um_per_px(s, o->um_per_px, &err))
        return bad_option(command, "--um-per-px", s, &err);
    return 0;
}

void cli_setup_hash(const cli_setup_opts *o, const lam_analysis_options *opt, char *out,
                    size_t n)
{
    char extra[160], h[LAM_BATCH_HASH_LEN];
    snprintf(extra, sizeof extra, "ox=%.6g na=%.6g mu=%.6g um=%.6g", o->oxide_nm, o->na,
             o->fermi_ev, o->um_per_px);
    lam_batch_setup_hash(o->setup_file, opt, extra, h);
    snprintf(out, n, "%s", h);
}
