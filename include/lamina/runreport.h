/*
 * lamina/runreport.h - the run report: one offline page (report.html) in
 * the output folder of a multi-image run, with the chip map (tiles at their
 * stage positions, candidates marked and linked to their rows) or a list of
 * tiles without positions, the candidate table (crop, layers, probability,
 * area, usable rectangle, chip position, warnings; sortable by clicking a
 * column head) and links to each image's annotated picture and JSON.
 *
 * The page uses only relative links and inline CSS and JavaScript: the
 * folder can be copied or opened without a network. It also writes the
 * crops (lamina/crops.h) and contact-sheet.png beside it. Every file is
 * written atomically, the page last.
 */
#ifndef LAMINA_RUNREPORT_H
#define LAMINA_RUNREPORT_H

#include <stddef.h>
#include "lamina/catalog.h"
#include "lamina/error.h"

typedef struct lam_run_report_options {
    const char *title;   /* NULL: "lamina run report" */
    size_t max_crops;    /* 0: 400 */
    double refresh_s;    /* > 0: the page reloads itself (a live session) */
} lam_run_report_options;

/* report.html of a finished catalogue into dir (relative links to the
 * results and crops/ beside it), atomically; opt may be NULL. */
lam_status lam_run_report_write(const lam_catalog *c, const char *dir,
                                const lam_run_report_options *opt, lam_error *err);

/* The outputs of a run over many images, into dir (created when missing):
 * lam_catalog_finish, then catalog.csv, catalog.json and, with positions,
 * goto.csv (lam_catalog_write), then the crops, contact-sheet.png and
 * report.html (lam_run_report_write; opt may be NULL). Errors: the
 * catalogue's (LAM_EINVAL when the stage origin's tile is unknown), the
 * writers' with the file or dir recorded in err->file. The catalogue's
 * own warnings for the images (c->images[k].own_warnings) are the
 * caller's to show. */
lam_status lam_run_outputs_write(lam_catalog *c, const char *dir,
                                 const lam_run_report_options *opt, lam_error *err);

#endif
