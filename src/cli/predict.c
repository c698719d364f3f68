/* cli/predict.c - `lamina predict`: the contrast ladder of N = A..B layers. */
#include "cli.h"
#include "setup_opts.h"
#include "lamina/model.h"

#include <getopt.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <cjson/cJSON.h>

static void predict_help(FILE *out)
{
    fputs("Usage: lamina predict [OPTIONS]\n"
          "Predicted contrast C = (substrate - flake) / substrate per camera channel\n"
          "for N-layer flakes (graphene, MoS2, WS2, WSe2, hBN: --material) on the\n"
          "setup's substrate, or for hBN films of given thicknesses.\n\n"
          "  --setup FILE        setup profile (lamina-setup/1 JSON)\n"
          "  --oxide NM          SiO2 thickness on Si, nm\n"
          "  --stack FILE        substrate {\"stack\": [...], \"base\": ...} (e.g. hBN on SiO2)\n"
          "  --material NAME     flake material: graphene (default), hBN, MoS2, WS2, WSe2\n"
          "                      (a source after a slash: MoS2/Song, WSe2/Gu, hBN/Lee, hBN/Rah)\n"
          "  --na X              illumination NA (0 = normal incidence)\n"
          "  --wavelength NM     one monochromatic channel instead of the camera\n"
          "  --layers A-B        layer range (default 1-5)\n"
          "  --thickness T1,T2   film thicknesses in nm (a continuous crystal: --material hBN)\n"
          "  --fermi EV          Fermi level |mu| in eV\n"
          "  --format F          table (default), csv or json\n",
          out);
}

static const char *channel_name(size_t channels, size_t c)
{
    static const char *rgb[3] = {"R", "G", "B"};
    return channels == 1 ? "mono" : rgb[c];
}

/* --thickness: film thicknesses, nm */
typedef struct thicknesses {
    size_t count;
    double nm[LAM_MODEL_MAX_LAYERS];
} thicknesses;

static int print_json(const lam_prediction *p, size_t lo, size_t hi, double mono, const lam_setup *s,
                      const thicknesses *th)
{
    cJSON *root = cJSON_CreateObject();
    cJSON_AddStringToObject(root, "schema", "lamina-predict/1");
    cJSON_AddStringToObject(root, "contrast_convention", "(substrate - flake) / substrate");
    cJSON *ch = cJSON_AddArrayToObject(root, "channels");
    for (size_t c = 0; c < p->channels; c++)
        cJSON_AddItemToArray(ch, cJSON_CreateString(channel_name(p->channels, c)));
    if (mono > 0)
        cJSON_AddNumberToObject(root, "wavelength_nm", mono);
    cJSON_AddNumberToObject(root, "oxide_nm", p->oxide_nm);
    cJSON_AddNumberToObject(root, "illumination_na", s->illumination_na);
    cJSON_AddNumberToObject(root, "fermi_eV", fabs(p->fermi_ev));
    char desc[200];
    lam_setup_describe_flake(s, desc, sizeof desc);
    cJSON_AddStringToObject(root, "material", s->flake);
    cJSON_AddStringToObject(root, "observation", s->transmission ? "transmission" : "reflection");
    cJSON_AddStringToObject(root, "conductivity", desc);
    cJSON *sr = cJSON_AddArrayToObject(root, "substrate_reflectance");
    for (size_t c = 0; c < p->channels; c++)
        cJSON_AddItemToArray(sr, cJSON_CreateNumber(p->substrate[c]));
    cJSON *rows = cJSON_AddArrayToObject(root, "rows");
    for (size_t N = lo; N <= hi; N++) {
        cJSON *row = cJSON_CreateObject();
        if (th)
            cJSON_AddNumberToObject(row, "thickness_nm", th->nm[N - 1]);
        else
            cJSON_AddNumberToObject(row, "layers", (double)N);
        cJSON *con = cJSON_AddArrayToObject(row, "contrast");
        for (size_t c = 0; c < p->channels; c++)
            cJSON_AddItemToArray(con, cJSON_CreateNumber(p->contrast[N][c]));
        cJSON_AddItemToArray(rows, row);
    }
    char *text = cJSON_Print(root);
    int ok = text && printf("%s\n", text) > 0;
    free(text);
    cJSON_Delete(root);
    return ok;
}

/* A nearly anti-reflecting substrate: below this channel reflectance the
 * relative contrast is ill-conditioned (stray light and the model's errors
 * in R_sub dominate it), so dR and a signal-to-noise are printed too. */
#define AR_REFLECTANCE 0.03
/* The signal-to-noise convention: shot noise of a camera whose full well
 * (10000 e-, common practice for microscope cameras) bare Si would fill at
 * the same exposure: SNR = |dR| sqrt(FW / (R_Si R_sub)). */
#define SNR_FULL_WELL 10000.0

static int parse_layers(const char *arg, long *lo, long *hi)
{
    const char *dash = strchr(arg, '-');
    char a[32], b[32];
    if (!dash || dash - arg >= 31 || strlen(dash + 1) >= 31)
        return cli_usage_error("predict", "--layers: expected A-B, e.g. 1-5");
    memcpy(a, arg, (size_t)(dash - arg));
    a[dash - arg] = '\0';
    strcpy(b, dash + 1);
    if (cli_parse_long("predict", "--layers", a, 1, LAM_MODEL_MAX_LAYERS, lo) ||
        cli_parse_long("predict", "--layers", b, *lo, LAM_MODEL_MAX_LAYERS, hi))
        return CLI_EUSAGE;
    return 0;
}

static int parse_thickness(const char *arg, thicknesses *th)
{
    char buf[1024];
    snprintf(buf, sizeof buf, "%s", arg);
    th->count = 0;
    for (char *save = NULL, *t = strtok_r(buf, ",", &save); t; t = strtok_r(NULL, ",", &save)) {
        if (th->count == LAM_MODEL_MAX_LAYERS)
            return cli_usage_error("predict", "--thickness: at most %d values",
                                   LAM_MODEL_MAX_LAYERS);
        if (cli_parse_double("predict", "--thickness", t, 0.1, 2000, &th->nm[th->count++]))
            return CLI_EUSAGE;
    }
    return th->count ? 0 : cli_usage_error("predict", "--thickness: expected T1,T2,... in nm");
}

/* The ladder, or with --thickness the films (rows 1..count). */
static lam_status predict_rows(const lam_setup *s, double mono, size_t hi, const thicknesses *th,
                               lam_prediction *p, lam_error *err)
{
    lam_model *m = NULL;
    double ox = lam_setup_oxide(s);
    lam_status st = lam_model_alloc(s, th ? 1 : hi, mono, &m, err);
    if (!st)
        st = lam_model_eval(m, ox < 0 ? 0 : ox, s->sheet.fermi_ev, p, err);
    if (!st && th) {
        lam_model_point pt = lam_model_point_default(m);
        pt.v[LAM_MP_OXIDE] = ox < 0 ? 0 : ox;
        double (*c)[LAM_MAX_CHANNELS] = (double (*)[LAM_MAX_CHANNELS])p->contrast[1];
        st = lam_model_eval_films(m, &pt, 1.0, th->nm, th->count, c, err);
        p->max_layers = th->count;
        for (size_t j = 1; !st && j <= th->count; j++)
            for (size_t k = 0; k < p->channels; k++)
                p->reflectance[j][k] = p->substrate[k] * (1 - p->contrast[j][k]);
    }
    lam_model_free(m);
    return st;
}

/* Is the substrate nearly anti-reflecting in some channel? */
static int near_ar(const lam_prediction *p)
{
    for (size_t c = 0; c < p->channels; c++)
        if (p->substrate[c] < AR_REFLECTANCE)
            return 1;
    return 0;
}

static void print_table(const lam_prediction *p, size_t lo, size_t hi, double mono,
                        const lam_setup *s, const thicknesses *th, int csv, double r_si)
{
    int ar = near_ar(p);
    if (!csv)
        printf("# contrast = (substrate - flake) / substrate%s; %s; oxide %.1f nm, illumination "
               "NA %.2f%s\n",
               s->transmission ? " in transmission (1 - T_flake / T_substrate)" : "", s->flake,
               p->oxide_nm, s->illumination_na, mono > 0 ? ", monochromatic" : "");
    if (ar)
        fprintf(stderr, "lamina: warning: the substrate is nearly anti-reflecting (R < %.2f in a "
                        "channel): relative contrast is ill-conditioned; dR = R_sub - R_flake and "
                        "the shot-noise SNR per pixel (%.0f e- full well at bare Si) are given\n",
                AR_REFLECTANCE, SNR_FULL_WELL);
    const char *key = th ? "thickness_nm" : "layers";
    printf(csv ? "%s" : "%-12s", key);
    for (size_t c = 0; c < p->channels; c++)
        printf(csv ? ",%s" : " %10s", channel_name(p->channels, c));
    for (size_t c = 0; ar && c < p->channels; c++)
        printf(csv ? ",dR_%s,snr_%s" : " %9s_dR %8s_snr", channel_name(p->channels, c),
               channel_name(p->channels, c));
    putchar('\n');
    for (size_t N = lo; N <= hi; N++) {
        if (th)
            printf(csv ? "%g" : "%-12g", th->nm[N - 1]);
        else
            printf(csv ? "%zu" : "%-12zu", N);
        for (size_t c = 0; c < p->channels; c++)
            printf(csv ? ",%.6f" : " %10.5f", p->contrast[N][c]);
        for (size_t c = 0; ar && c < p->channels; c++) {
            double dr = p->substrate[c] - p->reflectance[N][c];
            printf(csv ? ",%.6f,%.2f" : " %12.6f %12.2f", dr,
                   fabs(dr) * sqrt(SNR_FULL_WELL / (r_si * p->substrate[c])));
        }
        putchar('\n');
    }
}

/* Bare-Si reflectance of the brightest channel (the SNR's exposure). */
static double bare_si(const lam_setup *s, double mono)
{
    lam_setup b = *s;
    b.layers = 0;
    lam_model *m = NULL;
    lam_prediction *p = malloc(sizeof *p);
    double top = 0.35;
    if (p && !lam_model_alloc(&b, 1, mono, &m, NULL) &&
        !lam_model_eval(m, 0, b.sheet.fermi_ev, p, NULL)) {
        top = 0;
        for (size_t c = 0; c < p->channels; c++)
            top = fmax(top, p->substrate[c]);
    }
    lam_model_free(m);
    free(p);
    return top;
}

static int predict_output(const lam_setup *s, const char *format, size_t lo, size_t hi,
                          double mono, const thicknesses *th, lam_prediction *p)
{
    if (!strcmp(format, "json"))
        print_json(p, lo, hi, mono, s, th);
    else
        print_table(p, lo, hi, mono, s, th, !strcmp(format, "csv"),
                    near_ar(p) ? bare_si(s, mono) : 1);
    if (fflush(stdout) || ferror(stdout)) {
        fprintf(stderr, "lamina: cannot write the output\n");
        return CLI_EFILE;
    }
    return 0;
}

static int run_predict(int argc, char **argv)
{
    static const struct option longopts[] = {
        CLI_SETUP_LONGOPTS,
        {"wavelength", required_argument, 0, 'w'}, {"thickness", required_argument, 0, 'T'},
        {"layers", required_argument, 0, 'l'},  {"format", required_argument, 0, 'F'},  {"quiet", no_argument, 0, 'q'},
        {0, 0, 0, 0}};
    cli_setup_opts so;
    cli_setup_opts_init(&so);
    double mono = 0;
    long lo = 1, hi = 5;
    thicknesses th = {0, {0}};
    const char *format = "table";
    int opt, r;
    optind = 1;
    opterr = 0;
    while ((opt = getopt_long(argc, argv, "", longopts, NULL)) != -1) {
        switch (opt) {
        case 'w':
            if (cli_parse_double("predict", "--wavelength", optarg, 300, 1000, &mono)) return CLI_EUSAGE;
            break;
        case 'l': if ((r = parse_layers(optarg, &lo, &hi))) return r; break;
        case 'T': if ((r = parse_thickness(optarg, &th))) return r; break;
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
    if (th.count && lam_setup_crystal_kind(&s) != LAM_CRYSTAL_CONTINUOUS) {
        lam_setup_clear(&s);
        return cli_usage_error("predict", "--thickness needs a crystal of continuous thickness "
                                          "(--material hBN), not %s", s.flake);
    }
    if (th.count)
        lo = 1, hi = (long)th.count;
    lam_error err;
    lam_error_clear(&err);
    lam_prediction *p = malloc(sizeof *p);
    if (!p)
        lam_error_set(&err, LAM_ENOMEM, "out of memory");
    if (!p || predict_rows(&s, mono, (size_t)hi, th.count ? &th : NULL, p, &err))
        rc = cli_report(&err, so.setup_file);
    else
        rc = predict_output(&s, format, (size_t)lo, (size_t)hi, mono, th.count ? &th : NULL, p);
    free(p);
    lam_setup_clear(&s);
    return rc;
}

const cli_command cli_predict = {"predict", "predicted contrast per channel for N layers",
                                 run_predict, predict_help};
