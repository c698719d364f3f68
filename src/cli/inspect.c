/* cli/inspect.c - `lamina inspect IMAGE...`: how an image loads (size, bit
 * depth, transfer curve, saturation, linear mean per channel), to check
 * exposure before an analysis. */
#include "cli.h"
#include "lamina/analyze.h"
#include "lamina/image.h"
#include "lamina/summary.h"

#include <stdlib.h>

static lam_analysis_options opt; /* only its loading options are used */

static const cli_option inspect_options[] = {
    {"encoding", 0, CLI_ANALYSIS, &opt, 0, 0, NULL, "E",
     "srgb, linear or a gamma value (default: from the file)"},
    {"max-megapixels", 0, CLI_ANALYSIS, &opt, 0, 0, NULL, "MP", "refuse larger images"},
    CLI_END};

static int run_inspect(int argc, char **argv)
{
    opt = lam_analysis_options_default();
    if (cli_options_parse(&cli_inspect, argc, argv))
        return CLI_EUSAGE;
    int rc = CLI_OK;
    for (int i = optind; i < argc; i++) {
        lam_image *img = NULL;
        char *text = NULL;
        lam_error err;
        lam_error_clear(&err);
        if (lam_image_load(argv[i], &opt.load, &img, &err) ||
            lam_summary_image(argv[i], img, &text, &err))
            rc = cli_report(&err, argv[i]);
        else
            printf("%s\n", text);
        free(text);
        lam_image_free(img);
    }
    return rc;
}

const cli_command cli_inspect = {
    .name = "inspect", .summary = "how an image loads: size, depth, curve, saturation",
    .run = run_inspect,
    .usage = "Usage: lamina inspect [OPTIONS] IMAGE...\n"
             "Load each image as lamina would and print its size, bit depth, the transfer\n"
             "curve used to linearise it, the saturated-pixel fraction and the mean linear\n"
             "level per channel. Exit 1 if any file could not be read.\n\n",
    .options = inspect_options, .min_args = 1, .max_args = -1, .args_error = "no image given"};
