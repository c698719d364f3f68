/* cli/main.c - lamina's entry point: dispatch to subcommands, help, version. */
#include "cli.h"
#include "lamina/version.h"
#include "lamina/bigalloc.h"
#include "lamina/draw.h"
#include "lamina/outfile.h"

#include <signal.h>
#include <limits.h>
#ifdef __GLIBC__
#include <malloc.h>
#endif
#include <stdlib.h>
#include <string.h>

/* Only subcommands that work are registered here. */
static const cli_command *const commands[] = {
    &cli_analyze,
    &cli_predict,
    &cli_oxide,
    &cli_catalog,
    &cli_calibrate,
    &cli_inspect,
    &cli_map,
    &cli_plan,
    &cli_render,
    &cli_watch,
    NULL,
};

static void print_overview(FILE *out)
{
    fprintf(out,
            "lamina %s - layer counts of 2D-material flakes from optical micrographs\n\n"
            "Usage: lamina COMMAND [OPTIONS] [ARGS]\n\nCommands:\n",
            LAMINA_VERSION);
    for (size_t i = 0; commands[i]; i++)
        fprintf(out, "  %-10s %s\n", commands[i]->name, commands[i]->summary);
    fprintf(out, "  %-10s %s\n", "help", "show help for a command");
    fprintf(out,
            "\nContrast convention: C = (substrate - flake) / substrate, per channel,\n"
            "in linear light. Layer counts are model estimates: confirm by Raman\n"
            "spectroscopy or AFM before committing a flake to fabrication.\n"
            "Run 'lamina help COMMAND' for a command's options.\n");
}

static const cli_command *find_command(const char *name)
{
    for (size_t i = 0; commands[i]; i++)
        if (!strcmp(commands[i]->name, name))
            return commands[i];
    return NULL;
}

static void on_signal(int sig)
{
    lam_outfile_cleanup_all();
    signal(sig, SIG_DFL);
    raise(sig);
}

/* The heap's first 256 MiB in huge pages (lamina/bigalloc.h): a 12 MP
 * analysis holds ~175 MB at its peak; beyond the reserve the whole-image
 * buffers take their own advice. */
#define HEAP_HUGE_BYTES ((size_t)256 << 20)

/* The process's memory policy, set before anything is allocated.
 * Freed whole-image buffers stay in the process for the next stage and
 * the next image. glibc would otherwise map every block above its mmap
 * threshold afresh and unmap it on free, and the kernel zeroes each new
 * page: on the project's machine that was 15 % of a 12 MP analysis' time
 * (perf: clear_page_erms), and every map and unmap takes the memory-map
 * lock that the other threads' page faults wait on. The cost: a batch
 * holds the largest image's peak until it ends (docs/performance.md).
 * And the heap is advised for huge pages: a 1 MP tile took 3000-3600 page
 * faults of 10-13 us each, 850-1050 after; it holds 6-9 MB more. */
static void set_memory_policy(void)
{
#ifdef __GLIBC__
    (void)mallopt(M_MMAP_THRESHOLD, INT_MAX);
    (void)mallopt(M_TRIM_THRESHOLD, INT_MAX);
    lam_heap_huge_pages(HEAP_HUGE_BYTES);
#endif
}

int main(int argc, char **argv)
{
    set_memory_policy();
    lam_error_init_gsl();
    atexit(lam_draw_shutdown); /* font caches: not leaks, but leak checkers cannot tell */
    signal(SIGINT, on_signal);
    signal(SIGTERM, on_signal);
    if (argc < 2) {
        print_overview(stderr);
        return CLI_EUSAGE;
    }
    const char *name = argv[1];
    if (!strcmp(name, "--version") || !strcmp(name, "version")) {
        printf("lamina %s\n", LAMINA_VERSION);
        return CLI_OK;
    }
    if (!strcmp(name, "--help") || !strcmp(name, "-h")) {
        print_overview(stdout);
        return CLI_OK;
    }
    if (!strcmp(name, "help")) {
        if (argc < 3) {
            print_overview(stdout);
            return CLI_OK;
        }
        const cli_command *cmd = find_command(argv[2]);
        if (!cmd)
            return cli_usage_error(NULL, "unknown command '%s'", argv[2]);
        cli_help(stdout, cmd);
        return CLI_OK;
    }
    const cli_command *cmd = find_command(name);
    if (!cmd)
        return cli_usage_error(NULL, "unknown command '%s'", name);
    for (int i = 2; i < argc; i++) {
        if (!strcmp(argv[i], "--help") || !strcmp(argv[i], "-h")) {
            cli_help(stdout, cmd);
            return CLI_OK;
        }
    }
    return cmd->run(argc - 1, argv + 1);
}
