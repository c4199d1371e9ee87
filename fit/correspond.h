/*
 * fit/correspond.h - landmark correspondence without clicking.
 *
 * Turns the dense closed outlines of m training parts (fit/polyline.h) into
 * m landmark shapes with one common layout, ready for GPA and PCA
 * (fit/shape_model.h): landmark i of every part lands on the same place of
 * the part. For each part and outline it chooses
 *   - the direction of traversal (every outline is brought to one winding),
 *   - which hole of the part is which hole of the model (assignment of
 *     minimum total cost between hole centroids in the frame aligned to the
 *     mean),
 *   - the cyclic start as a continuous arc-length offset, so that the part,
 *     resampled by arc length from there and aligned by a similarity, lies
 *     closest (least squares) to the evolving mean,
 * alternating with generalised Procrustes analysis until the landmarks stop
 * moving. The method and its sources are described at the top of
 * correspond.c.
 *
 * Landmark counts per outline are proportional to the outline's mean length
 * over the parts, within a total budget and with a minimum per outline.
 */
#ifndef MB_CORRESPOND_H
#define MB_CORRESPOND_H

#include "polyline.h"
#include "shape.h"

typedef struct {
    int budget;            /**< total landmarks over all outlines; more
                                points follow the outline more closely and
                                cost time linearly in later stages (and
                                quadratically here); default 256. Raised to
                                n_outlines * min_per_outline when smaller. */
    int min_per_outline;   /**< fewest landmarks on any outline (small bolt
                                holes); >= 3; default 16 */
    int max_iter;          /**< cap on alternations of GPA and the choice of
                                starts; default 30 */
    double tol;            /**< converged when, in the frame of the mean,
                                no part's landmarks move by more than tol
                                landmark spacings (RMS per outline) in a
                                round and no hole changes partner; default
                                0.01 (a few hundredths of a pixel: below
                                that, polygon vertices and point noise make
                                the landmarks jitter as the mean settles) */
    double hole_shift_max; /**< a hole whose centroid lies farther than this
                                many equivalent radii (perimeter / 2 pi) from
                                its partner in the mean, or farther than half
                                the distance between that partner and its
                                nearest other hole, cannot be matched and the
                                part is refused; default 1.0 */
    int skip_bad;          /**< 1: a part that cannot be corresponded is left
                                out and its reason recorded in the info;
                                0: the run stops at the first such part with
                                its reason in err; default 1 */
    int min_parts;         /**< fewest usable parts for a result (>= 2);
                                default 2 */
    double arc_smoothing;  /**< px: the arc length that spaces the landmarks
                                is measured on a copy of each outline
                                averaged over +-arc_smoothing px of arc
                                (a moving average of the polygon), so that
                                point noise, which lengthens a polyline
                                unevenly, does not slide landmarks along
                                it; the landmarks themselves stay on the
                                input polyline. 0 = plain arc length;
                                default 2.5 (outliner points about 1 px
                                apart) */
} mb_correspond_params;

/** What was chosen for one input part (for reports and debugging). */
typedef struct {
    int status;       /**< 0 used; else the MB_E code it was refused with */
    char reason[160]; /**< why it was refused; "" when used */
    int column;       /**< its column in the output shapes; -1 when refused */
    int source[MB_MAX_OUTLINES];   /**< input outline that became layout
                                        outline k (source[0] == 0) */
    int reversed[MB_MAX_OUTLINES]; /**< 1 when input outline source[k] was
                                        traversed against the common winding */
    double start[MB_MAX_OUTLINES]; /**< arc length, px, from the first input
                                        point of outline source[k] to landmark
                                        0, measured along the input's own
                                        direction, in [0, perimeter) */
    double rms; /**< RMS distance of its landmarks to the mean after
                    similarity alignment, px of this part; 0 if refused */
} mb_correspond_part;

typedef struct {
    int n_parts;               /**< m, the parts given */
    int n_used;                /**< columns of the output shapes */
    int iterations;            /**< alternations run (last round) */
    int converged;             /**< 1 when the landmarks settled within tol */
    double last_change;        /**< largest landmark movement of the last
                                    alternation (see tol), landmark spacings */
    mb_correspond_part *parts; /**< n_parts entries, owned; release with
                                    mb_correspond_info_free */
} mb_correspond_info;

/** Fill p with the defaults documented above. */
void mb_correspond_params_default(mb_correspond_params *p);

/**
 * Correspond m parts.
 * parts: m polyline sets, image px (each part in its own image frame).
 * layout: out, the common landmark layout (outer edge first, then holes).
 * shapes: out, *shapes = malloc'd 2n x n_used column-major matrix, leading
 *   dimension 2n (n = layout->n_points), each column a used part in its own
 *   image px; the caller frees it. NULL on failure.
 * info: out, may be NULL. After the call, whatever it returns, info holds
 *   what is known of every part (a refused part's status and reason also
 *   when the run failed) and owns memory: call mb_correspond_info_free.
 * Teaching path, not per frame: allocates.
 * Return value: 0; MB_EINVAL (NULL, m < 2, bad params, bad outline count);
 * MB_ENOMEM; and, for a part that cannot be used when skip_bad is 0 or for
 * too few usable parts: MB_ENUMERIC (NaN/inf point), MB_EDEGENERATE (an
 * outline with fewer than 3 distinct points or no enclosed area; too few
 * usable parts), MB_ESIZE (a part with a different number of holes than
 * most parts), MB_ERANGE (a hole that cannot be matched). err names the
 * part (0-based index) and the outline.
 * Not converging within max_iter is not an error: see info->converged.
 */
int mb_correspond_run(const mb_polyline_set *parts, int m,
                      const mb_correspond_params *p, mb_layout *layout,
                      double **shapes, mb_correspond_info *info, char *err);

/** Release the arrays of an info and zero it. NULL-safe. */
void mb_correspond_info_free(mb_correspond_info *info);

/**
 * Linear assignment (Kuhn 1955, Munkres 1957): the permutation that
 * minimises sum_i cost[i + assign[i] * n] for an n x n column-major cost
 * matrix (row i, column j at cost[i + j * n]). Used to match holes; exported
 * so it can be checked against a reference.
 * assign: out, n values, assign[i] = column given to row i.
 * Return value: 0; MB_EINVAL (n < 1, NULL); MB_ENUMERIC (NaN/inf cost);
 * MB_ENOMEM.
 */
int mb_correspond_assign(const double *cost, int n, int *assign);

#endif
