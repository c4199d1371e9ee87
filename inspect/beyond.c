/* inspect/beyond.c - material beyond the measured edge (see beyond.h). */
#include "beyond.h"

#include "pyramid.h"

#include <math.h>
#include <string.h>

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

void mb_beyond_check(const mb_image *frame, const mb_asm_result *res,
                     const mb_layout *layout, double part_grey,
                     double back_grey, int min_run, mb_beyond *out)
{
    memset(out, 0, sizeof *out);
    if (!frame || !res || res->dense_n < 3 || !res->dense_xy)
        return;
    double mid = 0.5 * (part_grey + back_grey);
    int part_dark = part_grey < back_grey;
    int run = 0, best = 0, best_end = -1;
    for (int i = 0; i < res->dense_n; i++) {
        int hit = 0;
        if (res->dense_valid[i]) {
            const double *p = res->dense_xy + 2 * i;
            const double *nv = res->dense_normal + 2 * i;
            double e = res->dense_dist[i];
            int like_part = 0;
            for (int k = 3; k <= 7; k += 2) {
                double x = p[0] + (e + k) * nv[0], y = p[1] + (e + k) * nv[1];
                if (x < 0 || y < 0 || x > frame->width - 1 || y > frame->height - 1)
                    continue;
                double g = mb_pyramid_sample(frame, x, y);
                if ((part_dark ? g < mid : g > mid) &&
                    !(layout && res->model_xy && model_material(layout, res->model_xy, x, y)))
                    like_part++;
            }
            hit = like_part >= 2;
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
