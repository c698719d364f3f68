/* test_calibrate.c - calibration on rendered data: three chips (92, 287,
 * 300 nm) with 1-5 and 8 layer flakes, rendered with a camera different
 * from the default (598/528/458 nm centres, 65/60/55 nm FWHM, NA 0.4), are
 * fitted from the default start with the truth maps as labels. Goal (chip-
 * scale issue): centres within 10 nm, oxide within 3 nm. The channel
 * centres, the NA and the oxide are nearly degenerate (scaling them
 * together leaves the contrast almost unchanged), so the test gives the NA
 * and one oxide as known, as a user with a reference chip would. Invented
 * test data; the truth is the scene. */
#include "check.h"
#include "lamina/calibrate.h"
#include "lamina/render.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <gsl/gsl_errno.h>

static const double true_centre[3] = {598, 528, 458};
static const double oxides[3] = {92, 287, 300};

static void make(const char *dir, int i, char *img, size_t n, uint8_t **truth, size_t *w, size_t *h)
{
    char json[4096];
    snprintf(json, sizeof json,
             "{\"schema\":\"lamina-scene/1\",\"setup\":{\"schema\":\"lamina-setup/1\",\"objective\":"
             "{\"na\":0.8,\"illumination_na\":0.4},\"camera\":{\"kind\":\"gaussian\",\"channels\":"
             "[{\"centre_nm\":598,\"fwhm_nm\":65},{\"centre_nm\":528,\"fwhm_nm\":60},{\"centre_nm\":"
             "458,\"fwhm_nm\":55}]}},\"width\":640,\"height\":480,\"oxide_nm\":%g,\"vignetting\":0.15,"
             "\"blur_px\":0.8,\"full_well\":10000,\"seed\":%d,\"flakes\":["
             "{\"layers\":1,\"polygon\":[[40,40],[170,40],[170,170],[40,170]]},"
             "{\"layers\":2,\"polygon\":[[255,40],[385,40],[385,170],[255,170]]},"
             "{\"layers\":3,\"polygon\":[[470,40],[600,40],[600,170],[470,170]]},"
             "{\"layers\":4,\"polygon\":[[40,290],[170,290],[170,420],[40,420]]},"
             "{\"layers\":5,\"polygon\":[[255,290],[385,290],[385,420],[255,420]]},"
             "{\"layers\":8,\"polygon\":[[470,290],[600,290],[600,420],[470,420]]}]}",
             oxides[i], 40 + i);
    lam_scene sc;
    lam_scene_parse(json, ".", &sc, NULL);
    lam_image *im = NULL;
    lam_render(&sc, &im, truth, NULL);
    snprintf(img, n, "%s/cal%d.png", dir, i);
    lam_render_save(im, img, 0, 92, NULL);
    *w = im->width;
    *h = im->height;
    lam_image_free(im);
    lam_scene_clear(&sc);
}

int main(void)
{
    check_begin("test_calibrate");
    gsl_set_error_handler_off();
    lam_calib_set set;
    lam_calib_set_init(&set);
    lam_setup start;
    lam_setup_default(&start);
    for (int i = 0; i < 3; i++) {
        char img[512];
        uint8_t *truth = NULL;
        size_t w, h;
        make(check_tmpdir(), i, img, sizeof img, &truth, &w, &h);
        lam_error err;
        lam_error_clear(&err);
        check_int(lam_calib_measure_labels(&set, img, truth, w, h, &start, &err), LAM_OK,
                  "measure labelled image %d (%s)", i, err.message);
        free(truth);
    }
    size_t regions = 0;
    for (size_t i = 0; i < set.images; i++)
        regions += set.image[i].count;
    check_int((long long)regions, 18, "18 labelled regions");
    double known[3] = {92, NAN, NAN};
    lam_calib_result res;
    lam_error err;
    lam_error_clear(&err);
    check_int(lam_calibrate(&start, &set, known, 0.4, &res, &err), LAM_OK, "calibrate (%s)",
              err.message);
    /* the renders' camera is 7 nm bluer than the default in every channel */
    for (int c = 0; c < 3; c++)
        check_abs(res.shared[LAM_NU_SHIFT + c].value, true_centre[c] - (605 - 70 * c), 6,
                  "channel %d shift within 6 nm", c);
    check_abs(res.oxide[1].value, 287, 3, "oxide of the 287 nm chip within 3 nm");
    check_abs(res.oxide[2].value, 300, 3, "oxide of the 300 nm chip within 3 nm");
    check_true(res.oxide[1].sigma > 0.05 && res.oxide[1].sigma < 3, "oxide sigma sane (%.2f nm)",
               res.oxide[1].sigma);
    check_true(res.chi2 / res.dof < 3, "labels fit (chi2/value %.2f)", res.chi2 / res.dof);
    printf("test_calibrate: shifts %.1f %.1f %.1f nm, oxides %.1f +- %.1f, %.1f +- %.1f nm\n",
           res.shared[LAM_NU_SHIFT].value, res.shared[LAM_NU_SHIFT + 1].value,
           res.shared[LAM_NU_SHIFT + 2].value, res.oxide[1].value, res.oxide[1].sigma,
           res.oxide[2].value, res.oxide[2].sigma);
    lam_calib_result_clear(&res);
    /* a wrong label (a 2L region called 1L) is refused, naming the label */
    for (size_t i = 0; i < set.image[1].count; i++)
        if (set.image[1].regions[i].known_layers == 2)
            set.image[1].regions[i].known_layers = 1;
    lam_error_clear(&err);
    check_int(lam_calibrate(&start, &set, known, 0.4, &res, &err), LAM_ERANGE,
              "a wrong label is refused");
    check_true(strstr(err.message, "cannot reproduce a 1L label") != NULL, "message names it (%s)",
               err.message);
    lam_calib_set_clear(&set);
    return check_summary();
}
