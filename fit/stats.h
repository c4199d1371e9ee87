/*
 * fit/stats.h - the distributions and control limits the tolerance bands need.
 *
 * Pure computation: no allocation, no printing, no globals; every function
 * is reentrant (no lgamma()/signgam).
 *
 * Scalar functions return NaN for invalid parameters (a probability outside
 * its open or closed interval as stated, a degree of freedom <= 0, NaN in
 * any argument). The Q-statistic limits return 0 or a negative MB_E code
 * (fit/error.h) because they have more than one way to fail.
 *
 * Accuracy, as measured by tests/fit/ref_stats.py against mpmath at 40
 * digits (and scipy) on a grid of about 6000 values:
 *   - cdfs, upper tails and the special functions: relative 1e-12 or better
 *     in either tail down to 1e-300 (worst seen 3e-13, at 1e-224), for
 *     shape parameters (a = df/2, b) from 1e-3 to 1e6;
 *   - quantiles: each is the exact quantile of a probability within relative
 *     2e-14 of the one asked for, or within relative 1e-12 of the exact
 *     quantile (worst seen 1.5e-13), for p from 1e-300 to 1 - 1e-14 (the
 *     "_upper" variants take the upper-tail probability q = 1 - p directly
 *     and keep full relative accuracy for q down to 1e-300). A quantile
 *     below DBL_MIN is returned as 0, one above DBL_MAX / e as +inf;
 *   - exception: chi-square with df < 0.2 (a < 0.1): its upper tail for
 *     x < df + 2 is formed as 1 - P and is good to 1e-15 absolute only, so
 *     those quantiles are good to about 1e-11 relative.
 * Degrees of freedom and shape parameters are real. The series, continued
 * fractions and the root finder have iteration caps growing like sqrt(a);
 * above about 1e9 a function may return NaN rather than a guess.
 */
#ifndef MB_STATS_H
#define MB_STATS_H

/* ---- special functions ---------------------------------------------- */

/** ln Gamma(x) for x > 0: absolute error below 1e-14 for x <= 10, relative
 *  below 1e-14 above. NaN for x <= 0. */
double mb_stats_lgamma(double x);

/** Regularised lower incomplete gamma P(a, x), a > 0, x >= 0. */
double mb_stats_gamma_p(double a, double x);
/** Regularised upper incomplete gamma Q(a, x) = 1 - P(a, x), computed
 *  directly (full relative accuracy in the upper tail). */
double mb_stats_gamma_q(double a, double x);

/** Regularised incomplete beta I_x(a, b), a, b > 0, 0 <= x <= 1. */
double mb_stats_beta_inc(double x, double a, double b);

/* ---- normal ---------------------------------------------------------- */

/** Standard normal cdf Phi(x); x = +-inf allowed. */
double mb_stats_norm_cdf(double x);
/** Upper tail 1 - Phi(x), computed directly. */
double mb_stats_norm_sf(double x);
/** Phi^-1(p) for 0 <= p <= 1 (p = 0 gives -inf, p = 1 gives +inf). */
double mb_stats_norm_quantile(double p);
/** The x with 1 - Phi(x) = q, for 0 <= q <= 1 (q = 0.01 gives 2.326...). */
double mb_stats_norm_quantile_upper(double q);

/* ---- chi-square, F, Student t, beta (real degrees of freedom > 0) ------- */

/** P(X <= x) for X ~ chi-square(df); x < 0 gives 0. */
double mb_stats_chi2_cdf(double x, double df);
/** P(X > x), computed directly. */
double mb_stats_chi2_sf(double x, double df);
/** The x with P(X <= x) = p, 0 <= p <= 1 (p = 1 gives +inf). */
double mb_stats_chi2_quantile(double p, double df);
/** The x with P(X > x) = q, 0 <= q <= 1. */
double mb_stats_chi2_quantile_upper(double q, double df);

/** P(X <= x) for X ~ F(d1, d2); x < 0 gives 0. */
double mb_stats_f_cdf(double x, double d1, double d2);
/** P(X > x), computed directly. */
double mb_stats_f_sf(double x, double d1, double d2);
/** The x with P(X <= x) = p, 0 <= p <= 1. */
double mb_stats_f_quantile(double p, double d1, double d2);
/** The x with P(X > x) = q, 0 <= q <= 1. */
double mb_stats_f_quantile_upper(double q, double d1, double d2);

/** P(T <= x) for T ~ Student t(df). */
double mb_stats_t_cdf(double x, double df);
/** The x with P(T <= x) = p, 0 <= p <= 1. */
double mb_stats_t_quantile(double p, double df);

/** P(X <= x) for X ~ Beta(a, b); x outside [0, 1] is clamped. */
double mb_stats_beta_cdf(double x, double a, double b);
/** The x with P(X <= x) = p, 0 <= p <= 1. */
double mb_stats_beta_quantile(double p, double a, double b);
/** The x with P(X > x) = q, 0 <= q <= 1. */
double mb_stats_beta_quantile_upper(double q, double a, double b);

/* ---- Hotelling T^2 limits --------------------------------------------- */
/*
 * alpha is the false-alarm (false-reject) probability per part, 0 < alpha < 1;
 * p the number of variables (modes judged), n the number of good samples the
 * mean and covariance were estimated from. NaN when the limit does not exist
 * (p < 1, n too small, alpha outside (0, 1)).
 */

/**
 * Phase II limit for one new observation judged against a mean and
 * covariance estimated from n independent samples:
 *     UCL = p (n + 1)(n - 1) / (n (n - p)) * F_{1-alpha}(p, n - p),  n > p.
 * Source: NIST/SEMATECH e-Handbook of Statistical Methods, 6.5.4.3.4
 * "Chart for Individual Observations -- Phase II" (after Ryan 2000, ch. 9).
 */
double mb_stats_t2_limit_new(double alpha, int p, int n);

/**
 * Phase I limit for one of the n samples the mean and covariance were
 * estimated from (screening the training set), Tracy, Young and Mason,
 * J. Quality Technology 24(2), 1992:
 *     UCL = (n - 1)^2 / n * Beta_{1-alpha}(p / 2, (n - p - 1) / 2),  n > p + 1.
 */
double mb_stats_t2_limit_train(double alpha, int p, int n);

/** Known mean and covariance: UCL = chi-square_{1-alpha}(p). */
double mb_stats_t2_limit_known(double alpha, int p);

/* ---- Q statistic (squared prediction error) limits -------------------- */

/** The parts of a Q limit, kept for reports and tests. */
typedef struct {
    double theta1, theta2, theta3; /**< sums of lambda_j^1, ^2, ^3, j > k */
    double h0;                     /**< 1 - 2 theta1 theta3 / (3 theta2^2) */
    double z;                      /**< upper normal quantile of alpha */
    double q;                      /**< the limit, in the units of lambda */
} mb_q_limit;

/**
 * Jackson & Mudholkar (Technometrics 21(3), 1979) limit for the residual
 * sum of squares Q when the first k of n_eig eigenvalues are kept:
 *     theta_i = sum_{j > k} lambda_j^i,  h0 = 1 - 2 theta1 theta3 / (3
 * theta2^2), Q = theta1 [ z sqrt(2 theta2 h0^2) / theta1 + 1
 *                  + theta2 h0 (h0 - 1) / theta1^2 ]^(1 / h0),
 * z the upper alpha normal quantile. The paper approximates
 * c = (Q / theta1)^h0 as normal, which needs h0 > 0; h0 <= 0 happens when
 * one residual eigenvalue dominates a long flat rest (for example 1 and
 * sixty of 0.05), and there the limit is refused.
 * It is an approximation: for the eigenvalues 5, 3, 2, 1, 0.5, 0.3, 0.2 with
 * k = 2 and alpha = 0.01 it gives 17.009 where the exact 0.99 quantile of
 * sum lambda_j z_j^2 is about 15.88 (Monte Carlo, tests/fit/ref_stats.py):
 * conservative there, as it is on the other spectra tested.
 * eig: n_eig eigenvalues, largest first, each >= 0; 0 <= k < n_eig.
 * Return value: 0 with *out filled; MB_EINVAL (NULL, k or alpha out of range,
 * negative or non-finite eigenvalue); MB_EDEGENERATE (theta1 == 0: no
 * residual variance); MB_ERANGE (h0 <= 0, or the bracket is <= 0: the
 * approximation does not apply; theta1..3, h0 and z are still filled, q is
 * NaN; use mb_stats_q_limit_box or an empirical limit).
 */
int mb_stats_q_limit_jm(const double *eig, int n_eig, int k, double alpha,
                        mb_q_limit *out);

/**
 * Box (Ann. Math. Statist. 25, 1954) scaled chi-square approximation of the
 * same Q: Q ~ g chi-square(h) with g = theta2 / theta1, h = theta1^2 / theta2
 * (matching the mean theta1 and variance 2 theta2 of Q), so the limit is
 * g chi-square_{1-alpha}(h). Defined for every spectrum; it tends to be
 * liberal where Jackson-Mudholkar is conservative (15.19 in the example
 * above). Same arguments and return codes as mb_stats_q_limit_jm, except
 * MB_ERANGE; out->h0 is filled for reference.
 */
int mb_stats_q_limit_box(const double *eig, int n_eig, int k, double alpha,
                         mb_q_limit *out);

/* ---- order statistics ------------------------------------------------- */

/**
 * The k-th smallest (0-based) of v[0..n-1] by Hoare's selection (average
 * O(n)); reorders v. 0 < n, 0 <= k < n (not checked: inner-loop call).
 */
double mb_stats_select_kth(double *v, int n, int k);

/** The median v[n / 2] in sorted order (upper median for even n), by
    mb_stats_select_kth; 0 for n <= 0. Reorders v. */
double mb_stats_median_inplace(double *v, int n);

#endif
