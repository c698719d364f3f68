/* basis_cache.c - a process-wide memo of the sheet-conductivity basis per
 * (wavelength, Fermi level and the Kubo settings). The Kubo integrals cost
 * ~20 us per wavelength and the same values are wanted by every image of a
 * run (and by every Fermi-level table): computing them once saves most of
 * the time of an analysis' doping step. Thread-safe (one mutex); entries
 * live until the process ends. */
#include "basis_cache_internal.h"

#include <pthread.h>
#include <stdlib.h>
#include <string.h>

#define CACHE_BUCKETS 4096
#define CACHE_MAX_ENTRIES 200000 /* ~ 15 MB at most */

typedef struct entry {
    double key[6]; /* wavelength, mu, T, hbar/tau, puddles, model/exciton */
    double complex basis[4];
    struct entry *next;
} entry;

static pthread_mutex_t lock = PTHREAD_MUTEX_INITIALIZER;
static entry *bucket[CACHE_BUCKETS];
static size_t entries;

static size_t hash_key(const double *k)
{
    unsigned long long h = 1469598103934665603ull;
    const unsigned char *b = (const unsigned char *)k;
    for (size_t i = 0; i < 6 * sizeof(double); i++)
        h = (h ^ b[i]) * 1099511628211ull;
    return (size_t)(h % CACHE_BUCKETS);
}

static void make_key(const lam_sheet_params *p, double wl, double *k)
{
    memset(k, 0, 6 * sizeof *k);
    k[0] = wl;
    k[1] = p->fermi_ev;
    k[2] = p->temperature_k;
    k[3] = p->scattering_ev;
    k[4] = p->puddle_ev;
    k[5] = (double)p->model * 2 + (p->exciton != 0);
}

lam_status lam__sheet_basis_cached(const lam_sheet_params *p, double wl_nm, double energy_ev,
                                   double complex basis[4], lam_error *err)
{
    double k[6];
    make_key(p, wl_nm, k);
    size_t h = hash_key(k);
    pthread_mutex_lock(&lock);
    for (entry *e = bucket[h]; e; e = e->next)
        if (!memcmp(e->key, k, sizeof k)) {
            memcpy(basis, e->basis, sizeof e->basis);
            pthread_mutex_unlock(&lock);
            return LAM_OK;
        }
    pthread_mutex_unlock(&lock);
    lam_status st = lam_sheet_basis(p, energy_ev, basis, err);
    if (st)
        return st;
    entry *e = malloc(sizeof *e);
    if (!e)
        return LAM_OK; /* a failed (or full, below) cache only costs time */
    memcpy(e->key, k, sizeof k);
    memcpy(e->basis, basis, sizeof e->basis);
    pthread_mutex_lock(&lock); /* the count too is read under the lock */
    int room = entries < CACHE_MAX_ENTRIES;
    if (room) {
        e->next = bucket[h];
        bucket[h] = e;
        entries++;
    }
    pthread_mutex_unlock(&lock);
    if (!room)
        free(e);
    return LAM_OK;
}
