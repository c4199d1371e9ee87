/*
 * tests/fit/profile_driver.c - runs the profile learner on rendered ring
 * frames and writes everything ref_profile.py needs to redo the sums with
 * numpy and scipy: the pyramid level images, the landmarks, our normals,
 * the model (means, regularised covariances, grey levels, area, size), and
 * our Mahalanobis costs of profiles at shifted positions on a new frame.
 *
 * usage: profile_driver OUTDIR
 * Writes OUTDIR/out.json and OUTDIR/f<j>_l<L>.raw (8-bit level images, row
 * after row, width x height as given in out.json; frame j = M is the test
 * frame).
 */
#include "asm_parts.h"
#include "error.h"
#include "profile.h"
#include "pyramid.h"

#include <stdio.h>
#include <stdlib.h>

#define W 320
#define H 256
#define LEVELS 3
#define M 6
#define POINTS 64

static void fail(const char *what)
{
    fprintf(stderr, "profile_driver: %s\n", what);
    exit(1);
}

static void print_array(FILE *f, const double *v, int n)
{
    fputc('[', f);
    for (int i = 0; i < n; i++)
        fprintf(f, "%s%.17g", i ? "," : "", v[i]);
    fputc(']', f);
}

static void dump_levels(const char *dir, int j, const mb_pyramid *pyr)
{
    for (int l = 0; l < LEVELS; l++) {
        const mb_image *img = mb_pyramid_level(pyr, l);
        char path[1024];
        snprintf(path, sizeof path, "%s/f%d_l%d.raw", dir, j, l);
        FILE *f = fopen(path, "wb");
        if (!f)
            fail("cannot write a level image");
        for (int y = 0; y < img->height; y++)
            if (fwrite(img->pixels + (size_t)y * img->stride, 1, (size_t)img->width, f) !=
                (size_t)img->width)
                fail("short write");
        fclose(f);
    }
}

int main(int argc, char **argv)
{
    if (argc != 2) {
        fprintf(stderr, "usage: profile_driver OUTDIR\n");
        return 2;
    }
    const char *dir = argv[1];
    mb_layout lay;
    asmp_layout(ASMP_RING, POINTS, &lay);
    asmp_look lk = asmp_backlit();
    mb_image img;
    mb_pyramid *pyr = NULL;
    mb_profile_learner *pl = NULL;
    mb_profile_model *pm = NULL;
    mb_profile_params pp;
    mb_profile_params_default(&pp);
    pp.levels = LEVELS;
    pp.shrink = 0.2; /* not the default, so the formula is exercised */
    pp.floor = 3e-5;
    char err[MB_ERR_LEN];
    if (mb_image_alloc(W, H, &img) || mb_pyramid_create(W, H, LEVELS, &pyr) ||
        mb_profile_learner_create(&lay, &pp, &pl, err))
        fail("set-up");
    static double xy[M + 1][2 * POINTS], nxy[M + 1][2 * POINTS];
    uint64_t rng = 2024;
    for (int j = 0; j <= M; j++) {
        asmp_part part = asmp_random(ASMP_RING, 80.0, W, H, &rng);
        scene sc;
        asmp_landmarks(&part, &lay, xy[j]);
        if (mb_profile_normals(&lay, xy[j], nxy[j]) != MB_OK)
            fail("normals");
        asmp_scene(&part, &lk, 77u + (uint64_t)j, &sc);
        scene_render(&sc, &img);
        if (mb_pyramid_build(pyr, &img) != MB_OK)
            fail("pyramid");
        dump_levels(dir, j, pyr);
        if (j < M) {
            if (mb_profile_learner_add(pl, pyr, xy[j], err) != MB_OK)
                fail(err);
        }
    }
    if (mb_profile_learner_finish(pl, &pm, err) != MB_OK)
        fail(err);

    char path[1024];
    snprintf(path, sizeof path, "%s/out.json", dir);
    FILE *f = fopen(path, "w");
    if (!f)
        fail("cannot write out.json");
    const int p = mb_profile_model_len(pm), k = (p - 1) / 2;
    const mb_profile_stats *st = mb_profile_model_stats(pm);
    fprintf(f, "{\"m\":%d,\"levels\":%d,\"k\":%d,\"shrink\":%.17g,\"floor\":%.17g,",
            M, LEVELS, k, pp.shrink, pp.floor);
    fprintf(f, "\"counts\":[%d,%d],\"sizes\":[", lay.counts[0], lay.counts[1]);
    for (int l = 0; l < LEVELS; l++) {
        const mb_image *li = mb_pyramid_level(pyr, l);
        fprintf(f, "%s[%d,%d]", l ? "," : "", li->width, li->height);
    }
    fprintf(f, "],\"stats\":{\"n_samples\":%d,\"part_grey\":%.17g,\"back_grey\":%.17g,"
            "\"area\":%.17g,\"size\":%.17g},",
            st->n_samples, st->part_grey, st->back_grey, st->area, st->size);
    fprintf(f, "\"landmarks\":[");
    for (int j = 0; j <= M; j++) {
        fputs(j ? "," : "", f);
        print_array(f, xy[j], 2 * POINTS);
    }
    fprintf(f, "],\"normals\":[");
    for (int j = 0; j <= M; j++) {
        fputs(j ? "," : "", f);
        print_array(f, nxy[j], 2 * POINTS);
    }
    fprintf(f, "],\"means\":[");
    for (int l = 0; l < LEVELS; l++)
        for (int i = 0; i < POINTS; i++) {
            fputs(l || i ? "," : "", f);
            print_array(f, mb_profile_model_mean(pm, l, i), p);
        }
    fprintf(f, "],\"covs\":[");
    for (int l = 0; l < LEVELS; l++)
        for (int i = 0; i < POINTS; i++) {
            fputs(l || i ? "," : "", f);
            print_array(f, mb_profile_model_cov(pm, l, i), p * p);
        }
    /* costs on the test frame (still in the pyramid) at shifts -2..2 */
    fprintf(f, "],\"costs\":[");
    double g[2 * MB_PROFILE_MAX_HALF + 1], work[2 * MB_PROFILE_MAX_HALF + 1];
    int first = 1;
    for (int l = 0; l < LEVELS; l++) {
        const mb_image *li = mb_pyramid_level(pyr, l);
        const double down = 1.0 / (1 << l);
        for (int i = 0; i < POINTS; i++)
            for (int s = -2; s <= 2; s++) {
                double x = xy[M][2 * i] * down + s * nxy[M][2 * i];
                double y = xy[M][2 * i + 1] * down + s * nxy[M][2 * i + 1];
                mb_profile_sample(li, x, y, nxy[M][2 * i], nxy[M][2 * i + 1], k, g);
                double c = mb_profile_cost(pm, l, i, g, work);
                fprintf(f, "%s[%d,%d,%d,%.17g]", first ? "" : ",", l, i, s, c);
                first = 0;
            }
    }
    fprintf(f, "]}\n");
    fclose(f);
    mb_profile_model_close(pm);
    mb_profile_learner_close(pl);
    mb_pyramid_close(pyr);
    mb_image_free(&img);
    return 0;
}
