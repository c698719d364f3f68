/* outfile.c - atomic output: temporary file in the target folder, checked
 * writes and close, then rename. Open temporaries are tracked so that an
 * interrupted run can remove them. */
#include "lamina/outfile.h"

#include <errno.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include <fcntl.h>
#include <sys/stat.h>

#define MAX_OPEN_TEMPS 64

static pthread_mutex_t temps_lock = PTHREAD_MUTEX_INITIALIZER;
static char *open_temps[MAX_OPEN_TEMPS];

static void track(const char *temp, int add)
{
    pthread_mutex_lock(&temps_lock);
    for (int i = 0; i < MAX_OPEN_TEMPS; i++) {
        if (add && !open_temps[i]) {
            open_temps[i] = strdup(temp);
            break;
        }
        if (!add && open_temps[i] && !strcmp(open_temps[i], temp)) {
            free(open_temps[i]);
            open_temps[i] = NULL;
            break;
        }
    }
    pthread_mutex_unlock(&temps_lock);
}

void lam_outfile_cleanup_all(void)
{
    for (int i = 0; i < MAX_OPEN_TEMPS; i++)
        if (open_temps[i])
            unlink(open_temps[i]);
}

lam_status lam_outfile_open(lam_outfile *of, const char *path, lam_error *err)
{
    memset(of, 0, sizeof *of);
    size_t n = strlen(path);
    if (n + 16 >= LAM_OUTFILE_PATH_MAX)
        return lam_error_set(err, LAM_EINVAL, "output path too long: %s", path);
    memcpy(of->final_path, path, n + 1);
    struct stat sb;
    if (stat(path, &sb) == 0 && S_ISCHR(sb.st_mode)) {
        /* a device such as /dev/null or /dev/full: write straight to it */
        of->fp = fopen(path, "wb");
        if (!of->fp) {
            lam_error_set(err, LAM_EIO, "cannot open %s: %s", path, strerror(errno));
            lam_error_set_file(err, path);
            return LAM_EIO;
        }
        return LAM_OK;
    }
    snprintf(of->temp_path, sizeof of->temp_path, "%s.tmp-XXXXXX", path);
    int fd = mkstemp(of->temp_path);
    if (fd < 0) {
        lam_error_set(err, LAM_EIO, "cannot create %s: %s", path, strerror(errno));
        lam_error_set_file(err, path);
        return LAM_EIO;
    }
    fchmod(fd, 0644);
    of->fp = fdopen(fd, "wb");
    if (!of->fp) {
        close(fd);
        unlink(of->temp_path);
        lam_error_set(err, LAM_EIO, "cannot open %s: %s", path, strerror(errno));
        lam_error_set_file(err, path);
        return LAM_EIO;
    }
    track(of->temp_path, 1);
    return LAM_OK;
}

lam_status lam_outfile_commit(lam_outfile *of, lam_error *err)
{
    int failed = fflush(of->fp) != 0 || ferror(of->fp);
    int saved = errno;
    if (fclose(of->fp) != 0 && !failed) {
        failed = 1;
        saved = errno;
    }
    of->fp = NULL;
    if (!of->temp_path[0]) {
        if (failed) {
            lam_error_set(err, LAM_EIO, "cannot write %s: %s", of->final_path,
                          strerror(saved ? saved : EIO));
            lam_error_set_file(err, of->final_path);
            return LAM_EIO;
        }
        return LAM_OK;
    }
    if (!failed && rename(of->temp_path, of->final_path) != 0) {
        failed = 1;
        saved = errno;
    }
    if (failed) {
        unlink(of->temp_path);
        track(of->temp_path, 0);
        lam_error_set(err, LAM_EIO, "cannot write %s: %s", of->final_path,
                      strerror(saved ? saved : EIO));
        lam_error_set_file(err, of->final_path);
        return LAM_EIO;
    }
    track(of->temp_path, 0);
    return LAM_OK;
}

void lam_outfile_abort(lam_outfile *of)
{
    if (of->fp)
        fclose(of->fp);
    of->fp = NULL;
    if (!of->temp_path[0])
        return;
    unlink(of->temp_path);
    track(of->temp_path, 0);
}

lam_status lam_outfile_write_buffer(const char *path, const void *data, size_t n,
                                    lam_error *err)
{
    lam_outfile of;
    lam_status st = lam_outfile_open(&of, path, err);
    if (st)
        return st;
    if (n && fwrite(data, 1, n, of.fp) != n) {
        int e = errno;
        lam_outfile_abort(&of);
        lam_error_set(err, LAM_EIO, "cannot write %s: %s", path, strerror(e));
        lam_error_set_file(err, path);
        return LAM_EIO;
    }
    return lam_outfile_commit(&of, err);
}

lam_status lam_outfile_make_dir(const char *path, lam_error *err)
{
    char buf[LAM_OUTFILE_PATH_MAX];
    size_t n = strlen(path);
    if (n == 0 || n >= sizeof buf) {
        lam_error_set_file(err, path);
        return lam_error_set(err, LAM_EIO, "invalid output folder");
    }
    memcpy(buf, path, n + 1);
    /* each prefix ending at a '/' in turn, then the whole path */
    for (size_t i = 1; i <= n; i++) {
        if (buf[i] != '/' && buf[i] != '\0')
            continue;
        char c = buf[i];
        buf[i] = '\0';
        if (mkdir(buf, 0755) != 0 && errno != EEXIST) {
            int e = errno;
            lam_error_set_file(err, buf);
            lam_error_set(err, LAM_EIO, "cannot create folder: %s", strerror(e));
            if (err)
                err->sys_errno = e;
            return LAM_EIO;
        }
        buf[i] = c;
    }
    struct stat sb;
    if (stat(path, &sb) != 0 || !S_ISDIR(sb.st_mode)) {
        lam_error_set_file(err, path);
        return lam_error_set(err, LAM_EIO, "not a folder");
    }
    return LAM_OK;
}
