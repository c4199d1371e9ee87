/*
 * tests/alloc_count.h - how many times a test or benchmark program has
 * called malloc, calloc or realloc (its own code and the libraries it
 * links, through the linker's --wrap). A program gets it with
 * mb_count_allocs(target) in CMake (tests/CMakeLists.txt), which links
 * alloc_count.c and adds -Wl,--wrap=malloc,--wrap=calloc,--wrap=realloc.
 * Read it before and after the code under test; the difference is the
 * number of allocations that code made.
 */
#ifndef MB_ALLOC_COUNT_H
#define MB_ALLOC_COUNT_H

/** Allocations so far. */
long mb_allocs(void);

#endif
