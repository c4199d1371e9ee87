/*
 * inspect/grr.h - the arithmetic of a repeatability study: the same few
 * parts imaged again and again (re-placed each time), one gauge at a time.
 *
 * Repeatability standard deviation: the pooled within-part standard
 * deviation (one-way analysis of variance, the within-part mean square):
 *     sigma^2 = sum_i sum_j (x_ij - mean_i)^2 / sum_i (n_i - 1)
 * over parts i with n_i >= 1 measurements each (a part measured once adds
 * nothing), with df = sum_i (n_i - 1) degrees of freedom. This is the
 * equipment variation EV of a gauge study with one appraiser: the station
 * is its own and only appraiser, so reproducibility between appraisers
 * does not arise and GRR = EV here. (The AIAG average-and-range method
 * estimates the same sigma from ranges, R-bar / d2*; the pooled variance
 * uses the data more efficiently and allows unequal counts.)
 *
 * %GRR against the tolerance, in the convention of the AIAG Measurement
 * Systems Analysis reference manual (4th edition, 2010; from memory, and
 * as the R package SixSigma documents for ss.rr: study variation 6 sigma,
 * tolerance = USL - LSL):
 *     %GRR = 100 * 6 sigma / (USL - LSL)
 * with the manual's bands: under 10 % acceptable, 10 % to 30 % may be
 * acceptable depending on the application, over 30 % not acceptable. The
 * tolerance is the full width of the tolerance zone: for 20 +- 0.1 mm pass
 * 0.2 mm.
 *
 * Also given: an upper 95 % confidence bound of sigma from the chi-square
 * distribution, sigma * sqrt(df / chi2_0.05(df)) (chi2_0.05 the lower 5 %
 * quantile), since a few parts imaged a few times leave sigma uncertain.
 */
#ifndef MB_GRR_H
#define MB_GRR_H

/** Acceptance band of a %GRR. */
typedef enum {
    MB_GRR_ACCEPTABLE = 0, /**< %GRR < 10 */
    MB_GRR_CONDITIONAL,    /**< 10 <= %GRR <= 30 */
    MB_GRR_NOT_ACCEPTABLE  /**< %GRR > 30 */
} mb_grr_band;

typedef struct {
    int parts;          /**< parts given */
    int measurements;   /**< values given */
    int df;             /**< degrees of freedom, sum (n_i - 1) */
    double sigma;       /**< repeatability standard deviation, gauge units */
    double sigma_upper; /**< its upper 95 % confidence bound */
    double tolerance;   /**< USL - LSL, gauge units */
    double percent_grr; /**< 100 * 6 sigma / tolerance */
    mb_grr_band band;
} mb_grr;

/**
 * Repeatability of one gauge. values holds the measurements part by part:
 * counts[0] values of part 0, then counts[1] of part 1, and so on
 * (n_parts parts). tolerance is USL - LSL (> 0), in the values' units.
 * Return value: 0; MB_EINVAL (NULL, n_parts < 1, a negative count, a
 * tolerance not positive and finite); MB_ENUMERIC (a value not finite);
 * MB_EDEGENERATE (no part measured twice: df = 0). err gets a sentence.
 */
int mb_grr_compute(const double *values, const int *counts, int n_parts,
                   double tolerance, mb_grr *out, char *err);

/** The band of a %GRR value. */
mb_grr_band mb_grr_band_of(double percent_grr);

/** "acceptable", "conditionally acceptable" or "not acceptable". */
const char *mb_grr_band_name(mb_grr_band b);

#endif
