/*
 * lamina/bigalloc.h - memory for whole-image buffers (pixel planes, label
 * maps, the segmentation's node array).
 *
 * These buffers are tens to hundreds of megabytes and are written once
 * from start to end. With the kernel's 4 KiB pages every first write to a
 * page is a page fault; at 12 MP that was 129 000 faults and a fifth of
 * the analysis' time on this machine's virtual CPU (docs/performance.md).
 * These functions allocate as malloc, calloc and realloc do and then ask
 * the kernel (madvise, MADV_HUGEPAGE) to back the buffer with 2 MiB pages
 * where transparent huge pages are enabled "on advice", the usual Linux
 * default: 512 times fewer faults. The advice is only advice: where it is
 * not available or refused nothing changes but the speed.
 *
 * Free the result with free(). Buffers below 4 MiB get no advice (a huge
 * page would hold mostly other data). Thread-safe; errors as malloc's: NULL.
 */
#ifndef LAMINA_BIGALLOC_H
#define LAMINA_BIGALLOC_H

#include <stddef.h>

/* malloc, calloc and realloc with the huge-page advice (above). */
void *lam_big_malloc(size_t bytes);
void *lam_big_calloc(size_t count, size_t size);
void *lam_big_realloc(void *p, size_t bytes);

/* For a program, once at its start (the command line does this): the
 * next 'bytes' of the malloc heap get the huge-page advice, so that the
 * many buffers below 4 MiB fault in 2 MiB at a time too. On the project's
 * virtual machine a 4 KiB page fault cost 10-13 us, and an analysis of a
 * 1 MP tile took 3000-3600 of them (docs/performance.md). Only the main
 * heap is advised (glibc; elsewhere this does nothing), and only while
 * freed memory stays in it (M_TRIM_THRESHOLD raised). The price: a
 * touched huge page is 2 MiB of memory, so a small process holds a few
 * MB more. */
void lam_heap_huge_pages(size_t bytes);

/* malloc for a large buffer that is touched sparsely (a pool of slots of
 * which a run uses a part): small pages for it even inside a heap advised
 * for huge ones, where every touch would cost 2 MiB of zeroed memory. */
void *lam_sparse_malloc(size_t bytes);

#endif
