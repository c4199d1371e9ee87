/*
 * inspect/grr.c - repeatability standard deviation and %GRR (grr.h).
 * Two passes per part (mean, then squared deviations from it), so a
 * gauge reading 20.000 mm with scatter 0.001 mm loses no digits.
 */
#include "grr.h"

#include "error.h"
#include "stats.h"

#include <math.h>
#include <string.h>

mb_grr_band mb_grr_band_of(double percent_grr)
{
    if (percent_grr < 10.0)
        return MB_GRR_ACCEPTABLE;
    if (percent_grr <= 30.0)
        return MB_GRR_CONDITIONAL;
    return MB_GRR_NOT_ACCEPTABLE;
}

const char *mb_grr_band_name(mb_grr_band b)
{
    switch (b) {
    case MB_GRR_ACCEPTABLE: return "acceptable";
    case MB_GRR_CONDITIONAL: return "conditionally acceptable";
    case MB_GRR_NOT_ACCEPTABLE: return "not acceptable";
    }
    return "unknown";
}

int mb_grr_compute(const double *values, const int *counts, int n_parts,
                   double tolerance, mb_grr *out, char *err)
{
    if (!values || !counts || !out || n_parts < 1)
        return mb_err_set(err, MB_EINVAL, "repeatability: no measurements");
    if (!(tolerance > 0.0) || !isfinite(tolerance))
        return mb_err_set(err, MB_EINVAL,
                          "repeatability: tolerance %g is not a positive "
                          "number",
                          tolerance);
    memset(out, 0, sizeof *out);
    double ss = 0.0;
    long df = 0, at = 0;
    for (int p = 0; p < n_parts; p++) {
        if (counts[p] < 0)
            return mb_err_set(err, MB_EINVAL,
                              "repeatability: part %d has a negative count",
                              p + 1);
        const double *v = values + at;
        double mean = 0.0;
        for (int j = 0; j < counts[p]; j++) {
            if (!isfinite(v[j]))
                return mb_err_set(err, MB_ENUMERIC,
                                  "repeatability: part %d, measurement %d is "
                                  "not a finite number",
                                  p + 1, j + 1);
            mean += v[j];
        }
        if (counts[p] > 0)
            mean /= counts[p];
        for (int j = 0; j < counts[p]; j++)
            ss += (v[j] - mean) * (v[j] - mean);
        if (counts[p] > 1)
            df += counts[p] - 1;
        at += counts[p];
    }
    out->parts = n_parts;
    out->measurements = (int)at;
    if (df < 1)
        return mb_err_set(err, MB_EDEGENERATE,
                          "repeatability: no part was measured twice, so "
                          "there is no scatter to measure");
    out->df = (int)df;
    out->sigma = sqrt(ss / (double)df);
    double q = mb_stats_chi2_quantile(0.05, (double)df);
    out->sigma_upper = q > 0.0 ? out->sigma * sqrt((double)df / q) : INFINITY;
    out->tolerance = tolerance;
    out->percent_grr = 100.0 * 6.0 * out->sigma / tolerance;
    out->band = mb_grr_band_of(out->percent_grr);
    return MB_OK;
}
