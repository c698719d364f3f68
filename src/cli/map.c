/* cli/map.c - `lamina map`: contrast over wavelength x oxide (planning). */
#include "cli.h"
#include "setup_opts.h"
#include "lamina/planmap.h"

#include <getopt.h>
#include <string.h>

static void map_help(FILE *out)
{
    fputs("Usage: lamina map [--setup FILE] [--layers N] [--fermi EV] [--na X] [--out FILE.svg|FILE.png]\n"
          "N-layer contrast as a map over wavelength 400-750 nm and SiO2 thickness\n"
          "0-350 nm (monochromatic), beside the camera channels' contrast against\n"
          "oxide thickness; the setup's oxide is marked. Default output map.svg.\n",
          out);
}

static int run_map(int argc, char **argv)
{
    static const struct option longopts[] = {
        CLI_SETUP_LONGOPTS,
        {"layers", required_argument, 0, 'l'},
        {"out", required_argument, 0, 'O'},
        {"quiet", no_argument, 0, 'q'},       {0, 0, 0, 0}};
    cli_setup_opts so;
    cli_setup_opts_init(&so);
    long layers = 1;
    const char *out = "map.svg";
    int c, r;
    optind = 1;
    opterr = 0;
    while ((c = getopt_long(argc, argv, "", longopts, NULL)) != -1) {
        switch (c) {
        case 'l': if (cli_parse_long("map", "--layers", optarg, 1, 40, &layers)) return CLI_EUSAGE; break;
        case 'O': out = optarg; break;
        case 'q': cli_quiet = 1; break;
        default:
            if ((r = cli_setup_option(&so, "map", c, optarg)) > 0)
                break;
            if (r < 0)
                return CLI_EUSAGE;
            return cli_usage_error("map", "unknown or incomplete option '%s'", argv[optind - 1]);
        }
    }
    size_t n = strlen(out);
    int png = n >= 5 && !strcmp(out + n - 4, ".png");
    if (!png && (n < 5 || strcmp(out + n - 4, ".svg")))
        return cli_usage_error("map", "--out: the map must end in .svg or .png");
    lam_setup s;
    int rc = cli_setup_build("map", &so, &s);
    if (rc)
        return rc;
    lam_error err;
    lam_error_clear(&err);
    lam_planmap *m = NULL;
    if (lam_planmap_compute(&s, (size_t)layers, &m, &err) ||
        (png ? lam_planmap_write_png(m, out, &err) : lam_planmap_write_svg(m, out, &err)))
        rc = cli_report(&err, out);
    else if (!cli_quiet)
        fprintf(stderr, "lamina: wrote %s\n", out);
    lam_planmap_free(m);
    lam_setup_clear(&s);
    return rc;
}

const cli_command cli_map = {"map", "contrast over wavelength and oxide (planning)", run_map, map_help};
