/* test_substrate.c - the substrate's flat field, noise and choice, and the
 * contrast map (lamina/substrate.h, lamina/contrast.h), on linear images
 * built here with known answers: a vignetted, tilted illumination; Gaussian
 * pixel noise of known sigma (Box-Muller from a fixed seed); flakes of known
 * relative brightness. Geometry and statistics, no optics: the values are
 * chosen for the test. */
#include "check.h"
#include "lamina/contrast.h"
#include "lamina/substrate.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define W 640
#define H 480

static const double LEVEL[3] = {0.42, 0.35, 0.55}; /* substrate at the centre */
static const double FLAKE[3] = {0.92, 0.88, 0.97}; /* flake / substrate */

static unsigned state = 777;
static double uniform(void)
{
    state = state * 1103515245u + 12345u;
    return ((double)(state >> 8) + 0.5) / 16777216.0;
}

static double gauss(void)
{
    return sqrt(-2 * log(uniform())) * cos(2 * M_PI * uniform());
}

/* The illumination: 20 % vignetting at the corners, a 6 % gradient. */
static double light(size_t x, size_t y)
{
    double u = ((double)x - W / 2.0) / (W / 2.0), v = ((double)y - H / 2.0) / (H / 2.0);
    return (1 - 0.1 * (u * u + v * v)) * (1 + 0.03 * u - 0.03 * v);
}

static int in_flake(size_t x, size_t y, int big)
{
    return big ? (x > 100 && x < 400 && y > 80 && y < 400)
               : (x > 420 && x < 520 && y > 100 && y < 200);
}

static lam_image *scene(double sigma, int big_flake)
{
    lam_image *img = NULL;
    lam_error err;
    if (lam_image_alloc(W, H, &img, &err))
        return NULL;
    memset(img->clip_bits, 0, H * img->clip_stride);
    for (size_t y = 0; y < H; y++)
        for (size_t x = 0; x < W; x++)
            for (int c = 0; c < 3; c++) {
                double v = LEVEL[c] * light(x, y) * (in_flake(x, y, big_flake) ? FLAKE[c] : 1);
                img->plane[c][y * W + x] = (float)(v * (1 + sigma * gauss()));
            }
    return img;
}

int main(void)
{
    check_begin("test_substrate");
    const double sigma = 0.01;
    lam_image *img = scene(sigma, 0);
    if (!check_true(img != NULL, "scene made"))
        return check_summary();
    lam_substrate s;
    lam_error err;
    lam_error_clear(&err);
    lam_substrate_options o = lam_substrate_options_default();
    check_int(lam_substrate_estimate(img, &o, &s, &err), LAM_OK, "substrate found (%s)",
              err.message);
    double worst = 0;
    for (size_t y = 5; y < H; y += 47)
        for (size_t x = 5; x < W; x += 53) {
            double b[3];
            lam_substrate_eval(&s, (double)x + 0.5, (double)y + 0.5, b);
            for (int c = 0; c < 3; c++)
                worst = fmax(worst, fabs(b[c] / (LEVEL[c] * light(x, y)) - 1));
        }
    check_true(worst < 0.005, "flat field follows 20 %% vignetting and a tilt within 0.5 %% "
                              "(worst %.4f)", worst);
    for (int c = 0; c < 3; c++)
        check_rel(s.noise[c], sigma, 0.1, "pixel noise of channel %d measured (sigma %.4f)", c,
                  s.noise[c]);
    check_true(s.kappa >= 1 && s.kappa < 2, "white noise: correlation factor near 1 (%.2f)",
               s.kappa);
    lam_contrast_in_place(img, &s, 2);
    double sum[3] = {0, 0, 0};
    size_t n = 0;
    for (size_t y = 120; y < 180; y++)
        for (size_t x = 440; x < 500; x++, n++)
            for (int c = 0; c < 3; c++)
                sum[c] += img->plane[c][y * W + x];
    for (int c = 0; c < 3; c++)
        check_abs(sum[c] / (double)n, 1 - FLAKE[c], 0.003, "flake contrast, channel %d", c);
    check_int(lam_contrast_denoise(img, 2, &err), LAM_OK, "denoise");
    double var = 0;
    n = 0;
    for (size_t y = 300; y < 460; y++)
        for (size_t x = 440; x < 620; x++, n++)
            var += img->plane[1][y * W + x] * img->plane[1][y * W + x];
    check_rel(sqrt(var / (double)n), sigma / 3, 0.15, "3 x 3 filter: noise down threefold");
    lam_image_free(img);

    /* a flake larger than any patch of bare substrate around it is still
     * not the substrate when the ladder says which is graphene */
    img = scene(0.005, 1);
    static const double ladder[3][3] = {{1 - FLAKE[0], 1 - FLAKE[1], 1 - FLAKE[2]},
                                        {0.15, 0.23, 0.06}, {0.22, 0.33, 0.09}};
    static lam_prediction P; /* large: not on the stack */
    memset(&P, 0, sizeof P);
    P.channels = 3;
    P.max_layers = 3;
    for (size_t N = 1; N <= 3; N++)
        memcpy(P.contrast[N], ladder[N - 1], sizeof ladder[0]);
    o.ladder = &P;
    if (check_true(img != NULL, "big-flake scene made") &&
        check_int(lam_substrate_estimate(img, &o, &s, &err), LAM_OK, "substrate found (%s)",
                  err.message)) {
        double b[3];
        lam_substrate_eval(&s, 600, 450, b);
        check_rel(b[1], LEVEL[1] * light(600, 450), 0.01,
                  "the bare substrate is chosen, not the large flake");
    }
    lam_image_free(img);
    return check_summary();
}
