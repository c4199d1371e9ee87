/*
 * fit/part_model.h - everything taught about one part, in one handle:
 * the shape model, the grey-level profile models, the acceptance limits and
 * the imaging conditions it was taught under.
 *
 * A plain struct of owned parts (the model file in io/ reads and writes it;
 * fit/ search uses shape + profiles; inspect/ judges with the limits).
 * Teaching from landmark point files gives only the shape model (profiles
 * NULL, has_limits possibly 0): such a model can be studied but not used
 * to inspect images.
 */
#ifndef MB_PART_MODEL_H
#define MB_PART_MODEL_H

#include "part_limits.h"
#include "profile.h"
#include "shape_model.h"

typedef struct {
    int width, height;  /**< frame size taught on, px; 0 when unknown */
    double mm_per_px;   /**< scale taught with; 0 when not given */
    int dark_part;      /**< 1: part darker than the field (back-lit) */
} mb_imaging;

typedef struct {
    char name[128];            /**< part name / number, free text */
    mb_shape_model *shape;     /**< owned; never NULL in a valid model */
    mb_profile_model *profiles;/**< owned; NULL when taught from points */
    int has_limits;
    mb_limits limits;          /**< owned arrays when has_limits */
    mb_imaging imaging;
} mb_part_model;

/** Free every owned part and zero the struct. NULL-safe. */
void mb_part_model_free(mb_part_model *pm);

#endif
