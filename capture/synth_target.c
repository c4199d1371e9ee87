/*
 * capture/synth_target.c - a target sheet on the synthetic conveyor
 * (synth_target.h): exact area coverage of the sheet and of its discs,
 * blur, noise.
 */
#include "synth_target.h"

#include "error.h"
#include "render.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

/* Vertices of the polygon standing in for a disc: its centroid is the
   disc's centre, its area short of the disc's by 2 pi^2 / (3 N^2) = 1e-4. */
#define DISC_VERTICES 256

void mb_synth_target_view_default(mb_synth_target_view *v, int width,
                                  int height)
{
    memset(v, 0, sizeof *v);
    v->mm_per_px = 0.1;
    v->centre_px[0] = (width - 1) / 2.0;
    v->centre_px[1] = (height - 1) / 2.0;
    v->white = 220;
    v->black = 25;
    v->conveyor = 90;
    v->blur = 1.0;
    v->noise = 2.0;
    v->seed = 1;
}

/* splitmix64 (Steele, Lea, Flood, OOPSLA 2014): a small seeded stream. */
static uint64_t next_u64(uint64_t *s)
{
    uint64_t z = (*s += 0x9e3779b97f4a7c15ull);
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ull;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebull;
    return z ^ (z >> 31);
}

/* Standard normal by Box and Muller (Ann. Math. Stat. 29, 1958). */
static double next_normal(uint64_t *s)
{
    double u1 = ((next_u64(s) >> 11) + 0.5) / 9007199254740992.0;
    double u2 = (next_u64(s) >> 11) / 9007199254740992.0;
    return sqrt(-2.0 * log(u1)) * cos(2.0 * M_PI * u2);
}

static void to_px(const mb_synth_target_view *v, double X, double Y, double *x,
                  double *y)
{
    double a = v->angle_deg * M_PI / 180.0, c = cos(a), s = sin(a);
    double dx = X - v->anchor_mm[0], dy = Y - v->anchor_mm[1];
    *x = v->centre_px[0] + (c * dx - s * dy) / v->mm_per_px;
    *y = v->centre_px[1] + (s * dx + c * dy) / v->mm_per_px;
}

int mb_synth_target_frame(const mb_synth_disc *discs, int n,
                          const mb_synth_target_view *v, mb_image *frame,
                          char *err)
{
    if (!v || !frame || !frame->pixels || n < 0 || (n > 0 && !discs))
        return mb_err_set(err, MB_EINVAL, "target frame: missing argument");
    if (!(v->mm_per_px > 0) || !isfinite(v->mm_per_px) ||
        !isfinite(v->angle_deg) || !(v->blur >= 0) || !(v->noise >= 0))
        return mb_err_set(err, MB_EINVAL,
                          "target frame: scale, angle, blur or noise "
                          "out of range");
    if (!(v->sheet_mm[2] > v->sheet_mm[0]) ||
        !(v->sheet_mm[3] > v->sheet_mm[1]))
        return mb_err_set(err, MB_EINVAL,
                          "target frame: the sheet has no area");
    for (int i = 0; i < n; i++)
        if (!(discs[i].radius > 0) || !isfinite(discs[i].x) ||
            !isfinite(discs[i].y))
            return mb_err_set(err, MB_EINVAL,
                              "target frame: disc %d out of range", i);
    int w = frame->width, h = frame->height, rc = MB_OK;
    size_t cells = (size_t)h * (size_t)(w + 2);
    float *sheet = malloc(cells * sizeof *sheet);
    float *ink = malloc(cells * sizeof *ink);
    float *work = malloc((size_t)mb_blur_work_size(w, h) * sizeof *work);
    double *poly = malloc(2 * DISC_VERTICES * sizeof *poly);
    if (!sheet || !ink || !work || !poly) {
        rc = mb_err_set(err, MB_ENOMEM, "target frame: out of memory");
        goto done;
    }
    mb_coverage cs, ci;
    mb_coverage_reset(&cs, sheet, 0, 0, w, h);
    mb_coverage_reset(&ci, ink, 0, 0, w, h);
    const double corner[4][2] = {{v->sheet_mm[0], v->sheet_mm[1]},
                                 {v->sheet_mm[2], v->sheet_mm[1]},
                                 {v->sheet_mm[2], v->sheet_mm[3]},
                                 {v->sheet_mm[0], v->sheet_mm[3]}};
    for (int k = 0; k < 4; k++)
        to_px(v, corner[k][0], corner[k][1], &poly[2 * k], &poly[2 * k + 1]);
    mb_coverage_add(&cs, poly, 4);
    for (int i = 0; i < n; i++) {
        for (int k = 0; k < DISC_VERTICES; k++) {
            double t = 2.0 * M_PI * k / DISC_VERTICES;
            to_px(v, discs[i].x + discs[i].radius * cos(t),
                  discs[i].y + discs[i].radius * sin(t), &poly[2 * k],
                  &poly[2 * k + 1]);
        }
        mb_coverage_add(&ci, poly, DISC_VERTICES);
    }
    mb_coverage_resolve(&cs);
    mb_coverage_resolve(&ci);
    /* Grey of each pixel from the covered fractions (the sign of a
       coverage follows the polygons' turning sense: taken as a size). */
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            size_t at = (size_t)y * (size_t)cs.stride + (size_t)x;
            double fs = fmin(1.0, fabs(sheet[at]));
            double fi = fmin(fs, fabs(ink[at]));
            sheet[at] = (float)(v->conveyor + (v->white - v->conveyor) * fs -
                                (v->white - v->black) * fi);
        }
    mb_blur_gauss(sheet, w, h, cs.stride, v->blur, work);
    uint64_t state = v->seed;
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            double g = sheet[(size_t)y * (size_t)cs.stride + (size_t)x];
            if (v->noise > 0)
                g += v->noise * next_normal(&state);
            g = floor(g + 0.5);
            frame->pixels[(size_t)y * (size_t)frame->stride + (size_t)x] =
                (uint8_t)(g < 0     ? 0
                          : g > 255 ? 255
                                    : g);
        }
done:
    free(poly);
    free(work);
    free(ink);
    free(sheet);
    return rc;
}
