/* cli/render.c - `lamina render SCENE.json -o IMAGE`: a synthetic
 * micrograph and its true layer map (IMAGE_STEM.truth.png). */
#include "cli.h"
#include "lamina/render.h"

#include <string.h>

static struct {
    const char *out;
    int linear16;
} A;

static const cli_option render_options[] = {
    {"output", 'o', CLI_TEXT, &A.out, 0, 0, NULL, "IMAGE", ".png or .jpg (required)"},
    {"linear16", 0, CLI_FLAG, &A.linear16, 0, 0, NULL, NULL,
     "a 16-bit linear PNG instead of 8-bit sRGB"},
    {"quiet", 0, CLI_FLAG, &cli_quiet, 0, 0, NULL, NULL, "no closing line"},
    CLI_END};

static int run_render(int argc, char **argv)
{
    if (cli_options_parse(&cli_render, argc, argv))
        return CLI_EUSAGE;
    if (!A.out)
        return cli_usage_error("render", "-o IMAGE is required");
    const char *dot = strrchr(A.out, '.');
    if (!dot || (strcmp(dot, ".png") && strcmp(dot, ".jpg") && strcmp(dot, ".jpeg")))
        return cli_usage_error("render", "-o: the image must end in .png, .jpg or .jpeg");
    char truth[4096];
    lam_error err;
    lam_error_clear(&err);
    if (lam_render_files(argv[optind], A.out, A.linear16, truth, sizeof truth, &err))
        return cli_report(&err, NULL);
    if (!cli_quiet)
        fprintf(stderr, "lamina: wrote %s and %s\n", A.out, truth);
    return CLI_OK;
}

const cli_command cli_render = {
    .name = "render", .summary = "synthetic micrograph from a scene description",
    .run = run_render,
    .usage = "Usage: lamina render SCENE.json -o IMAGE [--linear16]\n"
             "Render a synthetic microscope image from a scene (lamina-scene/1, see\n"
             "docs/scene.md): flakes with layer counts and Fermi levels, residue, dust,\n"
             "vignetting, gradient, blur, shot and read noise. IMAGE ends in .png (8-bit\n"
             "sRGB, or 16-bit linear with --linear16) or .jpg. The true layer map is\n"
             "written beside it as STEM.truth.png (0 substrate, N layers, 255 other).\n\n",
    .options = render_options, .min_args = 1, .max_args = 1,
    .args_error = "expected one SCENE.json"};
