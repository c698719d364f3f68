/* cli/predict.c - `lamina predict`: the contrast ladder of N = A..B layers. */
#include "cli.h"
#include "setup_opts.h"
#include "lamina/model.h"
#include "lamina/summary.h"

#include <getopt.h>
#include <stdlib.h>
#include <string.h>

static void predict_help(FILE *out)
{
    fputs("Usage: lamina predict [OPTIONS]\n"
          "Predicted contrast C = (substrate - flake) / substrate per camera channel\n"
          "for N-layer graphene on the setup's substrate.\n\n"
          "  --setup FILE        setup profile (lamina-setup/1 JSON)\n"
          "  --oxide NM          SiO2 thickness on Si, nm\n"
          "  --stack FILE        substrate {\"stack\": [...], \"base\": ...} (e.g. hBN on SiO2)\n"
          "  --material NAME     flake material (graphene)\n"
          "  --na X              illumination NA (0 = normal incidence)\n"
          "  --wavelength NM     one monochromatic channel instead of the camera\n"
          "  --layers A-B        layer range (default 1-5)\n"
          "  --fermi EV          Fermi level |mu| in eV\n"
          "  --format F          table (default), csv or json\n",
          out);
}

static int run_predict(int argc, char **argv)
{
    static const struct option longopts[] = {
        CLI_SETUP_LONGOPTS,
        {"wavelength", required_argument, 0, 'w'},
        {"layers", required_argument, 0, 'l'},  {"format", required_argument, 0, 'F'},  {"quiet", no_argument, 0, 'q'},
        {0, 0, 0, 0}};
    cli_setup_opts so;
    cli_setup_opts_init(&so);
    double mono = 0;
    long lo = 1, hi = 5;
    const char *format = "table";
    int opt, r;
    optind = 1;
    opterr = 0;
    while ((opt = getopt_long(argc, argv, "", longopts, NULL)) != -1) {
        switch (opt) {
        case 'w':
            if (cli_parse_double("predict", "--wavelength", optarg, 300, 1000, &mono)) return CLI_EUSAGE;
            break;
        case 'l': {
            char *dash = strchr(optarg, '-');
            char a[32], b[32];
            if (!dash || dash - optarg >= 31 || strlen(dash + 1) >= 31)
                return cli_usage_error("predict", "--layers: expected A-B, e.g. 1-5");
            memcpy(a, optarg, (size_t)(dash - optarg));
            a[dash - optarg] = '\0';
            strcpy(b, dash + 1);
            if (cli_parse_long("predict", "--layers", a, 1, LAM_MODEL_MAX_LAYERS, &lo) ||
                cli_parse_long("predict", "--layers", b, lo, LAM_MODEL_MAX_LAYERS, &hi))
                return CLI_EUSAGE;
            break;
        }
        case 'F':
            if (strcmp(optarg, "table") && strcmp(optarg, "csv") && strcmp(optarg, "json"))
                return cli_usage_error("predict", "--format: expected table, csv or json");
            format = optarg;
            break;
        case 'q': cli_quiet = 1; break;
        default:
            if ((r = cli_setup_option(&so, "predict", opt, optarg)) > 0)
                break;
            if (r < 0)
                return CLI_EUSAGE;
            return cli_usage_error("predict", "unknown or incomplete option '%s'", argv[optind - 1]);
        }
    }
    if (optind < argc)
        return cli_usage_error("predict", "unexpected argument '%s'", argv[optind]);
    lam_setup s;
    int rc = cli_setup_build("predict", &so, &s);
    if (rc)
        return rc;
    lam_error err;
    lam_error_clear(&err);
    lam_model *m = NULL;
    lam_prediction *p = malloc(sizeof *p);
    double ox = lam_setup_oxide(&s);
    if (!p || lam_model_alloc(&s, (size_t)hi, mono, &m, &err) ||
        lam_model_eval(m, ox < 0 ? 0 : ox, s.sheet.fermi_ev, p, &err)) {
        if (!p)
            lam_error_set(&err, LAM_ENOMEM, "out of memory");
        rc = cli_report(&err, so.setup_file);
        goto done;
    }
    char *text = NULL;
    if (lam_summary_prediction(p, (size_t)lo, (size_t)hi, mono, &s, format, &text, &err))
        rc = cli_report(&err, NULL);
    else
        fputs(text, stdout);
    free(text);
    if (fflush(stdout) || ferror(stdout)) {
        fprintf(stderr, "lamina: cannot write the output\n");
        rc = CLI_EFILE;
    }
done:
    free(p);
    lam_model_free(m);
    lam_setup_clear(&s);
    return rc;
}

const cli_command cli_predict = {"predict", "predicted contrast per channel for N layers",
                                 run_predict, predict_help};
