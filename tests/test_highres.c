/* test_highres.c - the oxide and the layer counts of a large micrograph
 * (7.7 MP JPEG) from the independent generator in tests/synth/ (which
 * shares no code with lamina: the universal sheet sigma0 = e^2/4hbar as
 * the graphene response, published Si and SiO2 tables, a random camera,
 * lamp and NA; tests/robust/robust.h), analysed with the microscope
 * unknown, on a 90 nm chip under a setup that says 285 nm.
 *
 * N layers at 90 nm look like about 3N at ~280 nm once the response and
 * the camera's gain are free. At 640 x 480 the fit at the nominal oxide
 * left enough unmodelled to start the search one interference order each
 * side (test_warnings); at 7.7 MP it did not, and the analysis read two
 * of three chips as ~270 nm with no warning about the oxide, 8 of its 13
 * unwarned labels at p >= 0.95 wrong (monolayers as trilayers). The check
 * asks what a user needs: no wrong label with p >= 0.95 in an image
 * without a warning that doubts it, and no oxide beyond 3 sigma without a
 * warning about the oxide. Seeds 530000 and up are used only here. */
#include "check.h"
#include "robust/robust.h"
#include "lamina/error.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#define SCENES 3

/* 3200 x 2400 px at 0.05 um/px: the generator's flakes (tens of um) cover
 * a few hundred thousand pixels each. */
static void large_case(robust_case *c, synth_response response, double nominal_nm,
                       double true_nm)
{
    robust_case_init(c);
    c->cfg.width = 3200;
    c->cfg.height = 2400;
    c->cfg.um_per_px = 0.05;
    c->cfg.nominal_oxide_nm = nominal_nm;
    c->cfg.oxide_nm = true_nm;
    c->cfg.response = response;
    c->fmt = SYNTH_FMT_JPEG;
    c->quality = 85;
    c->informed = 0;
}

static void run_cases(const char *dir, synth_response response, double nominal_nm, double true_nm,
                      unsigned long long seed0, const char *what)
{
    robust_tally t;
    memset(&t, 0, sizeof t);
    robust_case c;
    large_case(&c, response, nominal_nm, true_nm);
    for (int s = 0; s < SCENES; s++)
        check_int(robust_run(&c, seed0 + (unsigned long long)s, dir, &t, stdout), 0,
                  "%s: 7.7 MP scene %d renders and analyses", what, s);
    robust_print(stdout, what, &t);
    size_t unwarned = t.confident - t.warned, unwarned_right = t.confident_right - t.warned_right;
    check_true(unwarned_right == unwarned,
               "%s: every label with p >= 0.95 in an unwarned image right (%zu of %zu)", what,
               unwarned_right, unwarned);
    check_true(t.oxide_silent == 0, "%s: no oxide beyond 3 sigma without a warning (%zu)", what,
               t.oxide_silent);
}

int main(void)
{
    check_begin("test_highres");
    lam_error_init_gsl();
    char dir[] = "/tmp/lamina-test-highres-XXXXXX";
    if (!check_true(mkdtemp(dir) != NULL, "scratch folder"))
        return check_summary();
    run_cases(dir, SYNTH_RESP_SIGMA0, 285, 90, 530000,
              "90 nm chip under a 285 nm setup, 7.7 MP JPEG, sigma0");
    char cmd[256];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", dir);
    if (system(cmd) != 0)
        fprintf(stderr, "test_highres: could not remove %s\n", dir);
    return check_summary();
}
