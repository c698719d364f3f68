/* test_oxide.c - the oxide audit's statistics (lamina/oxide.h): the
 * generalised-least-squares combination against hand calculations for two
 * and three images (independent, equally shared, unequally shared), the
 * chi2 consistency test against the chi2 distribution's closed forms for 1
 * and 2 degrees of freedom (Q(x;1) = erfc(sqrt(x/2)), Q(x;2) = exp(-x/2);
 * Abramowitz and Stegun, Handbook of Mathematical Functions, 26.4), the
 * Paule-Mandel batch variation for two images (solved by hand), the
 * three verdicts, and the audit of image files (lam_oxide_audit_files). */
#include "check.h"
#include "lamina/oxide.h"

#include <math.h>
#include <string.h>
#include <gsl/gsl_errno.h>

static void test_independent(void)
{
    /* sigma_given_shared = sigma: nothing shared; the inverse-variance
     * weighted mean: w = 1/4, 1/16 -> (280/4 + 286/16) / (5/16) = 281.2 */
    lam_oxide_sample s[2] = {{280, 2, 2}, {286, 4, 4}};
    lam_oxide_combined c;
    check_int(lam_oxide_combine(s, 2, &c, NULL), LAM_OK, "combine two independent images");
    check_int((long long)c.n, 2, "two images combined");
    check_abs(c.estimate_nm, 281.2, 1e-9, "weighted mean 281.2 nm");
    check_abs(c.sigma_nm, sqrt(1 / (1.0 / 4 + 1.0 / 16)), 1e-9, "sigma 1/sqrt(sum 1/sigma^2)");
    check_abs(c.sigma_shared_nm, 0, 1e-12, "no shared part");
    /* chi2 = 1.2^2/4 + 4.8^2/16 = 1.8 */
    check_abs(c.chi2, 1.8, 1e-9, "chi2 1.8");
    check_int((long long)c.dof, 1, "one degree of freedom");
    check_abs(c.p_value, erfc(sqrt(0.9)), 1e-9, "p = erfc(sqrt(chi2/2)) for 1 dof");
    check_true(c.consistent && c.tau_nm == 0, "consistent: no batch variation");
    check_abs(c.lo95_nm, 281.2 - 1.959963984540054 * c.sigma_nm, 1e-9, "95 %% interval");
    check_abs(c.spread_nm, sqrt(18.0), 1e-9, "spread: sample sd of 280 and 286");
    /* a missing sigma_given_shared counts as independent */
    lam_oxide_sample u[2] = {{280, 2, NAN}, {286, 4, NAN}};
    lam_oxide_combined cu;
    lam_oxide_combine(u, 2, &cu, NULL);
    check_abs(cu.estimate_nm, 281.2, 1e-9, "unknown shared part taken as independent");
}

static void test_equal_shared(void)
{
    /* sigma 5 of which g = 3 independent: s = 4 shared by all three.
     * C = 9 I + 16 11': the mean is the plain mean, var = s^2 + g^2 / n =
     * 16 + 3 = 19; residuals are orthogonal to 1, so chi2 = sum r^2 / g^2
     * = (16 + 0 + 16) / 9. */
    lam_oxide_sample s[3] = {{280, 5, 3}, {284, 5, 3}, {288, 5, 3}};
    lam_oxide_combined c;
    check_int(lam_oxide_combine(s, 3, &c, NULL), LAM_OK, "combine three images");
    check_abs(c.estimate_nm, 284, 1e-9, "equal weights: 284 nm");
    check_abs(c.sigma_nm, sqrt(19.0), 1e-9, "sigma^2 = s^2 + g^2/n: the shared part stays");
    check_abs(c.sigma_shared_nm, 4, 1e-9, "shared part 4 nm");
    check_abs(c.chi2, 32.0 / 9, 1e-9, "chi2 32/9");
    check_abs(c.p_value, exp(-16.0 / 9), 1e-9, "p = exp(-chi2/2) for 2 dof");
    /* more images: the independent part falls, the shared part does not */
    lam_oxide_sample many[100];
    for (int i = 0; i < 100; i++)
        many[i] = (lam_oxide_sample){284 + (i % 2 ? 3 : -3), 5, 3};
    lam_oxide_combine(many, 100, &c, NULL);
    check_abs(c.sigma_nm, sqrt(16 + 9.0 / 100), 1e-9, "100 images: sigma -> s");
}

static void test_unequal_shared(void)
{
    /* sigma (3, 5), g (1, 3): s = (sqrt 8, 4). C = [[9, 4 sqrt 8], [4 sqrt 8, 25]],
     * det 97, C^-1 = [[25, -4 sqrt 8], [-4 sqrt 8, 9]] / 97. */
    double r8 = sqrt(8.0), a1 = (25 - 4 * r8) / 97, a2 = (9 - 4 * r8) / 97, A = a1 + a2;
    double y1 = 280, y2 = 283, d = (a1 * y1 + a2 * y2) / A;
    double r1 = y1 - d, r2 = y2 - d;
    double chi2 = (25 * r1 * r1 - 8 * r8 * r1 * r2 + 9 * r2 * r2) / 97;
    lam_oxide_sample s[2] = {{y1, 3, 1}, {y2, 5, 3}};
    lam_oxide_combined c;
    check_int(lam_oxide_combine(s, 2, &c, NULL), LAM_OK, "combine unequally shared images");
    check_abs(c.estimate_nm, d, 1e-9, "GLS mean from the 2x2 inverse (%.4f nm)", d);
    check_abs(c.sigma_nm, sqrt(1 / A), 1e-9, "GLS sigma from the 2x2 inverse");
    check_abs(c.sigma_shared_nm, fabs(a1 * r8 + a2 * 4) / A, 1e-9, "shared part |w.s|");
    check_abs(c.chi2, chi2, 1e-9, "chi2 from the 2x2 inverse");
}

static void test_batch_variation(void)
{
    /* two independent images 10 nm apart with sigma 1: chi2 = 100/2 = 50,
     * p ~ 1.5e-12: the oxide varies. Paule-Mandel: 100 / (2 (1 + tau^2)) = 1
     * gives tau^2 = 49; the mean stays 285 with sigma^2 = (1 + 49) / 2. */
    lam_oxide_sample s[2] = {{280, 1, 1}, {290, 1, 1}};
    lam_oxide_combined c;
    check_int(lam_oxide_combine(s, 2, &c, NULL), LAM_OK, "combine disagreeing images");
    check_abs(c.chi2, 50, 1e-9, "chi2 50");
    check_true(!c.consistent && c.p_value < 1e-10, "inconsistent (p = %g)", c.p_value);
    check_abs(c.tau_nm, 7, 1e-6, "batch variation tau = 7 nm");
    check_abs(c.estimate_nm, 285, 1e-9, "mean 285 nm");
    check_abs(c.sigma_nm, 5, 1e-6, "sigma 5 nm with the batch variation");
    /* nearly fully shared, unequal s, disagreeing: the mean stays within
     * the data (plain GLS would extrapolate) */
    lam_oxide_sample t[3] = {{284.8, 3.49, 0.17}, {278.4, 3.98, 0.2}, {280.3, 3.81, 0.15}};
    check_int(lam_oxide_combine(t, 3, &c, NULL), LAM_OK, "combine nearly shared images");
    check_true(!c.consistent && c.estimate_nm > 278.4 && c.estimate_nm < 284.8,
               "the batch mean lies within the images (%.2f nm)", c.estimate_nm);
}

static void test_edges(void)
{
    lam_oxide_sample s[3] = {{NAN, 1, 1}, {280, 0, 0}, {281, 2, 1}};
    lam_oxide_combined c;
    check_int(lam_oxide_combine(s, 3, &c, NULL), LAM_OK, "unusable samples skipped");
    check_int((long long)c.n, 1, "one usable sample");
    check_abs(c.estimate_nm, 281, 0, "a single image is its own estimate");
    check_abs(c.p_value, 1, 0, "a single image: p = 1");
    check_true(isnan(c.spread_nm), "no spread of one image");
    check_int(lam_oxide_combine(s, 0, &c, NULL), LAM_OK, "no samples");
    check_true(c.n == 0 && isnan(c.estimate_nm), "no samples: no estimate");
}

static void test_verdicts(void)
{
    check_int(lam_oxide_verdict_of(280, 290, 285, 10), LAM_OXIDE_PASS, "inside: pass");
    check_int(lam_oxide_verdict_of(275, 295, 285, 10), LAM_OXIDE_PASS, "edges inclusive: pass");
    check_int(lam_oxide_verdict_of(278, 291.7, 285, 1.425), LAM_OXIDE_UNDECIDED,
              "wider than the band: undecided");
    check_int(lam_oxide_verdict_of(290, 300, 285, 10), LAM_OXIDE_UNDECIDED,
              "over the upper edge: undecided");
    check_int(lam_oxide_verdict_of(296, 300, 285, 10), LAM_OXIDE_FAIL, "above the band: fail");
    check_int(lam_oxide_verdict_of(80, 100, 285, 10), LAM_OXIDE_FAIL, "below the band: fail");
    check_int(lam_oxide_verdict_of(NAN, NAN, 285, 10), LAM_OXIDE_NO_DATA, "no interval");
    check_str(lam_oxide_verdict_name(LAM_OXIDE_UNDECIDED), "undecided", "verdict names");
    check_str(lam_oxide_verdict_name(LAM_OXIDE_FAIL), "fail", "verdict names");
}

static void count_failed(const char *path, const lam_error *err, void *user)
{
    (void)err;
    int *n = user;
    *n += !strcmp(path, "samples/none.png");
}

/* Files: one demo tile (samples/README.md: HT285-A07 was rendered on
 * 288 nm) and a missing file, which is reported and left out; the audit
 * names its image after the caller's path. */
static void test_files(void)
{
    const char *paths[] = {"samples/none.png", "samples/HT285-A07-tile12.png"};
    lam_setup s;
    lam_setup_default(&s);
    lam_setup_load("samples/bench3-setup.json", &s, NULL);
    lam_analysis_options opt = lam_analysis_options_default();
    lam_oxide_audit_options ao = lam_oxide_audit_options_default();
    ao.nominal_nm = 285;
    lam_oxide_audit a;
    size_t n = 0;
    int failed = 0;
    lam_error err;
    lam_error_clear(&err);
    check_int(lam_oxide_audit_files(paths, 2, &s, &opt, &ao, count_failed, &failed, &a, &n,
                                    &err), LAM_OK, "audit of files (%s)", err.message);
    check_int(failed, 1, "the missing file reported once");
    check_int((long long)n, 1, "one image analysed");
    check_true(a.n_images == 1 && !strcmp(a.images[0].file, "HT285-A07-tile12.png"),
               "the image named by its file");
    check_abs(a.combined.estimate_nm, 288, 10, "the tile's oxide within 10 nm of 288 nm");
    lam_oxide_audit_clear(&a);
    check_int(lam_oxide_audit_files(paths, 1, &s, &opt, &ao, NULL, NULL, &a, &n, &err), LAM_OK,
              "nothing analysed is not an error");
    check_true(n == 0 && a.n_images == 0, "and gives an empty audit");
    lam_oxide_audit_clear(&a);
    lam_setup_clear(&s);
}

int main(void)
{
    gsl_set_error_handler_off();
    check_begin("test_oxide");
    test_independent();
    test_equal_shared();
    test_unequal_shared();
    test_batch_variation();
    test_edges();
    test_verdicts();
    test_files();
    return check_summary();
}
