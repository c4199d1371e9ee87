/*
 * tests/fit/outline_scene.c - analytic test parts rendered with
 * anti-aliasing, blur, texture and noise. See outline_scene.h.
 *
 * Random numbers: SplitMix64 (Steele, Lea, Flood, "Fast splittable
 * pseudorandom number generators", OOPSLA 2014) and the Box-Muller transform
 * (Box & Muller, Ann. Math. Statist. 29, 1958).
 */
#include "outline_scene.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static void *xmalloc(size_t n)
{
    void *p = malloc(n);
    if (!p) {
        fprintf(stderr, "outline_scene: out of memory\n");
        abort();
    }
    return p;
}

double scene_uniform(uint64_t *state)
{
    uint64_t z = (*state += 0x9E3779B97F4A7C15ull);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
    z ^= z >> 31;
    return ((double)(z >> 11) + 0.5) / 9007199254740992.0; /* (0, 1) */
}

double scene_normal(uint64_t *state)
{
    double u = scene_uniform(state), v = scene_uniform(state);
    return sqrt(-2.0 * log(u)) * cos(2.0 * M_PI * v);
}

double scene_shape_distance(const scene_shape *s, double x, double y)
{
    double dx = x - s->cx, dy = y - s->cy;
    if (s->type == SCENE_CIRCLE)
        return sqrt(dx * dx + dy * dy) - s->a;
    /* rounded rectangle: into the shape's frame (rotation by -angle) */
    double c = cos(s->angle), sn = sin(s->angle);
    double u = fabs(c * dx + sn * dy), v = fabs(-sn * dx + c * dy);
    double qx = u - (s->a - s->r), qy = v - (s->b - s->r);
    double ox = qx > 0 ? qx : 0, oy = qy > 0 ? qy : 0;
    double in = qx > qy ? qx : qy;
    return sqrt(ox * ox + oy * oy) + (in < 0 ? in : 0) - s->r;
}

/* A bound of the signed distance to the part: negative inside the part,
 * |value| <= true distance, exact sign. d_solid / d_hole (may be NULL):
 * per-shape distances to use instead of evaluating the shapes whose entry
 * is finite (shapes far from the point, see scene_render). */
static double scene_sdf_with(const scene *sc, double x, double y,
                             const double *d_solid, const double *d_hole)
{
    double f = INFINITY;
    for (int i = 0; i < sc->n_solid; i++) {
        double d = d_solid && isfinite(d_solid[i])
                       ? d_solid[i]
                       : scene_shape_distance(&sc->solid[i], x, y);
        if (d < f)
            f = d;
    }
    for (int i = 0; i < sc->n_hole; i++) {
        double d = -(d_hole && isfinite(d_hole[i])
                         ? d_hole[i]
                         : scene_shape_distance(&sc->hole[i], x, y));
        if (d > f)
            f = d;
    }
    return f;
}

static double scene_sdf(const scene *sc, double x, double y)
{
    return scene_sdf_with(sc, x, y, NULL, NULL);
}

double scene_outline_distance(const scene *sc, double x, double y)
{
    double best = INFINITY;
    for (int i = 0; i < sc->n_solid; i++) {
        double d = fabs(scene_shape_distance(&sc->solid[i], x, y));
        if (d < best)
            best = d;
    }
    for (int i = 0; i < sc->n_hole; i++) {
        double d = fabs(scene_shape_distance(&sc->hole[i], x, y));
        if (d < best)
            best = d;
    }
    return best;
}

/* Separable Gaussian blur of a w x h double image in place, edges clamped. */
static void blur(double *img, int w, int h, double sigma)
{
    if (sigma <= 0)
        return;
    int rad = (int)ceil(4.0 * sigma);
    double *k = xmalloc(sizeof(double) * (size_t)(2 * rad + 1));
    double sum = 0;
    for (int i = -rad; i <= rad; i++)
        sum += k[i + rad] = exp(-0.5 * i * i / (sigma * sigma));
    for (int i = 0; i <= 2 * rad; i++)
        k[i] /= sum;
    int n = w > h ? w : h;
    double *line = xmalloc(sizeof(double) * (size_t)n);
    for (int y = 0; y < h; y++) {
        double *r = img + (size_t)y * w;
        memcpy(line, r, sizeof(double) * (size_t)w);
        for (int x = 0; x < w; x++) {
            double s = 0;
            for (int i = -rad; i <= rad; i++) {
                int xx = x + i < 0 ? 0 : x + i >= w ? w - 1 : x + i;
                s += k[i + rad] * line[xx];
            }
            r[x] = s;
        }
    }
    for (int x = 0; x < w; x++) {
        for (int y = 0; y < h; y++)
            line[y] = img[(size_t)y * w + x];
        for (int y = 0; y < h; y++) {
            double s = 0;
            for (int i = -rad; i <= rad; i++) {
                int yy = y + i < 0 ? 0 : y + i >= h ? h - 1 : y + i;
                s += k[i + rad] * line[yy];
            }
            img[(size_t)y * w + x] = s;
        }
    }
    free(line);
    free(k);
}

void scene_render(const scene *sc, mb_image *img)
{
    const int w = img->width, h = img->height, S = 16;
    uint64_t rng = sc->seed * 0x2545F4914F6CDD1Dull + 12345u;
    double *f = xmalloc(sizeof(double) * (size_t)w * (size_t)h);
    double *tex = NULL;
    if (sc->texture > 0) {
        /* belt texture: white noise smoothed to a grain of about 2 px,
         * rescaled to the requested standard deviation */
        tex = xmalloc(sizeof(double) * (size_t)w * (size_t)h);
        for (size_t i = 0; i < (size_t)w * h; i++)
            tex[i] = scene_normal(&rng);
        blur(tex, w, h, 2.0);
        double ss = 0;
        for (size_t i = 0; i < (size_t)w * h; i++)
            ss += tex[i] * tex[i];
        double g = sc->texture / sqrt(ss / ((double)w * h));
        for (size_t i = 0; i < (size_t)w * h; i++)
            tex[i] *= g;
    }
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            double d = scene_sdf(sc, x, y), cov;
            if (d < -0.75)
                cov = 1;
            else if (d > 0.75)
                cov = 0;
            else {
                /* each of the S x S sub-cells counts the part of it on
                 * the inner side of the locally straight outline, linear in
                 * the signed distance at its centre: exact for an edge
                 * parallel to an axis, within a few thousandths of a pixel
                 * of edge position otherwise */
                /* shapes farther than 1 px from the pixel centre keep
                 * their sign over the pixel and never come within 1/(2S)
                 * of zero: their centre value stands in for them (NAN marks
                 * the near ones, evaluated per sub-cell) */
                double ds[SCENE_MAX_SHAPES], dh[SCENE_MAX_SHAPES];
                for (int i = 0; i < sc->n_solid; i++) {
                    ds[i] = scene_shape_distance(&sc->solid[i], x, y);
                    if (fabs(ds[i]) < 1.0)
                        ds[i] = NAN;
                }
                for (int i = 0; i < sc->n_hole; i++) {
                    dh[i] = scene_shape_distance(&sc->hole[i], x, y);
                    if (fabs(dh[i]) < 1.0)
                        dh[i] = NAN;
                }
                double in = 0;
                for (int j = 0; j < S; j++)
                    for (int i = 0; i < S; i++) {
                        double e =
                            0.5 -
                            S * scene_sdf_with(sc, x - 0.5 + (i + 0.5) / S,
                                               y - 0.5 + (j + 0.5) / S, ds, dh);
                        in += e < 0 ? 0 : e > 1 ? 1 : e;
                    }
                cov = in / (S * S);
            }
            double back = sc->back + (tex ? tex[(size_t)y * w + x] : 0);
            f[(size_t)y * w + x] = cov * sc->part + (1 - cov) * back;
        }
    blur(f, w, h, sc->blur);
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            double v = f[(size_t)y * w + x];
            v *= 1.0 + sc->ramp * ((double)x / (w > 1 ? w - 1 : 1) - 0.5);
            if (sc->noise > 0)
                v += sc->noise * scene_normal(&rng);
            v = floor(v + 0.5);
            img->pixels[(size_t)y * img->stride + x] = (uint8_t)(v < 0     ? 0
                                                                 : v > 255 ? 255
                                                                           : v);
        }
    free(tex);
    free(f);
}
