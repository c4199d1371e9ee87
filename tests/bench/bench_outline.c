/*
 * tests/bench/bench_outline.c - time the outliner (fit/outline.h) on
 * 1280 x 1024 frames, one core.
 *
 * Two back-lit parts rendered with tests/fit/outline_scene.c (blur sigma 1
 * px, noise sigma 2 grey levels) at 0.1 mm per px: a ring 40 / 30 mm and a
 * flange 34 x 26 mm with 5 mm corners, an 18 x 9 mm stadium opening and
 * four bolt holes of 3.2 mm. For each: 200 runs of mb_outliner_run with
 * the default configuration (working level 2, 1024 points) and with 256
 * points; median and 99th percentile wall time; the pyramid build alone;
 * and one memcpy of the frame as the floor. Also the RMS distance of the
 * points to the true outlines and the number of allocations during the
 * timed runs (malloc, calloc, realloc wrapped at link time: must be 0).
 *
 * usage: bench_outline [RUNS]
 * Under ctest (label "bench") it skips itself (exit 77) unless MB_BENCH=1.
 */
#include "alloc_count.h"
#include "error.h"
#include "outline.h"
#include "outline_scene.h"
#include "pyramid.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>


enum { W = 1280, H = 1024 };

static double now_ms(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return 1e3 * (double)t.tv_sec + 1e-6 * (double)t.tv_nsec;
}

/* CPU time of this thread: not inflated when other processes share the
 * cores (wall time is what the station sees; both are printed) */
static double cpu_ms(void)
{
    struct timespec t;
    clock_gettime(CLOCK_THREAD_CPUTIME_ID, &t);
    return 1e3 * (double)t.tv_sec + 1e-6 * (double)t.tv_nsec;
}

static int cmp(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* median and 99th percentile (nearest rank) of n times, sorted in place */
static void stats(double *t, int n, double *median, double *p99)
{
    qsort(t, (size_t)n, sizeof *t, cmp);
    *median = n % 2 ? t[n / 2] : 0.5 * (t[n / 2 - 1] + t[n / 2]);
    int k = (int)ceil(0.99 * n) - 1;
    *p99 = t[k < 0 ? 0 : k];
}

static scene_shape placed(int type, double cx, double cy, double angle,
                          double u, double v, double a, double b, double r)
{
    scene_shape s = {type,
                     cx + cos(angle) * u - sin(angle) * v,
                     cy + sin(angle) * u + cos(angle) * v,
                     a,
                     b,
                     r,
                     angle};
    return s;
}

static void make_scene(int flange, scene *sc)
{
    memset(sc, 0, sizeof *sc);
    sc->part = 22;
    sc->back = 215;
    sc->blur = 1;
    sc->noise = 2;
    sc->seed = 2024 + (uint64_t)flange;
    sc->n_solid = 1;
    if (!flange) {
        sc->solid[0] = (scene_shape){SCENE_CIRCLE, 652.3, 497.8, 200, 0, 0, 0};
        sc->n_hole = 1;
        sc->hole[0] = (scene_shape){SCENE_CIRCLE, 652.3, 497.8, 150, 0, 0, 0};
        return;
    }
    const double cx = 618.6, cy = 530.2, ang = 0.52;
    sc->solid[0] = placed(SCENE_RRECT, cx, cy, ang, 0, 0, 170, 130, 50);
    sc->n_hole = 5;
    sc->hole[0] = placed(SCENE_RRECT, cx, cy, ang, 0, 0, 90, 45, 45);
    for (int k = 0; k < 4; k++)
        sc->hole[1 + k] = placed(SCENE_CIRCLE, cx, cy, ang, k % 2 ? 130 : -130,
                                 k / 2 ? 90 : -90, 16, 0, 0);
}

static int bench(const char *name, const scene *sc, const mb_image *img,
                 int points, int runs)
{
    mb_outline_config cfg;
    mb_outline_config_default(&cfg);
    cfg.points = points;
    mb_outliner *o;
    mb_outline_result res;
    char err[MB_ERR_LEN];
    if (mb_outliner_create(W, H, &cfg, &o, err) != 0) {
        fprintf(stderr, "bench_outline: %s\n", err);
        return 1;
    }
    double *t = malloc(sizeof(double) * (size_t)runs);
    double *c = malloc(sizeof(double) * (size_t)runs);
    if (!t || !c)
        return 1;
    if (mb_outliner_run(o, img, &res, err) != 0) { /* warm-up */
        fprintf(stderr, "bench_outline: %s: %s\n", name, err);
        return 1;
    }
    long before = mb_allocs();
    for (int r = 0; r < runs; r++) {
        double t0 = now_ms(), c0 = cpu_ms();
        int rc = mb_outliner_run(o, img, &res, err);
        t[r] = now_ms() - t0;
        c[r] = cpu_ms() - c0;
        if (rc) {
            fprintf(stderr, "bench_outline: %s: %s\n", name, err);
            return 1;
        }
    }
    long allocs = mb_allocs() - before;
    double med, p99, cmed, cp99;
    stats(t, runs, &med, &p99);
    stats(c, runs, &cmed, &cp99);
    double ss = 0;
    for (int k = 0; k < res.layout.n_points; k++) {
        double d = scene_outline_distance(sc, res.points[2 * k],
                                          res.points[2 * k + 1]);
        ss += d * d;
    }
    printf("%-7s %4d points, %d outlines: wall median %.3f ms, p99 %.3f ms "
           "(thread CPU median "
           "%.3f ms, p99 %.3f ms); RMS to truth %.4f px; allocations during "
           "runs %ld\n",
           name, res.layout.n_points, res.layout.n_outlines, med, p99, cmed,
           cp99, sqrt(ss / res.layout.n_points), allocs);
    free(t);
    free(c);
    mb_outliner_close(o);
    return allocs != 0;
}

int main(int argc, char **argv)
{
    if (getenv("MB_BENCH_GATED") && !getenv("MB_BENCH")) {
        printf("bench_outline: skipped (set MB_BENCH=1 to run)\n");
        return 77;
    }
    int runs = argc > 1 ? atoi(argv[1]) : 200;
    if (runs < 1)
        runs = 200;
    mb_image img, copy;
    if (mb_image_alloc(W, H, &img) != 0 || mb_image_alloc(W, H, &copy) != 0)
        return 1;
    double *t = malloc(sizeof(double) * (size_t)runs);
    if (!t)
        return 1;
    printf("bench_outline: %d x %d frames, %d runs each, one core\n", W, H,
           runs);

    /* the floor: one copy of the frame */
    size_t bytes = (size_t)img.stride * (size_t)H;
    for (int r = 0; r < runs; r++) {
        double t0 = now_ms();
        memcpy(copy.pixels, img.pixels, bytes);
        t[r] = now_ms() - t0;
        img.pixels[r % bytes] ^=
            copy.pixels[(r * 7919) % bytes] & 1; /* keep it honest */
    }
    double med, p99;
    stats(t, runs, &med, &p99);
    printf("memcpy of the frame (%zu bytes): median %.3f ms, p99 %.3f ms\n",
           bytes, med, p99);

    mb_pyramid *pyr;
    if (mb_pyramid_create(W, H, 3, &pyr) != 0)
        return 1;
    for (int r = 0; r < runs; r++) {
        double t0 = now_ms();
        mb_pyramid_build(pyr, &img);
        t[r] = now_ms() - t0;
    }
    stats(t, runs, &med, &p99);
    printf("pyramid build, levels 1-2: median %.3f ms, p99 %.3f ms\n", med,
           p99);
    mb_pyramid_close(pyr);

    int bad = 0;
    for (int flange = 0; flange < 2; flange++) {
        scene sc;
        make_scene(flange, &sc);
        scene_render(&sc, &img);
        bad |= bench(flange ? "flange" : "ring", &sc, &img, 1024, runs);
        bad |= bench(flange ? "flange" : "ring", &sc, &img, 256, runs);
    }
    free(t);
    mb_image_free(&img);
    mb_image_free(&copy);
    return bad;
}
