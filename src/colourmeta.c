/* colourmeta.c - colour metadata to transfer tables, ICC profiles through
 * Little CMS 2 (tone curves only: channels are never mixed). */
#include "colourmeta.h"

#include <lcms2.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#define ICC_MAX_BYTES (16u << 20) /* larger embedded profiles are refused */

/* An opened profile and the tone curve to use for each image channel. */
typedef struct icc_curves {
    cmsContext ctx;
    cmsHPROFILE prof;
    const cmsToneCurve *trc[3];
    char desc[64];     /* the profile's description, printable */
    char problem[160]; /* why it cannot be used, "" when it can */
    char lcms[96];     /* Little CMS's own first message */
} icc_curves;

static void on_lcms_error(cmsContext ctx, cmsUInt32Number code, const char *text)
{
    (void)code;
    icc_curves *ic = cmsGetContextUserData(ctx);
    if (ic && !ic->lcms[0])
        snprintf(ic->lcms, sizeof ic->lcms, "%s", text);
}

static void read_description(icc_curves *ic)
{
    char buf[256] = "";
    cmsGetProfileInfoASCII(ic->prof, cmsInfoDescription, "en", "US", buf, sizeof buf);
    size_t n = 0;
    for (const char *p = buf; *p && n + 1 < sizeof ic->desc; p++)
        ic->desc[n++] = (*p >= 0x20 && *p < 0x7f && *p != '\'') ? *p : '?';
    ic->desc[n] = '\0';
    if (!n)
        snprintf(ic->desc, sizeof ic->desc, "unnamed");
}

/* Largest difference between two tone curves over 0..1. */
static double curve_gap(const cmsToneCurve *a, const cmsToneCurve *b)
{
    double worst = 0.0;
    for (int i = 0; i <= 256; i++) {
        float v = (float)i / 256.0f;
        worst = fmax(worst, fabs((double)cmsEvalToneCurveFloat(a, v) -
                                 (double)cmsEvalToneCurveFloat(b, v)));
    }
    return worst;
}

/* Pick the tone curves for an image of 'chans' channels. */
static void pick_curves(icc_curves *ic, int chans)
{
    cmsColorSpaceSignature cs = cmsGetColorSpace(ic->prof);
    if (cs != cmsSigRgbData && cs != cmsSigGrayData) {
        snprintf(ic->problem, sizeof ic->problem, "a %s profile, not RGB or grey",
                 cs == cmsSigCmykData ? "CMYK" : cs == cmsSigLabData ? "Lab" : "non-RGB");
        return;
    }
    if (!cmsIsMatrixShaper(ic->prof)) {
        snprintf(ic->problem, sizeof ic->problem,
                 "a LUT-based profile without per-channel tone curves");
        return;
    }
    if (cs == cmsSigGrayData) {
        const cmsToneCurve *g = cmsReadTag(ic->prof, cmsSigGrayTRCTag);
        ic->trc[0] = ic->trc[1] = ic->trc[2] = g;
    } else {
        ic->trc[0] = cmsReadTag(ic->prof, cmsSigRedTRCTag);
        ic->trc[1] = cmsReadTag(ic->prof, cmsSigGreenTRCTag);
        ic->trc[2] = cmsReadTag(ic->prof, cmsSigBlueTRCTag);
    }
    if (!ic->trc[0] || !ic->trc[1] || !ic->trc[2]) {
        snprintf(ic->problem, sizeof ic->problem, "damaged (unreadable tone curve%s%s)",
                 ic->lcms[0] ? ": " : "", ic->lcms);
        return;
    }
    if (chans == 1 && cs == cmsSigRgbData) {
        /* a grey image with an RGB profile: usable only when the channels agree */
        if (curve_gap(ic->trc[0], ic->trc[1]) > 1e-3 || curve_gap(ic->trc[2], ic->trc[1]) > 1e-3)
            snprintf(ic->problem, sizeof ic->problem,
                     "an RGB profile with different channel curves on a grey image");
        ic->trc[0] = ic->trc[2] = ic->trc[1];
    }
}

static void icc_open(const lam__colour_meta *m, int chans, icc_curves *ic)
{
    memset(ic, 0, sizeof *ic);
    snprintf(ic->desc, sizeof ic->desc, "unnamed");
    if (m->icc_len < 128 || m->icc_len > ICC_MAX_BYTES) {
        snprintf(ic->problem, sizeof ic->problem, "damaged (%zu bytes)", m->icc_len);
        return;
    }
    ic->ctx = cmsCreateContext(NULL, ic);
    if (!ic->ctx) {
        snprintf(ic->problem, sizeof ic->problem, "not readable (out of memory)");
        return;
    }
    cmsSetLogErrorHandlerTHR(ic->ctx, on_lcms_error);
    ic->prof = cmsOpenProfileFromMemTHR(ic->ctx, m->icc, (cmsUInt32Number)m->icc_len);
    if (!ic->prof) {
        snprintf(ic->problem, sizeof ic->problem, "damaged%s%s%s", ic->lcms[0] ? " (" : "",
                 ic->lcms, ic->lcms[0] ? ")" : "");
        return;
    }
    read_description(ic);
    pick_curves(ic, chans);
}

static void icc_close(icc_curves *ic)
{
    if (ic->prof)
        cmsCloseProfile(ic->prof);
    if (ic->ctx)
        cmsDeleteContext(ic->ctx);
    ic->prof = NULL;
    ic->ctx = NULL;
}

static double eval_icc(const cmsToneCurve *t, double v)
{
    double l = (double)cmsEvalToneCurveFloat(t, (cmsFloat32Number)v);
    return isfinite(l) ? fmin(fmax(l, 0.0), 1.0) : 0.0;
}

/* The named curve closest to an ICC tone curve: sRGB or linear when they
 * match within 2e-3 of full scale, else the power law lcms2 estimates. */
static lam_transfer classify(const cmsToneCurve *t)
{
    lam_transfer srgb = {LAM_TRANSFER_SRGB, 0.0}, lin = {LAM_TRANSFER_LINEAR, 0.0};
    double ds = 0.0, dl = 0.0;
    for (int i = 0; i <= 256; i++) {
        double v = i / 256.0, l = eval_icc(t, v);
        ds = fmax(ds, fabs(l - lam_transfer_decode(&srgb, v)));
        dl = fmax(dl, fabs(l - v));
    }
    if (ds < 2e-3)
        return srgb;
    if (dl < 2e-3)
        return lin;
    double g = cmsEstimateGamma(t, 0.01);
    if (!(g >= 0.2 && g <= 5.0))
        g = 2.2; /* no power law fits: record the common value, the tables stay exact */
    return (lam_transfer){LAM_TRANSFER_GAMMA, g};
}

static void describe(const lam_transfer *t, char *buf, size_t n)
{
    if (t->kind == LAM_TRANSFER_GAMMA)
        snprintf(buf, n, "gamma %.4g", t->gamma);
    else
        snprintf(buf, n, "%s", t->kind == LAM_TRANSFER_LINEAR ? "linear" : "sRGB");
}

/* What the file says, without the ICC part. */
static void describe_file(const lam__colour_meta *m, lam_image *img)
{
    img->file_transfer = (lam_transfer){LAM_TRANSFER_AUTO, 0.0};
    snprintf(img->file_colour, sizeof img->file_colour, "none");
    if (m->kind == LAM__META_SRGB) {
        img->file_transfer.kind = LAM_TRANSFER_SRGB;
        snprintf(img->file_colour, sizeof img->file_colour, "sRGB chunk");
    } else if (m->kind == LAM__META_GAMMA) {
        snprintf(img->file_colour, sizeof img->file_colour, "gAMA %.5g", m->file_gamma);
        double g = m->file_gamma > 0.0 ? 1.0 / m->file_gamma : 0.0;
        if (fabs(g - 1.0) < 1e-3)
            img->file_transfer.kind = LAM_TRANSFER_LINEAR;
        else if (g >= 0.2 && g <= 5.0)
            img->file_transfer = (lam_transfer){LAM_TRANSFER_GAMMA, g};
        else
            snprintf(img->file_colour, sizeof img->file_colour, "gAMA %.5g (out of range, ignored)",
                     m->file_gamma);
    }
}

static void fill_from_icc(lam__pixconv *pc, const icc_curves *ic)
{
    double top = (double)(pc->levels - 1);
    int distinct = pc->chans == 3 && (ic->trc[1] != ic->trc[0] || ic->trc[2] != ic->trc[0]);
    for (int c = 0; c < (distinct ? 3 : 1); c++) {
        pc->lut[c] = pc->table + (size_t)c * pc->levels;
        for (size_t i = 0; i < pc->levels; i++)
            pc->lut[c][i] = (float)eval_icc(ic->trc[c], (double)i / top);
    }
    if (!distinct)
        pc->lut[1] = pc->lut[2] = pc->lut[0];
}

lam_status lam__colour_apply(const lam__colour_meta *meta, const lam_transfer *user,
                             lam__pixconv *pc, lam_image *img, lam_error *err)
{
    icc_curves ic;
    memset(&ic, 0, sizeof ic);
    describe_file(meta, img);
    int user_set = user && user->kind != LAM_TRANSFER_AUTO, icc_ok = 0;
    if (meta->kind == LAM__META_ICC) {
        icc_open(meta, pc->chans, &ic);
        icc_ok = !ic.problem[0];
        snprintf(img->file_colour, sizeof img->file_colour, "ICC profile '%s'%s", ic.desc,
                 icc_ok ? "" : " (not usable)");
        if (icc_ok)
            img->file_transfer = classify(ic.trc[1]);
        if (!icc_ok && !user_set) {
            icc_close(&ic);
            return lam_error_set(err, LAM_EFORMAT,
                                 "embedded ICC profile '%s' is %s, which lamina cannot apply "
                                 "channel by channel; set the encoding (--encoding or the "
                                 "setup's \"encoding\") to read the file anyway",
                                 ic.desc, ic.problem);
        }
    }
    char name[32];
    if (user_set) {
        img->transfer = *user;
        img->transfer_from_file = 0;
        describe(user, name, sizeof name);
        snprintf(img->transfer_source, sizeof img->transfer_source, "set by the user (%s)", name);
        lam__pixconv_fill(pc, user);
    } else if (icc_ok) {
        img->transfer = img->file_transfer;
        img->transfer_from_file = 1;
        snprintf(img->transfer_source, sizeof img->transfer_source, "%s", img->file_colour);
        fill_from_icc(pc, &ic);
    } else if (img->file_transfer.kind != LAM_TRANSFER_AUTO) {
        img->transfer = img->file_transfer;
        img->transfer_from_file = 1;
        snprintf(img->transfer_source, sizeof img->transfer_source, "%s", img->file_colour);
        lam__pixconv_fill(pc, &img->transfer);
    } else {
        int deep = pc->depth == 16;
        img->transfer = (lam_transfer){deep ? LAM_TRANSFER_LINEAR : LAM_TRANSFER_SRGB, 0.0};
        img->transfer_from_file = 0;
        snprintf(img->transfer_source, sizeof img->transfer_source, "none (assumed %s)",
                 deep ? "linear for 16-bit" : "sRGB for 8-bit");
        lam__pixconv_fill(pc, &img->transfer);
    }
    icc_close(&ic);
    return LAM_OK;
}
