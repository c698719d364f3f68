/* test_outfile.c - atomic result files (lamina/outfile.h): written under a
 * temporary name and renamed; removed on abort; and on an interrupt every
 * open temporary removed and no new one created (lam_outfile_cleanup_all,
 * what the command line's signal handler calls; run in a child process,
 * since it cannot be undone). */
#include "check.h"
#include "lamina/outfile.h"

#include <dirent.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/wait.h>
#include <unistd.h>

/* Files in dir whose name holds ".tmp-". */
static int temporaries(const char *dir)
{
    DIR *d = opendir(dir);
    int n = 0;
    for (struct dirent *e; d && (e = readdir(d));)
        n += strstr(e->d_name, ".tmp-") != NULL;
    if (d)
        closedir(d);
    return n;
}

static void commit_and_abort(const char *dir)
{
    char path[512];
    lam_error err;
    lam_error_clear(&err);
    lam_outfile of;
    snprintf(path, sizeof path, "%s/kept.txt", dir);
    check_int(lam_outfile_open(&of, path, &err), LAM_OK, "opened");
    fputs("kept\n", of.fp);
    check_int(temporaries(dir), 1, "written under a temporary name");
    check_int(lam_outfile_commit(&of, &err), LAM_OK, "committed");
    size_t len = 0;
    char *text = check_slurp(path, &len);
    check_true(text && len == 5 && !memcmp(text, "kept\n", 5), "the file holds what was written");
    free(text);
    snprintf(path, sizeof path, "%s/dropped.txt", dir);
    check_int(lam_outfile_open(&of, path, &err), LAM_OK, "opened");
    lam_outfile_abort(&of);
    check_true(access(path, F_OK) != 0, "an aborted file is not there");
    check_int(temporaries(dir), 0, "no temporary left");
}

/* More files open at once than the temporaries tracked (64): all get names
 * of their own and all are committed. */
static void many_at_once(const char *dir)
{
    enum { N = 70 };
    static lam_outfile of[N];
    lam_error err;
    lam_error_clear(&err);
    int ok = 1;
    for (int i = 0; i < N; i++) {
        char path[512];
        snprintf(path, sizeof path, "%s/many-%d.txt", dir, i);
        ok &= lam_outfile_open(&of[i], path, &err) == LAM_OK;
        for (int j = 0; ok && j < i; j++)
            ok &= strcmp(of[i].temp_path, of[j].temp_path) != 0;
    }
    check_true(ok, "%d files open at once, under distinct temporary names", N);
    check_int(temporaries(dir), N, "each a temporary");
    for (int i = 0; i < N; i++)
        ok &= lam_outfile_commit(&of[i], &err) == LAM_OK;
    check_true(ok, "all committed");
    check_int(temporaries(dir), 0, "no temporary left");
}

/* The interrupt: in a child, two files open, the cleanup, then an open
 * that must fail; the child's exit code says which steps held. */
static void interrupted(const char *dir)
{
    pid_t pid = fork();
    if (pid == 0) {
        char a[512], b[512];
        lam_error err;
        lam_error_clear(&err);
        lam_outfile fa, fb, fc;
        snprintf(a, sizeof a, "%s/a.txt", dir);
        snprintf(b, sizeof b, "%s/b.txt", dir);
        int code = 0;
        code |= lam_outfile_open(&fa, a, &err) != LAM_OK;
        code |= lam_outfile_open(&fb, b, &err) != LAM_OK;
        code |= (temporaries(dir) != 2) << 1;
        lam_outfile_cleanup_all();
        code |= (temporaries(dir) != 0) << 2;
        code |= (lam_outfile_open(&fc, a, &err) != LAM_EIO) << 3;
        code |= (temporaries(dir) != 0) << 4;
        _exit(code);
    }
    int status = -1;
    check_true(pid > 0 && waitpid(pid, &status, 0) == pid, "child ran");
    check_int(WIFEXITED(status) ? WEXITSTATUS(status) : -1, 0,
              "the interrupt removed both open temporaries and no file could be opened "
              "after it (bits: opened, two temporaries, removed, refused, none left)");
    check_int(temporaries(dir), 0, "no temporary left behind");
}

int main(void)
{
    check_begin("test_outfile");
    const char *dir = check_tmpdir();
    if (!check_true(dir != NULL, "scratch folder"))
        return check_summary();
    commit_and_abort(dir);
    many_at_once(dir);
    interrupted(dir);
    return check_summary();
}
