/* cli/inspect.c - `lamina inspect IMAGE...`: how an image loads (size, bit
 * depth, transfer curve, saturation, linear mean per channel), to check
 * exposure before an analysis. */
#include "cli.h"
#include "lamina/image.h"

#include <getopt.h>
#include <stdlib.h>
#include <string.h>

static void inspect_help(FILE *out)
{
    fputs("Usage: lamina inspect [--encoding srgb|linear|GAMMA] [--max-megapixels N] IMAGE...\n"
          "Load each image as lamina would and print its size, bit depth, the transfer\n"
          "curve used to linearise it, the saturated-pixel fraction and the mean linear\n"
          "level per channel. Exit 1 if any file could not be read.\n",
          out);
}

static int run_inspect(int argc, char **argv)
{
    static const struct option longopts[] = {{"encoding", required_argument, 0, 'e'},
                                             {"max-megapixels", required_argument, 0, 'm'},
                                             {0, 0, 0, 0}};
    lam_load_options opt = lam_load_options_default();
    int c;
    optind = 1;
    opterr = 0;
    while ((c = getopt_long(argc, argv, "", longopts, NULL)) != -1) {
        if (c == 'e') {
            if (lam_transfer_parse(optarg, &opt.transfer))
                return cli_usage_error("inspect", "--encoding: expected srgb, linear or a gamma");
        } else if (c == 'm') {
            double mp;
            if (cli_parse_double("inspect", "--max-megapixels", optarg, 0.001, 10000, &mp))
                return CLI_EUSAGE;
            opt.max_pixels = (size_t)(mp * 1e6);
        } else {
            return cli_usage_error("inspect", "unknown or incomplete option '%s'", argv[optind - 1]);
        }
    }
    if (optind >= argc)
        return cli_usage_error("inspect", "no image given");
    int rc = CLI_OK;
    for (int i = optind; i < argc; i++) {
        lam_image *img = NULL;
        lam_error err;
        lam_error_clear(&err);
        if (lam_image_load(argv[i], &opt, &img, &err)) {
            rc = cli_report(&err, argv[i]);
            continue;
        }
        size_t n = img->width * img->height;
        double mean[3] = {0, 0, 0};
        for (int ch = 0; ch < 3; ch++) {
            for (size_t k = 0; k < n; k++)
                mean[ch] += img->plane[ch][k];
            mean[ch] /= (double)n;
        }
        printf("%s: %zux%zu %s %d-bit %s, transfer %s, saturated %.3f %%, linear mean "
               "%.4f %.4f %.4f\n",
               argv[i], img->width, img->height, img->kind == LAM_FILE_PNG ? "PNG" : "JPEG",
               img->bit_depth, img->source_channels == 1 ? "grey" : "RGB",
               lam_transfer_name(&img->transfer), 100.0 * (double)img->clipped_count / (double)n,
               mean[0], mean[1], mean[2]);
        lam_image_free(img);
    }
    return rc;
}

const cli_command cli_inspect = {"inspect", "how an image loads: size, depth, curve, saturation",
                                 run_inspect, inspect_help};
