/*
 * inspect/bands.h - learning the acceptance limits (tolerance bands) of a
 * part from its good set, and screening that set.
 *
 * Every score of a training part is taken leave-one-out: the part is judged
 * against a model built without it, because scores of parts against a model
 * built from them are biased low and limits learned from them would reject
 * good parts several times too often. Then, per check:
 *   - size (RMS distance of the landmarks from their centroid, px): a
 *     prediction interval mean +- t * s * sqrt(1 + 1/m);
 *   - each judged mode: |b_i| / sqrt(lambda_i) <= t * s_i * sqrt(1 + 1/m),
 *     s_i the RMS of the leave-one-out values (about 1 when unbiased); only
 *     the first few modes are judged one by one (in proportion to the number
 *     of parts), T^2 covers all k;
 *   - T^2: the Phase II limit for a new observation,
 *     p (m+1)(m-1) / (m (m-p)) F_{1-a}(p, m-p) (NIST/SEMATECH e-Handbook
 *     6.5.4.3), widened by the ratio of the median leave-one-out T^2 to the
 *     median of that distribution when the former is larger;
 *   - residual outside the model (SPE): g chi-square_{1-a}(h) with g and h
 *     matched to the mean and variance of the leave-one-out SPE values
 *     (Box, Ann. Math. Statist. 25, 1954; the moment-matched form used for
 *     SPE limits by Nomikos and MacGregor, Technometrics 37(1), 1995), or the
 *     Jackson-Mudholkar limit from the eigenvalues scaled up by the ratio of
 *     the mean leave-one-out residual to theta1, whichever is wider;
 *   - local deviation: per landmark, the RMS normal deviation of the good
 *     parts pooled over a few neighbours on the same outline (corners and cut
 *     ends get their own, wider limits), times a t quantile with a
 *     Bonferroni share of the target over the landmarks, never below a floor.
 * The per-part target alpha is shared equally among the checks (Bonferroni).
 * The false-reject estimate counts good parts that fail any check against
 * limits learned without them (fully leave-one-out).
 */
#ifndef MB_BANDS_H
#define MB_BANDS_H

#include "part_limits.h"
#include "pca.h"
#include "shape.h"

typedef struct {
    double alpha;        /**< per-part false-reject target; default 0.002 */
    int max_judged;      /**< most modes judged one by one; default 0 =
                              automatic: about one per 8 good parts, >= 1 */
    int local_window;    /**< neighbours pooled each side per landmark;
                              default 3 */
    double local_floor;  /**< smallest local-deviation limit, px: the
                              sub-pixel measurement's own scatter at edges
                              and corners is about 0.05-0.15 px; default 0.4 */
    double screen_alpha; /**< a training part failing a check at this much
                              stricter level is an outlier; default 1e-4 */
} mb_bands_params;

/** Leave-one-out scores of each training part, for the summary and report. */
typedef struct {
    int m;
    double *size;       /**< px */
    double *t2;
    double *spe;
    double *mode_sd;    /**< m x n_judged, row-major: part i at i*n_judged */
    double *local_ratio;/**< max over landmarks of |dev| / limit */
    int *local_worst;   /**< landmark of that maximum */
    int *fails;         /**< bit set of failed checks (MB_BAND_...) against
                             limits learned without the part */
    int *outlier;       /**< 1 when it fails at screen_alpha */
    int n_judged;
} mb_bands_scores;

enum {
    MB_BAND_SIZE = 1,
    MB_BAND_MODE = 2,
    MB_BAND_T2 = 4,
    MB_BAND_SPE = 8,
    MB_BAND_LOCAL = 16
};

void mb_bands_params_default(mb_bands_params *p);

/**
 * Learn the limits from m corresponded good shapes (2n x m column-major,
 * leading dimension ld, image px) with k modes (from the model built on all
 * of them). Fills *lim (arrays allocated; free with mb_limits_free) and, if
 * scores is not NULL, the per-part scores (free with mb_bands_scores_free).
 * Return value: 0; MB_EINVAL (m < 5, k >= m - 1, bad layout); MB_ENUMERIC;
 * MB_EDEGENERATE; MB_ENOMEM. err gets a sentence.
 */
int mb_bands_learn(const double *shapes, int ld, const mb_layout *layout,
                   int m, int k, const mb_bands_params *p, mb_limits *lim,
                   mb_bands_scores *scores, char *err);

void mb_bands_scores_free(mb_bands_scores *s);

/**
 * How many good parts would bring the T^2 limit within `within` (e.g. 1.25)
 * of the limit with unlimited parts (chi-square), for k modes at alpha.
 * Returns m itself when it already is, or 0 when none up to 2000 does.
 */
int mb_bands_parts_advised(int m, int k, double alpha, double within);

#endif
