/* summary_live.c - the lines shown while images are analysed: a watch
 * session's events and an analysis' stage timings (lamina/summary.h). */
#include "lamina/batch.h"
#include "lamina/summary.h"
#include "summary_internal.h"

#include <stdlib.h>
#include <time.h>

lam_status lam_summary_watch_event(const lam_watch_event *ev, char **text, lam_error *err)
{
    *text = NULL;
    if (ev->kind == LAM_WATCH_FAILED)
        return LAM_OK;
    char name[48], when[16], *line = NULL;
    int pooled = ev->kind == LAM_WATCH_POOLED;
    lam_status st = pooled ? LAM_OK : lam_summary_image_line(ev->path, ev->result,
                                                             ev->kind == LAM_WATCH_KEPT, &line,
                                                             err);
    lam__text t;
    if (st || (st = lam__text_open(&t, err))) {
        free(line);
        return st;
    }
    time_t now = time(NULL);
    strftime(when, sizeof when, "%H:%M:%S", localtime(&now));
    if (pooled && ev->first)
        fprintf(t.f, "response, NA and camera pooled from %zu image%s", ev->prior->images,
                ev->prior->images == 1 ? "" : "s");
    else if (pooled)
        fprintf(t.f, "pooled response, NA and camera moved (%s by %.1f sigma), from %zu images",
                lam_batch_nuisance_name(ev->which, name, sizeof name), ev->moved,
                ev->prior->images);
    else
        fprintf(t.f, "%s  %s", when, line);
    free(line);
    return lam__text_close(&t, text, err);
}

lam_status lam_summary_timings(const lam_analysis *a, char **text, lam_error *err)
{
    static const char *const names[LAM_T_COUNT] = {"load",  "display", "substrate", "contrast",
                                                   "model", "segment", "oxide",     "regions"};
    lam__text t;
    lam_status st = lam__text_open(&t, err);
    if (st)
        return st;
    for (int k = 0; k < LAM_T_COUNT; k++)
        fprintf(t.f, "%s%s %.3f", k ? " " : "", names[k], a->seconds[k]);
    return lam__text_close(&t, text, err);
}
