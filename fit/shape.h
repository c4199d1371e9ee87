/*
 * fit/shape.h - shape vectors, their outline layout and 2-D similarity poses.
 *
 * A shape is one vector of 2n doubles holding every outline of one part, the
 * outer edge first and then each hole: x0, y0, x1, y1, ... (interleaved).
 * The layout says how many points each outline has, in that order.
 *
 * A set of m shapes is a column-major matrix with 2n rows and m columns and a
 * leading dimension ld >= 2n: shape j starts at data + j * ld. Column-major
 * is the one matrix layout of the project, so matrices go straight to
 * CBLAS/LAPACKE (CblasColMajor, LAPACK_COL_MAJOR).
 *
 * Poses map model coordinates to image coordinates:
 *     x' = s (cos a * x - sin a * y) + tx
 *     y' = s (sin a * x + cos a * y) + ty
 * with a in radians; x right, y down (so a positive angle turns clockwise
 * on screen). Only proper rotations: a similarity never reflects.
 */
#ifndef MB_SHAPE_H
#define MB_SHAPE_H

/** Most outlines one part may have (outer edge plus holes). */
#define MB_MAX_OUTLINES 64
/** Most points one outline may have. */
#define MB_MAX_OUTLINE_POINTS 8192

typedef struct {
    int n_outlines;              /**< 1 .. MB_MAX_OUTLINES */
    int counts[MB_MAX_OUTLINES]; /**< points per outline, outer edge first; each >= 3 */
    int n_points;                /**< sum of counts */
} mb_layout;

typedef struct {
    double tx, ty; /**< translation, px (or model units) */
    double scale;  /**< > 0 */
    double angle;  /**< radians */
} mb_pose;

/**
 * Check a layout: counts in range and n_points equal to their sum.
 * Return value: 0 or MB_EINVAL.
 */
int mb_layout_check(const mb_layout *layout);

/** Index of the first point of outline i in the shape (points, not doubles). */
int mb_layout_first(const mb_layout *layout, int outline);

/** The identity pose. */
mb_pose mb_pose_identity(void);

/** dst = pose(src) for n points (interleaved); dst may equal src. */
void mb_pose_apply(const mb_pose *pose, const double *src, int n, double *dst);

/** The inverse pose. pose->scale must be > 0. */
mb_pose mb_pose_invert(const mb_pose *pose);

/** The pose that applies first a then b. */
mb_pose mb_pose_compose(const mb_pose *b, const mb_pose *a);

#endif
