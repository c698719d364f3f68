/* synth_file.c - outputs go to a temporary name and are renamed when
 * complete, so a failure never leaves a partial file. */
#include "synth_internal.h"

#include <errno.h>
#include <string.h>
#include <unistd.h>

int synth_outfile_open(synth_outfile *of, const char *path)
{
    of->fp = NULL;
    if (strlen(path) >= sizeof of->path)
        return synth_fail("%.100s...: path too long", path);
    snprintf(of->path, sizeof of->path, "%s", path);
    snprintf(of->tmp, sizeof of->tmp, "%s.tmp%ld", path, (long)getpid());
    of->fp = fopen(of->tmp, "wb");
    if (!of->fp)
        return synth_fail("%s: cannot create: %s", path, strerror(errno));
    return 0;
}

int synth_outfile_commit(synth_outfile *of)
{
    int bad = ferror(of->fp);
    if (fclose(of->fp) != 0)
        bad = 1;
    of->fp = NULL;
    if (bad) {
        remove(of->tmp);
        return synth_fail("%s: write error", of->path);
    }
    if (rename(of->tmp, of->path) != 0) {
        int e = errno;
        remove(of->tmp);
        return synth_fail("%s: cannot rename into place: %s", of->path, strerror(e));
    }
    return 0;
}

void synth_outfile_abort(synth_outfile *of)
{
    if (of->fp)
        fclose(of->fp);
    of->fp = NULL;
    remove(of->tmp);
}
