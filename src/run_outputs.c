/* run_outputs.c - the files of a run over many images: the finished
 * catalogue, goto.csv and the run report (lamina/runreport.h). */
#include "lamina/outfile.h"
#include "lamina/runreport.h"

lam_status lam_run_outputs_write(lam_catalog *c, const char *dir,
                                 const lam_run_report_options *opt, lam_error *err)
{
    lam_status st = lam_outfile_make_dir(dir, err);
    if (st || (st = lam_catalog_finish(c, err)))
        return st;
    if ((st = lam_catalog_write(c, dir, err)) || (st = lam_run_report_write(c, dir, opt, err)))
        lam_error_set_file(err, dir);
    return st;
}
