/*
 * fit/shape_model.h - the point distribution model (PDM) of one part.
 *
 * A shape in model frame is x = mean + P b, with P the d x k matrix of modes
 * (orthonormal columns) and b the mode parameters; lambda_i = var(b_i).
 * (Cootes, Taylor, Cooper, Graham, CVIU 61(1), 1995.)
 *
 *   Hotelling T^2 of b:          T2  = sum_i b_i^2 / lambda_i
 *   squared prediction error:    SPE = |x - mean - P b|^2   (residual outside
 *                                      the kept modes, model units squared)
 *
 * Model frame: the GPA frame (centred, unit norm mean). A pose maps it to
 * image pixels (see shape.h).
 *
 * The model is an opaque handle; io/ reads and writes it through the
 * accessors and mb_shape_model_create.
 */
#ifndef MB_SHAPE_MODEL_H
#define MB_SHAPE_MODEL_H

#include "pca.h"
#include "procrustes.h"
#include "shape.h"

typedef struct mb_shape_model mb_shape_model;

/** Where a model came from; stored in the model file. */
typedef struct {
    int n_samples;            /**< shapes the model was built from */
    int gpa_iterations;       /**< GPA iterations used */
    int gpa_converged;        /**< 1 when GPA converged */
    double variance_fraction; /**< fraction asked for (0 when fixed_modes) */
    int fixed_modes;          /**< modes asked for (0 when by fraction) */
    char created[32];         /**< UTC time, ISO 8601, "" when unknown */
    char source[256];         /**< free text: where the training data came from */
} mb_train_info;

/**
 * Build a model from m training shapes (2n x m column-major, leading
 * dimension ld) with the given layout: GPA then PCA.
 * gp, pp may be NULL for the defaults. info may be NULL; its created/source
 * strings are copied into the model (n_samples etc. are filled in here).
 * Return value: 0; MB_EINVAL (bad layout, m < 3); MB_ENUMERIC; MB_EDEGENERATE;
 * MB_ENOMEM. err gets a sentence.
 */
int mb_shape_model_build(const double *shapes, int ld, const mb_layout *layout,
                         int m, const mb_gpa_params *gp,
                         const mb_pca_params *pp, const mb_train_info *info,
                         mb_shape_model **out, char *err);

/**
 * Make a model from its parts (used by the model-file loader). Everything is
 * copied. modes: d x k column-major with leading dimension ld_modes; eig:
 * n_eig eigenvalues, largest first, the first k of which are the kept
 * variances. Checks sizes, finiteness, eig sorted and >= 0, eig[k-1] > 0,
 * modes orthonormal to 1e-6.
 * Return value: 0; MB_EINVAL; MB_ENUMERIC; MB_ESIZE; MB_ENOMEM.
 */
int mb_shape_model_create(const mb_layout *layout, int k, const double *mean,
                          const double *modes, int ld_modes, int n_eig,
                          const double *eig, const mb_train_info *info,
                          mb_shape_model **out, char *err);

/** Free a model. NULL-safe. */
void mb_shape_model_close(mb_shape_model *m);

/* Accessors. Pointers stay valid until the model is closed. */
const mb_layout *mb_shape_model_layout(const mb_shape_model *m);
int mb_shape_model_dim(const mb_shape_model *m);     /**< d = 2n */
int mb_shape_model_n_modes(const mb_shape_model *m); /**< k */
int mb_shape_model_n_eig(const mb_shape_model *m);
const double *mb_shape_model_mean(const mb_shape_model *m);  /**< d */
const double *mb_shape_model_modes(const mb_shape_model *m); /**< d x k, ld = d */
const double *mb_shape_model_eig(const mb_shape_model *m);   /**< n_eig; first k = lambda */
double mb_shape_model_total_var(const mb_shape_model *m);    /**< sum of eig */
const mb_train_info *mb_shape_model_info(const mb_shape_model *m);

/** b = P^T (x - mean) for x in model frame. b has k values. */
void mb_shape_model_project(const mb_shape_model *m, const double *x, double *b);

/** x = mean + P b (model frame). */
void mb_shape_model_reconstruct(const mb_shape_model *m, const double *b,
                                double *x);

/** Hotelling T^2 of b (all k modes). */
double mb_shape_model_t2(const mb_shape_model *m, const double *b);

/** SPE: |x - mean - P b|^2 with b = P^T (x - mean). x in model frame.
    work: d doubles of scratch. */
double mb_shape_model_spe(const mb_shape_model *m, const double *x,
                          double *work);

typedef struct {
    double b_limit; /**< bound |b_i| <= b_limit * sqrt(lambda_i); 0 = none.
                         Inspection uses a wide bound (6) so defects stay
                         visible; 3 is the usual tracking bound. */
    int max_iter;   /**< pose/b alternation cap; default 50 */
    double tol;     /**< stop when b and pose change less than this (b in
                         standard deviations, pose in model units); default 1e-8 */
} mb_fit_params;

typedef struct {
    mb_pose pose;   /**< model frame -> target frame */
    int iterations;
    int converged;  /**< 1 when the change fell below tol */
    int clamped;    /**< modes that hit the bound at the end */
    double rms;     /**< RMS distance from fitted model points to targets,
                         target units */
} mb_fit_result;

void mb_fit_params_default(mb_fit_params *p);

/** Doubles of scratch mb_shape_model_fit needs. */
int mb_shape_model_fit_work_size(const mb_shape_model *m);

/**
 * Fit pose + b to n target points (interleaved, target frame, e.g. image px),
 * alternating a weighted Procrustes pose fit with the projection of the
 * inverse-posed targets, bounding b as asked. w: per-point weights or NULL.
 * b: in/out, k values (start value on entry; zeros are fine). res: out.
 * work: mb_shape_model_fit_work_size(m) doubles. Allocates nothing.
 * Each step projects the inverse-posed targets into the tangent plane of the
 * mean (scaled so that (y - mean) . mean = 0), as the model was built in
 * (mb_gpa_params.tangent); res->rms is over all points, unweighted.
 * Return value: 0 (see res->converged); MB_EINVAL; MB_EDEGENERATE (targets
 * without spread, weights summing to zero); MB_ENUMERIC (NaN/inf in target
 * or b).
 */
int mb_shape_model_fit(const mb_shape_model *m, const double *target,
                       const double *w, const mb_fit_params *p, double *b,
                       mb_fit_result *res, double *work);

#endif
