/* cli/map.c - `lamina map RESULTS_DIR`: the chip map of a results folder. */
#include "cli.h"

static void map_help(FILE *out)
{
    fputs("Usage: lamina map RESULTS_DIR [-o chip.svg|chip.pdf|chip.png]\n", out);
}

static int run_map(int argc, char **argv)
{
    (void)argc;
    (void)argv;
    return cli_usage_error("map", "not yet");
}

const cli_command cli_map = {"map", "chip map of a results folder", run_map, map_help};
