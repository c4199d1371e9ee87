/*
 * tests/bench/bench_search.c - time one inspection's fit on 1280 x 1024
 * frames on one core: pyramid build, coarse location, multi-resolution ASM
 * search with the full-resolution sub-pixel measurement.
 *
 * For every family of the synthetic line (capture/synth.h: ring, flange,
 * hose, lipseal; 0.1 mm/px, blur 1 px, noise 2 grey levels) and both
 * lightings (back-lit, front-lit), a part is taught from 20 good frames
 * (tests/fit/synth_teach.h: outlines, correspondence, 256 landmarks, 99.5 %
 * of the shape variance, 4 pyramid levels); then 10 new good parts are each
 * inspected RUNS times. Printed per family and lighting: median and 99th
 * percentile ms of the pyramid build, of locate, of search + measurement,
 * of locate + search + measurement (pyramid excluded) and of all three;
 * start poses and iterations per level; the measured outline's RMS and
 * largest distance to the generator's true outline; allocations counted
 * over the timed frames (must be 0); one memcpy of the frame as the floor.
 *
 * usage: bench_search [RUNS [FAMILY]]   (default 20, every family)
 * Registered under ctest with the label "bench"; it skips itself (exit 77)
 * when run from ctest unless MB_BENCH=1 is set:
 *     MB_BENCH=1 ctest --test-dir build -L bench -V
 */
#include "alloc_count.h"
#include "asm.h"
#include "error.h"
#include "locate.h"
#include "synth_teach.h"

#include <cblas.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#define W 1280
#define H 1024
#define LEVELS 4
#define POINTS 256
#define PARTS 10


static double now_ms(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return ts.tv_sec * 1e3 + ts.tv_nsec * 1e-6;
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* median and 99th percentile (nearest rank) of v; sorts v */
static void stats(double *v, int n, double *med, double *p99)
{
    qsort(v, (size_t)n, sizeof *v, cmp_double);
    *med = n % 2 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]);
    int r = (int)ceil(0.99 * n) - 1;
    *p99 = v[r < 0 ? 0 : r];
}

static void die(const char *what, int rc, const char *err)
{
    fprintf(stderr, "bench_search: %s failed: %s (%s)\n", what,
            mb_strerror(rc), err ? err : "");
    exit(1);
}

/* Memory for the truths of the timed frames (the generator reuses its). */
typedef struct {
    mb_polyline_set set;
    double *xy;
} kept_truth;

int main(int argc, char **argv)
{
    if (getenv("MB_BENCH_GATED") && !(getenv("MB_BENCH") && !strcmp(getenv("MB_BENCH"), "1"))) {
        printf("bench_search: skipped (set MB_BENCH=1 to run)\n");
        return 77;
    }
    const int runs = argc > 1 ? atoi(argv[1]) : 20;
    const int only = argc > 2 ? mb_synth_family_from_name(argv[2]) : -1;
    if (runs < 1 || (argc > 2 && only < 0)) {
        fprintf(stderr, "usage: bench_search [RUNS [FAMILY]]\n");
        return 2;
    }
    openblas_set_num_threads(1); /* the station runs BLAS on one core */
    char err[MB_ERR_LEN] = "";
    mb_image frames[PARTS], copy;
    kept_truth truths[PARTS];
    int rc;
    if ((rc = mb_image_alloc(W, H, &copy)) != MB_OK)
        die("image", rc, NULL);
    for (int j = 0; j < PARTS; j++)
        if ((rc = mb_image_alloc(W, H, &frames[j])) != MB_OK)
            die("image", rc, NULL);
    const int total = runs * PARTS;
    double *t_pyr = malloc(sizeof(double) * total), *t_loc = malloc(sizeof(double) * total);
    double *t_fit = malloc(sizeof(double) * total), *t_lf = malloc(sizeof(double) * total);
    double *t_all = malloc(sizeof(double) * total), *t_cpy = malloc(sizeof(double) * total);
    if (!t_pyr || !t_loc || !t_fit || !t_lf || !t_all || !t_cpy)
        die("malloc", MB_ENOMEM, NULL);

    printf("bench_search: %d x %d frames, %d levels, %d landmarks, %d parts x %d "
           "runs per family and lighting, one core\n", W, H, LEVELS, POINTS, PARTS, runs);
    for (int fam = 0; fam < MB_SYNTH_N_FAMILIES; fam++)
        for (int light = 0; light < 2 && (only < 0 || fam == only); light++) {
            mb_synth_config cfg;
            mb_synth_config_default(&cfg, (mb_synth_family)fam);
            cfg.width = W;
            cfg.height = H;
            cfg.lighting = light ? MB_SYNTH_FRONTLIT : MB_SYNTH_BACKLIT;
            cfg.seed = 40 + (uint64_t)(2 * fam + light);
            synth_taught t;
            double t0 = now_ms();
            if ((rc = synth_teach(&cfg, 20, POINTS, 0.995, LEVELS, &t, err)) != MB_OK)
                die("teach", rc, err);
            double teach_ms = now_ms() - t0;
            mb_locate *loc = NULL;
            mb_asm *as = NULL;
            if ((rc = mb_locate_create(t.sm, t.pm, W, H, NULL, &loc, err)) != MB_OK)
                die("locate create", rc, err);
            if ((rc = mb_asm_create(t.sm, t.pm, W, H, NULL, &as, err)) != MB_OK)
                die("search create", rc, err);
            for (int j = 0; j < PARTS; j++) {
                mb_synth_truth truth;
                if ((rc = mb_synth_make(t.gen, 1000u + (uint64_t)j, 0, MB_SYNTH_NONE,
                                        &frames[j], &truth)) != MB_OK)
                    die("synth", rc, NULL);
                int n = 0;
                for (int o = 0; o < truth.outlines.n_outlines; o++)
                    n += truth.outlines.counts[o];
                truths[j].set = truth.outlines;
                truths[j].xy = malloc(sizeof(double) * 2 * (size_t)n);
                if (!truths[j].xy)
                    die("malloc", MB_ENOMEM, NULL);
                memcpy(truths[j].xy, truth.outlines.xy, sizeof(double) * 2 * (size_t)n);
                truths[j].set.xy = truths[j].xy;
            }
            /* first frame outside the timing and the allocation count */
            mb_locate_result lr;
            mb_asm_result r;
            mb_pyramid_build(t.pyr, &frames[0]);
            mb_locate_run(loc, t.pyr, &lr);
            mb_asm_search(as, t.pyr, lr.candidates, lr.n_candidates, &r);

            long allocs0 = mb_allocs();
            int q = 0, failed = 0, notconv = 0, starts = 0, mrounds = 0, frounds = 0;
            double ss = 0.0, worst = 0.0, iters[LEVELS] = {0};
            long npts = 0;
            for (int rep = 0; rep < runs; rep++)
                for (int j = 0; j < PARTS; j++, q++) {
                    double a = now_ms();
                    memcpy(copy.pixels, frames[j].pixels, (size_t)frames[j].stride * H);
                    double b = now_ms();
                    mb_pyramid_build(t.pyr, &frames[j]);
                    double c = now_ms();
                    int lrc = mb_locate_run(loc, t.pyr, &lr);
                    double d = now_ms();
                    int src = lrc == MB_OK ? mb_asm_search(as, t.pyr, lr.candidates,
                                                           lr.n_candidates, &r)
                                           : lrc;
                    double e = now_ms();
                    t_cpy[q] = b - a;
                    t_pyr[q] = c - b;
                    t_loc[q] = d - c;
                    t_fit[q] = e - d;
                    t_lf[q] = e - c;
                    t_all[q] = e - b;
                    if (src != MB_OK) {
                        failed++;
                        continue;
                    }
                    notconv += !r.converged;
                    starts += r.n_starts;
                    mrounds += r.measure_rounds;
                    frounds += r.follow_rounds;
                    for (int l = 0; l < LEVELS; l++)
                        iters[l] += r.iterations[l];
                    if (rep == 0)
                        for (int i = 0; i < r.n_points; i++) {
                            if (!r.valid[i])
                                continue;
                            double dd = synth_truth_distance(&truths[j].set, r.measured_xy[2 * i],
                                                             r.measured_xy[2 * i + 1]);
                            ss += dd * dd;
                            worst = fmax(worst, dd);
                            npts++;
                        }
                }
            long allocs = mb_allocs() - allocs0;
            double m_pyr, p_pyr, m_loc, p_loc, m_fit, p_fit, m_lf, p_lf, m_all, p_all, m_cpy, p_cpy;
            stats(t_pyr, total, &m_pyr, &p_pyr);
            stats(t_loc, total, &m_loc, &p_loc);
            stats(t_fit, total, &m_fit, &p_fit);
            stats(t_lf, total, &m_lf, &p_lf);
            stats(t_all, total, &m_all, &p_all);
            stats(t_cpy, total, &m_cpy, &p_cpy);
            /* the same builds with the 16-byte kernels (fit/pyramid.h) */
            const int wide = mb_pyramid_use_wide(t.pyr, 1);
            mb_pyramid_use_wide(t.pyr, 0);
            for (q = 0; q < total; q++) {
                double a = now_ms();
                mb_pyramid_build(t.pyr, &frames[q % PARTS]);
                t_pyr[q] = now_ms() - a;
            }
            mb_pyramid_use_wide(t.pyr, 1);
            double m_pyr16, p_pyr16;
            stats(t_pyr, total, &m_pyr16, &p_pyr16);
            const int ok = total - failed;
            printf("\n%s, %s-lit (%d modes, taught from %d frames in %.1f s): %d of %d "
                   "runs failed, %d not converged\n", mb_synth_family_name(fam),
                   mb_synth_lighting_name(cfg.lighting), mb_shape_model_n_modes(t.sm),
                   t.n_used, teach_ms / 1e3, failed, total, notconv);
            printf("  %-28s median %7.3f ms   p99 %7.3f ms\n", "memcpy of the frame", m_cpy, p_cpy);
            printf("  %-28s median %7.3f ms   p99 %7.3f ms\n",
                   wide ? "pyramid build (32-byte)" : "pyramid build", m_pyr, p_pyr);
            printf("  %-28s median %7.3f ms   p99 %7.3f ms\n", "pyramid build (16-byte)",
                   m_pyr16, p_pyr16);
            printf("  %-28s median %7.3f ms   p99 %7.3f ms\n", "locate", m_loc, p_loc);
            printf("  %-28s median %7.3f ms   p99 %7.3f ms\n", "search + measurement", m_fit, p_fit);
            printf("  %-28s median %7.3f ms   p99 %7.3f ms\n", "locate + search + measure", m_lf, p_lf);
            printf("  %-28s median %7.3f ms   p99 %7.3f ms\n", "all, pyramid included", m_all, p_all);
            printf("  start poses per frame %.1f; iterations per level 3/2/1: %.2f %.2f %.2f\n",
                   ok ? (double)starts / ok : 0.0, ok ? iters[3] / ok : 0.0,
                   ok ? iters[2] / ok : 0.0, ok ? iters[1] / ok : 0.0);
            printf("  measurement rounds per frame %.2f, outline-following fits %.2f\n",
                   ok ? (double)mrounds / ok : 0.0, ok ? (double)frounds / ok : 0.0);
            printf("  measured outline vs truth: RMS %.3f px, max %.3f px over %ld points\n",
                   npts ? sqrt(ss / npts) : NAN, worst, npts);
            printf("  allocations in %d timed frames: %ld\n", total, allocs);
            for (int j = 0; j < PARTS; j++)
                free(truths[j].xy);
            mb_asm_close(as);
            mb_locate_close(loc);
            synth_forget(&t);
        }
    free(t_pyr);
    free(t_loc);
    free(t_fit);
    free(t_lf);
    free(t_all);
    free(t_cpy);
    for (int j = 0; j < PARTS; j++)
        mb_image_free(&frames[j]);
    mb_image_free(&copy);
    return 0;
}
