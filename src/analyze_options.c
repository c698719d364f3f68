/* analyze_options.c - analysis options set from text by their
 * command-line names (lam_analysis_options_set, analyze.h): the parsing
 * every front end (the command line, a script's binding) would repeat. */
#include "lamina/analyze.h"
#include "lamina/transfer.h"

#include <string.h>

static lam_status set_min_area(lam_analysis_options *o, const char *text, lam_error *err)
{
    double a;
    lam_status st = lam_parse_number(err, "--min-area", text, 0, 1e9, &a);
    if (!st)
        o->min_area_um2 = o->min_area_px = a; /* um^2, or px without a pixel size */
    return st;
}

static lam_status set_megapixels(lam_analysis_options *o, const char *text, lam_error *err)
{
    double mp;
    lam_status st = lam_parse_number(err, "--max-megapixels", text, 0.001, 10000, &mp);
    if (!st)
        o->load.max_pixels = (size_t)(mp * 1e6);
    return st;
}

static lam_status set_encoding(lam_analysis_options *o, const char *text, lam_error *err)
{
    if (lam_transfer_parse(text, &o->load.transfer))
        return lam_error_set(err, LAM_ERANGE, "--encoding: expected srgb, linear or a gamma "
                                              "value");
    return LAM_OK;
}

static lam_status set_annotated(lam_analysis_options *o, const char *text, lam_error *err)
{
    static const struct {
        const char *name;
        lam_annotated_format format;
    } formats[] = {{"auto", LAM_ANNOTATED_AUTO}, {"png", LAM_ANNOTATED_PNG},
                   {"jpeg", LAM_ANNOTATED_JPEG}};
    for (size_t k = 0; k < sizeof formats / sizeof formats[0]; k++)
        if (!strcmp(text, formats[k].name)) {
            o->annotated = formats[k].format;
            return LAM_OK;
        }
    return lam_error_set(err, LAM_ERANGE, "--annotated-format: expected auto, png or jpeg");
}

const char *lam_annotated_extension(const lam_analysis *a, lam_annotated_format f)
{
    int jpeg = f == LAM_ANNOTATED_JPEG || (f == LAM_ANNOTATED_AUTO && a->jpeg_input);
    return jpeg ? "jpg" : "png";
}

lam_status lam_analysis_options_set(lam_analysis_options *o, const char *name, const char *text,
                                    lam_error *err)
{
    if (!strcmp(name, "min-area"))
        return set_min_area(o, text, err);
    if (!strcmp(name, "max-megapixels"))
        return set_megapixels(o, text, err);
    if (!strcmp(name, "encoding"))
        return set_encoding(o, text, err);
    if (!strcmp(name, "annotated-format"))
        return set_annotated(o, text, err);
    if (!strcmp(name, "substrate-roi"))
        return lam_substrate_roi_parse(&o->substrate, "--substrate-roi", text, err);
    return lam_error_set(err, LAM_EINVAL, "no analysis option '%s'", name);
}
