/* oxide_files.c - the oxide audit of image files: each analysed, the ones
 * that cannot be left out (lamina/oxide.h, lam_oxide_audit_files). */
#include "lamina/oxide.h"

#include <stdlib.h>
#include <string.h>

/* The audit's image names borrow from the analyses, which go: point them
 * at the caller's paths instead (the same names: lam_analyze copies its
 * path into the analysis). */
static void borrow_names(lam_oxide_audit *out, const char *const *paths, const size_t *used)
{
    for (size_t j = 0; j < out->n_images; j++) {
        const char *b = strrchr(paths[used[j]], '/');
        out->images[j].file = b ? b + 1 : paths[used[j]];
    }
}

lam_status lam_oxide_audit_files(const char *const *paths, size_t n, const lam_setup *setup,
                                 const lam_analysis_options *opt,
                                 const lam_oxide_audit_options *ao, lam_oxide_failed_fn on_failed,
                                 void *user, lam_oxide_audit *out, size_t *analysed,
                                 lam_error *err)
{
    memset(out, 0, sizeof *out);
    *analysed = 0;
    lam_analysis **an = calloc(n ? n : 1, sizeof *an);
    size_t *used = calloc(n ? n : 1, sizeof *used);
    lam_status st = an && used ? LAM_OK : lam_error_set(err, LAM_ENOMEM, "cannot hold %zu "
                                                                         "analyses", n);
    for (size_t i = 0; i < n && !st; i++) {
        lam_error e;
        lam_error_clear(&e);
        if (!lam_analyze(paths[i], setup, opt, &an[*analysed], &e))
            used[(*analysed)++] = i;
        else if (on_failed)
            on_failed(paths[i], &e, user);
    }
    if (!st && *analysed)
        st = lam_oxide_audit_run((const lam_analysis *const *)an, *analysed, setup, ao, out, err);
    if (st)
        lam_error_set_file(err, ao->reference);
    else
        borrow_names(out, paths, used);
    for (size_t i = 0; an && i < *analysed; i++)
        lam_analysis_free(an[i]);
    free(an);
    free(used);
    return st;
}
