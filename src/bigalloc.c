/* bigalloc.c - whole-image buffers backed by huge pages where the kernel
 * takes the advice (see lamina/bigalloc.h). */
#include "lamina/bigalloc.h"

#include <stdint.h>
#include <stdlib.h>
#include <sys/mman.h>

#define ADVICE_MIN ((size_t)4 << 20)  /* smaller buffers get no advice */
#define HUGE_PAGE ((uintptr_t)2 << 20) /* x86-64 and arm64 with 4 KiB pages */

/* Advise the huge-page-aligned interior of p[0..bytes): the advice must
 * start on a page boundary, and only whole huge pages can be used. */
static void *advise(void *p, size_t bytes)
{
#ifdef MADV_HUGEPAGE
    if (p && bytes >= ADVICE_MIN) {
        uintptr_t begin = ((uintptr_t)p + HUGE_PAGE - 1) & ~(HUGE_PAGE - 1);
        uintptr_t end = ((uintptr_t)p + bytes) & ~(HUGE_PAGE - 1);
        if (end > begin)
            (void)madvise((void *)begin, end - begin, MADV_HUGEPAGE);
    }
#else
    (void)bytes;
#endif
    return p;
}

void *lam_big_malloc(size_t bytes)
{
    return advise(malloc(bytes), bytes);
}

void *lam_big_calloc(size_t count, size_t size)
{
    if (size && count > SIZE_MAX / size)
        return NULL;
    return advise(calloc(count, size), count * size);
}

void *lam_big_realloc(void *p, size_t bytes)
{
    return advise(realloc(p, bytes), bytes);
}

void lam_heap_huge_pages(size_t bytes)
{
#ifdef __GLIBC__
    /* the block comes from the top of the heap (the caller has raised the
     * mmap threshold) and goes back to it on free, advised */
    free(advise(malloc(bytes), bytes));
#else
    (void)bytes;
#endif
}

void *lam_sparse_malloc(size_t bytes)
{
    void *p = malloc(bytes);
#ifdef MADV_NOHUGEPAGE
    uintptr_t small = 4096;
    uintptr_t begin = ((uintptr_t)p + small - 1) & ~(small - 1);
    uintptr_t end = ((uintptr_t)p + bytes) & ~(small - 1);
    if (p && bytes >= HUGE_PAGE && end > begin)
        (void)madvise((void *)begin, end - begin, MADV_NOHUGEPAGE);
#endif
    return p;
}
