/* cli/setup_opts.h - the options every physics subcommand shares (--setup,
 * --stack, --material, --oxide, --na, --fermi, --um-per-px), parsed in one
 * place and applied to a lam_setup. */
#ifndef LAMINA_CLI_SETUP_OPTS_H
#define LAMINA_CLI_SETUP_OPTS_H

#include "lamina/analyze.h"
#include "lamina/setup.h"

typedef struct cli_setup_opts {
    const char *setup_file;
    double oxide_nm;  /* < 0: not given */
    double na;        /* < 0: not given */
    double fermi_ev;  /* NAN: not given */
    double um_per_px; /* <= 0: not given */
    const char *stack_file; /* --stack: substrate {"stack": [...], "base": ...} */
    const char *material;   /* --material NAME */
} cli_setup_opts;

/* getopt codes of the options shared by every physics command */
enum {
    CLI_OPT_STACK = 1001, CLI_OPT_MATERIAL, CLI_OPT_SETUP, CLI_OPT_OXIDE, CLI_OPT_NA,
    CLI_OPT_FERMI, CLI_OPT_UM_PER_PX
};
#define CLI_SETUP_LONGOPTS                                                                   \
    {"stack", required_argument, 0, CLI_OPT_STACK},                                         \
        {"material", required_argument, 0, CLI_OPT_MATERIAL},                               \
        {"setup", required_argument, 0, CLI_OPT_SETUP},                                     \
        {"oxide", required_argument, 0, CLI_OPT_OXIDE}, {"na", required_argument, 0, CLI_OPT_NA}, \
        {"fermi", required_argument, 0, CLI_OPT_FERMI},                                     \
        {"um-per-px", required_argument, 0, CLI_OPT_UM_PER_PX}

#define CLI_SETUP_HELP                                                                     \
    "  --setup FILE          setup profile (lamina-setup/1)\n"                             \
    "  --oxide NM, --na X, --fermi EV, --um-per-px X, --material NAME\n"                   \
    "                        override the setup's nominal SiO2 thickness, illumination\n" \
    "                        NA, Fermi level, pixel size and flake material (graphene,\n"   \
    "                        hBN, MoS2, WS2, WSe2; a source after a slash: MoS2/Song)\n"    \
    "  --stack FILE          substrate {\"stack\": [...], \"base\": ...}\n"

/* Handle a shared option: 1 if it was one, 0 if not, -1 after printing a
 * usage error for a bad value (exit 2). */
int cli_setup_option(cli_setup_opts *o, const char *command, int code, const char *arg);

void cli_setup_opts_init(cli_setup_opts *o);

/* Build the setup: defaults, then the file, then the options through the
 * library's setters (so the keys they set are not reported as defaults).
 * Prints any error and returns the exit code (0 on success; 2 for an
 * option value a setter refuses). */
int cli_setup_build(const char *command, const cli_setup_opts *o, lam_setup *s);

/* The setup hash of lamina/batch.h: the setup file's bytes, the analysis
 * options and the values given on the command line. */
void cli_setup_hash(const cli_setup_opts *o, const lam_analysis_options *opt, char *out,
                    size_t n);

#endif
