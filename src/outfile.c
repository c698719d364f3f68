/* outfile.c - atomic output: temporary file in the target folder, checked
 * writes and close, then rename. Open temporaries are tracked so that an
 * interrupted run can remove them. */
#include "lamina/outfile.h"

#include <errno.h>
#include <pthread.h>
#include <stdatomic.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include <fcntl.h>
#include <sys/stat.h>

#define MAX_OPEN_TEMPS 64

/* The open temporaries, for lam_outfile_cleanup_all, which runs in a
 * signal handler: it takes no lock and frees nothing, so each slot is a
 * fixed buffer and a flag. A temporary is named and tracked before it is
 * created, and creation is refused once cleanup has begun ('dying'), so an
 * interrupt cannot fall between a file's creation and its tracking (with
 * mkstemp it could: the interrupted run of test_batch left one file in a
 * CI run) nor let a file be created after the cleanup has passed. */
static pthread_mutex_t temps_lock = PTHREAD_MUTEX_INITIALIZER; /* adders only */
static char temp_names[MAX_OPEN_TEMPS][LAM_OUTFILE_PATH_MAX];
static atomic_int temp_used[MAX_OPEN_TEMPS];
static atomic_int dying;        /* lam_outfile_cleanup_all has begun */
static atomic_uint temp_serial; /* makes the process's temporaries' names unique */

/* A slot for temp, or -1 when all are taken (the file is then not removed
 * on an interrupt). */
static int track_add(const char *temp)
{
    int slot = -1;
    pthread_mutex_lock(&temps_lock);
    for (int i = 0; i < MAX_OPEN_TEMPS && slot < 0; i++)
        if (!atomic_load(&temp_used[i])) {
            snprintf(temp_names[i], sizeof temp_names[i], "%s", temp);
            atomic_store(&temp_used[i], 1);
            slot = i;
        }
    pthread_mutex_unlock(&temps_lock);
    return slot;
}

static void track_remove(int slot)
{
    if (slot >= 0)
        atomic_store(&temp_used[slot], 0);
}

void lam_outfile_cleanup_all(void)
{
    atomic_store(&dying, 1);
    for (int i = 0; i < MAX_OPEN_TEMPS; i++)
        if (atomic_load(&temp_used[i]))
            unlink(temp_names[i]);
}

/* Create of->temp_path ("PATH.tmp-PID-N", N new for each file; a name
 * that exists is passed over), tracked first; the descriptor or -1. */
static int create_temp(lam_outfile *of, const char *path)
{
    for (int attempt = 0; attempt < 100; attempt++) {
        snprintf(of->temp_path, sizeof of->temp_path, "%s.tmp-%ld-%u", path, (long)getpid(),
                 atomic_fetch_add(&temp_serial, 1));
        of->slot = track_add(of->temp_path);
        int fd = atomic_load(&dying) ? -1 : open(of->temp_path, O_WRONLY | O_CREAT | O_EXCL, 0644);
        if (fd >= 0 && !atomic_load(&dying))
            return fd;
        int e = fd >= 0 || atomic_load(&dying) ? EINTR : errno; /* a refusal: interrupted */
        if (fd >= 0) { /* the cleanup began while it was created */
            close(fd);
            unlink(of->temp_path);
        }
        track_remove(of->slot);
        errno = e;
        if (e != EEXIST)
            break;
    }
    return -1;
}

lam_status lam_outfile_open(lam_outfile *of, const char *path, lam_error *err)
{
    memset(of, 0, sizeof *of);
    of->slot = -1;
    size_t n = strlen(path);
    if (n + 32 >= LAM_OUTFILE_PATH_MAX)
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
    int fd = create_temp(of, path);
    if (fd < 0) {
        lam_error_set(err, LAM_EIO, "cannot create %s: %s", path, strerror(errno));
        lam_error_set_file(err, path);
        of->temp_path[0] = '\0';
        return LAM_EIO;
    }
    fchmod(fd, 0644); /* whatever the umask, as before */
    of->fp = fdopen(fd, "wb");
    if (!of->fp) {
        close(fd);
        unlink(of->temp_path);
        track_remove(of->slot);
        of->temp_path[0] = '\0';
        lam_error_set(err, LAM_EIO, "cannot open %s: %s", path, strerror(errno));
        lam_error_set_file(err, path);
        return LAM_EIO;
    }
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
        track_remove(of->slot);
        lam_error_set(err, LAM_EIO, "cannot write %s: %s", of->final_path,
                      strerror(saved ? saved : EIO));
        lam_error_set_file(err, of->final_path);
        return LAM_EIO;
    }
    track_remove(of->slot);
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
    track_remove(of->slot);
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
