/*
 * inspect/drift.c - EWMA charts (see drift.h; NIST/SEMATECH e-Handbook
 * 6.3.2.4). The time-varying factor (1 - lambda)^(2t) is carried as a
 * running product, so a part costs a few multiplications.
 */
#include "drift.h"

#include "error.h"

#include <math.h>

void mb_drift_config_default(mb_drift_config *cfg)
{
    cfg->lambda = 0.2;
    cfg->L = 3.0;
    cfg->clear_after = 10;
}

double mb_drift_halfwidth(const mb_drift_config *cfg, double sigma, long t)
{
    double l = cfg->lambda;
    double decay2 = pow(1.0 - l, 2.0 * (double)t);
    return cfg->L * sigma * sqrt(l / (2.0 - l) * (1.0 - decay2));
}

int mb_drift_init(mb_drift_chart *c, const mb_drift_config *cfg, double target,
                  double sigma)
{
    if (!c || !cfg || !isfinite(target) || !isfinite(sigma) || !(sigma > 0) ||
        !(cfg->lambda > 0) || cfg->lambda > 1 || !(cfg->L > 0) ||
        cfg->clear_after < 1)
        return MB_EINVAL;
    c->cfg = *cfg;
    c->target = target;
    c->sigma = sigma;
    c->z = target;
    c->lcl = c->ucl = target;
    c->t = 0;
    c->decay2 = 1.0;
    c->signalling = 0;
    c->direction = 0;
    c->side = 0;
    c->run_start = 0;
    c->run_start_seq = 0;
    c->since = 0;
    c->since_seq = 0;
    c->inside_run = 0;
    return 0;
}

mb_drift_event mb_drift_add(mb_drift_chart *c, double x, uint32_t seq)
{
    if (!isfinite(x))
        return MB_DRIFT_NONE;
    double l = c->cfg.lambda;
    c->t++;
    c->z = l * x + (1.0 - l) * c->z;
    c->decay2 *= (1.0 - l) * (1.0 - l);
    double h = c->cfg.L * c->sigma * sqrt(l / (2.0 - l) * (1.0 - c->decay2));
    c->lcl = c->target - h;
    c->ucl = c->target + h;

    int side = c->z > c->target ? 1 : c->z < c->target ? -1 : 0;
    if (side != c->side || c->run_start == 0) {
        c->side = side;
        c->run_start = c->t;
        c->run_start_seq = seq;
    }
    int out = c->z > c->ucl ? 1 : c->z < c->lcl ? -1 : 0;
    if (!c->signalling) {
        if (out) {
            c->signalling = 1;
            c->direction = out;
            c->inside_run = 0;
            c->since = c->run_start;
            c->since_seq = c->run_start_seq;
            return MB_DRIFT_SIGNAL;
        }
        return MB_DRIFT_NONE;
    }
    if (out) {
        c->inside_run = 0;
        if (out != c->direction) { /* crossed to the other limit */
            c->direction = out;
            c->since = c->run_start;
            c->since_seq = c->run_start_seq;
            return MB_DRIFT_SIGNAL;
        }
        return MB_DRIFT_NONE;
    }
    if (++c->inside_run >= c->cfg.clear_after) {
        c->signalling = 0;
        c->direction = 0;
        c->inside_run = 0;
        return MB_DRIFT_CLEARED;
    }
    return MB_DRIFT_NONE;
}
