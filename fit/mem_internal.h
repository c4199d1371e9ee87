/*
 * fit/mem_internal.h - allocation of large work matrices (private to fit/).
 *
 * A model build touches a few MB of fresh memory (the aligned shapes, the
 * covariance or Gram matrix). With 4 kB pages that is about a thousand page
 * faults per build; on a virtual machine a fault can cost tens of
 * microseconds, which then outweighs the arithmetic (measured with
 * tests/bench/bench_gpa_pca: about 20 ms of a 35 ms build). Buffers of 1 MB
 * and more are therefore aligned to 2 MB and marked for transparent huge
 * pages (madvise MADV_HUGEPAGE, a hint: where huge pages are off nothing
 * changes). Release them with free().
 */
#ifndef MB_MEM_INTERNAL_H
#define MB_MEM_INTERNAL_H

#include <stdlib.h>
#include <sys/mman.h>

#define MB_BIG_ALIGN ((size_t)2 << 20)

static inline void *mb_big_alloc(size_t bytes)
{
    if (bytes < ((size_t)1 << 20))
        return malloc(bytes ? bytes : 1);
    size_t rounded = (bytes + MB_BIG_ALIGN - 1) & ~(MB_BIG_ALIGN - 1);
    void *p = NULL;
    if (rounded < bytes || posix_memalign(&p, MB_BIG_ALIGN, rounded) != 0)
        return NULL;
#ifdef MADV_HUGEPAGE
    (void)madvise(p, rounded, MADV_HUGEPAGE); /* a hint; failure is fine */
#endif
    return p;
}

#endif
