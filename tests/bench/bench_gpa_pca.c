/*
 * tests/bench/bench_gpa_pca.c - time the model build (GPA + PCA,
 * mb_shape_model_build) on 500 shapes x 256 points, on one core.
 *
 * The shapes are realistic rather than white noise: one closed outline (a
 * lobed ring, r(t) = 1 + 0.12 cos 3t + 0.05 sin 5t) bent by a handful of
 * smooth random deformations with falling variances, a little point noise,
 * and a random placement (scale 80..120 px, any angle, offset 200..400 px).
 *
 * usage: bench_gpa_pca DATA_OUT [RUNS] [SEED]
 * Writes the shapes to DATA_OUT (raw little-endian doubles, shape after
 * shape, x0 y0 x1 y1 ...) so that bench_gpa_pca_numpy.py times the same
 * computation on the same data, and DATA_OUT.eig (the eigenvalues found,
 * one per line) so that the script can check both did the same sums.
 * Prints the median, min and max of the wall and the CPU time; the last
 * lines are machine-readable:
 *     c_median_ms=<wall>
 *     c_median_cpu_ms=<cpu>
 */
#include "shape_model.h"

#include "error.h"

#include <cblas.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#define N_SHAPES 500
#define N_POINTS 256
#define N_DEFORM 8

static uint64_t rng;

static double uniform(void) /* splitmix64 -> [0, 1) */
{
    uint64_t z = (rng += 0x9E3779B97F4A7C15ull);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
    return (double)((z ^ (z >> 31)) >> 11) * 0x1.0p-53;
}

static double gauss(void) /* Box-Muller */
{
    double u = 1.0 - uniform(), v = uniform();
    return sqrt(-2.0 * log(u)) * cos(2.0 * M_PI * v);
}

static void make_shape(double *x)
{
    double amp[N_DEFORM], ph[N_DEFORM];
    for (int f = 0; f < N_DEFORM; f++) {
        amp[f] = 0.03 * gauss() / (1.0 + f); /* falling variances */
        ph[f] = 2.0 * M_PI * uniform();
    }
    double s = 80.0 + 40.0 * uniform(), a = 2.0 * M_PI * uniform();
    double tx = 200.0 + 200.0 * uniform(), ty = 200.0 + 200.0 * uniform();
    for (int i = 0; i < N_POINTS; i++) {
        double t = 2.0 * M_PI * i / N_POINTS;
        double r = 1.0 + 0.12 * cos(3 * t) + 0.05 * sin(5 * t);
        for (int f = 0; f < N_DEFORM; f++)
            r += amp[f] * cos((f + 2) * t + ph[f]);
        double px = r * cos(t) + 0.002 * gauss();
        double py = r * sin(t) + 0.002 * gauss();
        x[2 * i] = s * (cos(a) * px - sin(a) * py) + tx;
        x[2 * i + 1] = s * (sin(a) * px + cos(a) * py) + ty;
    }
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* Wall time, and the CPU time of this process (user + system, all
   threads): on a shared machine the CPU time is the steadier figure. */
static double now_ms(clockid_t clock)
{
    struct timespec ts;
    clock_gettime(clock, &ts);
    return ts.tv_sec * 1e3 + ts.tv_nsec * 1e-6;
}

static double median(double *v, int n)
{
    qsort(v, (size_t)n, sizeof *v, cmp_double);
    return n % 2 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]);
}

int main(int argc, char **argv)
{
    if (argc < 2) {
        fprintf(stderr, "usage: bench_gpa_pca DATA_OUT [RUNS] [SEED]\n");
        return 2;
    }
    int runs = argc > 2 ? atoi(argv[2]) : 15;
    rng = argc > 3 ? strtoull(argv[3], NULL, 10) : 20240611u;
    if (runs < 1)
        runs = 1;
    openblas_set_num_threads(1); /* the station runs BLAS on one core */

    const int d = 2 * N_POINTS;
    double *shapes = malloc((size_t)d * N_SHAPES * sizeof *shapes);
    double *ms = malloc(2 * (size_t)runs * sizeof *ms), *cpu = ms + runs;
    if (!shapes || !ms) {
        fprintf(stderr, "bench_gpa_pca: out of memory\n");
        return 1;
    }
    for (int j = 0; j < N_SHAPES; j++)
        make_shape(shapes + (size_t)j * d);
    FILE *f = fopen(argv[1], "wb");
    if (!f ||
        fwrite(shapes, sizeof *shapes, (size_t)d * N_SHAPES, f) !=
            (size_t)d * N_SHAPES ||
        fclose(f) != 0) {
        fprintf(stderr, "bench_gpa_pca: cannot write %s\n", argv[1]);
        return 1;
    }

    mb_layout layout = {1, {N_POINTS}, N_POINTS};
    char err[MB_ERR_LEN] = "";
    mb_shape_model *model = NULL;
    /* One warm-up build (page faults, OpenBLAS start-up), then the runs. */
    for (int r = -1; r < runs; r++) {
        mb_shape_model_close(model);
        model = NULL;
        double t0 = now_ms(CLOCK_MONOTONIC);
        double c0 = now_ms(CLOCK_PROCESS_CPUTIME_ID);
        int rc = mb_shape_model_build(shapes, d, &layout, N_SHAPES, NULL, NULL,
                                      NULL, &model, err);
        double c1 = now_ms(CLOCK_PROCESS_CPUTIME_ID);
        double t1 = now_ms(CLOCK_MONOTONIC);
        if (rc < 0) {
            fprintf(stderr, "bench_gpa_pca: build failed: %s\n", err);
            return 1;
        }
        if (r >= 0) {
            ms[r] = t1 - t0;
            cpu[r] = c1 - c0;
        }
    }
    double med = median(ms, runs), med_cpu = median(cpu, runs);

    const mb_train_info *ti = mb_shape_model_info(model);
    int k = mb_shape_model_n_modes(model), n_eig = mb_shape_model_n_eig(model);
    char path[4096];
    snprintf(path, sizeof path, "%s.eig", argv[1]);
    f = fopen(path, "w");
    if (!f) {
        fprintf(stderr, "bench_gpa_pca: cannot write %s\n", path);
        return 1;
    }
    const double *eig = mb_shape_model_eig(model);
    for (int i = 0; i < n_eig; i++)
        fprintf(f, "%.17g\n", eig[i]);
    fclose(f);

    printf("C (modeband): GPA + PCA of %d shapes x %d points, 1 BLAS thread\n",
           N_SHAPES, N_POINTS);
    printf("  %d GPA iterations (converged %d), %d of %d modes kept for 98%% "
           "of the variance, %s route\n",
           ti->gpa_iterations, ti->gpa_converged, k, n_eig,
           d <= N_SHAPES ? "covariance" : "Gram-matrix");
    printf("  wall: median %.2f ms over %d runs (min %.2f, max %.2f)\n", med,
           runs, ms[0], ms[runs - 1]);
    printf("  CPU:  median %.2f ms (min %.2f, max %.2f)\n", med_cpu, cpu[0],
           cpu[runs - 1]);
    printf("  OpenBLAS: %s\n", openblas_get_config());
    printf("c_median_ms=%.3f\nc_median_cpu_ms=%.3f\n", med, med_cpu);
    mb_shape_model_close(model);
    free(shapes);
    free(ms);
    return 0;
}
