/* tests/alloc_count.c - the allocation counter of alloc_count.h. The
   __wrap_ and __real_ names are the linker's convention for --wrap. */
#include "alloc_count.h"

#include <stddef.h>

void *__real_malloc(size_t n);
void *__real_calloc(size_t n, size_t size);
void *__real_realloc(void *p, size_t n);
void *__wrap_malloc(size_t n);
void *__wrap_calloc(size_t n, size_t size);
void *__wrap_realloc(void *p, size_t n);

static long allocations;

long mb_allocs(void)
{
    return allocations;
}

void *__wrap_malloc(size_t n)
{
    allocations++;
    return __real_malloc(n);
}

void *__wrap_calloc(size_t n, size_t size)
{
    allocations++;
    return __real_calloc(n, size);
}

void *__wrap_realloc(void *p, size_t n)
{
    allocations++;
    return __real_realloc(p, n);
}
