/* model_gradient.c - the contrast ladder's derivatives with respect to
 * the model's parameters (lam_model_gradient, lam_model_doxide): analytic
 * where one pass of derivative fields through the stack gives them, central
 * differences elsewhere (lamina/model.h says which). */
#include "lamina/model.h"
#include "lamina/tmm.h"
#include "model_internal.h"
#include "vector_clones.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

/* ---- the ladder's derivatives without differences ----
 * A fit asks for the ladder's derivatives every iteration. By central
 * differences every parameter costs two evaluations; the oxide, the NA
 * and the three response terms each restack the sheets, and the oxide and
 * the NA refill substrate slots (the NA also the cone's waves): most of a
 * tile's fit. One pass gives them all: beside each item's fields (b, c) it
 * carries their derivatives with respect to the sheet admittance y, the
 * oxide thickness and the item's kx = n_ambient sin(theta).
 * - The stack is a polynomial in y, so (b, c) are holomorphic in it and one
 *   complex derivative serves every response term (y is linear in them:
 *   lam_sheet_combine).
 * - The stack is linear in the substrate's fields (1, Y); Y moves with the
 *   oxide's phase alone.
 * - kx moves every wave vector q = sqrt(n^2 - kx^2) (dq/dkx = -kx/q), hence
 *   every admittance (s: q, p: n^2/q) and phase (k0 q d), in the substrate,
 *   the ambient and its gaps between the sheets. The NA moves the cone's
 *   Gauss-Legendre nodes (theta_i = theta_max u_i) and their normalised
 *   pupil weights (ensure_cone). */

/* Inside a film the admittance follows dY/d phase = -i (eta^2 - Y^2) / eta
 * (the characteristic matrix to first order; films compose). */
static double complex riccati(double complex eta, double complex y)
{
    return -I * (eta * eta - y * y) / eta;
}

/* dY/d oxide (and, when dkx is not NULL, dY/dkx) of item (k, pol) at the
 * top of the substrate. With the oxide on top and no kx, dY/d oxide is
 * k0 q times riccati of the slot's own Y. Otherwise Y is carried up from
 * the base as fill_slot_from_waves carries it: through a film Y goes by a
 * Moebius map of determinant cos^2 + sin^2 = 1 (dY_above/dY_below =
 * 1 / den^2), its phase and its admittance moving with kx. */
static double complex substrate_derivs(const lam_model *m, const cone_waves *w,
                                       const substrate_slot *s, size_t k, int pol, double kx,
                                       double complex *dkx)
{
    size_t films = lam__films_of(m), ox = m->oxide_layer;
    if (ox == 0 && m->layers > 0 && !dkx)
        return w->k0q[k * films] *
               riccati(w->eta[2 * k * films + (size_t)pol], s->y[2 * k + (size_t)pol]);
    double k0 = 2.0 * M_PI / m->wl[k / m->cone_cache.nodes];
    double complex qb = w->eta_base[2 * k], y = w->eta_base[2 * k + (size_t)pol];
    double complex dq = -kx / qb, dy = pol == LAM_POL_S ? dq : -y * dq / qb, dox = 0;
    for (size_t j = m->layers; j-- > 0;) {
        size_t kj = k * films + j;
        double complex e = w->eta[2 * kj + (size_t)pol], cp = w->cph[kj], sp = w->sph[kj];
        double d = j == ox ? s->oxide_nm : m->layer_nm[j];
        if (j == ox)
            lam__phase_cos_sin(w->k0q[kj] * d, &cp, &sp);
        double complex den = cp - I * sp * y / e, yo = (-I * e * sp + cp * y) / den;
        double complex q = w->k0q[kj] / k0, dqj = -kx / q;
        double complex de = pol == LAM_POL_S ? dqj : -e * dqj / q;
        double complex dyo_de = (-I * sp - yo * (I * sp * y / (e * e))) / den;
        dy = dy / (den * den) + riccati(e, yo) * k0 * dqj * d + dyo_de * de;
        dox = j == ox ? w->k0q[kj] * riccati(e, yo) : dox / (den * den);
        y = yo;
    }
    if (dkx)
        *dkx = dy;
    return dox;
}

/* Each item's derivative fields: d(b, c)/dy (p), d(b, c)/d oxide (o) and
 * d(b, c)/dkx (a); the ambient's d/dkx: of the gap's cos (dcg), of its
 * i sin / eta0 and i sin eta0 (dg1, dg2) and of eta0 (de0); the node's
 * d ln(weight)/d theta_max (ka) and dkx/d theta_max (kb); and the
 * reflectance's derivatives: dR = 2 Re(G dy) (G = gr + i gi), dR/d oxide
 * (go), dR/d theta_max through the item alone (ga). */
typedef struct deriv_items {
    double pbr[MAX_ITEMS], pbi[MAX_ITEMS], pcr[MAX_ITEMS], pci[MAX_ITEMS];
    double obr[MAX_ITEMS], obi[MAX_ITEMS], ocr[MAX_ITEMS], oci[MAX_ITEMS];
    double abr[MAX_ITEMS], abi[MAX_ITEMS], acr[MAX_ITEMS], aci[MAX_ITEMS];
    double dcgr[MAX_ITEMS], dcgi[MAX_ITEMS], dg1r[MAX_ITEMS], dg1i[MAX_ITEMS];
    double dg2r[MAX_ITEMS], dg2i[MAX_ITEMS], de0r[MAX_ITEMS], de0i[MAX_ITEMS];
    double ka[MAX_ITEMS], kb[MAX_ITEMS];
    double gr[MAX_ITEMS], gi[MAX_ITEMS], go[MAX_ITEMS], ga[MAX_ITEMS];
} deriv_items;

/* Per node of the cone: d ln(w_t)/d theta_max of its normalised weight
 * w_t ~ W_t p(theta_t) with theta_t = theta_max u_t, which is
 * u_t L_t - sum_j w_j u_j L_j with L = p'/p (cot for the sin pupil,
 * cot - tan for sin cos), into ka; dkx/d theta_max = u_t n cos(theta_t)
 * into kb. Returns d theta_max / d NA. */
static double node_derivs(const lam_model *m, double *ka, double *kb)
{
    const cone *c = &m->cone_cache;
    double tmax = asin(c->na / m->n_ambient), mean = 0;
    for (size_t t = 0; t < c->nodes; t++) {
        double th = asin(c->sin_t[t]), L = 1.0 / tan(th);
        if (m->pupil != LAM_PUPIL_SIN)
            L -= tan(th);
        ka[t] = th / tmax * L;
        kb[t] = th / tmax * m->n_ambient * cos(th);
        mean += c->w_t[t] * ka[t];
    }
    for (size_t t = 0; t < c->nodes; t++)
        ka[t] -= mean;
    return 1.0 / sqrt(m->n_ambient * m->n_ambient - c->na * c->na);
}

/* The ambient's d/dkx for item i at node kx (gap phase k0 q0 d_gap). */
static void ambient_derivs(const lam_model *m, const substrate_slot *s, size_t k, int pol,
                           double kx, size_t i, deriv_items *d)
{
    double k0 = 2.0 * M_PI / m->wl[k / m->cone_cache.nodes];
    double complex q0 = s->eta0[2 * k], e0 = s->eta0[2 * k + (size_t)pol];
    double complex cg = s->gap_cos[k], sg = s->gap_sin[k], dq0 = -kx / q0;
    double complex de0 = pol == LAM_POL_S ? dq0 : -e0 * dq0 / q0;
    double complex dph = k0 * m->interlayer_nm * dq0, dcg = -sg * dph, dsg = cg * dph;
    double complex dg1 = I * (dsg / e0 - sg * de0 / (e0 * e0)), dg2 = I * (dsg * e0 + sg * de0);
    d->dcgr[i] = creal(dcg), d->dcgi[i] = cimag(dcg);
    d->dg1r[i] = creal(dg1), d->dg1i[i] = cimag(dg1);
    d->dg2r[i] = creal(dg2), d->dg2i[i] = cimag(dg2);
    d->de0r[i] = creal(de0), d->de0i[i] = cimag(de0);
}

/* The bare substrate's derivative fields of wavelength l, in load_items'
 * order (b = 1 and c = Y do not depend on y; c moves with the oxide and
 * kx), and the ambient's terms. ka, kb: the nodes' terms (node_derivs)
 * when the kx terms are wanted, else NULL (they are left zero). */
static void load_derivs(const lam_model *m, const cone_waves *w, const substrate_slot *s, size_t l,
                        const double *ka, const double *kb, deriv_items *d)
{
    const cone *c = &m->cone_cache;
    int angle = ka != NULL;
    size_t i = 0;
    for (size_t t = 0; t < c->nodes; t++) {
        size_t k = l * c->nodes + t;
        double kx = m->n_ambient * c->sin_t[t];
        for (int pol = 0; pol < (c->sin_t[t] > 0 ? 2 : 1); pol++, i++) {
            double complex dkx = 0;
            double complex dox = substrate_derivs(m, w, s, k, pol, kx, angle ? &dkx : NULL);
            d->pbr[i] = d->pbi[i] = d->pcr[i] = d->pci[i] = 0;
            d->obr[i] = d->obi[i] = 0, d->ocr[i] = creal(dox), d->oci[i] = cimag(dox);
            d->abr[i] = d->abi[i] = 0, d->acr[i] = creal(dkx), d->aci[i] = cimag(dkx);
            d->dcgr[i] = d->dcgi[i] = d->dg1r[i] = d->dg1i[i] = 0;
            d->dg2r[i] = d->dg2i[i] = d->de0r[i] = d->de0i[i] = 0;
            d->ka[i] = angle ? ka[t] : 0;
            d->kb[i] = angle ? kb[t] : 0;
            if (angle)
                ambient_derivs(m, s, k, pol, kx, i, d);
        }
    }
}

/* One ambient gap on the derivative fields: the same linear map as
 * items_gap, and for kx its own derivative on (b, c) (before the gap). */
LAM_VECTOR_CLONES
static void derivs_gap(const stack_items *restrict it, deriv_items *restrict d)
{
    for (size_t i = 0; i < it->n; i++) {
        double gcr = it->gcr[i], gci = it->gci[i], g1r = it->g1r[i], g1i = it->g1i[i];
        double g2r = it->g2r[i], g2i = it->g2i[i];
        double br = d->pbr[i], bi = d->pbi[i], cr = d->pcr[i], ci = d->pci[i];
        d->pbr[i] = (gcr * br - gci * bi) - (g1r * cr - g1i * ci);
        d->pbi[i] = (gcr * bi + gci * br) - (g1r * ci + g1i * cr);
        d->pcr[i] = (gcr * cr - gci * ci) - (g2r * br - g2i * bi);
        d->pci[i] = (gcr * ci + gci * cr) - (g2r * bi + g2i * br);
        br = d->obr[i], bi = d->obi[i], cr = d->ocr[i], ci = d->oci[i];
        d->obr[i] = (gcr * br - gci * bi) - (g1r * cr - g1i * ci);
        d->obi[i] = (gcr * bi + gci * br) - (g1r * ci + g1i * cr);
        d->ocr[i] = (gcr * cr - gci * ci) - (g2r * br - g2i * bi);
        d->oci[i] = (gcr * ci + gci * cr) - (g2r * bi + g2i * br);
        double fbr = it->br[i], fbi = it->bi[i], fcr = it->cr[i], fci = it->ci[i];
        double hr = d->dcgr[i], hi = d->dcgi[i], h1r = d->dg1r[i], h1i = d->dg1i[i];
        double h2r = d->dg2r[i], h2i = d->dg2i[i];
        br = d->abr[i], bi = d->abi[i], cr = d->acr[i], ci = d->aci[i];
        d->abr[i] = (gcr * br - gci * bi) - (g1r * cr - g1i * ci) +
                    ((hr * fbr - hi * fbi) - (h1r * fcr - h1i * fci));
        d->abi[i] = (gcr * bi + gci * br) - (g1r * ci + g1i * cr) +
                    ((hr * fbi + hi * fbr) - (h1r * fci + h1i * fcr));
        d->acr[i] = (gcr * cr - gci * ci) - (g2r * br - g2i * bi) +
                    ((hr * fcr - hi * fci) - (h2r * fbr - h2i * fbi));
        d->aci[i] = (gcr * ci + gci * cr) - (g2r * bi + g2i * br) +
                    ((hr * fci + hi * fcr) - (h2r * fbi + h2i * fbr));
    }
}

/* One sheet, C += y B: d/dy adds B + y dB/dy, d/d oxide and d/dkx add
 * y times their dB. */
LAM_VECTOR_CLONES
static void derivs_sheet(const stack_items *restrict it, deriv_items *restrict d, double yr,
                         double yi)
{
    for (size_t i = 0; i < it->n; i++) {
        double pbr = d->pbr[i], pbi = d->pbi[i], obr = d->obr[i], obi = d->obi[i];
        double abr = d->abr[i], abi = d->abi[i];
        d->pcr[i] += it->br[i] + (yr * pbr - yi * pbi);
        d->pci[i] += it->bi[i] + (yr * pbi + yi * pbr);
        d->ocr[i] += yr * obr - yi * obi;
        d->oci[i] += yr * obi + yi * obr;
        d->acr[i] += yr * abr - yi * abi;
        d->aci[i] += yr * abi + yi * abr;
    }
}

/* R = |n|^2 / |D|^2 with n = eta0 B - C, D = eta0 B + C:
 * dR = 2 Re(conj(n) dn - R conj(D) dD) / |D|^2 (for kx, eta0 moves too).
 * Adds the items' weighted G (acc[0], acc[1]), dR/d oxide (acc[2]) and
 * d(w R)/d theta_max / w (acc[3]), in item order. */
LAM_VECTOR_CLONES
static void derivs_reflectance(const stack_items *restrict it, deriv_items *restrict d,
                               double acc[4])
{
    for (size_t i = 0; i < it->n; i++) {
        double er = it->er[i], ei = it->ei[i], br = it->br[i], bi = it->bi[i];
        double ar = er * br - ei * bi, ai = er * bi + ei * br; /* eta0 B */
        double nr = ar - it->cr[i], ni = ai - it->ci[i], dr = ar + it->cr[i], di = ai + it->ci[i];
        double inv = 1.0 / (dr * dr + di * di), r2 = it->r2[i];
        double qr = er * d->pbr[i] - ei * d->pbi[i], qi = er * d->pbi[i] + ei * d->pbr[i];
        double pnr = qr - d->pcr[i], pni = qi - d->pci[i], pdr = qr + d->pcr[i],
               pdi = qi + d->pci[i];
        d->gr[i] = ((nr * pnr + ni * pni) - r2 * (dr * pdr + di * pdi)) * inv;
        d->gi[i] = ((nr * pni - ni * pnr) - r2 * (dr * pdi - di * pdr)) * inv;
        qr = er * d->obr[i] - ei * d->obi[i], qi = er * d->obi[i] + ei * d->obr[i];
        double onr = qr - d->ocr[i], oni = qi - d->oci[i], odr = qr + d->ocr[i],
               odi = qi + d->oci[i];
        d->go[i] = 2.0 * ((nr * onr + ni * oni) - r2 * (dr * odr + di * odi)) * inv;
        /* d(eta0 B) = deta0 B + eta0 dB */
        qr = er * d->abr[i] - ei * d->abi[i] + (d->de0r[i] * br - d->de0i[i] * bi);
        qi = er * d->abi[i] + ei * d->abr[i] + (d->de0r[i] * bi + d->de0i[i] * br);
        double anr = qr - d->acr[i], ani = qi - d->aci[i], adr = qr + d->acr[i],
               adi = qi + d->aci[i];
        double dkx = 2.0 * ((nr * anr + ni * ani) - r2 * (dr * adr + di * adi)) * inv;
        d->ga[i] = d->ka[i] * r2 + d->kb[i] * dkx;
    }
    for (size_t i = 0; i < it->n; i++) {
        acc[0] += it->wt[i] * d->gr[i];
        acc[1] += it->wt[i] * d->gi[i];
        acc[2] += it->wt[i] * d->go[i];
        acc[3] += it->wt[i] * d->ga[i];
    }
}

/* For slot s and the model's y_sheet, N = 0..layers (stride max_layers +
 * 1): gy[l][N] with d rbar = 2 Re(gy dy), gox[l][N] = d rbar/d oxide and,
 * when gna is not NULL, gna[l][N] = d rbar/d NA. */
static void stack_derivatives(lam_model *m, const substrate_slot *s, size_t layers,
                              double complex *gy, double *gox, double *gna)
{
    size_t stride = m->max_layers + 1;
    const cone_waves *w = lam__waves_for(m);
    double ka[MAX_NODES], kb[MAX_NODES], dtmax = 0; /* d theta_max / d NA */
    if (gna)
        dtmax = node_derivs(m, ka, kb);
    stack_items it;
    deriv_items d;
    for (size_t l = 0; l < m->nwl; l++) {
        double yr = creal(m->y_sheet[l]), yi = cimag(m->y_sheet[l]);
        lam__load_items(m, s, l, &it);
        load_derivs(m, w, s, l, gna ? ka : NULL, kb, &d);
        for (size_t N = 0; N <= layers; N++) {
            if (N > 1) {
                derivs_gap(&it, &d);
                lam__items_gap(&it);
            }
            if (N > 0) {
                derivs_sheet(&it, &d, yr, yi);
                lam__items_sheet(&it, yr, yi);
            }
            double acc[4] = {0, 0, 0, 0};
            derivs_reflectance(&it, &d, acc);
            gy[l * stride + N] = acc[0] + I * acc[1];
            gox[l * stride + N] = acc[2];
            if (gna)
                gna[l * stride + N] = acc[3] * dtmax;
        }
    }
}

/* The film ladder's derivatives (stack_film: N layers as one film on the
 * substrate), d rbar/d oxide into gox and, when gna is not NULL, d rbar/d NA
 * into gna (stride max_layers + 1), by the same terms as stack_derivatives:
 * the substrate's dY through the film (1 / den^2), and for kx the film's
 * own phase and admittance, the ambient's admittance and the cone's nodes
 * and weights. */
static void film_item_derivs(const lam_model *m, size_t l, size_t N, const film_phases *f, int pol,
                             double kx, double complex ysub, double complex dsub[2],
                             double complex *y, double complex dy[2])
{
    *y = ysub, dy[0] = dsub[0], dy[1] = dsub[1];
    if (N == 0)
        return;
    double complex n = N <= m->film_layers ? m->n_film_layer[(N - 1) * m->nwl + l] : m->n_film[l];
    double complex q = f->q[N], e = lam_tmm_eta(n, q, (lam_pol)pol), cp = f->cp[N], sp = f->sp[N];
    double complex den = cp - I * sp * ysub / e, dq = -kx / q;
    double complex de = pol == LAM_POL_S ? dq : -e * dq / q;
    *y = (-I * e * sp + cp * ysub) / den;
    dy[0] = dsub[0] / (den * den);
    dy[1] = dsub[1] / (den * den) +
            riccati(e, *y) * (2.0 * M_PI / m->wl[l]) * dq * (m->interlayer_nm * (double)N) +
            (-I * sp - *y * (I * sp * ysub / (e * e))) / den * de;
}

/* dR of |(eta0 - Y) / (eta0 + Y)|^2 for dY and d eta0. */
static double reflectance_change(double complex eta0, double complex y, double complex dy,
                                 double complex deta0, double *r2)
{
    double complex n = eta0 - y, d = eta0 + y;
    double inv = 1.0 / creal(d * conj(d));
    *r2 = creal(n * conj(n)) * inv;
    return 2.0 * creal(conj(n) * (deta0 - dy) - *r2 * conj(d) * (deta0 + dy)) * inv;
}

static int film_derivatives(lam_model *m, const substrate_slot *s, size_t layers, double *gox,
                            double *gna)
{
    const cone *c = &m->cone_cache;
    const cone_waves *w = lam__waves_for(m);
    size_t stride = m->max_layers + 1;
    double ka[MAX_NODES], kb[MAX_NODES], dtmax = 0, r2;
    if (gna)
        dtmax = node_derivs(m, ka, kb);
    film_phases f;
    for (size_t l = 0; l < m->nwl; l++) {
        double *go = gox + l * stride, *gn = gna ? gna + l * stride : NULL;
        for (size_t N = 0; N <= layers; N++)
            go[N] = gn ? (gn[N] = 0) : 0;
        for (size_t t = 0; t < c->nodes; t++) {
            size_t k = l * c->nodes + t;
            int npol = c->sin_t[t] > 0 ? 2 : 1;
            double wt = c->w_t[t] / (double)npol, kx = m->n_ambient * c->sin_t[t];
            if (!lam__film_phases(m, l, t, layers, &f))
                return 0;
            for (int pol = 0; pol < npol; pol++) {
                double complex eta0 = s->eta0[2 * k + (size_t)pol], q0 = s->eta0[2 * k];
                double complex dq0 = -kx / q0, de0 = pol == LAM_POL_S ? dq0 : -eta0 * dq0 / q0;
                double complex dsub[2] = {0, 0}, y, dy[2];
                dsub[0] = substrate_derivs(m, w, s, k, pol, kx, gn ? &dsub[1] : NULL);
                for (size_t N = 0; N <= layers; N++) {
                    film_item_derivs(m, l, N, &f, pol, kx, s->y[2 * k + (size_t)pol], dsub, &y, dy);
                    go[N] += wt * reflectance_change(eta0, y, dy[0], 0, &r2);
                    if (gn)
                        gn[N] +=
                            wt *
                            (ka[t] * r2 + kb[t] * reflectance_change(eta0, y, dy[1], de0, &r2)) *
                            dtmax;
                }
            }
        }
    }
    return 1;
}

/* Whether stack_derivatives (sheets) or film_derivatives (films) gives
 * d C / d p.v[j] at p: in reflection, the oxide, an NA above 0 (at 0 the
 * cone is one node, and its differences are one-sided) and, for sheets,
 * the response terms. */
static int derivable(const lam_model *m, const lam_model_point *p, int j)
{
    if (m->transmission)
        return 0;
    if (j == LAM_MP_NA)
        return p->v[LAM_MP_NA] > 0 && m->cone_nodes_max > 1;
    if (m->n_film) /* film flakes have no sheets: the response terms are not theirs */
        return j == LAM_MP_OXIDE;
    return j == LAM_MP_OXIDE || j == LAM_MP_CONTINUUM || j == LAM_MP_RESONANCE ||
           j == LAM_MP_BACKGROUND;
}

/* d C_c(N) from d rbar (per wavelength and N, stride max_layers + 1) at
 * the prediction 'at': C = (S - R) / S with S = R(0), so
 * dC = (R dS - S dR) / S^2 (the channel weights do not move). */
static void contrast_derivative(const lam_model *m, const lam_prediction *at, size_t layers,
                                const double *drbar, double (*g)[LAM_MAX_CHANNELS])
{
    size_t stride = m->max_layers + 1;
    for (size_t c = 0; c < m->channels; c++) {
        const double *w = m->weight + c * m->nwl;
        double S = at->substrate[c], dS = 0;
        for (size_t l = 0; l < m->nwl; l++)
            dS += w[l] * drbar[l * stride];
        for (size_t N = 0; N <= layers; N++) {
            double dR = 0;
            for (size_t l = 0; l < m->nwl; l++)
                dR += w[l] * drbar[l * stride + N];
            g[N][c] = (at->reflectance[N][c] * dS - S * dR) / (S * S);
        }
    }
}

/* d rbar / d (response term b of lam_sheet_combine, 1..3) from gy:
 * dy = Z0 basis_b per unit of the term (none without the visible terms). */
static void response_drbar(const lam_model *m, size_t b, size_t layers, const double complex *gy,
                           double *drbar)
{
    size_t stride = m->max_layers + 1;
    int visible = m->sheet.model == LAM_SHEET_KUBO && m->sheet.exciton;
    double z0s0 = lam_z0_sigma0();
    for (size_t l = 0; l < m->nwl; l++) {
        double complex u = visible ? z0s0 * m->basis[4 * l + b] : 0;
        for (size_t N = 0; N <= layers; N++)
            drbar[l * stride + N] = 2.0 * creal(u * gy[l * stride + N]);
    }
}

/* The derivable parameters' rows of grad, from one pass at p, which the
 * model has just evaluated into 'at' (its slot, cone, y_sheet, basis and
 * weights are p's). */
static lam_status analytic_gradient(lam_model *m, const lam_model_point *p, size_t layers,
                                    const lam_prediction *at, const int *which, size_t count,
                                    lam_ladder_grad *grad, lam_error *err)
{
    size_t per = m->nwl * (m->max_layers + 1);
    int na = 0;
    for (size_t k = 0; k < count; k++)
        na |= which[k] == LAM_MP_NA && derivable(m, p, LAM_MP_NA);
    double complex *gy = malloc(per * sizeof *gy);
    double *gox = malloc(3 * per * sizeof *gox), *gna = gox ? gox + 2 * per : NULL;
    lam_status st =
        gy && gox ? LAM_OK : lam_error_set(err, LAM_ENOMEM, "cannot allocate derivatives");
    if (!st) {
        substrate_slot *slot = lam__substrate_for(m, p->v[LAM_MP_OXIDE]);
        if (!m->n_film)
            stack_derivatives(m, slot, layers, gy, gox, na ? gna : NULL);
        else if (!film_derivatives(m, slot, layers, gox, na ? gna : NULL))
            st = lam_error_set(err, LAM_ENOMEM, "cannot allocate the film phases");
        for (size_t k = 0; k < count && !st; k++) {
            int j = which[k];
            if (!derivable(m, p, j))
                continue;
            double *drbar = j == LAM_MP_OXIDE ? gox : j == LAM_MP_NA ? gna : gox + per;
            if (drbar == gox + per)
                response_drbar(m,
                               j == LAM_MP_CONTINUUM   ? 1
                               : j == LAM_MP_RESONANCE ? 2
                                                       : 3,
                               layers, gy, drbar);
            contrast_derivative(m, at, layers, drbar, grad[k]);
        }
    }
    free(gy);
    free(gox);
    return st;
}

/* d C / d (one channel's shift or log width) by central differences of
 * that channel's weights alone, on rbar at p (the caller has evaluated p):
 * the stacking does not move, and the other channels' contrasts do not
 * either (their differences were exactly 0). The same numbers as
 * differences of whole evaluations, without them. w (nwl) and a (two
 * predictions): the caller's scratch. */
static lam_status camera_difference(lam_model *m, const lam_model_point *p, size_t layers, int j,
                                    double *w, lam_prediction *a, double (*g)[LAM_MAX_CHANNELS],
                                    lam_error *err)
{
    int shift = j <= LAM_MP_SHIFT_LAST;
    size_t c = (size_t)(j - (shift ? LAM_MP_SHIFT : LAM_MP_WIDTH));
    for (size_t N = 0; N <= layers; N++)
        for (size_t ch = 0; ch < m->channels; ch++)
            g[N][ch] = 0;
    if (c >= m->channels)
        return LAM_OK;
    double h = lam_model_step((lam_model_param)j), v[2] = {p->v[j] + h, p->v[j] - h};
    lam_status st = LAM_OK;
    for (int side = 0; side < 2 && !st; side++) {
        double sh = shift ? v[side] : p->v[LAM_MP_SHIFT + c];
        double lw = shift ? p->v[LAM_MP_WIDTH + c] : v[side];
        if (!(st = lam__channel_weights(m, c, sh, lw, w, err)))
            lam__integrate_channel(m, w, c, layers, &a[side]);
    }
    for (size_t N = 0; N <= layers && !st; N++)
        g[N][c] = (a[0].contrast[N][c] - a[1].contrast[N][c]) / (v[0] - v[1]);
    return st;
}

static int camera_param(int j)
{
    return j >= LAM_MP_SHIFT && j <= LAM_MP_WIDTH_LAST;
}

/* Central differences of whole evaluations for the parameters neither the
 * pass nor the camera's differences give (a: scratch for two). */
static lam_status whole_difference(lam_model *m, const lam_model_point *p, size_t layers, int j,
                                   lam_prediction *a, double (*g)[LAM_MAX_CHANNELS], lam_error *err)
{
    double h = lam_model_step((lam_model_param)j);
    lam_model_point hi = *p, lo = *p;
    hi.v[j] += h;
    lo.v[j] -= h;
    /* stay inside the physical range: one-sided at its edge */
    if ((j == LAM_MP_OXIDE || j == LAM_MP_NA || j == LAM_MP_RESONANCE || j == LAM_MP_BACKGROUND) &&
        lo.v[j] < 0)
        lo.v[j] = p->v[j];
    if (j == LAM_MP_NA && hi.v[j] >= m->n_ambient)
        hi.v[j] = p->v[j];
    double span = hi.v[j] - lo.v[j];
    lam_status st;
    if (!(st = lam_model_eval_point(m, &hi, layers, &a[0], err)) &&
        !(st = lam_model_eval_point(m, &lo, layers, &a[1], err)))
        for (size_t N = 0; N <= layers; N++)
            for (size_t c = 0; c < m->channels; c++)
                g[N][c] = (a[0].contrast[N][c] - a[1].contrast[N][c]) / span;
    return st;
}

lam_status lam_model_gradient(lam_model *m, const lam_model_point *p, size_t layers,
                              const int *which, size_t count, lam_ladder_grad *grad, lam_error *err)
{
    if (layers == 0 || layers > m->max_layers)
        layers = m->max_layers;
    int pass = 0, camera = 0;
    for (size_t k = 0; k < count; k++) {
        pass |= derivable(m, p, which[k]);
        camera |= camera_param(which[k]);
    }
    lam_prediction *a = malloc(3 * sizeof *a); /* p, then two scratch */
    double *w = malloc(m->nwl * sizeof *w);
    lam_status st = a && w ? LAM_OK : lam_error_set(err, LAM_ENOMEM, "cannot allocate predictions");
    /* p once, for the pass and the camera's terms (rbar stays p's through both) */
    if (!st && (pass || camera))
        st = lam_model_eval_point(m, p, layers, &a[0], err);
    if (!st && pass)
        st = analytic_gradient(m, p, layers, &a[0], which, count, grad, err);
    for (size_t k = 0; k < count && !st; k++)
        if (camera_param(which[k]))
            st = camera_difference(m, p, layers, which[k], w, a + 1, grad[k], err);
    /* last: whole evaluations move rbar away from p */
    for (size_t k = 0; k < count && !st; k++)
        if (!camera_param(which[k]) && !derivable(m, p, which[k]))
            st = whole_difference(m, p, layers, which[k], a + 1, grad[k], err);
    free(a);
    free(w);
    return st;
}

lam_status lam_model_doxide(lam_model *m, double oxide_nm, double fermi_ev,
                            double (*dc)[LAM_MAX_CHANNELS], lam_error *err)
{
    const double h = 0.05;
    lam_prediction *a = malloc(2 * sizeof *a);
    if (!a)
        return lam_error_set(err, LAM_ENOMEM, "cannot allocate predictions");
    lam_status st = lam_model_eval(m, oxide_nm + h, fermi_ev, &a[0], err);
    if (!st)
        st = lam_model_eval(m, oxide_nm > h ? oxide_nm - h : 0, fermi_ev, &a[1], err);
    if (!st) {
        double span = oxide_nm > h ? 2 * h : oxide_nm + h;
        for (size_t N = 0; N <= m->max_layers; N++)
            for (size_t c = 0; c < m->channels; c++)
                dc[N][c] = (a[0].contrast[N][c] - a[1].contrast[N][c]) / span;
    }
    free(a);
    return st;
}
