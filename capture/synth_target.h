/*
 * capture/synth_target.h - a frame of a printed dot target (or any sheet of
 * dark discs) lying on the synthetic line's conveyor, seen by the synthetic
 * line's camera: straight down at a fixed scale, no lens distortion, the
 * same blur and sensor noise as the part frames (capture/synth.h). With it
 * a demo or a test calibrates the synthetic camera the way a plant
 * calibrates its own, through the calibration target (calibration/target.h
 * gives the discs; this room does not know the target's layout).
 *
 * Pixels: the conveyor is `conveyor` grey, the sheet `white`, the discs
 * `black`; each pixel is its exact area coverage (capture/render.h; discs
 * as 256-gons, whose centroids are their centres), then Gaussian blur,
 * then Gaussian noise, rounded to 8 bits.
 *
 * Coordinates: sheet mm (x right, y down as printed); image px (x right,
 * y down, pixel centres at integers). Sheet point (X, Y) is seen at
 *     centre_px + (R(angle) ((X, Y) - anchor_mm)) / mm_per_px
 * with R turning clockwise on screen for a positive angle.
 */
#ifndef MB_SYNTH_TARGET_H
#define MB_SYNTH_TARGET_H

#include <stdint.h>

#include "image.h"

/** A dark disc on the sheet, mm. */
typedef struct {
    double x, y;   /**< centre, sheet mm */
    double radius; /**< mm, > 0 */
} mb_synth_disc;

/** How the sheet lies and how it is imaged; mb_synth_target_view_default. */
typedef struct {
    double mm_per_px;    /**< camera scale; default 0.1 (the line's) */
    double angle_deg;    /**< the sheet's turn in the image; default 0 */
    double anchor_mm[2]; /**< sheet point placed at centre_px; default 0 */
    double centre_px[2]; /**< default: the frame centre */
    double sheet_mm[4];  /**< the sheet: x0, y0, x1, y1 (x0 < x1, y0 < y1) */
    double white, black, conveyor; /**< grey levels; 220, 25, 90 */
    double blur;                   /**< Gaussian sigma, px; default 1 */
    double noise;  /**< Gaussian sigma, grey levels; default 2 */
    uint64_t seed; /**< noise seed; default 1 */
} mb_synth_target_view;

/** Defaults as listed; centre_px at the frame centre of a width x height
    frame; sheet_mm all 0 (the caller sets it). */
void mb_synth_target_view_default(mb_synth_target_view *v, int width,
                                  int height);

/**
 * Render the sheet with n discs into frame (an allocated image of the
 * size wanted). Allocates its work planes (not a per-frame path).
 * Return value: 0; MB_EINVAL (NULL, n < 0, a disc or view value out of
 * range, a sheet of no area: err says which); MB_ENOMEM.
 */
int mb_synth_target_frame(const mb_synth_disc *discs, int n,
                          const mb_synth_target_view *v, mb_image *frame,
                          char *err);

#endif
