/*
 * tests/bench/bench_synth.c - the synthetic line on 1280 x 1024 frames:
 * milliseconds per frame (median, p99, mean) per family and lighting, for
 * good parts and for a 30 % defect mix (deformed and wrong-variant parts
 * cost more: their size is measured on the geometry); allocations per frame
 * after the first (malloc/calloc/realloc wrapped; must be 0); and the time
 * to write one frame as PGM and PNG and its labels line.
 * Figures only, no pass/fail. Under ctest (label "bench") it skips itself
 * (exit 77) unless MB_BENCH=1:  MB_BENCH=1 ctest --test-dir build -R
 * bench_synth -V or run build/tests/bench/bench_synth [FRAMES].
 */
#include "alloc_count.h"
#include "error.h"
#include "image.h"
#include "image_file.h"
#include "labels_file.h"
#include "synth.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>



static double now_ms(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return 1e3 * (double)t.tv_sec + 1e-6 * (double)t.tv_nsec;
}

static int cmp(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

int main(int argc, char **argv)
{
    if (getenv("MB_BENCH_GATED") && !getenv("MB_BENCH")) {
        printf("bench_synth: skipped (set MB_BENCH=1 to run)\n");
        return 77;
    }
    int frames = argc > 1 ? atoi(argv[1]) : 60;
    if (frames < 2)
        frames = 2;
    char err[MB_ERR_LEN];
    double *t = malloc(sizeof(double) * (size_t)frames);
    mb_image im;
    if (!t || mb_image_alloc(1280, 1024, &im) < 0)
        return 1;
    printf("synthetic line, 1280x1024, 0.1 mm/px, noise 2, blur 1: ms per "
           "frame\n");
    printf("%-8s %-6s %-10s %8s %8s %8s %14s\n", "family", "light", "parts",
           "median", "p99", "mean", "allocs/frame");
    for (int f = 0; f < MB_SYNTH_N_FAMILIES; f++)
        for (int light = 0; light < 2; light++)
            for (int mix = 0; mix < 2; mix++) {
                mb_synth_config c;
                mb_synth_config_default(&c, (mb_synth_family)f);
                c.lighting = (mb_synth_lighting)light;
                c.defect_rate = mix ? 0.3 : 0.0;
                mb_synth *g = NULL;
                if (mb_synth_open(&c, &g, err) < 0) {
                    fprintf(stderr, "bench_synth: %s\n", err);
                    return 1;
                }
                mb_synth_next(g, &im, NULL); /* first frame: page faults */
                long a0 = mb_allocs();
                double sum = 0;
                for (int i = 0; i < frames; i++) {
                    double s = now_ms();
                    mb_synth_next(g, &im, NULL);
                    t[i] = now_ms() - s;
                    sum += t[i];
                }
                long a = mb_allocs() - a0;
                qsort(t, (size_t)frames, sizeof *t, cmp);
                printf("%-8s %-6s %-10s %8.2f %8.2f %8.2f %14.2f\n",
                       mb_synth_family_name(f), mb_synth_lighting_name(light),
                       mix ? "30% defect" : "good", t[frames / 2],
                       t[(int)(0.99 * (frames - 1))], sum / frames,
                       (double)a / frames);
                mb_synth_close(g);
            }
    /* writing one frame and its label */
    mb_synth_config c;
    mb_synth_config_default(&c, MB_SYNTH_FLANGE);
    mb_synth *g = NULL;
    mb_synth_truth truth;
    if (mb_synth_open(&c, &g, err) < 0 || mb_synth_next(g, &im, &truth) < 0)
        return 1;
    char dir[] = "/tmp/mb_bench_synth_XXXXXX", path[256];
    if (!mkdtemp(dir))
        return 1;
    const char *what[3] = {"PGM", "PNG", "labels line"};
    for (int k = 0; k < 3; k++) {
        double best = 1e30;
        for (int rep = 0; rep < 5; rep++) {
            double s = now_ms();
            int rc = 0;
            if (k == 0) {
                snprintf(path, sizeof path, "%s/f.pgm", dir);
                rc = mb_image_save_pgm(path, &im, err);
            } else if (k == 1) {
                snprintf(path, sizeof path, "%s/f.png", dir);
                rc = mb_image_save_png(path, &im, err);
            } else {
                snprintf(path, sizeof path, "%s/labels.jsonl", dir);
                mb_labels_writer *w = NULL;
                rc = mb_labels_writer_open(path, &w, err);
                if (rc == 0)
                    rc = mb_labels_write(w, "f.pgm", &truth, err);
                if (rc == 0)
                    rc = mb_labels_writer_close(w, err);
            }
            if (rc < 0) {
                fprintf(stderr, "bench_synth: %s\n", err);
                return 1;
            }
            double e = now_ms() - s;
            best = e < best ? e : best;
        }
        printf("write one flange frame's %-12s best of 5: %7.2f ms\n", what[k],
               best);
        unlink(path);
    }
    rmdir(dir);
    mb_synth_close(g);
    mb_image_free(&im);
    free(t);
    return 0;
}
