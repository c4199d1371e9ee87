/*
 * calibration/detect.h - finding modeband's calibration target
 * (calibration/target.h) in a camera frame: every dot's centre to a
 * fraction of a pixel, in target order, or a refusal that says why.
 *
 * Steps (detect.c opens with the details):
 *   1. Dark blobs: Otsu's threshold (fit/outline.h) and 8-connected
 *      components; blobs shaped like filled ellipses are dot candidates.
 *   2. Lattice: from the most lattice-like candidate, dots are joined to
 *      their four neighbours by predicting each next dot from the last two
 *      (or the local lattice vectors) and taking the candidate near the
 *      prediction; the result is a rectangle of lattice coordinates.
 *   3. Checks, in this order, each refusing with its own code: no lattice
 *      (NO_TARGET); a second lattice of half the expected dots (MULTIPLE);
 *      local pitch below min_pitch_px (TOO_SMALL); lattice cells squashed
 *      beyond max_anisotropy or pitch varying beyond max_pitch_ratio
 *      across the target (TOO_OBLIQUE); dots missing, cut by the frame or
 *      beyond the found rectangle (PARTIAL); a complete grid of another
 *      size than asked (GRID_SIZE); corner marks not found or the pitch
 *      code unreadable (ORIENTATION); a pitch code other than the pitch
 *      given, by more than max_pitch_error (PITCH).
 *   4. Orientation and code: the corner marks fix which lattice corner is
 *      dot (0, 0) (judged against the three marked corners' mean contrast,
 *      so that blur does not hide them). When two readings remain (square
 *      grids: the target and its mirror image), the one that keeps the
 *      sheet's handedness (a camera that sees the front of the sheet) is
 *      tried first, and the first whose pitch code has valid check bits is
 *      used. Millimetres always come from the pitch given; the code only
 *      decides whether to refuse it.
 *   5. Sub-pixel centres: grey-weighted centroid of 1 - grey / background
 *      over a window around each dot (an ellipse following the local
 *      lattice) reaching 4 px beyond the dot's edge, at most 0.45 of a
 *      cell from its centre; the background a plane fitted to the ring
 *      from 0.45 to 0.55 cells; re-centred until it moves less than
 *      1e-4 px (3 passes at most). For a linear sensor, blur and
 *      anti-aliasing this is the area centroid of the dark disc's image
 *      (calibration/camera.h corrects that for perspective and
 *      distortion). Measured on rendered frames (tests/calibration): 0.003
 *      px RMS from the true centroid without noise, 0.009 px with noise
 *      of 2 grey levels and blur of 1 px, at about 40 px pitch.
 *
 * Allocation: each call allocates its working memory (a label image and
 * blob lists) and frees it; detection runs at calibration time, not per
 * inspected part.
 */
#ifndef MB_DETECT_H
#define MB_DETECT_H

#include "image.h"
#include "target.h"

/** Why a frame was refused (MB_DETECT_OK when it was not). */
typedef enum {
    MB_DETECT_OK = 0,
    MB_DETECT_NO_TARGET,   /**< no dot lattice in view (MB_ENOTFOUND) */
    MB_DETECT_MULTIPLE,    /**< two targets in view (MB_EMULTIPLE) */
    MB_DETECT_TOO_SMALL,   /**< dots too small in the image (MB_ERANGE) */
    MB_DETECT_TOO_OBLIQUE, /**< seen too obliquely (MB_EDEGENERATE) */
    MB_DETECT_PARTIAL,     /**< cut by the frame edge or covered (MB_EEDGE) */
    MB_DETECT_GRID_SIZE,   /**< complete, but not rows x cols (MB_ESIZE) */
    MB_DETECT_ORIENTATION, /**< marks or code unreadable (MB_EFORMAT) */
    MB_DETECT_PITCH /**< printed pitch is not the one given (MB_EINVAL) */
} mb_detect_fault;

/** Settings; mb_detect_config_default fills them. */
typedef struct {
    double min_pitch_px;    /**< smallest local pitch accepted, px; below it
                                 a dot is under 5 px across and its centroid
                                 loses accuracy. Default 10 */
    double max_anisotropy;  /**< largest ratio of the long to the short side
                                 of a lattice cell (1 / cos of the tilt for
                                 a plane tilted away from the camera): 1.6,
                                 about 51 degrees of tilt */
    double max_pitch_ratio; /**< largest ratio of the largest to the smallest
                                 local pitch across the target (perspective
                                 plus distortion); default 2 */
    double max_pitch_error; /**< relative: the pitch given may differ from
                                 the printed (coded) one by this much, for a
                                 printer's scale error; default 0.05 */
    double min_contrast;    /**< grey levels between dots and paper; below
                                 it there is no target. Default 20 */
} mb_detect_config;

/** What a detection found (also filled, as far as it got, on a refusal). */
typedef struct {
    mb_detect_fault fault;
    int threshold;              /**< Otsu's threshold used */
    int blobs;                  /**< dark blobs found */
    int candidates;             /**< of them, dot-shaped */
    int found_rows, found_cols; /**< lattice size in target orientation (or
                                     as found, before orientation) */
    double pitch_px_min, pitch_px_max; /**< local pitch across the target */
    double anisotropy;                 /**< largest cell side ratio */
    double coded_pitch; /**< mm, from the marks; 0 when not read */
    double h[9];        /**< target mm -> image px homography fitted to
                             the centres (no distortion), column-major */
    int mirrored;       /**< 1 when the frame shows the sheet mirrored */
} mb_detect_info;

void mb_detect_config_default(mb_detect_config *cfg);

/** The MB_E code that goes with a fault (0 for MB_DETECT_OK). */
int mb_detect_fault_code(mb_detect_fault f);

/** A short name for a fault: "no target", "partial target", ... */
const char *mb_detect_fault_name(mb_detect_fault f);

/**
 * Find target t in img. On success xy (caller-owned, 2 rows cols doubles)
 * gets the centre of dot (r, c) at xy[2 (r cols + c)], xy[... + 1], in px
 * (x right, y down, pixel centres at integers). cfg may be NULL for the
 * defaults; info may be NULL.
 * Return value: 0; MB_EINVAL (NULL or an invalid target); MB_ENOMEM; or
 * the code of the fault (mb_detect_fault_code), with info->fault set and a
 * sentence in err that says what was seen and what to do.
 */
int mb_target_detect(const mb_image *img, const mb_target *t,
                     const mb_detect_config *cfg, double *xy,
                     mb_detect_info *info, char *err);

#endif
