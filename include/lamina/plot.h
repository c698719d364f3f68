/*
 * lamina/plot.h - plots drawn with cairo (lamina/draw.h): the oxide audit.
 * (The per-image contrast plot is lam_report_write_svg in lamina/report.h;
 * the planning plot is in lamina/planmap.h.)
 *
 * The format follows the file name: .svg, .pdf or .png. Written atomically.
 * Everything passed is borrowed for the call.
 */
#ifndef LAMINA_PLOT_H
#define LAMINA_PLOT_H

#include <stddef.h>
#include "lamina/error.h"

typedef struct lam_oxide_plot_image {
    const char *name;        /* shown beside its row */
    double estimate_nm, sigma_nm; /* sigma NAN when unknown */
    int fitted;              /* 0: no usable region, drawn as a note */
    size_t regions;
} lam_oxide_plot_image;

typedef struct lam_oxide_plot {
    const double *grid_nm, *chi2; /* the joint chi2 profile, n points */
    size_t n;
    double nominal_nm, tolerance_nm;
    double estimate_nm, sigma_nm; /* combined; NAN when no image fitted its oxide */
    double lo95_nm, hi95_nm;      /* the combined 95 % interval the verdict used */
    const char *verdict;          /* "pass", "fail", "undecided" or "no data" */
    const double *alternatives_nm; /* other interference orders */
    size_t n_alternatives;
    double absolute_nm;           /* from a bare-Si reference, NAN if none */
    const lam_oxide_plot_image *images;
    size_t n_images;
} lam_oxide_plot;

/* Two panels: the joint profile over the whole grid with the tolerance
 * band, nominal, estimate and other orders; below it each image's
 * estimate with its 1-sigma bar and the combined 95 % interval with the
 * verdict, zoomed around the nominal value. */
lam_status lam_plot_oxide(const lam_oxide_plot *p, const char *path, lam_error *err);

#endif
