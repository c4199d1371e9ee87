/* fit/part_model.c - release of a taught part's model. */
#include "part_model.h"

#include <string.h>

void mb_part_model_free(mb_part_model *pm)
{
    if (!pm)
        return;
    mb_shape_model_close(pm->shape);
    mb_profile_model_close(pm->profiles);
    mb_limits_free(&pm->limits);
    memset(pm, 0, sizeof *pm);
}
