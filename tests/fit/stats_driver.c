/*
 * tests/fit/stats_driver.c - evaluates fit/stats.h functions for
 * ref_stats.py. Reads one request per line from stdin,
 *     <function> <arg> <arg> ...
 * and prints one value per line with 17 significant digits (a Q limit
 * prints "theta1 theta2 theta3 h0 z q" or "error <code>").
 * Functions: lgamma x | gamma_p a x | gamma_q a x | beta_inc x a b |
 * norm_cdf x | norm_sf x | norm_q p | norm_qu q | chi2_cdf x df |
 * chi2_sf x df | chi2_q p df | chi2_qu q df | f_cdf x d1 d2 | f_sf x d1 d2 |
 * f_q p d1 d2 | f_qu q d1 d2 | t_cdf x df | t_q p df | beta_cdf x a b |
 * beta_q p a b | beta_qu q a b | t2_new alpha p n | t2_train alpha p n |
 * t2_known alpha p | q_jm alpha k n_eig l1 .. ln | q_box alpha k n_eig l1 .. ln
 */
#include "stats.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define MAX_EIG 256

static int q_limit(const char *name, const char *rest)
{
    double alpha, eig[MAX_EIG];
    int k, n, used;
    if (sscanf(rest, "%lf %d %d%n", &alpha, &k, &n, &used) != 3 || n < 1 ||
        n > MAX_EIG)
        return -1;
    rest += used;
    for (int i = 0; i < n; i++) {
        if (sscanf(rest, "%lf%n", &eig[i], &used) != 1)
            return -1;
        rest += used;
    }
    mb_q_limit out;
    int rc = strcmp(name, "q_jm") == 0
                 ? mb_stats_q_limit_jm(eig, n, k, alpha, &out)
                 : mb_stats_q_limit_box(eig, n, k, alpha, &out);
    if (rc != 0)
        printf("error %d\n", rc);
    else
        printf("%.17g %.17g %.17g %.17g %.17g %.17g\n", out.theta1, out.theta2,
               out.theta3, out.h0, out.z, out.q);
    return 0;
}

int main(void)
{
    char line[8192];
    long lineno = 0;
    while (fgets(line, sizeof line, stdin)) {
        char name[32];
        double a = 0, b = 0, c = 0;
        int used;
        lineno++;
        if (sscanf(line, "%31s%n", name, &used) != 1)
            continue;
        const char *rest = line + used;
        if (strcmp(name, "q_jm") == 0 || strcmp(name, "q_box") == 0) {
            if (q_limit(name, rest) != 0) {
                fprintf(stderr, "stats_driver: line %ld: bad q limit request\n",
                        lineno);
                return 2;
            }
            continue;
        }
        int n = sscanf(rest, "%lf %lf %lf", &a, &b, &c);
        double v;
        if (n == 1 && strcmp(name, "lgamma") == 0)
            v = mb_stats_lgamma(a);
        else if (n == 2 && strcmp(name, "gamma_p") == 0)
            v = mb_stats_gamma_p(a, b);
        else if (n == 2 && strcmp(name, "gamma_q") == 0)
            v = mb_stats_gamma_q(a, b);
        else if (n == 3 && strcmp(name, "beta_inc") == 0)
            v = mb_stats_beta_inc(a, b, c);
        else if (n == 1 && strcmp(name, "norm_cdf") == 0)
            v = mb_stats_norm_cdf(a);
        else if (n == 1 && strcmp(name, "norm_sf") == 0)
            v = mb_stats_norm_sf(a);
        else if (n == 1 && strcmp(name, "norm_q") == 0)
            v = mb_stats_norm_quantile(a);
        else if (n == 1 && strcmp(name, "norm_qu") == 0)
            v = mb_stats_norm_quantile_upper(a);
        else if (n == 2 && strcmp(name, "chi2_cdf") == 0)
            v = mb_stats_chi2_cdf(a, b);
        else if (n == 2 && strcmp(name, "chi2_sf") == 0)
            v = mb_stats_chi2_sf(a, b);
        else if (n == 2 && strcmp(name, "chi2_q") == 0)
            v = mb_stats_chi2_quantile(a, b);
        else if (n == 2 && strcmp(name, "chi2_qu") == 0)
            v = mb_stats_chi2_quantile_upper(a, b);
        else if (n == 3 && strcmp(name, "f_cdf") == 0)
            v = mb_stats_f_cdf(a, b, c);
        else if (n == 3 && strcmp(name, "f_sf") == 0)
            v = mb_stats_f_sf(a, b, c);
        else if (n == 3 && strcmp(name, "f_q") == 0)
            v = mb_stats_f_quantile(a, b, c);
        else if (n == 3 && strcmp(name, "f_qu") == 0)
            v = mb_stats_f_quantile_upper(a, b, c);
        else if (n == 2 && strcmp(name, "t_cdf") == 0)
            v = mb_stats_t_cdf(a, b);
        else if (n == 2 && strcmp(name, "t_q") == 0)
            v = mb_stats_t_quantile(a, b);
        else if (n == 3 && strcmp(name, "beta_cdf") == 0)
            v = mb_stats_beta_cdf(a, b, c);
        else if (n == 3 && strcmp(name, "beta_q") == 0)
            v = mb_stats_beta_quantile(a, b, c);
        else if (n == 3 && strcmp(name, "beta_qu") == 0)
            v = mb_stats_beta_quantile_upper(a, b, c);
        else if (n == 3 && strcmp(name, "t2_new") == 0)
            v = mb_stats_t2_limit_new(a, (int)b, (int)c);
        else if (n == 3 && strcmp(name, "t2_train") == 0)
            v = mb_stats_t2_limit_train(a, (int)b, (int)c);
        else if (n == 2 && strcmp(name, "t2_known") == 0)
            v = mb_stats_t2_limit_known(a, (int)b);
        else {
            fprintf(stderr,
                    "stats_driver: line %ld: unknown request '%s' with %d "
                    "numbers\n",
                    lineno, name, n);
            return 2;
        }
        printf("%.17g\n", v);
    }
    return 0;
}
