/* cli/plan.c - `lamina plan`: contrast over wavelength x oxide, for choosing
 * an oxide thickness or a filter before exfoliating. */
#include "cli.h"
#include "lamina/draw.h"
#include "lamina/planmap.h"

static struct {
    lam_setup_overrides so;
    size_t layers;
    const char *out;
} A = {.layers = 1, .out = "plan.svg"};

static const cli_option plan_options[] = {
    {"layers", 0, CLI_SIZE, &A.layers, 1, 40, NULL, "N", "layer count N (default 1)"},
    {"out", 'o', CLI_TEXT, &A.out, 0, 0, NULL, "FILE", ".svg, .pdf or .png (default plan.svg)"},
    {"quiet", 0, CLI_FLAG, &cli_quiet, 0, 0, NULL, NULL, "no closing line"},
    CLI_END};

static int run_plan(int argc, char **argv)
{
    if (cli_options_parse(&cli_plan, argc, argv))
        return CLI_EUSAGE;
    if (lam_canvas_kind_of(A.out) < 0)
        return cli_usage_error("plan", "--out: the plot must end in .svg, .pdf or .png");
    lam_setup s;
    int rc = cli_setup_build("plan", &A.so, &s);
    if (rc)
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

const cli_command cli_plan = {
    .name = "plan", .summary = "planning plot: contrast over wavelength and oxide", .run = run_plan,
    .usage = "Usage: lamina plan [OPTIONS]\n"
             "Planning plot: N-layer contrast as a map over wavelength 400-750 nm and SiO2\n"
             "thickness 0-350 nm (monochromatic), beside the camera channels' contrast\n"
             "against oxide thickness; the setup's oxide is marked.\n"
             "(The chip map of a results folder is 'lamina map'.)\n\n",
    .options = plan_options, .setup = &A.so};
