/*
 * fit/stats.c - distributions and control limits (see stats.h).
 *
 * The methods, each written here from its published formula:
 *
 * ln Gamma. Stirling's series with its remainder split off,
 *     ln Gamma(z) = (z - 1/2) ln z - z + ln sqrt(2 pi) + s(z),
 *     s(z) = 1/(12 z) - 1/(360 z^3) + 1/(1260 z^5) - 1/(1680 z^7) + ...
 * (Abramowitz & Stegun 6.1.40-6.1.41) for z >= 10; below that the exact
 * recurrence s(z) = s(z + 1) + (z + 1/2) ln(1 + 1/z) - 1, which follows from
 * Gamma(z + 1) = z Gamma(z), carries s up to 10. Keeping s apart lets the
 * prefactors below cancel their large terms analytically (the idea of
 * Loader, "Fast and accurate computation of binomial probabilities", 2000).
 *
 * Prefactors. With log1pmx(t) = ln(1 + t) - t (summed as -u t + 2 sum
 * u^(2i+1)/(2i+1), u = t/(2 + t), for moderate t),
 *     ln(x^a e^-x / Gamma(a))     = a log1pmx(x/a - 1) + ln sqrt(a / 2pi) -
 * s(a) ln(x^a y^b / B(a, b))       = a log1pmx(x/x0 - 1) + b log1pmx(y/y0 - 1)
 *                                   + ln sqrt(ab / (2pi (a+b))) - s(a) - s(b) +
 * s(a+b) with y = 1 - x, x0 = a/(a+b), y0 = b/(a+b). No term grows with a or b,
 * so large degrees of freedom lose no digits to cancellation.
 *
 * Incomplete gamma. P(a, x) by its power series (A&S 6.5.29) for x < a + 1,
 * otherwise Q(a, x) by its continued fraction (A&S 6.5.31, even part, as in
 * Numerical Recipes 2nd ed. 6.2) evaluated with the modified Lentz method
 * (Thompson & Barnett, J. Comput. Phys. 64, 1986). The tail that is not
 * summed is 1 minus the other; in each region the summed tail is the
 * smaller one, except for a < 0.1, where Q just below x = a + 1 can be
 * small (the documented exception in stats.h).
 *
 * Incomplete beta. The continued fraction A&S 26.5.8 (NR 6.4) for
 * x < (a + 1)/(a + b + 2), otherwise I_x(a, b) = 1 - I_(1-x)(b, a), taken
 * in its even contraction so that each denominator holds 1 + d_(2m+1),
 * which is formed from x or from 1 - x, whichever cancels less: with x
 * near 1 and a large, forming it from x alone would cost 1e-16 / (1 - x)
 * (1e-11 relative at F(1, 1e6)).
 *
 * Normal. Phi(x) = erfc(-x / sqrt 2) / 2 with the C library's erfc.
 * The quantile starts from A&S 26.2.23 (error below 4.5e-4) and takes
 * Halley steps on erfc, each of which cubes the relative error, until the
 * step is below 1e-15 relative (two or three steps).
 *
 * Quantiles of chi-square, F and beta. A safeguarded Newton iteration in
 * u = ln x on h(u) = ln(tail(e^u)) - ln(target), where the tail is the
 * smaller of p and 1 - p (so both tails keep their relative accuracy).
 * ln tail is close to linear in ln x in both tails of these distributions,
 * which makes Newton converge from rough starts; a bracket kept from the
 * signs of h turns any step that leaves it into a bisection.
 */
#include "stats.h"

#include "error.h"

#include <float.h>
#include <math.h>

#define LN_SQRT_2PI 0.91893853320467274178032973640562
#define SQRT_2PI 2.50662827463100050241576528481105

/* Smallest positive double kept off zero in the Lentz recurrences. */
#define LENTZ_TINY 1e-300

/* One step of the modified Lentz method for a continued fraction
   b0 + a1/(b1 + a2/(b2 + ...)): with the next partial numerator num and
   denominator den, update C and D (kept away from zero) and return the
   factor the running value is multiplied by. */
static double lentz_step(double num, double den, double *c, double *d)
{
    *d = den + num * *d;
    if (fabs(*d) < LENTZ_TINY)
        *d = LENTZ_TINY;
    *c = den + num / *c;
    if (fabs(*c) < LENTZ_TINY)
        *c = LENTZ_TINY;
    *d = 1.0 / *d;
    return *d * *c;
}

/* ---- ln Gamma via Stirling's remainder ------------------------------ */

/* s(z) for z >= 10 by the asymptotic series A&S 6.1.41 (through z^-13; the
 * first omitted term is below 3e-17 at z = 10). */
static double stirling_tail_series(double z)
{
    double r = 1.0 / z, r2 = r * r;
    return r *
           (1.0 / 12.0 + r2 * (-1.0 / 360.0 +
                               r2 * (1.0 / 1260.0 +
                                     r2 * (-1.0 / 1680.0 +
                                           r2 * (1.0 / 1188.0 +
                                                 r2 * (-691.0 / 360360.0 +
                                                       r2 * (1.0 / 156.0)))))));
}

/* s(z) = ln Gamma(z) - ((z - 1/2) ln z - z + ln sqrt(2 pi)), z > 0. */
static double stirling_tail(double z)
{
    double sum = 0.0;
    while (z < 10.0) {
        /* s(z) - s(z + 1) = (z + 1/2) ln(1 + 1/z) - 1 */
        sum += (z + 0.5) * log1p(1.0 / z) - 1.0;
        z += 1.0;
    }
    return sum + stirling_tail_series(z);
}

double mb_stats_lgamma(double x)
{
    if (!(x > 0.0) || isinf(x))
        return isinf(x) && x > 0.0 ? INFINITY : NAN;
    return (x - 0.5) * log(x) - x + LN_SQRT_2PI + stirling_tail(x);
}

/* ln(1 + t) - t, t > -1, without the cancellation of the direct form for
 * small t. */
static double log1pmx(double t)
{
    if (t < -0.5 || t > 1.0)
        return log1p(t) - t;
    /* ln(1+t) = 2 atanh(u) = 2 (u + u^3/3 + u^5/5 + ...), u = t / (2 + t),
     * and t - 2u = u t, so ln(1+t) - t = -u t + 2 (u^3/3 + u^5/5 + ...).
     * |u| <= 1/3 here: each term shrinks by 1/9 at least. */
    double u = t / (2.0 + t), u2 = u * u;
    double lead = -u * t;
    double pw = u * u2, sum = 0.0;
    for (int i = 1; i < 60; i++) {
        double term = pw / (2 * i + 1);
        sum += term;
        if (fabs(term) <= 1e-17 * fabs(lead + 2.0 * sum))
            break;
        pw *= u2;
    }
    return lead + 2.0 * sum;
}

/* ln(r) - (r - 1) for r = num / den > 0. Far below 1, t = r - 1 rounds to
 * -1 and log1p would see ln 0: take the logarithms apart there. */
static double log_ratio_m1(double num, double den)
{
    double t = (num - den) / den;
    if (t < -0.5)
        return log(num) - log(den) - t;
    return log1pmx(t);
}

/* ln(x^a e^-x / Gamma(a)), a > 0, x > 0. */
static double log_gamma_prefactor(double a, double x)
{
    return a * log_ratio_m1(x, a) + 0.5 * log(a) - LN_SQRT_2PI -
           stirling_tail(a);
}

/* ln(x^a y^b / B(a, b)), a, b > 0, 0 < x, y < 1, x + y = 1, both given
 * with full relative accuracy. The two log1pmx arguments x/x0 - 1 and
 * y/y0 - 1 are formed from one difference d = (a + b)(x - x0), taken from
 * the smaller of x and y, so that the linear terms a (x/x0 - 1) and
 * b (y/y0 - 1) cancel exactly: otherwise a rounding of 1e-16 in y would
 * cost (a + b) 1e-16 in the logarithm, 1e-10 at a + b = 1e6. */
static double log_beta_prefactor(double x, double y, double a, double b)
{
    double ab = a + b;
    double d = x <= y ? x * ab - a : b - y * ab;
    double tx = d / a, ty = -d / b;
    double lx = tx < -0.5 ? log(x) + log(ab) - log(a) - tx : log1pmx(tx);
    double ly = ty < -0.5 ? log(y) + log(ab) - log(b) - ty : log1pmx(ty);
    return a * lx + b * ly + 0.5 * (log(a) + log(b) - log(ab)) - LN_SQRT_2PI -
           stirling_tail(a) - stirling_tail(b) + stirling_tail(ab);
}

/* Iteration cap for the series and continued fractions: the number of
 * terms they need grows like sqrt(a) when x is near a. */
static int iteration_cap(double a)
{
    double c = 1000.0 + 60.0 * sqrt(a);
    return c > 2e6 ? 2000000 : (int)c;
}

/* ---- incomplete gamma ------------------------------------------------ */

/* Both tails of the regularised incomplete gamma. Returns 0, or -1 when an
 * iteration did not converge. a > 0, x >= 0 finite. */
static int gamma_tails(double a, double x, double *lower, double *upper)
{
    if (x == 0.0) {
        *lower = 0.0;
        *upper = 1.0;
        return 0;
    }
    double lp = log_gamma_prefactor(a, x);
    int cap = iteration_cap(a);
    if (x < a + 1.0) {
        /* P = x^a e^-x / Gamma(a + 1) * sum_n x^n / ((a+1)...(a+n)) */
        double term = 1.0, sum = 1.0;
        int n;
        for (n = 1; n < cap; n++) {
            term *= x / (a + n);
            sum += term;
            if (term <= sum * DBL_EPSILON * 0.5)
                break;
        }
        if (n >= cap)
            return -1;
        double p = exp(lp - log(a) + log(sum));
        if (p > 1.0)
            p = 1.0;
        *lower = p;
        *upper = 1.0 - p;
        return 0;
    }
    /* Q = x^a e^-x / Gamma(a) * 1/(x+1-a- 1(1-a)/(x+3-a- 2(2-a)/(x+5-a- ...)))
     * by modified Lentz: f = b0 + a1/(b1 + a2/(b2 + ...)). */
    double b = x + 1.0 - a;
    double c = 1.0 / LENTZ_TINY;
    double d = 1.0 / b;
    double f = d;
    int i;
    for (i = 1; i < cap; i++) {
        double an = -i * (i - a);
        b += 2.0;
        double delta = lentz_step(an, b, &c, &d);
        f *= delta;
        if (fabs(delta - 1.0) <= DBL_EPSILON)
            break;
    }
    if (i >= cap)
        return -1;
    double q = exp(lp) * f;
    if (q > 1.0)
        q = 1.0;
    *upper = q;
    *lower = 1.0 - q;
    return 0;
}

static int gamma_args_ok(double a, double x)
{
    return a > 0.0 && isfinite(a) && x >= 0.0 && !isnan(x);
}

double mb_stats_gamma_p(double a, double x)
{
    double lo, up;
    if (!gamma_args_ok(a, x))
        return NAN;
    if (isinf(x))
        return 1.0;
    return gamma_tails(a, x, &lo, &up) == 0 ? lo : NAN;
}

double mb_stats_gamma_q(double a, double x)
{
    double lo, up;
    if (!gamma_args_ok(a, x))
        return NAN;
    if (isinf(x))
        return 0.0;
    return gamma_tails(a, x, &lo, &up) == 0 ? up : NAN;
}

/* ---- incomplete beta ------------------------------------------------- */

/* 1 + d_(2m+1) of the continued fraction below. From x it is
 *     1 - P,  P = (a+m)(a+b+m) x / ((a+2m)(a+2m+1)),
 * which cancels when P is near 1; with x = 1 - y multiplied out it is
 *     [a (2m+1-b) + m (3m+2-b) + (a+m)(a+b+m) y] / ((a+2m)(a+2m+1)),
 * which cancels only through its negative terms. Near x = 1 with a large
 * the first form loses 1e-16 / (1 - x) to the rounding of x while the
 * second is exact; elsewhere it is the other way round. Take the one with
 * the smaller cancellation (sum of magnitudes over magnitude of the sum). */
static double beta_cf_odd1(double x, double y, double a, double b, double m)
{
    double den = (a + 2.0 * m) * (a + 2.0 * m + 1.0);
    double p = (a + m) * (a + b + m) * x / den;
    double vx = 1.0 - p;
    double t1 = a * (2.0 * m + 1.0 - b), t2 = m * (3.0 * m + 2.0 - b);
    double t3 = (a + m) * (a + b + m) * y;
    double n = t1 + t2 + t3;
    /* (|t1|+|t2|+t3)/|n| < (1+p)/|vx|, cross-multiplied */
    if ((fabs(t1) + fabs(t2) + t3) * fabs(vx) < (1.0 + p) * fabs(n))
        return n / den;
    return vx;
}

/* I_x(a, b) by the continued fraction A&S 26.5.8,
 *     I = x^a y^b / (a B(a,b)) * 1/(1+ d1/(1+ d2/(1+ ...))),
 *     d_(2m+1) = -(a+m)(a+b+m) x / ((a+2m)(a+2m+1)),
 *     d_(2m)   =  m (b-m) x / ((a+2m-1)(a+2m)),
 * taken in its even contraction
 *     1/(1+d1 - d1 d2/(1+d2+d3 - d3 d4/(1+d4+d5 - ...))),
 * whose denominators hold 1 + d_(2m+1) whole (see beta_cf_odd1). Meant for
 * x < (a+1)/(a+b+2). Returns -1 when it did not converge. */
static int beta_cf(double x, double y, double a, double b, double *out)
{
    int cap = iteration_cap(a > b ? a : b);
    double d_odd = -(a + b) * x / (a + 1.0); /* d1 */
    double g = beta_cf_odd1(x, y, a, b, 0.0);
    if (fabs(g) < LENTZ_TINY)
        g = LENTZ_TINY;
    double c = g, d = 0.0;
    int m;
    for (m = 1; m < cap; m++) {
        double dm = m;
        double d_even =
            dm * (b - dm) * x / ((a + 2.0 * dm - 1.0) * (a + 2.0 * dm));
        double num = -d_odd * d_even;
        double den = beta_cf_odd1(x, y, a, b, dm) + d_even;
        d_odd = -(a + dm) * (a + b + dm) * x /
                ((a + 2.0 * dm) * (a + 2.0 * dm + 1.0));
        double delta = lentz_step(num, den, &c, &d);
        g *= delta;
        if (fabs(delta - 1.0) <= DBL_EPSILON)
            break;
    }
    if (m >= cap)
        return -1;
    double v = exp(log_beta_prefactor(x, y, a, b) - log(a)) / g;
    *out = v > 1.0 ? 1.0 : v;
    return 0;
}

/* Both tails I_x(a, b) and 1 - I_x(a, b); x + y = 1, both given so that
 * the caller can form the smaller one without rounding. Returns 0 or -1. */
static int beta_tails(double x, double y, double a, double b, double *lower,
                      double *upper)
{
    if (x <= 0.0) {
        *lower = 0.0;
        *upper = 1.0;
        return 0;
    }
    if (y <= 0.0) {
        *lower = 1.0;
        *upper = 0.0;
        return 0;
    }
    double v;
    if (x < (a + 1.0) / (a + b + 2.0)) {
        if (beta_cf(x, y, a, b, &v) != 0)
            return -1;
        *lower = v;
        *upper = 1.0 - v;
    } else {
        if (beta_cf(y, x, b, a, &v) != 0)
            return -1;
        *upper = v;
        *lower = 1.0 - v;
    }
    return 0;
}

static int shape_ok(double a)
{
    return a > 0.0 && isfinite(a);
}

double mb_stats_beta_inc(double x, double a, double b)
{
    double lo, up;
    if (!shape_ok(a) || !shape_ok(b) || !(x >= 0.0 && x <= 1.0))
        return NAN;
    return beta_tails(x, 1.0 - x, a, b, &lo, &up) == 0 ? lo : NAN;
}

/* ---- normal ---------------------------------------------------------- */

double mb_stats_norm_cdf(double x)
{
    if (isnan(x))
        return NAN;
    return 0.5 * erfc(-x / M_SQRT2);
}

double mb_stats_norm_sf(double x)
{
    if (isnan(x))
        return NAN;
    return 0.5 * erfc(x / M_SQRT2);
}

/* The x <= 0 with Phi(x) = p, 0 < p <= 0.5. */
static double norm_lower_quantile(double p)
{
    /* A&S 26.2.23: for 0 < p <= 0.5, t = sqrt(-2 ln p),
     * x = -(t - (c0 + c1 t + c2 t^2) / (1 + d1 t + d2 t^2 + d3 t^3)). */
    double t = sqrt(-2.0 * log(p));
    double x =
        -(t - (2.515517 + t * (0.802853 + t * 0.010328)) /
                  (1.0 + t * (1.432788 + t * (0.189269 + t * 0.001308))));
    /* Halley on F(x) = Phi(x) - p: with r = (Phi(x) - p) / phi(x), the step
     * is r / (1 + x r / 2) (phi'/phi = -x). */
    for (int it = 0; it < 8; it++) {
        double e = mb_stats_norm_cdf(x) - p;
        /* r = e / phi(x), with phi's exp(-x^2/2) ~ p held in logarithms
         * so that nothing overflows far in the tail */
        double r = (e / p) * SQRT_2PI * exp(log(p) + 0.5 * x * x);
        double step = r / (1.0 + 0.5 * x * r);
        x -= step;
        if (fabs(step) <= 1e-15 * fabs(x))
            break;
    }
    return x;
}

/* Quantile from both tail probabilities (p + q = 1), each given exactly. */
static double norm_quantile_pq(double p, double q)
{
    if (p == 0.0)
        return -INFINITY;
    if (q == 0.0)
        return INFINITY;
    if (p == q)
        return 0.0;
    return p < q ? norm_lower_quantile(p) : -norm_lower_quantile(q);
}

static int prob_ok(double p)
{
    return p >= 0.0 && p <= 1.0;
}

double mb_stats_norm_quantile(double p)
{
    return prob_ok(p) ? norm_quantile_pq(p, 1.0 - p) : NAN;
}

double mb_stats_norm_quantile_upper(double q)
{
    return prob_ok(q) ? norm_quantile_pq(1.0 - q, q) : NAN;
}

/* ---- the quantile solver --------------------------------------------- */

/* A distribution seen from u = ln x: both tails at x and
 * ln(x * density(x)) = ln(d lower / du). Returns 0 or -1. */
typedef int (*tails_fn)(double x, const double *par, double *lower,
                        double *upper, double *log_xdens);

/*
 * The x with lower(x) = p (equivalently upper(x) = q), p + q = 1, both
 * given exactly. u_max: the largest allowed ln x (0 for beta, +inf
 * otherwise). x0 > 0: a starting point. NaN when the iteration failed.
 */
static double solve_quantile(tails_fn fn, const double *par, double p, double q,
                             double x0, double u_max)
{
    /* The range searched, ln DBL_MIN .. ln(DBL_MAX / e): a root below it is
     * returned as 0, above it as +inf (staying off the extremes keeps x/2
     * and d1 x from under- or overflowing in the tails). */
    const double u_min_rep = log(DBL_MIN), u_max_rep = log(DBL_MAX) - 1.0;
    int use_lower = p <= q;
    double ln_target = log(use_lower ? p : q);
    double u = log(x0);
    double u_lo = -INFINITY, u_hi = u_max;
    if (u > u_max)
        u = u_max - 1.0;

    for (int it = 0; it < 400; it++) {
        double lower, upper, lxd;
        if (fn(exp(u), par, &lower, &upper, &lxd) != 0)
            return NAN;
        double tail = use_lower ? lower : upper;
        /* h increases with u for the lower tail, decreases for the upper */
        double h = log(tail) - ln_target;
        double sign_h = use_lower ? h : -h; /* > 0: u is above the root */
        if (h == 0.0)
            return exp(u);
        if (sign_h > 0.0)
            u_hi = u;
        else
            u_lo = u;

        if (sign_h > 0.0 && u <= u_min_rep)
            return 0.0;
        if (sign_h < 0.0 && u >= u_max_rep)
            return INFINITY;

        double slope = exp(lxd - log(tail)); /* |dh/du| */
        double step = use_lower ? -h / slope : h / slope;
        /* converged: a step this small may not even change u (and would
         * then look like one leaving the bracket) */
        if (fabs(step) <= 2e-15 * (1.0 + fabs(u)))
            return exp(u + step);
        double u_new = u + step;
        if (!isfinite(u_new) || !(u_new > u_lo && u_new < u_hi)) {
            /* bisect; on an open side move by a factor e^3 */
            if (isinf(u_lo) && isinf(u_hi))
                return NAN;
            if (isinf(u_lo))
                u_new = u_hi - 3.0;
            else if (isinf(u_hi))
                u_new = u_lo + 3.0;
            else
                u_new = 0.5 * (u_lo + u_hi);
        }
        if (u_new < u_min_rep || u_new > u_max_rep) {
            /* evaluate at the end of the range next: the checks above then
             * return 0 or +inf if the root lies beyond it */
            u = u_new < u_min_rep ? u_min_rep : u_max_rep;
            continue;
        }
        if (fabs(u_new - u) <= 2e-15 * (1.0 + fabs(u)) ||
            (u_hi - u_lo) <= 4e-16 * (1.0 + fabs(u)))
            return exp(u_new);
        u = u_new;
    }
    return NAN;
}

/* ---- chi-square ------------------------------------------------------ */

static int chi2_tails(double x, const double *par, double *lower, double *upper,
                      double *log_xdens)
{
    double a = 0.5 * par[0], t = 0.5 * x;
    /* x * density(x) = t * gamma density(t) = e^(prefactor) */
    *log_xdens = log_gamma_prefactor(a, t);
    return gamma_tails(a, t, lower, upper);
}

static int df_ok(double df)
{
    return df > 0.0 && isfinite(df);
}

double mb_stats_chi2_cdf(double x, double df)
{
    if (!df_ok(df) || isnan(x))
        return NAN;
    return x <= 0.0 ? 0.0 : mb_stats_gamma_p(0.5 * df, 0.5 * x);
}

double mb_stats_chi2_sf(double x, double df)
{
    if (!df_ok(df) || isnan(x))
        return NAN;
    return x <= 0.0 ? 1.0 : mb_stats_gamma_q(0.5 * df, 0.5 * x);
}

static double chi2_quantile_pq(double p, double q, double df)
{
    if (p == 0.0)
        return 0.0;
    if (q == 0.0)
        return INFINITY;
    /* Start: Wilson-Hilferty (1931), x = df (1 - 2/(9df) + z sqrt(2/(9df)))^3.
     * In the lower tail P(a, t) <= t^a / Gamma(a + 1) (e^-s <= 1 in the
     * integral), so t = (p Gamma(a + 1))^(1/a) is below the root: never
     * start under it. */
    double a = 0.5 * df;
    double z = norm_quantile_pq(p, q);
    double v = 2.0 / (9.0 * df);
    double c = 1.0 - v + z * sqrt(v);
    double x0 = df * c * c * c;
    if (p < q) {
        double ln_t = (log(p) + mb_stats_lgamma(a + 1.0)) / a;
        double x_low = 2.0 * exp(ln_t);
        if (!(x0 > x_low))
            x0 = x_low;
    }
    if (!(x0 > 0.0) || !isfinite(x0))
        x0 = df;
    return solve_quantile(chi2_tails, &df, p, q, x0, INFINITY);
}

double mb_stats_chi2_quantile(double p, double df)
{
    if (!df_ok(df) || !prob_ok(p))
        return NAN;
    return chi2_quantile_pq(p, 1.0 - p, df);
}

double mb_stats_chi2_quantile_upper(double q, double df)
{
    if (!df_ok(df) || !prob_ok(q))
        return NAN;
    return chi2_quantile_pq(1.0 - q, q, df);
}

/* ---- F ----------------------------------------------------------------- */

/* X ~ F(d1, d2): P(X <= f) = I_x(d1/2, d2/2), x = d1 f / (d1 f + d2). */
static int f_tails(double f, const double *par, double *lower, double *upper,
                   double *log_xdens)
{
    double d1 = par[0], d2 = par[1];
    double x, y;
    /* x = d1 f / (d1 f + d2), y = d2 / (d1 f + d2), through the ratio
     * r <= 1 of the two terms so that nothing overflows */
    if (d1 * f <= d2) {
        double r = (d1 / d2) * f;
        x = r / (1.0 + r);
        y = 1.0 / (1.0 + r);
    } else {
        double r = (d2 / d1) / f;
        x = 1.0 / (1.0 + r);
        y = r / (1.0 + r);
    }
    double a = 0.5 * d1, b = 0.5 * d2;
    /* f * density(f) = x^a y^b / B(a, b) (since f dx/df = x y) */
    if (x <= 0.0 || y <= 0.0)
        *log_xdens = -INFINITY;
    else
        *log_xdens = log_beta_prefactor(x, y, a, b);
    return beta_tails(x, y, a, b, lower, upper);
}

static double f_tail(double x, double d1, double d2, int upper_tail)
{
    double par[2] = {d1, d2}, lo, up, lxd;
    if (!df_ok(d1) || !df_ok(d2) || isnan(x))
        return NAN;
    if (x <= 0.0)
        return upper_tail ? 1.0 : 0.0;
    if (isinf(x))
        return upper_tail ? 0.0 : 1.0;
    if (f_tails(x, par, &lo, &up, &lxd) != 0)
        return NAN;
    return upper_tail ? up : lo;
}

double mb_stats_f_cdf(double x, double d1, double d2)
{
    return f_tail(x, d1, d2, 0);
}

double mb_stats_f_sf(double x, double d1, double d2)
{
    return f_tail(x, d1, d2, 1);
}

static double f_quantile_pq(double p, double q, double d1, double d2)
{
    if (p == 0.0)
        return 0.0;
    if (q == 0.0)
        return INFINITY;
    /* Start: the chi-square(d1)/d1 quantile by Wilson-Hilferty, the limit
     * of F as d2 grows; the log-space Newton takes it from there. */
    double z = norm_quantile_pq(p, q);
    double v = 2.0 / (9.0 * d1);
    double c = 1.0 - v + z * sqrt(v);
    double x0 = c * c * c;
    if (!(x0 > 1e-300) || !isfinite(x0))
        x0 = 1.0;
    double par[2] = {d1, d2};
    return solve_quantile(f_tails, par, p, q, x0, INFINITY);
}

double mb_stats_f_quantile(double p, double d1, double d2)
{
    if (!df_ok(d1) || !df_ok(d2) || !prob_ok(p))
        return NAN;
    return f_quantile_pq(p, 1.0 - p, d1, d2);
}

double mb_stats_f_quantile_upper(double q, double d1, double d2)
{
    if (!df_ok(d1) || !df_ok(d2) || !prob_ok(q))
        return NAN;
    return f_quantile_pq(1.0 - q, q, d1, d2);
}

/* ---- Student t ------------------------------------------------------ */

double mb_stats_t_cdf(double x, double df)
{
    if (!df_ok(df) || isnan(x))
        return NAN;
    if (isinf(x))
        return x > 0.0 ? 1.0 : 0.0;
    /* T^2 ~ F(1, df): P(|T| <= |x|) is the F(1, df) cdf at x^2 */
    double par[2] = {1.0, df}, inner, outer, lxd;
    if (f_tails(x * x, par, &inner, &outer, &lxd) != 0)
        return NAN;
    return x >= 0.0 ? 0.5 + 0.5 * inner : 0.5 * outer;
}

double mb_stats_t_quantile(double p, double df)
{
    if (!df_ok(df) || !prob_ok(p))
        return NAN;
    double q = 1.0 - p;
    if (p == 0.0)
        return -INFINITY;
    if (q == 0.0)
        return INFINITY;
    if (p == q)
        return 0.0;
    /* T^2 ~ F(1, df): P(T^2 > t^2) = 2 min(p, q), P(T^2 <= t^2) = |p - q|,
     * both exact in floating point for p in the middle of (0, 1). */
    double small = p < q ? p : q;
    double f = f_quantile_pq(fabs(p - q), 2.0 * small, 1.0, df);
    double t = sqrt(f);
    return p < q ? -t : t;
}

/* ---- beta ------------------------------------------------------------ */

static int beta_dist_tails(double x, const double *par, double *lower,
                           double *upper, double *log_xdens)
{
    double y = 1.0 - x;
    if (y <= 0.0)
        *log_xdens = -INFINITY;
    else /* x * density(x) = x^a y^b / B(a, b) / y */
        *log_xdens = log_beta_prefactor(x, y, par[0], par[1]) - log(y);
    return beta_tails(x, y, par[0], par[1], lower, upper);
}

double mb_stats_beta_cdf(double x, double a, double b)
{
    if (!shape_ok(a) || !shape_ok(b) || isnan(x))
        return NAN;
    if (x <= 0.0)
        return 0.0;
    if (x >= 1.0)
        return 1.0;
    return mb_stats_beta_inc(x, a, b);
}

/* The beta quantile when it is at most about 1/2 (p + q = 1). */
static double beta_quantile_low(double p, double q, double a, double b)
{
    /* Start: the mean, or, for a small p, the root of the leading term
     * x^a / (a B(a, b)) = p of the series; capped at 1/2. */
    double x0 = a / (a + b);
    double lbeta =
        mb_stats_lgamma(a) + mb_stats_lgamma(b) - mb_stats_lgamma(a + b);
    double x_small = exp((log(p) + log(a) + lbeta) / a);
    if (x_small < x0)
        x0 = x_small;
    if (x0 > 0.5)
        x0 = 0.5;
    if (!(x0 > 0.0))
        x0 = DBL_MIN;
    double par[2] = {a, b};
    return solve_quantile(beta_dist_tails, par, p, q, x0, 0.0);
}

static double beta_quantile_pq(double p, double q, double a, double b)
{
    if (p == 0.0)
        return 0.0;
    if (q == 0.0)
        return 1.0;
    /* Solve in whichever of x and 1 - x is below 1/2 at the root, so that
     * the answer keeps its relative accuracy (a root at 1 - 1e-15 found as
     * x would carry the rounding of x near 1). 1 - X ~ Beta(b, a). */
    double lo, up;
    if (beta_tails(0.5, 0.5, a, b, &lo, &up) != 0)
        return NAN;
    int above_half = p <= q ? lo < p : up > q;
    if (above_half)
        return 1.0 - beta_quantile_low(q, p, b, a);
    return beta_quantile_low(p, q, a, b);
}

double mb_stats_beta_quantile(double p, double a, double b)
{
    if (!shape_ok(a) || !shape_ok(b) || !prob_ok(p))
        return NAN;
    return beta_quantile_pq(p, 1.0 - p, a, b);
}

double mb_stats_beta_quantile_upper(double q, double a, double b)
{
    if (!shape_ok(a) || !shape_ok(b) || !prob_ok(q))
        return NAN;
    return beta_quantile_pq(1.0 - q, q, a, b);
}

/* ---- Hotelling T^2 limits --------------------------------------------- */

static int alpha_ok(double alpha)
{
    return alpha > 0.0 && alpha < 1.0;
}

double mb_stats_t2_limit_new(double alpha, int p, int n)
{
    if (!alpha_ok(alpha) || p < 1 || n <= p)
        return NAN;
    double dp = p, dn = n;
    double f = mb_stats_f_quantile_upper(alpha, dp, dn - dp);
    return dp * (dn + 1.0) * (dn - 1.0) / (dn * (dn - dp)) * f;
}

double mb_stats_t2_limit_train(double alpha, int p, int n)
{
    if (!alpha_ok(alpha) || p < 1 || n <= p + 1)
        return NAN;
    double dp = p, dn = n;
    double bq =
        mb_stats_beta_quantile_upper(alpha, 0.5 * dp, 0.5 * (dn - dp - 1.0));
    return (dn - 1.0) * (dn - 1.0) / dn * bq;
}

double mb_stats_t2_limit_known(double alpha, int p)
{
    if (!alpha_ok(alpha) || p < 1)
        return NAN;
    return mb_stats_chi2_quantile_upper(alpha, (double)p);
}

/* ---- Q statistic limits ----------------------------------------------- */

/* Check arguments and fill theta1..3, h0 and z. */
static int q_limit_setup(const double *eig, int n_eig, int k, double alpha,
                         mb_q_limit *out)
{
    if (!eig || !out || n_eig < 1 || k < 0 || k >= n_eig || !alpha_ok(alpha))
        return MB_EINVAL;
    double t1 = 0.0, t2 = 0.0, t3 = 0.0;
    for (int j = k; j < n_eig; j++) {
        double l = eig[j];
        if (!(l >= 0.0) || !isfinite(l))
            return MB_EINVAL;
        t1 += l;
        t2 += l * l;
        t3 += l * l * l;
    }
    out->theta1 = t1;
    out->theta2 = t2;
    out->theta3 = t3;
    out->z = mb_stats_norm_quantile_upper(alpha);
    if (!(t1 > 0.0) || !(t2 > 0.0)) {
        out->h0 = NAN;
        out->q = NAN;
        return MB_EDEGENERATE;
    }
    out->h0 = 1.0 - 2.0 * t1 * t3 / (3.0 * t2 * t2);
    out->q = NAN;
    return 0;
}

int mb_stats_q_limit_jm(const double *eig, int n_eig, int k, double alpha,
                        mb_q_limit *out)
{
    int rc = q_limit_setup(eig, n_eig, k, alpha, out);
    if (rc != 0)
        return rc;
    double t1 = out->theta1, t2 = out->theta2, h0 = out->h0, z = out->z;
    if (!(h0 > 0.0))
        return MB_ERANGE;
    /* [1 + h0 w]^(1/h0) with w = z sqrt(2 t2)/t1 + t2 (h0 - 1)/t1^2
     * (sqrt(2 t2 h0^2) = h0 sqrt(2 t2) for h0 > 0), evaluated as
     * exp(log1p(h0 w) / h0), which stays accurate as h0 -> 0. */
    double w = z * sqrt(2.0 * t2) / t1 + t2 * (h0 - 1.0) / (t1 * t1);
    double inner = h0 * w;
    if (inner <= -1.0)
        return MB_ERANGE;
    out->q = t1 * exp(log1p(inner) / h0);
    return isfinite(out->q) ? 0 : MB_ERANGE;
}

int mb_stats_q_limit_box(const double *eig, int n_eig, int k, double alpha,
                         mb_q_limit *out)
{
    int rc = q_limit_setup(eig, n_eig, k, alpha, out);
    if (rc != 0)
        return rc;
    /* g chi2(h) matches the mean theta1 and variance 2 theta2 of Q */
    double g = out->theta2 / out->theta1;
    double h = out->theta1 * out->theta1 / out->theta2;
    out->q = g * mb_stats_chi2_quantile_upper(alpha, h);
    return isfinite(out->q) ? 0 : MB_ENUMERIC;
}

double mb_stats_select_kth(double *v, int n, int kth)
{
    int lo = 0, hi = n - 1;
    while (lo < hi) {
        double pivot = v[(lo + hi) / 2];
        int i = lo, j = hi;
        while (i <= j) {
            while (v[i] < pivot)
                i++;
            while (v[j] > pivot)
                j--;
            if (i <= j) {
                double t = v[i];
                v[i] = v[j];
                v[j] = t;
                i++;
                j--;
            }
        }
        if (kth <= j)
            hi = j;
        else if (kth >= i)
            lo = i;
        else
            break;
    }
    return v[kth];
}

double mb_stats_median_inplace(double *v, int n)
{
    return n > 0 ? mb_stats_select_kth(v, n, n / 2) : 0.0;
}
