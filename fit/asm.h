/*
 * fit/asm.h - Active Shape Model search of one frame, and the measurement
 * of the part's outline at full resolution along the fitted model's normals.
 *
 * (Cootes, Taylor, Cooper, Graham, CVIU 61(1), 1995; multi-resolution search
 * as in Cootes, Taylor, Lanitis, BMVC 1994.)
 *
 * The search, from one or more start poses (fit/locate.h):
 *   - on each pyramid level from coarsest_level down to finest_level:
 *       1. every landmark of the current model outline looks along its
 *          normal (fit/profile.h: part -> background) at the 2 ns + 1
 *          positions -ns .. ns samples of that level and moves to the one
 *          whose grey-level profile matches the profile model best (least
 *          Mahalanobis cost), refined between samples by a parabola through
 *          the three costs around the best;
 *       2. pose + b are fitted to the moved landmarks
 *          (mb_shape_model_fit), b bounded by b_limit_search standard
 *          deviations on the coarser levels and b_limit on the finest;
 *       3. the level has converged when at least conv_fraction of the
 *          landmarks found their best match within the central half of the
 *          range (|shift| <= ns / 2), or when at least half did and the
 *          fit moved no landmark by more than 0.05 px of that level (a
 *          textured belt or uneven light keeps a few landmarks off-centre
 *          at every iteration while the outline stands still); else
 *          repeat, up to max_iter times;
 *   - every start pose is searched on the coarsest level for at most
 *     start_iter iterations; the one whose landmarks end with the least mean
 *     profile cost is kept, finishes its coarsest level (up to max_iter in
 *     all) and is carried down the finer levels.
 *
 * The measurement (DESIGN.md: "judge the measured outline, not the fitted
 * one"): at full resolution, along the normal of every landmark of the
 * fitted model outline, within +-refine_range px, the grey levels are
 * sampled at 1 px spacing; the edge is the local maximum of the central
 * difference (of the taught polarity and at least edge_fraction times the
 * taught contrast per px) nearest to the model point, placed to sub-pixel
 * precision where the profile crosses the mid grey level between the
 * part and background levels read 3-5 px either side of it; the profile is
 * the mean of the normal and two lines 0.75 px either side, and the small
 * shifts of a blurred curved edge are corrected (see asm.c). No edge:
 * the landmark is invalid (counted; its measured point is the model point).
 * Then pose + b are fitted to the valid measured points (bound b_limit) by
 * their distances to the tangent lines (so landmarks may slide along the
 * outline), points farther than max(outlier_px, 3 robust sigma) from the
 * fitted outline are left out and the fit is repeated, so that a nick or
 * flash shows as a large distance measured - model instead of dragging the
 * model along. When that fit slid the outline along itself by more than
 * 1 px (for example it turned an oval ring to its ovality), the model first
 * follows the outline already measured (each normal intersected with that
 * polyline, refit, repeat: it may turn by many pixels at no image cost),
 * then the image is measured again along the new normals and fitted again,
 * at most 3 rounds, so that measured point i lies on model point i's
 * normal. Only full-resolution pixels along the outline are read.
 *
 * The dense measurement: a nick, tear or piece of dirt narrower than the
 * landmark spacing (5-9 px) falls between two landmarks. So, after the
 * final fit, the edge is also found between every two consecutive
 * landmarks of an outline, about every dense_step px along the model
 * outline, with the same edge finder, range and curvature corrections as
 * at the landmarks. The model outline between landmarks i and j (the next
 * one of its outline) is the Catmull-Rom cubic through the landmarks
 * h, i, j, k (uniform parameter f in 0..1 from i to j), not the chord: on
 * a circle of radius R cut every L px the chord misses the curve by
 * L^2 / 8R (0.2 px for L = 5 px on a 16 px hole, the size of a local
 * limit), the cubic by 0.004 px, a fiftieth of that; the normal there is the
 * cubic's, turned to agree with the landmarks'. The sample at f = 0 is
 * landmark i itself (its measurement is copied, not repeated), so the
 * dense samples of an outline run round it in order without a hole. At a
 * sharp corner (a cut end, a lip tip) the cubic still rounds the corner
 * and its normals sweep through it: the caller relaxes its limits near
 * corners and leaves the samples of sharp ones out (inspect/verdict.c).
 * The count is bounded in mb_asm_create by twice the model outline's
 * length at the taught size (profile stats size) over dense_step, plus one
 * per landmark;
 * a larger part gets proportionally wider spacing, never a buffer overrun.
 *
 * Signs: dist = (measured - model) . normal, px, with the normal pointing
 * from the part into the background: positive where material stands out
 * of the model outline (flash), negative where material is missing (nick).
 *
 * The workspace holds references to both models (they must outlive it) and
 * every buffer the search needs; mb_asm_search allocates nothing. One
 * workspace serves one thread.
 */
#ifndef MB_ASM_H
#define MB_ASM_H

#include <stddef.h>
#include <stdint.h>

#include "profile.h"
#include "pyramid.h"
#include "shape.h"
#include "shape_model.h"

typedef struct {
    int search_range;     /**< ns: samples searched each side of a landmark,
                               in pixels of the level being searched; wider
                               catches a worse start and costs linearly;
                               1 .. 32; default 3 */
    int max_iter;         /**< iteration cap per level; default 10 */
    int start_iter;       /**< iteration cap per start pose while the start
                               poses are compared on the coarsest level (the
                               one kept then continues up to max_iter); a
                               wrong start rarely converges, so this bounds
                               what each costs; 1 .. max_iter; default 3 */
    double conv_fraction; /**< 0..1: a level has converged when this
                               fraction of the landmarks found their best
                               match within |shift| <= ns / 2; default 0.95 */
    int coarsest_level;   /**< first level searched; -1 = the profile
                               model's coarsest; default -1 */
    int finest_level;     /**< last level searched with profiles; the
                               measurement at full resolution follows, so 1
                               is enough and half the cost of 0; default 1 */
    double b_limit;       /**< bound on |b_i| in standard deviations on the
                               finest level and in the fit to the measured
                               outline; wide, so that defects show instead of
                               being hidden (inspection, not tracking);
                               0 = none; default 6 */
    double b_limit_search; /**< the bound on the coarser levels, where a
                                wrong match is likelier than a defect;
                                default 3 */
    int fit_iter;         /**< pose/b alternations per search iteration
                               (mb_fit_params.max_iter; each warm-starts from
                               the last b); default 3 */
    int refine_range;     /**< px each side of the model outline searched
                               for the edge at full resolution; must cover
                               the deepest nick or highest flash to be
                               measured; 1 .. 64; default 8 */
    double edge_fraction; /**< 0..1: least edge strength (central difference,
                               grey per px) as a fraction of the taught
                               contrast; a blurred step of contrast C peaks
                               near C / 3; default 0.1 */
    double outlier_px;    /**< least distance, px, beyond which a measured
                               point is left out of the final fit (the cut is
                               max(outlier_px, 3 * 1.4826 * median |dist|));
                               default 1.0 */
    double dense_step;    /**< px along the model outline between dense
                               samples (see above); a slit w px wide is
                               crossed by about w / dense_step of them; each
                               costs what a landmark's measurement costs;
                               0 = no dense measurement; 0.25 .. 16 else;
                               default 1.0 */
} mb_asm_params;

/** Figures of one search. Pointers into the workspace, valid until its next
    search or close. */
typedef struct {
    int converged;          /**< 1 when the finest level met the
                                 convergence rule within max_iter; 0 also
                                 when the search broke down (the fit lost
                                 its targets, the scale left 0.5..2 times
                                 the start's or the model centre left the
                                 frame by half its size) or the fit to the
                                 measured outline failed. Says nothing of
                                 how many landmarks found an edge: see
                                 n_valid */
    int n_starts;           /**< start poses tried */
    int start;              /**< index of the start pose kept */
    mb_pose pose;           /**< model frame -> image px, fitted to the
                                 measured outline */
    int n_modes;            /**< k */
    const double *b;        /**< k mode parameters, model units */
    const double *b_sd;     /**< k: b_i / sqrt(lambda_i) */
    int n_points;           /**< landmarks n */
    const double *model_xy; /**< 2n: the model's reconstruction (pose, b),
                                 image px */
    const double *normal_xy; /**< 2n: unit normals of the model outline */
    const double *measured_xy; /**< 2n: the measured outline, image px;
                                    the model point where invalid */
    const double *dist;     /**< n: (measured - model) . normal, px; 0
                                 where invalid */
    const uint8_t *valid;   /**< n: 1 when an edge was found */
    int n_valid;            /**< landmarks with an edge */
    int n_outliers;         /**< valid landmarks left out of the final fit */
    int clamped;            /**< modes on the bound after the final fit */
    double fit_rms;         /**< RMS of dist over the points in the final
                                 fit, px */
    int measure_rounds;     /**< measure-and-fit rounds at full
                                 resolution (1..3: another when the fit
                                 slid the outline along itself by more
                                 than 1 px) */
    int follow_rounds;      /**< fits to an earlier measured outline
                                 between those rounds (0 unless the fit
                                 had to turn the model along its outline) */
    double edge_blur;       /**< blur sigma of the part's edges estimated
                                 from the measured profiles, px (optics,
                                 pixel footprint and interpolation) */
    double profile_cost;    /**< mean best Mahalanobis cost per landmark in
                                 the last iteration of the finest level (a
                                 guide only: the covariances of fine levels
                                 are tight, so good parts may score tens to
                                 hundreds against 2k+1 expected) */
    int coarsest, finest;   /**< levels searched */
    int iterations[MB_PYRAMID_MAX_LEVELS]; /**< per level (0 when not
                                                searched; the coarsest: of
                                                the start kept) */
    int level_converged[MB_PYRAMID_MAX_LEVELS]; /**< per level */
    /* The dense measurement (see above); dense_n = 0 when it was not
       made (dense_step 0, the search broke down, fewer than 3 edges). */
    int dense_n;             /**< dense samples, all outlines in layout
                                  order, each outline's in order along it */
    int dense_n_valid;       /**< of them with an edge */
    double dense_spacing;    /**< mean spacing used, px (dense_step unless
                                  the part was too large for the buffers) */
    const double *dense_xy;  /**< 2 dense_n: model curve points, image px */
    const double *dense_normal; /**< 2 dense_n: unit normals there */
    const double *dense_dist; /**< dense_n: (measured - model) . normal, px;
                                   0 where invalid */
    const uint8_t *dense_valid; /**< dense_n: 1 when an edge was found */
    const int *dense_seg;    /**< dense_n: landmark i (global index): the
                                  sample lies between i and the next
                                  landmark of i's outline */
    const double *dense_frac; /**< dense_n: fraction 0..1 of the way from
                                   landmark i to the next (0: i itself) */
} mb_asm_result;

typedef struct mb_asm mb_asm;

/** Fill p with the defaults documented above. */
void mb_asm_params_default(mb_asm_params *p);

/**
 * Make a search workspace for the two models of one part and width x height
 * frames. The models are referenced, not copied: they must outlive it.
 * Return value: 0; MB_EINVAL (NULL, a parameter out of range, levels outside
 * the profile model's); MB_ESIZE (the models' layouts differ); MB_ENOMEM.
 */
int mb_asm_create(const mb_shape_model *sm, const mb_profile_model *pm,
                  int width, int height, const mb_asm_params *p, mb_asm **out,
                  char *err);

/** Free a workspace. NULL-safe. */
void mb_asm_close(mb_asm *a);

/** Bytes the workspace holds (its own buffers; the models not counted). */
size_t mb_asm_workspace_bytes(const mb_asm *a);

/**
 * Search pyr (built from the frame; at least coarsest_level + 1 levels)
 * from n_starts start poses (model frame -> image px) and measure the
 * outline. Allocates nothing. res is filled also when not converged.
 * Return value: 0 (see res->converged); MB_EINVAL (NULL, n_starts < 1, a
 * start pose with a non-positive or non-finite scale); MB_ESIZE (a pyramid
 * of another frame size or with too few levels).
 */
int mb_asm_search(mb_asm *a, const mb_pyramid *pyr, const mb_pose *starts,
                  int n_starts, mb_asm_result *res);

#endif
