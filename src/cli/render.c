/* cli/render.c - `lamina render SCENE.json -o IMAGE`: a synthetic
 * micrograph and its true layer map (IMAGE_STEM.truth.png). */
#include "cli.h"
#include "lamina/png.h"
#include "lamina/render.h"

#include <getopt.h>
#include <stdlib.h>
#include <string.h>

static void render_help(FILE *out)
{
    fputs("Usage: lamina render SCENE.json -o IMAGE [--linear16]\n"
          "Render a synthetic microscope image from a scene (lamina-scene/1, see\n"
          "docs/scene.md): flakes with layer counts and Fermi levels, residue, dust,\n"
          "vignetting, gradient, blur, shot and read noise. IMAGE ends in .png (8-bit\n"
          "sRGB, or 16-bit linear with --linear16) or .jpg. The true layer map is\n"
          "written beside it as STEM.truth.png (0 substrate, N layers, 255 other).\n",
          out);
}

static int run_render(int argc, char **argv)
{
    static const struct option longopts[] = {{"output", required_argument, 0, 'o'},
                                             {"linear16", no_argument, 0, 'L'},
                                             {"quiet", no_argument, 0, 'q'},
                                             {0, 0, 0, 0}};
    const char *out = NULL;
    int linear16 = 0, c;
    optind = 1;
    opterr = 0;
    while ((c = getopt_long(argc, argv, "o:", longopts, NULL)) != -1) {
        if (c == 'o')
            out = optarg;
        else if (c == 'L')
            linear16 = 1;
        else if (c == 'q')
            cli_quiet = 1;
        else
            return cli_usage_error("render", "unknown or incomplete option '%s'", argv[optind - 1]);
    }
    if (optind + 1 != argc)
        return cli_usage_error("render", "expected one SCENE.json");
    if (!out)
        return cli_usage_error("render", "-o IMAGE is required");
    const char *dot = strrchr(out, '.');
    if (!dot || (strcmp(dot, ".png") && strcmp(dot, ".jpg") && strcmp(dot, ".jpeg")))
        return cli_usage_error("render", "-o: the image must end in .png, .jpg or .jpeg");
    lam_scene scene;
    lam_error err;
    lam_error_clear(&err);
    if (lam_scene_load(argv[optind], &scene, &err))
        return cli_report(&err, argv[optind]);
    lam_image *img = NULL;
    uint8_t *truth = NULL;
    int rc = CLI_OK;
    char truth_path[4096];
    snprintf(truth_path, sizeof truth_path, "%.*s.truth.png", (int)(dot - out), out);
    if (lam_render(&scene, &img, &truth, &err) ||
        lam_render_save(img, out, linear16, scene.jpeg_quality, &err) ||
        lam_png_save_grey8(truth_path, truth, img->width, img->height, &err))
        rc = cli_report(&err, out);
    else if (!cli_quiet)
        fprintf(stderr, "lamina: wrote %s and %s\n", out, truth_path);
    lam_image_free(img);
    free(truth);
    lam_scene_clear(&scene);
    return rc;
}

const cli_command cli_render = {"render", "synthetic micrograph from a scene description",
                                run_render, render_help};
