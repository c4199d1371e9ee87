/* fit/part_limits.c - allocation of the acceptance-limit record. */
#include "part_limits.h"

#include "error.h"

#include <stdlib.h>
#include <string.h>

void mb_limits_free(mb_limits *l)
{
    if (!l)
        return;
    free(l->local_sigma);
    free(l->local_limit);
    memset(l, 0, sizeof *l);
}

int mb_limits_alloc(mb_limits *l, int n_landmarks)
{
    if (!l || n_landmarks < 1)
        return MB_EINVAL;
    l->local_sigma = calloc((size_t)n_landmarks, sizeof *l->local_sigma);
    l->local_limit = calloc((size_t)n_landmarks, sizeof *l->local_limit);
    if (!l->local_sigma || !l->local_limit) {
        free(l->local_sigma);
        free(l->local_limit);
        l->local_sigma = l->local_limit = NULL;
        return MB_ENOMEM;
    }
    l->n_landmarks = n_landmarks;
    return MB_OK;
}
