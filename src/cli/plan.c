/* cli/plan.c - `lamina plan`: contrast over wavelength x oxide, for choosing
 * an oxide thickness or a filter before exfoliating. */
#include "cli.h"
#include "setup_opts.h"
#include "lamina/draw.h"
#include "lamina/planmap.h"

#include <getopt.h>
#include <string.h>

static void plan_help(FILE *out)
{
    fputs("Usage: lamina plan [--setup FILE] [--layers N] [--fermi EV] [--na X]\n"
          "                   [-o|--out FILE.svg|FILE.pdf|FILE.png]\n"
          "Planning plot: N-layer contrast as a map over wavelength 400-750 nm and SiO2\n"
          "thickness 0-350 nm (monochromatic), beside the camera channels' contrast\n"
          "against oxide thickness; the setup's oxide is marked. Default plan.svg.\n"
          "(The chip map of a results folder is 'lamina map'.)\n",
          out);
}

static int run_plan(int argc, char **argv)
{
    static const struct option longopts[] = {
        CLI_SETUP_LONGOPTS,
        {"layers", required_argument, 0, 'l'},
        {"out", required_argument, 0, 'O'},
        {"quiet", no_argument, 0, 'q'},       {0, 0, 0, 0}};
    cli_setup_opts so;
    cli_setup_opts_init(&so);
    long layers = 1;
    const char *out = "plan.svg";
    int c, r;
    optind = 1;
    opterr = 0;
    while ((c = getopt_long(argc, argv, "o:", longopts, NULL)) != -1) {
        switch (c) {
        case 'l':
            if (cli_parse_long("plan", "--layers", optarg, 1, 40, &layers))
                return CLI_EUSAGE;
            break;
        case 'o':
        case 'O': out = optarg; break;
        case 'q': cli_quiet = 1; break;
        default:
            if ((r = cli_setup_option(&so, "plan", c, optarg)) > 0)
                break;
            if (r < 0)
                return CLI_EUSAGE;
            return cli_usage_error("plan", "unknown or incomplete option '%s'", argv[optind - 1]);
        }
    }
    if (lam_canvas_kind_of(out) < 0)
        return cli_usage_error("plan", "--out: the plot must end in .svg, .pdf or .png");
    lam_setup s;
    int rc = cli_setup_build("plan", &so, &s);
    if (rc)
        return rc;
    lam_error err;
    lam_error_clear(&err);
    lam_planmap *m = NULL;
    if (lam_planmap_compute(&s, (size_t)layers, &m, &err) ||
        lam_planmap_write(m, out, &err))
        rc = cli_report(&err, out);
    else if (!cli_quiet)
        fprintf(stderr, "lamina: wrote %s\n", out);
    lam_planmap_free(m);
    lam_setup_clear(&s);
    return rc;
}

const cli_command cli_plan = {"plan", "planning plot: contrast over wavelength and oxide", run_plan,
                              plan_help};
