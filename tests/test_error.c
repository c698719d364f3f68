/* test_error.c - the error record (prefixes written once, no overlap),
 * the check helpers, the enum name tables with their suggestions, the
 * edit distance, and the monotonic clock. */
#include "check.h"
#include "lamina/analyze.h"
#include "lamina/clock.h"
#include "lamina/colour.h"
#include "lamina/error.h"
#include "lamina/names.h"
#include "lamina/setup.h"
#include "lamina/substrate.h"
#include "lamina/transfer.h"

#include <math.h>
#include <string.h>
#include <time.h>

static void test_prefix(void)
{
    lam_error err;
    lam_error_clear(&err);
    lam_error_set(&err, LAM_ERANGE, "0 is outside 1 to 40");
    check_int(lam_error_prefix(&err, LAM_EFORMAT, "key %s: ", "flakes[0].layers"), LAM_EFORMAT,
              "prefix returns its status");
    check_str(err.message, "key flakes[0].layers: 0 is outside 1 to 40", "prefix written once");
    check_int(err.status, LAM_EFORMAT, "prefix sets the status");
    lam_error_prefix(&err, err.status, "setup: ");
    check_str(err.message, "setup: key flakes[0].layers: 0 is outside 1 to 40", "prefixes nest");
    check_int(lam_error_prefix(NULL, LAM_EIO, "x"), LAM_EIO, "a NULL record passes the status");
    /* a message at the size limit stays terminated and keeps the prefix */
    char big[LAM_ERROR_MSG_MAX + 10];
    memset(big, 'a', sizeof big - 1);
    big[sizeof big - 1] = '\0';
    lam_error_set(&err, LAM_EIO, "%s", big);
    lam_error_prefix(&err, LAM_EIO, "file: ");
    check_int(strlen(err.message), LAM_ERROR_MSG_MAX - 1, "long message cut to the record");
    check_true(!strncmp(err.message, "file: aaa", 9), "long message keeps its prefix");
}

static void test_checks(void)
{
    lam_error err;
    lam_error_clear(&err);
    check_int(lam_check_range(&err, "key x", 5, 0, 10), LAM_OK, "in range");
    check_int(lam_check_range(&err, "key x", 10, 0, 10), LAM_OK, "bounds are inclusive");
    check_int(lam_check_range(&err, "key x", 11, 0, 10), LAM_ERANGE, "above the range");
    check_str(err.message, "key x: 11 is outside 0 to 10", "range message");
    check_int(lam_check_range(&err, "--na", NAN, 0, 1), LAM_ERANGE, "NaN is outside every range");
    check_int(lam_check_finite(&err, "exposure", INFINITY), LAM_ERANGE, "infinity is not finite");
    check_str(err.message, "exposure: expected a finite number", "finite message");
    check_int(lam_check_finite(NULL, "x", 1.5), LAM_OK, "finite, NULL record");
    check_int(lam_check_positive(&err, "sigma", 0), LAM_ERANGE, "0 is not positive");
    check_str(err.message, "sigma: 0 is not a positive number", "positive message");
    check_int(lam_check_positive(&err, "sigma", 1e-300), LAM_OK, "a tiny value is positive");
}

/* Numbers from text: C's strtod/strtol syntax over the whole text. */
static void test_parse(void)
{
    lam_error err;
    lam_error_clear(&err);
    double v = -1;
    long n = -1;
    check_int(lam_parse_number(&err, "--na", "0.5", 0, 1, &v), LAM_OK, "0.5 read");
    check_abs(v, 0.5, 0, "its value");
    check_int(lam_parse_number(&err, "--na", "1e-1", 0, 1, &v), LAM_OK, "exponent form read");
    check_abs(v, 0.1, 1e-17, "1e-1");
    check_int(lam_parse_number(&err, "--oxide", "6000", 0, 5000, &v), LAM_ERANGE, "out of range");
    check_str(err.message, "--oxide: 6000 is outside 0 to 5000", "range message");
    check_abs(v, 0.1, 1e-17, "a refused value leaves *out alone");
    check_int(lam_parse_number(&err, "--na", "0.5x", 0, 1, &v), LAM_ERANGE, "trailing text");
    check_str(err.message, "--na: '0.5x' is not a number", "not-a-number message");
    check_int(lam_parse_number(&err, "--na", "", 0, 1, &v), LAM_ERANGE, "empty text");
    check_int(lam_parse_number(&err, "--na", "inf", 0, 1, &v), LAM_ERANGE, "infinity");
    check_int(lam_parse_number(&err, "--na", "1e999", 0, 1, &v), LAM_ERANGE, "overflow");
    check_int(lam_parse_integer(&err, "--layers", "12", 1, 40, &n), LAM_OK, "12 read");
    check_int(n, 12, "its value");
    check_int(lam_parse_integer(&err, "--layers", "1.5", 1, 40, &n), LAM_ERANGE, "not whole");
    check_str(err.message, "--layers: '1.5' is not a whole number", "whole-number message");
    check_int(lam_parse_integer(&err, "--n", "100000001", 1, 100000000, &n), LAM_ERANGE,
              "above the range");
    check_str(err.message, "--n: 100000001 is outside 1 to 100000000", "integers in full");
}

/* Lists and ranges: "0.333,10,30", "10-30", "1/4", "X,Y,W,H". */
static void test_parse_lists(void)
{
    lam_error err;
    lam_error_clear(&err);
    double v[4] = {0}, r[2] = {0};
    size_t n = 0;
    check_int(lam_parse_numbers(&err, "--thickness", "0.333,10,30", ',', 0.1, 2000, v, 4, &n),
              LAM_OK, "three thicknesses read");
    check_int((long long)n, 3, "their count");
    check_abs(v[0] + v[1] + v[2], 40.333, 1e-12, "their values");
    check_int(lam_parse_numbers(&err, "--thickness", "10,,30", ',', 0.1, 2000, v, 4, &n),
              LAM_ERANGE, "an empty field");
    check_int(lam_parse_numbers(&err, "--t", "1,2,3,4,5", ',', 0, 9, v, 4, &n), LAM_ERANGE,
              "more values than room");
    check_str(err.message, "--t: at most 4 values", "too-many message");
    check_int(lam_parse_range(&err, "--target-thickness", "10-30", 0.1, 1000, r), LAM_OK,
              "a range read");
    check_true(r[0] == 10 && r[1] == 30, "its ends");
    check_int(lam_parse_range(&err, "--target-thickness", "30-10", 0.1, 1000, r), LAM_ERANGE,
              "a reversed range");
    check_str(err.message, "--target-thickness: expected A-B with 0.1 <= A <= B <= 1000",
              "range message");
    check_true(r[0] == 10 && r[1] == 30, "a refused range leaves out alone");
    check_int(lam_parse_range(&err, "--r", "5", 0.1, 1000, r), LAM_ERANGE, "one number");
    check_int(lam_parse_range(&err, "--r", "1-2-3", 0.1, 1000, r), LAM_ERANGE, "three numbers");
    lam_substrate_options so = lam_substrate_options_default();
    check_int(lam_substrate_roi_parse(&so, "--roi", "10,20,30,40", &err), LAM_OK, "an ROI read");
    check_true(so.has_roi && so.roi[0] == 10 && so.roi[3] == 40, "its corners and size");
    so = lam_substrate_options_default();
    check_int(lam_substrate_roi_parse(&so, "--roi", "10,20,0,40", &err), LAM_ERANGE,
              "an empty ROI");
    check_int(lam_substrate_roi_parse(&so, "--roi", "1.5,2,3,4", &err), LAM_ERANGE,
              "fractional pixels");
    check_true(!so.has_roi, "a refused ROI leaves the options alone");
    lam_analysis_options ao = lam_analysis_options_default();
    check_int(lam_analysis_options_set(&ao, "min-area", "25", &err), LAM_OK, "--min-area 25");
    check_true(ao.min_area_um2 == 25 && ao.min_area_px == 25, "both area limits set");
    check_int(lam_analysis_options_set(&ao, "max-megapixels", "12", &err), LAM_OK, "12 MP");
    check_int((long long)ao.load.max_pixels, 12000000, "12 MP as pixels");
    check_int(lam_analysis_options_set(&ao, "encoding", "linear", &err), LAM_OK, "linear");
    check_int(lam_analysis_options_set(&ao, "encoding", "purple", &err), LAM_ERANGE,
              "an unknown curve");
    check_int(lam_analysis_options_set(&ao, "substrate-roi", "0,0,64,64", &err), LAM_OK, "ROI");
    check_true(ao.substrate.has_roi && ao.substrate.roi[2] == 64, "the ROI in the options");
    check_int(lam_analysis_options_set(&ao, "annotated-format", "jpeg", &err), LAM_OK, "jpeg");
    check_true(ao.annotated == LAM_ANNOTATED_JPEG, "the annotated picture as a JPEG");
    check_int(lam_analysis_options_set(&ao, "annotated-format", "gif", &err), LAM_ERANGE,
              "an unknown picture format");
    check_true(ao.annotated == LAM_ANNOTATED_JPEG, "a refused format leaves the option alone");
    check_int(lam_analysis_options_set(&ao, "min-aera", "5", &err), LAM_EINVAL, "unknown name");
}

static void test_names(void)
{
    /* Levenshtein distances: kitten -> sitting = 3 and flaw -> lawn = 2, the
     * usual textbook examples (from memory); ours ignores case */
    check_int(lam_edit_distance("kitten", "sitting"), 3, "kitten/sitting");
    check_int(lam_edit_distance("flaw", "lawn"), 2, "flaw/lawn");
    check_int(lam_edit_distance("", "abc"), 3, "empty string");
    check_int(lam_edit_distance("illumination_NA", "illumination_na"), 0, "case is ignored");
    const char *keys[] = {"na", "illumination_na", "pupil_weight", "immersion", "cone_nodes"};
    int case_only = 0;
    const char *n = lam_nearest_name("illumination_NA", keys, 5, &case_only);
    check_true(n && !strcmp(n, "illumination_na") && case_only, "case-only slip found");
    n = lam_nearest_name("imersion", keys, 5, &case_only);
    check_true(n && !strcmp(n, "immersion") && !case_only, "one dropped letter found");
    check_true(lam_nearest_name("wavelength", keys, 5, NULL) == NULL, "nothing near: no guess");
    check_true(lam_nearest_name("xy", keys, 5, NULL) == NULL, "short texts need a close match");
    const char *units[] = {"centre_nm", "fwhm_nm"};
    n = lam_nearest_name("fwhm", units, 2, NULL);
    check_true(n && !strcmp(n, "fwhm_nm"), "a dropped unit suffix is a slip");

    check_str(lam_camera_kind_name(LAM_CAMERA_GAUSSIAN), "gaussian", "camera kind name");
    check_str(lam_camera_kind_name(LAM_CAMERA_MONO), "mono", "internal kinds have names");
    check_str(lam_illuminant_kind_name(LAM_ILLUM_CIE_A), "cie-a", "illuminant kind name");
    check_str(lam_pupil_weight_name(LAM_PUPIL_SIN), "sin", "pupil weight name");
    lam_transfer t = {LAM_TRANSFER_LINEAR, 0};
    check_str(lam_transfer_name(&t), "linear", "transfer name");
    int v = -1;
    lam_error err;
    lam_error_clear(&err);
    check_int(lam_name_parse(lam_camera_kind_names, "camera.kind", "table", &v, &err), LAM_OK,
              "parse a camera kind");
    check_int(v, LAM_CAMERA_TABLE, "parsed value");
    check_int(lam_name_parse(lam_camera_kind_names, "camera.kind", "mono", &v, &err), LAM_EFORMAT,
              "internal names are not accepted from files");
    check_str(err.message, "key camera.kind: 'mono' is not srgb-observer, gaussian or table",
              "the message lists the accepted names");
    lam_name_parse(lam_illuminant_kind_names, "illuminant.kind", "LED-white", &v, &err);
    check_true(strstr(err.message, "did you mean led-white? (names are case-sensitive)") != NULL,
               "case-only slip in a value: %s", err.message);
    char list[64];
    check_str(lam_name_list(lam_pupil_weight_names, list, sizeof list), "sin-cos or sin",
              "a list of two");
}

static void test_clock(void)
{
    double a = lam_clock_seconds();
    struct timespec ts = {0, 20000000};
    nanosleep(&ts, NULL);
    double b = lam_clock_seconds();
    /* only a lower bound: the machine may be busy */
    check_true(b - a >= 0.019, "a 20 ms sleep takes at least 19 ms on the clock (%g s)", b - a);
}

int main(void)
{
    check_begin("test_error");
    test_prefix();
    test_checks();
    test_parse();
    test_parse_lists();
    test_names();
    test_clock();
    return check_summary();
}
