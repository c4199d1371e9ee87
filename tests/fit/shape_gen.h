/*
 * tests/fit/shape_gen.h - random numbers and synthetic parts for the fit/
 * shape-model tests (header-only; every function static inline).
 *
 * A part here is an outer lobed ring of N_OUTER points and one round hole of
 * N_HOLE points off centre, both bent by a few smooth deformations with
 * falling variances plus small point noise, then placed with a random
 * similarity pose. Correspondence is given: point i is the same place on
 * every part.
 */
#ifndef MB_TEST_SHAPE_GEN_H
#define MB_TEST_SHAPE_GEN_H

#include "shape.h"

#include <math.h>
#include <stdint.h>

typedef struct {
    uint64_t s;
} tg_rng;

static inline double tg_uniform(tg_rng *r) /* splitmix64 -> [0, 1) */
{
    uint64_t z = (r->s += 0x9E3779B97F4A7C15ull);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
    return (double)((z ^ (z >> 31)) >> 11) * 0x1.0p-53;
}

static inline double tg_gauss(tg_rng *r) /* Box-Muller */
{
    double u = 1.0 - tg_uniform(r), v = tg_uniform(r);
    return sqrt(-2.0 * log(u)) * cos(2.0 * M_PI * v);
}

static inline mb_pose tg_random_pose(tg_rng *r)
{
    mb_pose p;
    p.scale = 50.0 + 100.0 * tg_uniform(r);
    p.angle = M_PI * (2.0 * tg_uniform(r) - 1.0);
    p.tx = 100.0 + 500.0 * tg_uniform(r);
    p.ty = 100.0 + 400.0 * tg_uniform(r);
    return p;
}

enum { TG_N_OUTER = 24, TG_N_HOLE = 12 };

static inline mb_layout tg_layout(void)
{
    mb_layout l = {2, {TG_N_OUTER, TG_N_HOLE}, TG_N_OUTER + TG_N_HOLE};
    return l;
}

/*
 * One part in model units (before the pose), deformed by `var` (0: the
 * undeformed part) with point noise `noise`; then posed with *pose when
 * pose is not NULL. x gets 2 (TG_N_OUTER + TG_N_HOLE) values.
 */
static inline void tg_part(tg_rng *r, double var, double noise,
                           const mb_pose *pose, double *x)
{
    double amp[5], ph[5];
    for (int f = 0; f < 5; f++) {
        amp[f] = var * tg_gauss(r) / (1.0 + f);
        ph[f] = 2.0 * M_PI * tg_uniform(r);
    }
    double hole_shift = 0.3 * var * tg_gauss(r);
    for (int i = 0; i < TG_N_OUTER; i++) {
        double t = 2.0 * M_PI * i / TG_N_OUTER;
        double rad = 1.0 + 0.15 * cos(3.0 * t) + 0.05 * sin(2.0 * t);
        for (int f = 0; f < 5; f++)
            rad += amp[f] * cos((f + 2) * t + ph[f]);
        x[2 * i] = rad * cos(t) + noise * tg_gauss(r);
        x[2 * i + 1] = rad * sin(t) + noise * tg_gauss(r);
    }
    for (int i = 0; i < TG_N_HOLE; i++) {
        double t = 2.0 * M_PI * i / TG_N_HOLE;
        double *p = x + 2 * (TG_N_OUTER + i);
        p[0] = 0.25 + hole_shift + 0.2 * cos(t) + noise * tg_gauss(r);
        p[1] = -0.1 + 0.2 * sin(t) + noise * tg_gauss(r);
    }
    if (pose)
        mb_pose_apply(pose, x, TG_N_OUTER + TG_N_HOLE, x);
}

/* A loud comparison for cmocka tests: names both sides and the tolerance. */
#ifdef fail_msg
#define TG_NEAR(a, b, tol)                                                     \
    do {                                                                       \
        double tg_a_ = (a), tg_b_ = (b), tg_t_ = (tol);                        \
        if (!(fabs(tg_a_ - tg_b_) <= tg_t_))                                   \
            fail_msg("%s = %.17g but %s = %.17g (tolerance %g)", #a, tg_a_,    \
                     #b, tg_b_, tg_t_);                                        \
    } while (0)
#endif

#endif
