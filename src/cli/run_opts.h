/* cli/run_opts.h - what the commands that end in a catalogue share
 * (analyze, catalog merge, watch, map): the stage options and writing the
 * run outputs (catalogue, goto.csv, crops, contact sheet, report.html)
 * with the warnings printed. */
#ifndef LAMINA_CLI_RUN_OPTS_H
#define LAMINA_CLI_RUN_OPTS_H

#include "lamina/catalog.h"
#include "lamina/stage.h"

enum { CLI_OPT_STAGE_AXES = 1101, CLI_OPT_STAGE_UNITS, CLI_OPT_STAGE_ROTATION, CLI_OPT_STAGE_ORIGIN };
#define CLI_STAGE_LONGOPTS                                                                   \
    {"stage-axes", required_argument, 0, CLI_OPT_STAGE_AXES},                               \
        {"stage-units", required_argument, 0, CLI_OPT_STAGE_UNITS},                         \
        {"stage-rotation", required_argument, 0, CLI_OPT_STAGE_ROTATION},                   \
        {"stage-origin", required_argument, 0, CLI_OPT_STAGE_ORIGIN}

#define CLI_STAGE_HELP                                                                       \
    "  --stage-axes X,Y      where stage readings grow in the image: right|left,down|up\n"  \
    "                        (default right,down)\n"                                        \
    "  --stage-units U       um or mm for goto.csv and --stage-origin (default: as in the\n" \
    "                        positions file's header)\n"                                     \
    "  --stage-rotation DEG  turn the pictures DEG counter-clockwise onto the stage axes\n"  \
    "  --stage-origin X,Y|TILE:PX,PY  chip (0,0): a stage reading, or a pixel of a tile\n"

/* --target-thickness A-B (nm, 0 < A <= B <= 1000) into out; 0, or the
 * usage exit code after printing the error. */
int cli_parse_target(const char *command, const char *arg, double out[2]);
/* The same as an option table's call (cli/options.h): 0, or -1. */
int cli_option_target(const char *command, const char *arg, void *target);

/* 1 if 'code' was a stage option, 0 if not, -1 after a usage error. */
int cli_stage_option(lam_stage *s, const char *command, int code, const char *arg);

/* Finish the catalogue, write catalog.csv/json, goto.csv (with positions),
 * crops, contact-sheet.png and report.html into out_dir, and print the
 * catalogue's warnings. refresh_s > 0 makes the page reload itself.
 * Returns an exit code. */
int cli_run_outputs(lam_catalog *cat, const char *out_dir, double refresh_s);

#endif
