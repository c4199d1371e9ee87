/*
 * tests/fit/asm_parts.c - analytic test parts (see asm_parts.h).
 */
#include "asm_parts.h"

#include "error.h"
#include "profile.h"
#include "pyramid.h"
#include "shape_model.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

asmp_look asmp_backlit(void)
{
    asmp_look lk = {60.0, 200.0, 1.0, 2.0, 0.0, 0.05};
    return lk;
}

/* One outline of a part in the part frame (px, before rotation). */
typedef struct {
    int circle;     /* 1 circle (a = radius), 0 rounded rectangle */
    double u, v;    /* centre */
    double a, b, r; /* half sizes and corner radius */
} outline_def;

/* Outlines of a part: returns how many (outer edge first). */
static int outlines(const asmp_part *p, outline_def *o)
{
    const double s = p->size * (1.0 + 0.015 * p->var[0]);
    memset(o, 0, 6 * sizeof *o);
    switch (p->family) {
    case ASMP_RING:
        o[0].circle = o[1].circle = 1;
        o[0].a = s;
        o[1].a = 0.7 * s * (1.0 + 0.02 * p->var[1]);
        return 2;
    case ASMP_FLANGE: {
        double a = s * (1.0 + 0.02 * p->var[1]), b = 0.72 * s * (1.0 - 0.02 * p->var[1]);
        o[0].a = a;
        o[0].b = b;
        o[0].r = 0.2 * s * (1.0 + 0.05 * p->var[2]);
        o[1].a = 0.45 * s;
        o[1].b = o[1].r = 0.2 * s;
        const double hu = a - 0.22 * s, hv = b - 0.2 * s, sh = 0.3 * p->var[3];
        const double su[4] = {1, -1, -1, 1}, sv[4] = {-1, -1, 1, 1};
        for (int i = 0; i < 4; i++) {
            o[2 + i].circle = 1;
            o[2 + i].a = 0.07 * s;
            o[2 + i].u = su[i] * hu + sh;
            o[2 + i].v = sv[i] * hv - sh;
        }
        return 6;
    }
    default: /* ASMP_TAB */
        o[0].a = s * (1.0 + 0.02 * p->var[1]);
        o[0].b = 0.5 * s * (1.0 - 0.02 * p->var[1]);
        o[0].r = 0.15 * s * (1.0 + 0.05 * p->var[2]);
        o[1].circle = 1;
        o[1].a = 0.22 * s;
        o[1].u = 0.45 * s + 0.3 * p->var[3];
        return 2;
    }
}

static double perimeter(const outline_def *o)
{
    if (o->circle)
        return 2.0 * M_PI * o->a;
    return 4.0 * (o->a - o->r) + 4.0 * (o->b - o->r) + 2.0 * M_PI * o->r;
}

void asmp_layout(int family, int points, mb_layout *layout)
{
    asmp_part p = {family, 100.0, 0, 0, 0, {0, 0, 0, 0}};
    outline_def o[6];
    int n = outlines(&p, o);
    double total = 0.0, len[6];
    for (int i = 0; i < n; i++)
        total += len[i] = perimeter(&o[i]);
    memset(layout, 0, sizeof *layout);
    layout->n_outlines = n;
    int rest = points;
    for (int i = 1; i < n; i++) {
        int c = (int)lround(points * len[i] / total);
        layout->counts[i] = c < 12 ? 12 : c;
        rest -= layout->counts[i];
    }
    layout->counts[0] = rest;
    layout->n_points = points;
}

asmp_part asmp_random(int family, double size, int w, int h, uint64_t *rng)
{
    asmp_part p;
    p.family = family;
    p.size = size;
    const double ext = 1.3 * size + 8.0;
    p.cx = ext + (w - 2.0 * ext) * scene_uniform(rng);
    p.cy = ext + (h - 2.0 * ext) * scene_uniform(rng);
    p.angle = 2.0 * M_PI * scene_uniform(rng);
    for (int i = 0; i < 4; i++)
        p.var[i] = scene_normal(rng);
    return p;
}

/* Point at arc fraction f (0..1) of an outline, part frame; clockwise on
   screen (x right, y down) starting at angle 0 / the middle of the right
   side. */
static void outline_point(const outline_def *o, double f, double *u, double *v)
{
    if (o->circle) {
        double t = 2.0 * M_PI * f;
        *u = o->u + o->a * cos(t);
        *v = o->v + o->a * sin(t);
        return;
    }
    const double a = o->a, b = o->b, r = o->r, ea = a - r, eb = b - r;
    /* nine pieces: half side, corner, side, corner, side, corner, side,
       corner, half side */
    const double len[9] = {eb, M_PI_2 * r, 2 * ea, M_PI_2 * r, 2 * eb,
                           M_PI_2 * r, 2 * ea, M_PI_2 * r, eb};
    double s = f * perimeter(o);
    int k = 0;
    while (k < 8 && s > len[k]) {
        s -= len[k];
        k++;
    }
    double x, y, phi;
    switch (k) {
    case 0: x = a; y = s; break;
    case 1: phi = s / r; x = ea + r * cos(phi); y = eb + r * sin(phi); break;
    case 2: x = ea - s; y = b; break;
    case 3: phi = M_PI_2 + s / r; x = -ea + r * cos(phi); y = eb + r * sin(phi); break;
    case 4: x = -a; y = eb - s; break;
    case 5: phi = M_PI + s / r; x = -ea + r * cos(phi); y = -eb + r * sin(phi); break;
    case 6: x = -ea + s; y = -b; break;
    case 7: phi = 1.5 * M_PI + s / r; x = ea + r * cos(phi); y = -eb + r * sin(phi); break;
    default: x = a; y = -eb + s; break;
    }
    *u = o->u + x;
    *v = o->v + y;
}

void asmp_landmarks(const asmp_part *p, const mb_layout *layout, double *xy)
{
    outline_def o[6];
    int n = outlines(p, o);
    const double c = cos(p->angle), s = sin(p->angle);
    int q = 0;
    for (int k = 0; k < n && k < layout->n_outlines; k++)
        for (int i = 0; i < layout->counts[k]; i++, q++) {
            double u, v;
            outline_point(&o[k], (double)i / layout->counts[k], &u, &v);
            xy[2 * q] = p->cx + c * u - s * v;
            xy[2 * q + 1] = p->cy + s * u + c * v;
        }
}

static scene_shape shape_of(const asmp_part *p, const outline_def *o)
{
    const double c = cos(p->angle), s = sin(p->angle);
    scene_shape sh;
    sh.type = o->circle ? SCENE_CIRCLE : SCENE_RRECT;
    sh.cx = p->cx + c * o->u - s * o->v;
    sh.cy = p->cy + s * o->u + c * o->v;
    sh.a = o->a;
    sh.b = o->b;
    sh.r = o->r;
    sh.angle = p->angle;
    return sh;
}

void asmp_scene(const asmp_part *p, const asmp_look *lk, uint64_t seed,
                scene *sc)
{
    outline_def o[6];
    int n = outlines(p, o);
    memset(sc, 0, sizeof *sc);
    sc->solid[sc->n_solid++] = shape_of(p, &o[0]);
    for (int k = 1; k < n; k++)
        sc->hole[sc->n_hole++] = shape_of(p, &o[k]);
    sc->part = lk->part;
    sc->back = lk->back;
    sc->blur = lk->blur;
    sc->noise = lk->noise;
    sc->texture = lk->texture;
    sc->ramp = lk->ramp;
    sc->seed = seed;
}

void asmp_add_nick(scene *sc, const double *xy, const double *nxy, int at,
                   double depth, double r)
{
    scene_shape *h = &sc->hole[sc->n_hole++];
    memset(h, 0, sizeof *h);
    h->type = SCENE_CIRCLE;
    h->a = r;
    h->cx = xy[2 * at] + (r - depth) * nxy[2 * at];
    h->cy = xy[2 * at + 1] + (r - depth) * nxy[2 * at + 1];
}

int asmp_teach(int family, double size, int w, int h, int m, int points,
               int levels, const asmp_look *lk, uint64_t seed,
               asmp_model *out)
{
    memset(out, 0, sizeof *out);
    asmp_layout(family, points, &out->layout);
    const int d = 2 * out->layout.n_points;
    double *shapes = malloc(sizeof(double) * (size_t)d * (size_t)m);
    mb_image img = {0, 0, 0, NULL};
    mb_pyramid *pyr = NULL;
    mb_profile_learner *pl = NULL;
    mb_profile_params pp;
    mb_profile_params_default(&pp);
    pp.levels = levels;
    int rc = shapes ? MB_OK : MB_ENOMEM;
    if (rc == MB_OK)
        rc = mb_image_alloc(w, h, &img);
    if (rc == MB_OK)
        rc = mb_pyramid_create(w, h, levels, &pyr);
    if (rc == MB_OK)
        rc = mb_profile_learner_create(&out->layout, &pp, &pl, NULL);
    uint64_t rng = seed;
    for (int j = 0; j < m && rc == MB_OK; j++) {
        asmp_part p = asmp_random(family, size, w, h, &rng);
        scene sc;
        asmp_landmarks(&p, &out->layout, shapes + (size_t)j * d);
        asmp_scene(&p, lk, seed * 1000u + (uint64_t)j, &sc);
        scene_render(&sc, &img);
        rc = mb_pyramid_build(pyr, &img);
        if (rc == MB_OK)
            rc = mb_profile_learner_add(pl, pyr, shapes + (size_t)j * d, NULL);
    }
    if (rc == MB_OK)
        rc = mb_profile_learner_finish(pl, &out->pm, NULL);
    if (rc == MB_OK) {
        mb_pca_params pca;
        mb_pca_params_default(&pca);
        pca.variance_fraction = 0.999;
        rc = mb_shape_model_build(shapes, d, &out->layout, m, NULL, &pca, NULL,
                                  &out->sm, NULL);
    }
    mb_profile_learner_close(pl);
    mb_pyramid_close(pyr);
    mb_image_free(&img);
    free(shapes);
    if (rc != MB_OK)
        asmp_model_free(out);
    return rc;
}

void asmp_model_free(asmp_model *t)
{
    mb_shape_model_close(t->sm);
    mb_profile_model_close(t->pm);
    t->sm = NULL;
    t->pm = NULL;
}
