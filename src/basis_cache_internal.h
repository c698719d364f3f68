/* basis_cache_internal.h - memoised sheet-conductivity bases (see
 * basis_cache.c). Used by model.c only. */
#ifndef LAMINA_BASIS_CACHE_INTERNAL_H
#define LAMINA_BASIS_CACHE_INTERNAL_H

#include "lamina/conductivity.h"

/* lam_sheet_basis at energy_ev (= hc / wl_nm), remembered by (wl_nm, the
 * parameters that enter the basis). Same errors as lam_sheet_basis. */
lam_status lam__sheet_basis_cached(const lam_sheet_params *p, double wl_nm, double energy_ev,
                                   double complex basis[4], lam_error *err);

#endif
