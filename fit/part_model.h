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

/** Most drawing gauges one part may have. */
#define MB_MAX_GAUGES 16

/** What a gauge measures on the measured outline. */
typedef enum {
    MB_GAUGE_DIAMETER = 1,  /**< least-squares circle diameter of outline a */
    MB_GAUGE_WIDTH_MIN,     /**< least caliper width of outline a */
    MB_GAUGE_WIDTH_MAX,     /**< greatest caliper width of outline a */
    MB_GAUGE_SPACING,       /**< distance between the centroids of outlines a, b */
    MB_GAUGE_LENGTH,        /**< perimeter of outline a */
    MB_GAUGE_AREA           /**< area enclosed by outline a (mm^2) */
} mb_gauge_kind;

/** A drawing dimension: kind, outlines, nominal and tolerance in mm. */
typedef struct {
    char name[48];        /**< as on the drawing, e.g. "ID", "bolt pitch" */
    mb_gauge_kind kind;
    int a, b;             /**< outline indices (b only for SPACING) */
    double nominal;       /**< mm (mm^2 for AREA) */
    double tol_lo, tol_hi;/**< accepted: nominal + tol_lo .. nominal + tol_hi
                               (tol_lo <= 0 <= tol_hi) */
    double taught_mean;   /**< mean over the good parts taught (mm); 0 when
                               not taught */
    double taught_sd;     /**< their standard deviation (mm); 0 when not */
} mb_gauge_def;

typedef struct {
    char name[128];            /**< part name / number, free text */
    mb_shape_model *shape;     /**< owned; never NULL in a valid model */
    mb_profile_model *profiles;/**< owned; NULL when taught from points */
    int has_limits;
    mb_limits limits;          /**< owned arrays when has_limits */
    mb_imaging imaging;
    int n_gauges;
    mb_gauge_def gauges[MB_MAX_GAUGES];
} mb_part_model;

/** Free every owned part and zero the struct. NULL-safe. */
void mb_part_model_free(mb_part_model *pm);

#endif
