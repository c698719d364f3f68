/* cli/inputs.c - batch inputs: files, folders, list files, shards; output
 * stems and hashes (lamina/batch.h). */
#include "inputs.h"
#include "cli.h"

#include <dirent.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/stat.h>
#include <cjson/cJSON.h>
#include "lamina/batch.h"
#include "lamina/jsonfile.h"
#include "lamina/textfile.h"

static int add(cli_inputs *in, const char *path)
{
    if (in->count == in->cap) {
        size_t nc = in->cap ? in->cap * 2 : 64;
        char **np = realloc(in->paths, nc * sizeof *np);
        if (!np)
            return -1;
        in->paths = np;
        in->cap = nc;
    }
    if (!(in->paths[in->count] = strdup(path)))
        return -1;
    in->count++;
    return 0;
}

/* The extensions a folder is searched for (files given by name are read
 * whatever they are called: the content decides). */
static int is_image_name(const char *name)
{
    static const char *const ext[] = {".png", ".jpg", ".jpeg", ".tif", ".tiff"};
    const char *dot = strrchr(name, '.');
    for (size_t i = 0; dot && i < sizeof ext / sizeof ext[0]; i++)
        if (!strcasecmp(dot, ext[i]))
            return 1;
    return 0;
}

/* lamina's own outputs, which a folder of results may hold. */
static int is_result_name(const char *name)
{
    return strstr(name, ".annotated.") || strstr(name, ".layers.") || strstr(name, ".truth.") ||
           !strcmp(name, "contact-sheet.png");
}

static int cmp_str(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

static void free_names(char **names, size_t n)
{
    for (size_t i = 0; i < n; i++)
        free(names[i]);
    free(names);
}

/* The entries of a folder except hidden ones, sorted (byte order), so a
 * scan is the same on every machine. */
static int list_sorted(const char *dir, char ***out, size_t *count)
{
    DIR *d = opendir(dir);
    if (!d)
        return -1;
    char **names = NULL;
    size_t n = 0, cap = 0;
    struct dirent *e;
    int bad = 0;
    while (!bad && (e = readdir(d))) {
        if (e->d_name[0] == '.')
            continue;
        if (n == cap) {
            char **nn = realloc(names, (cap = cap ? cap * 2 : 64) * sizeof *nn);
            bad = !nn;
            names = nn ? nn : names;
        }
        if (!bad && !(names[n] = strdup(e->d_name)))
            bad = 1;
        n += !bad;
    }
    closedir(d);
    if (bad) {
        free_names(names, n);
        return -2;
    }
    if (n)
        qsort(names, n, sizeof *names, cmp_str);
    *out = names;
    *count = n;
    return 0;
}

#define MAX_FOLDER_DEPTH 16 /* also ends loops made with symbolic links */

typedef struct folder_scan {
    int recursive;
    size_t subfolders; /* seen, whether entered or not */
} folder_scan;

/* Add a folder's image files in name order; with --recursive, each
 * subfolder where its name falls in that order (depth first). */
static int add_folder(cli_inputs *in, const char *dir, folder_scan *fs, int depth)
{
    char **names = NULL;
    size_t n = 0;
    int rc = list_sorted(dir, &names, &n);
    if (rc == -1)
        fprintf(stderr, "lamina: %s: cannot read the folder\n", dir);
    else if (rc)
        fprintf(stderr, "lamina: out of memory\n");
    if (rc)
        return CLI_EFILE;
    size_t dl = strlen(dir);
    int trim = dl > 1 && dir[dl - 1] == '/';
    for (size_t i = 0; i < n && !rc; i++) {
        char p[4096];
        snprintf(p, sizeof p, "%.*s/%s", (int)(trim ? dl - 1 : dl), dir, names[i]);
        struct stat sb;
        if (stat(p, &sb) != 0)
            continue;
        if (S_ISDIR(sb.st_mode)) {
            fs->subfolders++;
            if (fs->recursive && depth < MAX_FOLDER_DEPTH)
                rc = add_folder(in, p, fs, depth + 1);
        } else if (is_image_name(names[i]) && !is_result_name(names[i]) && add(in, p)) {
            fprintf(stderr, "lamina: out of memory\n");
            rc = CLI_EFILE;
        }
    }
    free_names(names, n);
    return rc;
}

/* A folder given on the command line must yield images: say why not. */
static int add_top_folder(cli_inputs *in, const char *dir, int recursive)
{
    folder_scan fs = {recursive, 0};
    size_t before = in->count;
    int rc = add_folder(in, dir, &fs, 0);
    if (rc || in->count > before)
        return rc;
    if (!recursive && fs.subfolders)
        return cli_usage_error("analyze",
                               "%s holds no image files (%zu subfolder%s; add --recursive)", dir,
                               fs.subfolders, fs.subfolders == 1 ? "" : "s");
    return cli_usage_error("analyze", "%s holds no image files (.png, .jpg, .jpeg, .tif, .tiff)%s",
                           dir, recursive ? ", nor do its subfolders" : "");
}

static int add_list(cli_inputs *in, const char *list)
{
    FILE *fp = fopen(list, "r");
    if (!fp) {
        fprintf(stderr, "lamina: %s: cannot open the list\n", list);
        return CLI_EFILE;
    }
    char dir[2048];
    lam_path_dir(list, dir, sizeof dir);
    char line[4096];
    while (fgets(line, sizeof line, fp)) {
        line[strcspn(line, "\r\n")] = '\0';
        if (!line[0] || line[0] == '#')
            continue;
        char p[6200];
        if (line[0] == '/')
            snprintf(p, sizeof p, "%s", line);
        else
            snprintf(p, sizeof p, "%s/%s", dir, line);
        if (add(in, p)) {
            fclose(fp);
            fprintf(stderr, "lamina: out of memory\n");
            return CLI_EFILE;
        }
    }
    fclose(fp);
    return 0;
}

int cli_inputs_collect(cli_inputs *in, int argc, char **argv, const char *list, int recursive)
{
    memset(in, 0, sizeof *in);
    int rc = 0;
    for (int i = 0; i < argc && !rc; i++) {
        struct stat sb;
        if (stat(argv[i], &sb) == 0 && S_ISDIR(sb.st_mode))
            rc = add_top_folder(in, argv[i], recursive);
        else if (add(in, argv[i]))
            rc = CLI_EFILE;
    }
    if (!rc && list)
        rc = add_list(in, list);
    /* two inputs with the same stem would overwrite each other's results */
    for (size_t i = 0; !rc && i < in->count; i++)
        for (size_t j = i + 1; j < in->count; j++) {
            char a[512], b[512];
            cli_stem_of(in->paths[i], a, sizeof a);
            cli_stem_of(in->paths[j], b, sizeof b);
            if (!strcmp(a, b)) {
                rc = cli_usage_error("analyze", "%s and %s would both write %s.*: rename one",
                                     in->paths[i], in->paths[j], a);
                break;
            }
        }
    if (rc)
        cli_inputs_free(in);
    return rc;
}

void cli_inputs_shard(cli_inputs *in, size_t index, size_t of)
{
    size_t k = 0;
    for (size_t i = 0; i < in->count; i++) {
        if (i % of == index - 1)
            in->paths[k++] = in->paths[i];
        else
            free(in->paths[i]);
    }
    in->count = k;
}

void cli_inputs_free(cli_inputs *in)
{
    for (size_t i = 0; i < in->count; i++)
        free(in->paths[i]);
    free(in->paths);
    memset(in, 0, sizeof *in);
}

void cli_stem_of(const char *path, char *stem, size_t n)
{
    lam_batch_stem(path, stem, n);
}

int cli_hash_file(const char *path, char *out, size_t n)
{
    char h[LAM_BATCH_HASH_LEN];
    lam_status st = lam_batch_hash_file(path, h, NULL);
    snprintf(out, n, "%s", h);
    return st ? -1 : 0;
}

void cli_setup_hash(const char *setup_file, const lam_analysis_options *opt,
                    const cli_setup_opts *so, char *out, size_t n)
{
    char extra[160], h[LAM_BATCH_HASH_LEN];
    snprintf(extra, sizeof extra, "ox=%.6g na=%.6g mu=%.6g um=%.6g", so->oxide_nm, so->na,
             so->fermi_ev, so->um_per_px);
    lam_batch_setup_hash(setup_file, opt, extra, h);
    snprintf(out, n, "%s", h);
}

cJSON *cli_read_json(const char *path)
{
    cJSON *root = NULL;
    lam_json_load(path, 64u << 20, "result", NULL, &root, NULL);
    return root;
}
