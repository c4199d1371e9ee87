/*
 * io/overlay.h - the picture of an inspection: the frame in grey with the
 * model's outline, the measured outline and rings around the located
 * defects drawn on it, and a band along the top in the verdict's colour;
 * written as an RGB PNG. Plain data in, so io/ needs no verdict type.
 *
 * Colours: model outline blue (70,150,255); measured outline teal
 * (0,200,140); invalid measured points (no edge) yellow (250,210,0);
 * defect rings magenta (235,40,170); top band: pass green (40,170,80),
 * reject red (220,50,40), fault amber (240,170,0).
 */
#ifndef MB_OVERLAY_H
#define MB_OVERLAY_H

#include <stdint.h>

#include "image.h"
#include "shape.h"

typedef struct {
    double x, y;    /**< image px */
    double radius;  /**< px */
} mb_overlay_mark;

typedef struct {
    const mb_image *frame;
    const mb_layout *layout;     /**< may be NULL: no outlines */
    const double *model_xy;      /**< 2n px or NULL */
    const double *measured_xy;   /**< 2n px or NULL */
    const uint8_t *valid;        /**< n or NULL */
    int verdict;                 /**< 1 pass, 2 reject, 3 fault */
    const mb_overlay_mark *marks;
    int n_marks;
} mb_overlay;

/**
 * Draw into rgb (frame width x height x 3 bytes, rows of `stride` bytes).
 * Return value: 0; MB_EINVAL.
 */
int mb_overlay_render(const mb_overlay *ov, uint8_t *rgb, int stride);

/** Render and write an RGB PNG. Return value: 0; MB_EINVAL; MB_ENOMEM; MB_EIO. */
int mb_overlay_save(const char *path, const mb_overlay *ov, char *err);

#endif
