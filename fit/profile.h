/*
 * fit/profile.h - grey-level profile models: what the image looks like
 * across the part's outline at every landmark and pyramid level.
 *
 * (Cootes, Taylor, Cooper, Graham, "Active Shape Models - Their Training and
 * Application", CVIU 61(1), 1995, section 5; multi-resolution profiles as in
 * Cootes, Taylor, Lanitis, BMVC 1994.)
 *
 * Normals. At landmark i of a closed outline the normal is the unit vector
 * perpendicular to the chord between its two neighbours on the same outline,
 * p[i+1] - p[i-1], turned so that it points FROM THE PART INTO THE
 * BACKGROUND: outward on the outer edge (outline 0), into the hole on every
 * hole. Which way that is follows from the signed area of each outline of
 * the shape itself, so the result does not depend on the winding the
 * outlines arrive in (correspondence may give either, as long as every shape
 * of one model has the same layout). A pose is a proper similarity, so
 * model points and image points give the same normals.
 *
 * Profile. At level L a point with full-resolution coordinates (x0, y0) sits
 * at (x0, y0) / 2^L (fit/pyramid.h). Along the normal n, 2k+2 grey levels
 *     G_j = I_L(p + t_j n),   t_j = j - k - 1/2,   j = 0 .. 2k+1
 * are sampled bilinearly at 1-pixel spacing of that level; their differences
 *     d_j = G_{j+1} - G_j,    j = 0 .. 2k          (centred at t = j - k)
 * form the derivative profile, normalised by the sum of absolute values
 *     g = d / sum_j |d_j|      (g = 0 when the profile is flat).
 * So g runs from the part side (t < 0) to the background side (t > 0), and
 * a dark part on a bright field gives a positive peak at the centre.
 *
 * Model. Per level and landmark: the mean profile gbar and the regularised
 * covariance
 *     S' = (1 - shrink) S + (shrink * trace(S) / p + floor) I,   p = 2k+1,
 * with S the sample covariance (divisor m - 1) of the m training profiles.
 * The matching cost of a profile g is the squared Mahalanobis distance
 *     f(g) = (g - gbar)^T S'^-1 (g - gbar)
 * (scipy.spatial.distance.mahalanobis returns sqrt(f) when given S'^-1).
 *
 * Beside the profiles the model keeps what the training frames said about
 * the part as a whole: the mean grey level of the part and of the
 * background next to the outline (level 0, 4 px either side of every
 * landmark), the mean part area (px^2, outer edge minus holes) and the mean
 * size (RMS distance of the landmarks from their centroid, px). Locating a
 * part in a frame needs these; the file format stores them.
 *
 * Learning streams over the training frames: create a learner, add one
 * pyramid and landmark shape per frame, finish to get the model. Teaching
 * path: allocates. Cost evaluation allocates nothing.
 */
#ifndef MB_PROFILE_H
#define MB_PROFILE_H

#include "image.h"
#include "pyramid.h"
#include "shape.h"

/** Longest profile half-length k. */
#define MB_PROFILE_MAX_HALF 16

typedef struct {
    int levels;    /**< pyramid levels with profiles, level 0 included,
                        1 .. MB_PYRAMID_MAX_LEVELS; each training pyramid must
                        have at least this many; default 4 (scales 1 .. 1/8) */
    int half_len;  /**< k: a profile has 2k+1 samples; longer profiles see
                        more of the surroundings and cost (2k+1)^2 per
                        evaluation; 1 .. MB_PROFILE_MAX_HALF; default 3 */
    double shrink; /**< 0..1: weight of the scaled identity in the
                        regularised covariance (guards against few training
                        frames and against flat, noise-only samples);
                        default 0.1 */
    double floor;  /**< >= 0, added to the diagonal (variance units of the
                        normalised profile; its samples are about 0.01..0.5);
                        keeps S' invertible with 2 frames; default 1e-5 */
} mb_profile_params;

/** What the training frames said about the part as a whole. */
typedef struct {
    int n_samples;    /**< training frames */
    double part_grey; /**< mean grey level on the part side, level 0 */
    double back_grey; /**< mean grey level on the background side, level 0 */
    double area;      /**< mean part area, px^2 (outer edge minus holes) */
    double size;      /**< mean RMS distance of landmarks from their
                           centroid, px (the pose scale a part of mean size
                           has, within the tangent-space correction) */
} mb_profile_stats;

typedef struct mb_profile_model mb_profile_model;
typedef struct mb_profile_learner mb_profile_learner;

/** Fill p with the defaults documented above. */
void mb_profile_params_default(mb_profile_params *p);

/**
 * Unit normals of every landmark of shape xy (layout, 2n interleaved values,
 * any units) into nxy (2n values), pointing from the part into the
 * background as described at the top of this file.
 * Return value: 0; MB_EINVAL (NULL, bad layout); MB_EDEGENERATE (an outline
 * whose signed area is zero, or a landmark whose neighbours coincide: its
 * normal is set to (0, 0)).
 */
int mb_profile_normals(const mb_layout *layout, const double *xy, double *nxy);

/**
 * Sample one normalised derivative profile of 2k+1 values (see above) on
 * img at the real point (x, y) (coordinates of img) along the unit vector
 * (nx, ny). Allocates nothing. Returns the normaliser sum |d_j| (0 for a
 * flat profile, then g is all zeros).
 */
double mb_profile_sample(const mb_image *img, double x, double y, double nx,
                         double ny, int k, double *g);

/**
 * Make a learner for shapes with this layout.
 * Return value: 0; MB_EINVAL (NULL, bad layout or params); MB_ENOMEM.
 */
int mb_profile_learner_create(const mb_layout *layout,
                              const mb_profile_params *p,
                              mb_profile_learner **out, char *err);

/**
 * Learn from one training frame: pyr is its pyramid (at least p->levels
 * levels), shape its landmarks in full-resolution image px (2n values,
 * layout order).
 * Return value: 0; MB_EINVAL (NULL); MB_ESIZE (pyramid with too few levels);
 * MB_ENUMERIC (NaN/inf in shape); MB_EDEGENERATE (see mb_profile_normals).
 * A refused frame leaves the learner as it was.
 */
int mb_profile_learner_add(mb_profile_learner *l, const mb_pyramid *pyr,
                           const double *shape, char *err);

/** Frames added so far. */
int mb_profile_learner_count(const mb_profile_learner *l);

/**
 * Build the model from the frames added (at least 2).
 * Return value: 0; MB_EINVAL; MB_EDEGENERATE (fewer than 2 frames);
 * MB_ENUMERIC (a covariance that cannot be factorised); MB_ENOMEM.
 * The learner stays usable (more frames may be added and finish called
 * again).
 */
int mb_profile_learner_finish(const mb_profile_learner *l,
                              mb_profile_model **out, char *err);

/** Free a learner. NULL-safe. */
void mb_profile_learner_close(mb_profile_learner *l);

/**
 * Make a model from its parts (for the model-file loader). Everything is
 * copied.
 * means: levels * n * p values, level-major then landmark: the mean of
 *   level L, landmark i starts at means + (L * n + i) * p (p = 2k+1).
 * covs: levels * n * p * p values in the same order, each p x p column-major
 *   (leading dimension p), the REGULARISED covariance S' as returned by
 *   mb_profile_model_cov.
 * Checks params, layout, finiteness, symmetry (to 1e-9 relative) and
 * positive definiteness (Cholesky).
 * Return value: 0; MB_EINVAL (NULL, bad layout or params, n_samples < 2);
 * MB_ENUMERIC (NaN/inf, not symmetric positive definite); MB_ENOMEM.
 */
int mb_profile_model_create(const mb_layout *layout,
                            const mb_profile_params *p,
                            const mb_profile_stats *stats, const double *means,
                            const double *covs, mb_profile_model **out,
                            char *err);

/** Free a model. NULL-safe. */
void mb_profile_model_close(mb_profile_model *m);

/* Accessors. Pointers stay valid until the model is closed. */
const mb_layout *mb_profile_model_layout(const mb_profile_model *m);
const mb_profile_params *mb_profile_model_params(const mb_profile_model *m);
const mb_profile_stats *mb_profile_model_stats(const mb_profile_model *m);
/** Profile length p = 2k+1. */
int mb_profile_model_len(const mb_profile_model *m);
/** Mean profile of a level and landmark (p values); NULL when out of range. */
const double *mb_profile_model_mean(const mb_profile_model *m, int level,
                                    int landmark);
/** Regularised covariance S' (p x p column-major, ld p); NULL when out of
    range. */
const double *mb_profile_model_cov(const mb_profile_model *m, int level,
                                   int landmark);

/**
 * Matching cost f(g) = (g - gbar)^T S'^-1 (g - gbar) of a profile g (p
 * values) at a level and landmark (both in range: not checked, inner-loop
 * call). work: p doubles. Allocates nothing.
 */
double mb_profile_cost(const mb_profile_model *m, int level, int landmark,
                       const double *g, double *work);

#endif
