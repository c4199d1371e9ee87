/*
 * fit/part_limits.h - the acceptance limits of one taught part, as plain data.
 *
 * The policy that learns them from the good set lives in inspect/bands.c;
 * this header only holds the numbers so that io/ can store them in the model
 * file and inspect/ can judge against them. Units: mode values in standard
 * deviations of the mode (b_i / sqrt(lambda_i)); T^2 dimensionless; the
 * residual (SPE) in model-frame units squared (shapes of unit norm); sizes
 * as the pose scale (image px per model unit); local deviations in image px
 * along the outline normal (positive = outward, material added).
 */
#ifndef MB_PART_LIMITS_H
#define MB_PART_LIMITS_H

/** Most modes judged one by one; the rest are covered by T^2. */
#define MB_MAX_JUDGED_MODES 16

typedef struct {
    double alpha;       /**< per-part false-reject target the limits were set for */
    int n_train;        /**< good parts they were learned from */
    int n_modes;        /**< modes in the T^2 (k of the shape model) */
    int n_judged;       /**< modes judged one by one (first n_judged) */
    double mode_band[MB_MAX_JUDGED_MODES]; /**< |b_i| / sqrt(lambda_i) limit, sd */
    double t2_limit;    /**< T^2 limit used */
    double t2_phase2;   /**< the F-based Phase II limit it started from */
    double t2_inflation;/**< factor applied (>= 1) for leave-one-out bias */
    double spe_limit;   /**< residual limit used (model units squared) */
    double spe_jm;      /**< Jackson-Mudholkar limit from the eigenvalues,
                             for reference (0 when it does not exist) */
    double size_mean;   /**< mean pose scale of the good parts, px per unit */
    double size_lo, size_hi; /**< accepted pose scale band */
    double size_sd;     /**< standard deviation of the good parts' size, px
                             (the drift chart's sigma) */
    int n_landmarks;    /**< entries in the two arrays below */
    double *local_sigma; /**< per landmark: spread of the good parts'
                              deviation, px */
    double *local_limit; /**< per landmark: accepted |deviation|, px */
    int loo_rejects;    /**< good parts rejected in leave-one-out */
    double frr_loo;     /**< loo_rejects / n_train */
    double frr_upper;   /**< one-sided 95 % upper confidence bound of the
                             false-reject rate from the leave-one-out count */
} mb_limits;

/** Free the arrays of a limits record and zero it. NULL-safe. */
void mb_limits_free(mb_limits *l);

/** Allocate the per-landmark arrays (zeroed). Return value: 0, MB_ENOMEM. */
int mb_limits_alloc(mb_limits *l, int n_landmarks);

#endif
