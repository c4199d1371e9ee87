/* inspect/beyond.c - material beyond the measured edge (see beyond.h). */
#include "beyond.h"

#include "pyramid.h"
#include "stats.h"

#include <math.h>
#include <string.h>

#define BEYOND_LEVEL 0.3
#define BG_SAMPLES 256
#define SPOT_CLEAR 10.0 /* px of the part's own material behind a spot */

/* Crossing-number test: is (x, y) inside the closed polygon of n points? */
static int inside(const double *xy, int n, double x, double y)
{
    int c = 0;
    for (int i = 0, j = n - 1; i < n; j = i++) {
        double yi = xy[2 * i + 1], yj = xy[2 * j + 1];
        if ((yi > y) != (yj > y)) {
            double xc = xy[2 * j] + (y - yj) * (xy[2 * i] - xy[2 * j]) / (yi - yj);
            if (x < xc)
                c = !c;
        }
    }
    return c;
}

/* Is (x, y) material of the fitted model (inside the outer edge and
   outside every hole)? A part whose own material lies a few px beyond an
   edge (a lip beside a heel, a narrow slot) is not contamination there. */
static int model_material(const mb_layout *l, const double *model, double x,
                          double y)
{
    int first = 0;
    for (int o = 0; o < l->n_outlines; o++) {
        int in = inside(model + 2 * first, l->counts[o], x, y);
        if (o == 0 && !in)
            return 0;
        if (o > 0 && in)
            return 0;
        first += l->counts[o];
    }
    return 1;
}

/* The point k px out from the measured edge of dense sample i (k < 0:
   into the part); 0 when it lies outside the frame. */
static int point_at(const mb_image *frame, const mb_asm_result *res, int i,
                    double k, double *x, double *y)
{
    const double *p = res->dense_xy + 2 * i;
    const double *nv = res->dense_normal + 2 * i;
    double e = res->dense_dist[i];
    *x = p[0] + (e + k) * nv[0];
    *y = p[1] + (e + k) * nv[1];
    return *x >= 0 && *y >= 0 && *x <= frame->width - 1 && *y <= frame->height - 1;
}

/* Is the sample's side at k px (sign of k: beyond the edge or on the part)
   usable there: beyond, not material of the fitted model; on the part,
   material of the model out to SPOT_CLEAR px (no hole or other edge within
   reach of the blur)? */
static int side_ok(const mb_image *frame, const mb_asm_result *res,
                   const mb_layout *layout, int i, double k)
{
    double x, y;
    if (!point_at(frame, res, i, k, &x, &y))
        return 0;
    if (!layout || !res->model_xy)
        return 1;
    if (k > 0)
        return !model_material(layout, res->model_xy, x, y);
    return point_at(frame, res, i, -SPOT_CLEAR, &x, &y) &&
           model_material(layout, res->model_xy, x, y);
}

static double grey_at(const mb_image *frame, const mb_asm_result *res, int i,
                      double k)
{
    double x, y;
    point_at(frame, res, i, k, &x, &y);
    return mb_pyramid_sample(frame, x, y);
}

/* A dense sample with an edge, away from a sharp corner (where the normals
   fan out and the points beyond may fall on the part's other side). */
static int usable(const mb_asm_result *res, const uint8_t *corner, int i)
{
    return res->dense_valid[i] && !(corner && corner[res->dense_seg[i]]);
}

/* One side of the edge (side +1 beyond it, -1 on the part): the level and
   spread of the grey 5 px out at up to BG_SAMPLES dense samples (median,
   1.4826 MAD; foreign matter covers a few of them at most), then the
   longest run of samples where two of the points at 3, 5 and 7 px differ
   from that level by more than `need`, towards `toward` (+1 brighter, -1
   darker, 0 either way). */
static void scan_side(const mb_image *frame, const mb_asm_result *res,
                      const mb_layout *layout, const uint8_t *corner, int side,
                      double taught, double contrast, int toward, int min_run,
                      mb_beyond *out)
{
    memset(out, 0, sizeof *out);
    if (!frame || !res || res->dense_n < 3 || !res->dense_xy)
        return;
    double lv[BG_SAMPLES], dev[BG_SAMPLES];
    int nb = 0, stride = 1 + res->dense_n / BG_SAMPLES;
    for (int i = 0; i < res->dense_n && nb < BG_SAMPLES; i += stride) {
        double x, y;
        /* beyond the edge the model's own material (a lip, a slot) is rare
           enough for the median; on the part a hole is not */
        if (usable(res, corner, i) &&
            (side > 0 ? point_at(frame, res, i, 5, &x, &y)
                      : side_ok(frame, res, layout, i, -5)))
            lv[nb++] = grey_at(frame, res, i, 5 * side);
    }
    double level = taught, spread = 0;
    if (nb >= 16) {
        level = mb_stats_median_inplace(lv, nb);
        for (int j = 0; j < nb; j++)
            dev[j] = fabs(lv[j] - level);
        spread = 1.4826 * mb_stats_median_inplace(dev, nb);
    }
    /* a third of the taught contrast (a thin fibre, 1.5-3 px and blurred,
       reaches only half to two thirds of the contrast) and 8 times the
       spread (a textured belt under front light, a grainy part face) */
    double need = fmax(BEYOND_LEVEL * fabs(contrast), 8.0 * spread);
    int run = 0, best = 0, best_end = -1;
    for (int i = 0; i < res->dense_n; i++) {
        int hit = 0;
        if (usable(res, corner, i)) {
            int odd = 0;
            for (int k = 3; k <= 7; k += 2) {
                if (k == 7 && odd != 1)
                    break; /* two of three decided already */
                double d = grey_at(frame, res, i, k * side) - level;
                if ((toward ? d * toward : fabs(d)) > need &&
                    side_ok(frame, res, layout, i, k * side))
                    odd++;
            }
            hit = odd >= 2;
        }
        run = hit ? run + 1 : 0;
        if (run > best) {
            best = run;
            best_end = i;
        }
    }
    if (best >= min_run) {
        out->found = 1;
        out->len = best;
        out->first = best_end - best + 1;
        out->worst = best_end - best / 2;
    }
}

void mb_beyond_check(const mb_image *frame, const mb_asm_result *res,
                     const mb_layout *layout, const uint8_t *corner,
                     double part_grey, double back_grey, int min_run,
                     mb_beyond *out)
{
    double contrast = part_grey - back_grey;
    scan_side(frame, res, layout, corner, 1, back_grey, contrast,
              contrast < 0 ? -1 : 1, min_run, out);
}

void mb_spot_check(const mb_image *frame, const mb_asm_result *res,
                   const mb_layout *layout, const uint8_t *corner,
                   double part_grey, double back_grey, int min_run,
                   mb_beyond *out)
{
    scan_side(frame, res, layout, corner, -1, part_grey,
              part_grey - back_grey, 0, min_run, out);
}
