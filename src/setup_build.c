/* setup_build.c - a setup from the defaults, a setup file, a stack file and
 * values given beside them (lamina/setup.h, lam_setup_build). */
#include "lamina/setup.h"

#include <math.h>

void lam_setup_overrides_init(lam_setup_overrides *o)
{
    *o = (lam_setup_overrides){NULL, NULL, NULL, -1, -1, NAN, 0};
}

/* A setter refused a value: LAM_EINVAL naming the option, s released. */
static lam_status refused(lam_setup *s, lam_error *err, const char *option)
{
    lam_setup_clear(s);
    return lam_error_prefix(err, LAM_EINVAL, "%s: ", option);
}

/* A file could not be read: its error, with the file recorded. */
static lam_status unreadable(lam_setup *s, lam_error *err, lam_status st, const char *path)
{
    lam_setup_clear(s);
    lam_error_set_file(err, path);
    return st;
}

lam_status lam_setup_build(const lam_setup_overrides *o, lam_setup *s, lam_error *err)
{
    lam_status st;
    lam_setup_default(s);
    if (o->setup_file && (st = lam_setup_load(o->setup_file, s, err)))
        return unreadable(s, err, st, o->setup_file);
    if (o->stack_file && (st = lam_setup_load_stack(o->stack_file, s, err)))
        return unreadable(s, err, st, o->stack_file);
    if (o->material && lam_setup_set_material(s, o->material, err))
        return refused(s, err, "--material");
    if (o->oxide_nm >= 0 && lam_setup_set_oxide(s, o->oxide_nm, err))
        return refused(s, err, "--oxide");
    if (o->na >= 0 && lam_setup_set_na(s, o->na, err))
        return refused(s, err, "--na");
    if (!isnan(o->fermi_ev) && lam_setup_set_fermi(s, o->fermi_ev, err))
        return refused(s, err, "--fermi");
    if (o->um_per_px > 0 && lam_setup_set_um_per_px(s, o->um_per_px, err))
        return refused(s, err, "--um-per-px");
    return LAM_OK;
}
