/*
 * fit/procrustes.h - similarity (Procrustes) alignment of two point sets and
 * generalised Procrustes analysis (GPA) of many.
 *
 * Ordinary Procrustes: the similarity (translation, proper rotation, scale)
 * that maps src onto dst with the least sum of squared distances.
 * GPA (Gower, Psychometrika 1975; as used for point distribution models in
 * Cootes, Taylor, Cooper, Graham, CVIU 61(1), 1995): centre every shape,
 * scale it to unit norm, rotate each onto the current mean, re-estimate and
 * renormalise the mean, repeat until the mean stops moving.
 */
#ifndef MB_PROCRUSTES_H
#define MB_PROCRUSTES_H

#include "shape.h"

/**
 * Best similarity mapping src onto dst (n points each, interleaved), least
 * squares, optionally weighted per point (w may be NULL for equal weights).
 * Proper rotations only. If residual is not NULL it receives the weighted sum
 * of squared distances after the mapping.
 * pose->scale is 0 when dst has no spread (every point maps to its centroid).
 * Return value: 0; MB_EINVAL for bad arguments (NULL, n < 1, a negative or
 * non-finite weight); MB_EDEGENERATE when src has zero spread (all points
 * equal) or the weights sum to zero; MB_ENUMERIC for NaN/inf in the points.
 */
int mb_procrustes_fit(const double *src, const double *dst, int n,
                      const double *w, mb_pose *pose, double *residual);

typedef struct {
    double tol;   /**< stop when the mean (unit norm) moves less than this, in
                       Euclidean norm; cost: more iterations; default 1e-10 */
    int max_iter; /**< iteration cap; default 100 */
    int tangent;  /**< 1: project aligned shapes into the tangent space of the
                       mean (x / (x . mean)), as usual before PCA; default 1 */
} mb_gpa_params;

typedef struct {
    int iterations;     /**< iterations run */
    double last_change; /**< norm of the last change of the mean */
    int converged;      /**< 1 when last_change < tol */
} mb_gpa_info;

/** Fill p with the defaults documented above. */
void mb_gpa_params_default(mb_gpa_params *p);

/**
 * Generalised Procrustes analysis of m shapes of n points.
 * shapes: 2n x m column-major, leading dimension ld (>= 2n).
 * aligned: output, same shape, leading dimension ld_out (>= 2n); may equal
 *   shapes when ld_out == ld.
 * mean: output, 2n values, centred, unit norm, orientation fixed to the first
 *   shape's (after centring and scaling).
 * poses: optional output, m poses mapping each aligned shape back onto its
 *   input (aligned -> original image coordinates); may be NULL.
 * info: optional output.
 * Return value: 0; MB_EINVAL (m < 2, n < 2, bad ld, NULL); MB_ENUMERIC (NaN
 * or inf in a shape); MB_EDEGENERATE (a shape of zero size); MB_ENOMEM.
 * Not converging within max_iter is not an error: see info->converged.
 */
int mb_gpa_align(const double *shapes, int ld, int n, int m,
                 const mb_gpa_params *p, double *aligned, int ld_out,
                 double *mean, mb_pose *poses, mb_gpa_info *info, char *err);

#endif
