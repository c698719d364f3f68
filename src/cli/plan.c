/* cli/plan.c - `lamina plan`: contrast over wavelength x oxide, for choosing
 * an oxide thickness or a filter before exfoliating. */
#include "cli.h"
#include "options.h"
#include "lamina/draw.h"
#include "lamina/planmap.h"

typedef struct plan_args {
    lam_setup_overrides so;
    size_t layers;
    const char *out;
} plan_args;

#define PLAN_OPTIONS(A)                                                                         \
    {                                                                                           \
        {"layers", 0, CLI_SIZE, &(A)->layers, 1, 40, NULL, "N", "layer count N (default 1)"},   \
        {"out", 'o', CLI_TEXT, &(A)->out, 0, 0, NULL, "FILE",                                   \
         ".svg, .pdf or .png (default plan.svg)"},                                              \
        {"quiet", 0, CLI_FLAG, &cli_quiet, 0, 0, NULL, NULL, "no closing line"},                \
        CLI_END                                                                                 \
    }

static void plan_help(FILE *out)
{
    plan_args A;
    cli_option t[] = PLAN_OPTIONS(&A);
    fputs("Usage: lamina plan [OPTIONS]\n"
          "Planning plot: N-layer contrast as a map over wavelength 400-750 nm and SiO2\n"
          "thickness 0-350 nm (monochromatic), beside the camera channels' contrast\n"
          "against oxide thickness; the setup's oxide is marked.\n"
          "(The chip map of a results folder is 'lamina map'.)\n\n" CLI_SETUP_HELP, out);
    cli_options_help(out, t);
}

static int run_plan(int argc, char **argv)
{
    plan_args A = {.layers = 1, .out = "plan.svg"};
    lam_setup_overrides_init(&A.so);
    cli_option t[] = PLAN_OPTIONS(&A);
    cli_command_options co = {.command = "plan", .own = t, .setup = &A.so};
    int rc = cli_options_parse(&co, argc, argv, 1);
    if (rc)
        return rc;
    if (lam_canvas_kind_of(A.out) < 0)
        return cli_usage_error("plan", "--out: the plot must end in .svg, .pdf or .png");
    lam_setup s;
    if ((rc = cli_setup_build("plan", &A.so, &s)))
        return rc;
    lam_error err;
    lam_error_clear(&err);
    lam_planmap *m = NULL;
    if (lam_planmap_compute(&s, A.layers, &m, &err) || lam_planmap_write(m, A.out, &err))
        rc = cli_report(&err, A.out);
    else if (!cli_quiet)
        fprintf(stderr, "lamina: wrote %s\n", A.out);
    lam_planmap_free(m);
    lam_setup_clear(&s);
    return rc;
}

const cli_command cli_plan = {"plan", "planning plot: contrast over wavelength and oxide", run_plan,
                              plan_help};
