/* inputs.c - the images a batch works on (lamina/inputs.h). */
#include "lamina/inputs.h"
#include "lamina/batch.h"
#include "lamina/textfile.h"

#include <dirent.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/stat.h>

lam_status lam_inputs_add(lam_inputs *in, const char *path, lam_error *err)
{
    if (in->count == in->cap) {
        size_t nc = in->cap ? in->cap * 2 : 64;
        char **np = realloc(in->paths, nc * sizeof *np);
        if (!np)
            return lam_error_set(err, LAM_ENOMEM, "cannot list %zu inputs", nc);
        in->paths = np;
        in->cap = nc;
    }
    if (!(in->paths[in->count] = strdup(path)))
        return lam_error_set(err, LAM_ENOMEM, "cannot list the input %s", path);
    in->count++;
    return LAM_OK;
}

void lam_inputs_free(lam_inputs *in)
{
    for (size_t i = 0; i < in->count; i++)
        free(in->paths[i]);
    free(in->paths);
    memset(in, 0, sizeof *in);
}

int lam_inputs_is_image_name(const char *name)
{
    static const char *const ext[] = {".png", ".jpg", ".jpeg", ".tif", ".tiff"};
    const char *dot = strrchr(name, '.');
    for (size_t i = 0; dot && dot != name && i < sizeof ext / sizeof ext[0]; i++)
        if (!strcasecmp(dot, ext[i]))
            return 1;
    return 0;
}

int lam_inputs_is_output_name(const char *name)
{
    return strstr(name, ".annotated.") || strstr(name, ".layers.") || strstr(name, ".truth.") ||
           !strcmp(name, "contact-sheet.png");
}

static int cmp_str(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

lam_status lam_inputs_folder_names(const char *dir, int (*keep)(const char *name),
                                   lam_inputs *out, lam_error *err)
{
    memset(out, 0, sizeof *out);
    DIR *d = opendir(dir);
    if (!d) {
        lam_error_set(err, LAM_EIO, "cannot read the folder");
        lam_error_set_file(err, dir);
        return LAM_EIO;
    }
    struct dirent *e;
    lam_status st = LAM_OK;
    while (!st && (e = readdir(d)))
        if (e->d_name[0] != '.' && (!keep || keep(e->d_name)))
            st = lam_inputs_add(out, e->d_name, err);
    closedir(d);
    if (st)
        lam_inputs_free(out);
    else if (out->count) /* qsort must not see a NULL array, even empty */
        qsort(out->paths, out->count, sizeof *out->paths, cmp_str);
    return st;
}

typedef struct folder_scan {
    int recursive;
    size_t subfolders; /* seen, whether entered or not */
} folder_scan;

/* Add a folder's image files in name order; with 'recursive', each
 * subfolder where its name falls in that order (depth first). */
static lam_status add_folder(lam_inputs *in, const char *dir, folder_scan *fs, int depth,
                             lam_error *err)
{
    lam_inputs names;
    lam_status st = lam_inputs_folder_names(dir, NULL, &names, err);
    size_t dl = strlen(dir);
    int trim = dl > 1 && dir[dl - 1] == '/';
    for (size_t i = 0; i < names.count && !st; i++) {
        char p[4096];
        snprintf(p, sizeof p, "%.*s/%s", (int)(trim ? dl - 1 : dl), dir, names.paths[i]);
        struct stat sb;
        if (stat(p, &sb) != 0)
            continue;
        if (S_ISDIR(sb.st_mode)) {
            fs->subfolders++;
            if (fs->recursive && depth < LAM_INPUTS_MAX_DEPTH)
                st = add_folder(in, p, fs, depth + 1, err);
        } else if (lam_inputs_is_image_name(names.paths[i]) &&
                   !lam_inputs_is_output_name(names.paths[i])) {
            st = lam_inputs_add(in, p, err);
        }
    }
    lam_inputs_free(&names);
    return st;
}

/* A folder given as an input must yield images: say why not. */
static lam_status add_top_folder(lam_inputs *in, const char *dir, int recursive, lam_error *err)
{
    folder_scan fs = {recursive, 0};
    size_t before = in->count;
    lam_status st = add_folder(in, dir, &fs, 0, err);
    if (st || in->count > before)
        return st;
    if (!recursive && fs.subfolders)
        return lam_error_set(err, LAM_EINVAL,
                             "%s holds no image files (%zu subfolder%s; add --recursive)", dir,
                             fs.subfolders, fs.subfolders == 1 ? "" : "s");
    return lam_error_set(err, LAM_EINVAL,
                         "%s holds no image files (.png, .jpg, .jpeg, .tif, .tiff)%s", dir,
                         recursive ? ", nor do its subfolders" : "");
}

static lam_status add_list(lam_inputs *in, const char *list, lam_error *err)
{
    FILE *fp = fopen(list, "r");
    if (!fp) {
        lam_error_set(err, LAM_EIO, "cannot open the list");
        lam_error_set_file(err, list);
        return LAM_EIO;
    }
    char dir[2048], line[4096], p[6200];
    lam_path_dir(list, dir, sizeof dir);
    lam_status st = LAM_OK;
    while (!st && fgets(line, sizeof line, fp)) {
        line[strcspn(line, "\r\n")] = '\0';
        if (!line[0] || line[0] == '#')
            continue;
        lam_path_join(p, sizeof p, dir, line);
        st = lam_inputs_add(in, p, err);
    }
    fclose(fp);
    return st;
}

/* Two inputs with the same stem would overwrite each other's results. */
static lam_status check_stems(const lam_inputs *in, lam_error *err)
{
    for (size_t i = 0; i < in->count; i++)
        for (size_t j = i + 1; j < in->count; j++) {
            char a[512], b[512];
            lam_batch_stem(in->paths[i], a, sizeof a);
            lam_batch_stem(in->paths[j], b, sizeof b);
            if (!strcmp(a, b))
                return lam_error_set(err, LAM_EINVAL, "%s and %s would both write %s.*: rename "
                                                      "one", in->paths[i], in->paths[j], a);
        }
    return LAM_OK;
}

lam_status lam_inputs_collect(lam_inputs *in, const char *const *args, size_t n,
                              const char *list, int recursive, lam_error *err)
{
    memset(in, 0, sizeof *in);
    lam_status st = LAM_OK;
    for (size_t i = 0; i < n && !st; i++) {
        struct stat sb;
        if (stat(args[i], &sb) == 0 && S_ISDIR(sb.st_mode))
            st = add_top_folder(in, args[i], recursive, err);
        else
            st = lam_inputs_add(in, args[i], err);
    }
    if (!st && list)
        st = add_list(in, list, err);
    if (!st)
        st = check_stems(in, err);
    if (st)
        lam_inputs_free(in);
    return st;
}

void lam_inputs_shard(lam_inputs *in, size_t index, size_t of)
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
