/*
 * fit/locate.c - coarse location of a part (see locate.h).
 *
 * Threshold by Otsu's method (Otsu, IEEE SMC 9(1), 1979; computed by
 * fit/outline.h), connected components by a flood fill with an explicit
 * stack, and the pose from image moments (Hu, "Visual pattern recognition by
 * moment invariants", IRE Trans. Information Theory 8(2), 1962): the
 * centroid gives the translation, the area the scale, and the principal
 * axis of the second central moments
 *     theta = 1/2 atan2(2 mu11, mu20 - mu02)
 * the orientation up to 180 degrees. The model's moments are those of the
 * region its mean shape encloses (outer edge minus holes), computed exactly
 * from the polygon by Green's theorem: for an edge (x0, y0) -> (x1, y1) with
 * c = x0 y1 - x1 y0,
 *     A   += c / 2
 *     Sx  += (x0 + x1) c / 6              Sy  += (y0 + y1) c / 6
 *     Sxx += (x0^2 + x0 x1 + x1^2) c / 12  Syy likewise in y
 *     Sxy += (x0 y1 + 2 x0 y0 + 2 x1 y1 + x1 y0) c / 24
 * (e.g. Steger, "On the calculation of arbitrary moments of polygons",
 * TU Munich report FGBV-96-05, 1996).
 */
#include "locate.h"

#include "error.h"
#include "outline.h"

#include <math.h>
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

struct mb_locate {
    mb_locate_params p;
    int width, height;   /* level 0 */
    int lw, lh;          /* working level */
    int part_dark;
    double taught_contrast, taught_area;
    /* model region (model frame): area, centroid, principal angle, ratio */
    double m_area, m_cx, m_cy, m_angle, m_round;
    int symmetric;
    uint8_t *mark;       /* lw * lh: 1 part class, 2 visited */
    int32_t *stack;      /* lw * lh */
};

void mb_locate_params_default(mb_locate_params *p)
{
    if (!p)
        return;
    p->level = 3;
    p->min_contrast = 0.35;
    p->min_area = 0.4;
    p->max_area = 2.5;
    p->other_area = 0.25;
    p->round_ratio = 0.85;
    p->n_round_angles = 8;
    p->symmetry_tol = 0.03;
}

void mb_locate_close(mb_locate *loc)
{
    if (!loc)
        return;
    free(loc->mark);
    free(loc->stack);
    free(loc);
}

typedef struct {
    double a, sx, sy, sxx, syy, sxy;
} moments;

/* Raw polygon moments of one closed outline (signed like its shoelace). */
static moments polygon_moments(const double *xy, int n)
{
    moments m = {0, 0, 0, 0, 0, 0};
    for (int i = 0; i < n; i++) {
        int j = i + 1 == n ? 0 : i + 1;
        double x0 = xy[2 * i], y0 = xy[2 * i + 1];
        double x1 = xy[2 * j], y1 = xy[2 * j + 1];
        double c = x0 * y1 - x1 * y0;
        m.a += c / 2.0;
        m.sx += (x0 + x1) * c / 6.0;
        m.sy += (y0 + y1) * c / 6.0;
        m.sxx += (x0 * x0 + x0 * x1 + x1 * x1) * c / 12.0;
        m.syy += (y0 * y0 + y0 * y1 + y1 * y1) * c / 12.0;
        m.sxy += (x0 * y1 + 2.0 * x0 * y0 + 2.0 * x1 * y1 + x1 * y0) * c / 24.0;
    }
    return m;
}

/* Principal axis angle and minor/major ratio from central second moments. */
static void principal(double mu20, double mu02, double mu11, double *angle,
                      double *ratio)
{
    *angle = 0.5 * atan2(2.0 * mu11, mu20 - mu02);
    double h = 0.5 * (mu20 + mu02);
    double r = hypot(0.5 * (mu20 - mu02), mu11);
    *ratio = h + r > 0.0 ? (h - r) / (h + r) : 1.0;
}

int mb_locate_create(const mb_shape_model *sm, const mb_profile_model *pm,
                     int width, int height, const mb_locate_params *p,
                     mb_locate **out, char *err)
{
    mb_locate_params def;
    if (out)
        *out = NULL;
    if (!p) {
        mb_locate_params_default(&def);
        p = &def;
    }
    if (!sm || !pm || !out)
        return mb_err_set(err, MB_EINVAL, "locate: missing argument");
    if (width < 1 || height < 1 || width > 65536 || height > 65536)
        return mb_err_set(err, MB_EINVAL, "locate: frame size %d x %d out of "
                          "range", width, height);
    if (p->level < 0 || p->level >= MB_PYRAMID_MAX_LEVELS ||
        !(p->min_contrast >= 0.0 && p->min_contrast <= 1.0) ||
        !(p->min_area > 0.0) || !(p->max_area > p->min_area) ||
        !(p->other_area > 0.0) || !(p->round_ratio >= 0.0 && p->round_ratio <= 1.0) ||
        p->n_round_angles < 1 || p->n_round_angles > MB_LOCATE_MAX_CANDIDATES ||
        !(p->symmetry_tol >= 0.0))
        return mb_err_set(err, MB_EINVAL, "locate: a parameter is out of range");
    int lw = width, lh = height;
    for (int l = 0; l < p->level; l++) {
        lw = (lw + 1) / 2;
        lh = (lh + 1) / 2;
    }
    if (lw < 4 || lh < 4)
        return mb_err_set(err, MB_EINVAL, "locate: level %d of a %d x %d "
                          "frame is smaller than 4 x 4 px", p->level, width,
                          height);
    const mb_layout *lay = mb_shape_model_layout(sm);
    const mb_layout *play = mb_profile_model_layout(pm);
    if (lay->n_points != play->n_points || lay->n_outlines != play->n_outlines)
        return mb_err_set(err, MB_ESIZE, "locate: the shape model has %d "
                          "points, the profile model %d", lay->n_points,
                          play->n_points);
    const mb_profile_stats *st = mb_profile_model_stats(pm);
    if (!(fabs(st->part_grey - st->back_grey) > 0.0))
        return mb_err_set(err, MB_EDEGENERATE, "locate: the taught part and "
                          "background grey levels are equal");

    /* Region moments of the mean shape, holes subtracted. */
    const double *mean = mb_shape_model_mean(sm);
    moments r = {0, 0, 0, 0, 0, 0};
    for (int o = 0, first = 0; o < lay->n_outlines; o++) {
        moments m = polygon_moments(mean + 2 * first, lay->counts[o]);
        double sgn = (m.a > 0 ? 1.0 : -1.0) * (o == 0 ? 1.0 : -1.0);
        r.a += sgn * m.a;
        r.sx += sgn * m.sx;
        r.sy += sgn * m.sy;
        r.sxx += sgn * m.sxx;
        r.syy += sgn * m.syy;
        r.sxy += sgn * m.sxy;
        first += lay->counts[o];
    }
    if (!(r.a > 0.0))
        return mb_err_set(err, MB_EDEGENERATE, "locate: the mean shape "
                          "encloses no area");

    mb_locate *loc = calloc(1, sizeof *loc);
    if (!loc)
        return mb_err_set(err, MB_ENOMEM, "locate: out of memory");
    loc->p = *p;
    loc->width = width;
    loc->height = height;
    loc->lw = lw;
    loc->lh = lh;
    loc->part_dark = st->part_grey < st->back_grey;
    loc->taught_contrast = fabs(st->part_grey - st->back_grey);
    loc->taught_area = st->area;
    loc->m_area = r.a;
    loc->m_cx = r.sx / r.a;
    loc->m_cy = r.sy / r.a;
    principal(r.sxx / r.a - loc->m_cx * loc->m_cx,
              r.syy / r.a - loc->m_cy * loc->m_cy,
              r.sxy / r.a - loc->m_cx * loc->m_cy, &loc->m_angle, &loc->m_round);

    /* Rotation symmetry: every outline a circle about the centroid. */
    loc->symmetric = 1;
    for (int o = 0, first = 0; o < lay->n_outlines && loc->symmetric; o++) {
        const int n = lay->counts[o];
        double sum = 0.0, lo = INFINITY, hi = 0.0;
        for (int i = 0; i < n; i++) {
            double d = hypot(mean[2 * (first + i)] - loc->m_cx,
                             mean[2 * (first + i) + 1] - loc->m_cy);
            sum += d;
            lo = d < lo ? d : lo;
            hi = d > hi ? d : hi;
        }
        double avg = sum / n;
        if (!(avg > 0.0) || hi - avg > p->symmetry_tol * avg ||
            avg - lo > p->symmetry_tol * avg)
            loc->symmetric = 0;
        first += n;
    }

    loc->mark = malloc((size_t)lw * lh);
    loc->stack = malloc((size_t)lw * lh * sizeof *loc->stack);
    if (!loc->mark || !loc->stack) {
        mb_locate_close(loc);
        return mb_err_set(err, MB_ENOMEM, "locate: out of memory");
    }
    *out = loc;
    return MB_OK;
}

int mb_locate_level(const mb_locate *loc)
{
    return loc ? loc->p.level : -1;
}

int mb_locate_symmetric(const mb_locate *loc)
{
    return loc ? loc->symmetric : 0;
}

typedef struct {
    double n, sx, sy, sxx, syy, sxy;
    int x0, y0, x1, y1; /* bounding box, inclusive */
} blob;

/* Flood-fill the 8-connected part component holding pixel `seed`. */
static void fill(mb_locate *loc, int seed, blob *b)
{
    const int w = loc->lw, h = loc->lh;
    uint8_t *mark = loc->mark;
    int32_t *stack = loc->stack;
    int top = 0;
    memset(b, 0, sizeof *b);
    b->x0 = w;
    b->y0 = h;
    b->x1 = b->y1 = -1;
    stack[top++] = seed;
    mark[seed] = 2;
    while (top > 0) {
        int q = stack[--top];
        int x = q % w, y = q / w;
        b->n += 1.0;
        b->sx += x;
        b->sy += y;
        b->sxx += (double)x * x;
        b->syy += (double)y * y;
        b->sxy += (double)x * y;
        if (x < b->x0) b->x0 = x;
        if (x > b->x1) b->x1 = x;
        if (y < b->y0) b->y0 = y;
        if (y > b->y1) b->y1 = y;
        for (int dy = -1; dy <= 1; dy++) {
            int yy = y + dy;
            if (yy < 0 || yy >= h)
                continue;
            for (int dx = -1; dx <= 1; dx++) {
                int xx = x + dx;
                if (xx < 0 || xx >= w)
                    continue;
                int qq = yy * w + xx;
                if (mark[qq] == 1) {
                    mark[qq] = 2;
                    stack[top++] = qq;
                }
            }
        }
    }
}

/* Rule 4 on one line of n pixels `step` bytes apart: a run of 3 or more
   part-class pixels. */
static int line_cut(const uint8_t *px, int n, ptrdiff_t step, double mid,
                    int part_dark)
{
    int run = 0;
    for (int i = 0; i < n; i++) {
        int g = px[i * step];
        int part = part_dark ? g < mid : g > mid;
        run = part ? run + 1 : 0;
        if (run >= 3)
            return 1;
    }
    return 0;
}

/* Rule 4: the four border lines of the full-resolution frame. */
static int border_cut(const mb_image *img, double mid, int part_dark)
{
    const uint8_t *p = img->pixels;
    const ptrdiff_t st = img->stride;
    const int w = img->width, h = img->height;
    return line_cut(p, w, 1, mid, part_dark) ||
           line_cut(p + (h - 1) * st, w, 1, mid, part_dark) ||
           line_cut(p, h, st, mid, part_dark) ||
           line_cut(p + (w - 1), h, st, mid, part_dark);
}

int mb_locate_run(mb_locate *loc, const mb_pyramid *pyr,
                  mb_locate_result *res)
{
    if (!loc || !pyr || !res)
        return MB_EINVAL;
    memset(res, 0, sizeof *res);
    const int L = loc->p.level;
    if (mb_pyramid_levels(pyr) <= L)
        return MB_ESIZE;
    const mb_image *img0 = mb_pyramid_level(pyr, 0);
    const mb_image *img = mb_pyramid_level(pyr, L);
    if (img0->width != loc->width || img0->height != loc->height ||
        img->width != loc->lw || img->height != loc->lh)
        return MB_ESIZE;
    const int w = loc->lw, h = loc->lh;
    const double cell = (double)(1 << L);

    /* 1. Threshold. */
    uint32_t hist[256];
    mb_otsu ot;
    mb_outline_histogram(img, hist);
    if (mb_outline_threshold(hist, &ot) != MB_OK)
        return MB_ENOPART; /* one grey level: nothing to separate */
    res->threshold = ot.threshold;
    res->part_dark = loc->part_dark;
    res->contrast = ot.mean_bright - ot.mean_dark;
    if (res->contrast < loc->p.min_contrast * loc->taught_contrast)
        return MB_ENOPART;

    /* 2, 3. Part-class pixels and their components. */
    const int t = ot.threshold;
    for (int y = 0; y < h; y++) {
        const uint8_t *row = img->pixels + (size_t)y * img->stride;
        uint8_t *m = loc->mark + (size_t)y * w;
        if (loc->part_dark)
            for (int x = 0; x < w; x++)
                m[x] = row[x] <= t;
        else
            for (int x = 0; x < w; x++)
                m[x] = row[x] > t;
    }
    blob best = {0}, cur;
    double second = 0.0;
    for (int q = 0; q < w * h; q++) {
        if (loc->mark[q] != 1)
            continue;
        fill(loc, q, &cur);
        if (cur.n > best.n) {
            second = best.n;
            best = cur;
        } else if (cur.n > second) {
            second = cur.n;
        }
    }
    const double px_area = cell * cell;
    res->area = best.n * px_area;
    res->other_area = second * px_area;
    if (best.n > 0) {
        res->box[0] = (int)(best.x0 * cell);
        res->box[1] = (int)(best.y0 * cell);
        res->box[2] = (int)((best.x1 - best.x0 + 1) * cell);
        res->box[3] = (int)((best.y1 - best.y0 + 1) * cell);
        res->edges = (best.x0 == 0 ? MB_EDGE_LEFT : 0) |
                     (best.y0 == 0 ? MB_EDGE_TOP : 0) |
                     (best.x1 == w - 1 ? MB_EDGE_RIGHT : 0) |
                     (best.y1 == h - 1 ? MB_EDGE_BOTTOM : 0);
    }
    if (res->area < loc->p.min_area * loc->taught_area ||
        res->area > loc->p.max_area * loc->taught_area)
        return MB_ENOPART;
    res->n_parts = 1 + (res->other_area >= loc->p.other_area * loc->taught_area);

    /* Moments of the part region, full-resolution px (level-L sample i
       sits at full-resolution i * 2^L: fit/pyramid.h). */
    double cx = best.sx / best.n, cy = best.sy / best.n;
    double mu20 = best.sxx / best.n - cx * cx;
    double mu02 = best.syy / best.n - cy * cy;
    double mu11 = best.sxy / best.n - cx * cy;
    res->x = cx * cell;
    res->y = cy * cell;
    principal(mu20, mu02, mu11, &res->angle, &res->roundness);

    /* 4. Cut by the frame edge. */
    if (best.x0 == 0 || best.y0 == 0 || best.x1 == w - 1 || best.y1 == h - 1) {
        double mid = 0.5 * (ot.mean_dark + ot.mean_bright);
        if (border_cut(img0, mid, loc->part_dark))
            return MB_EEDGE;
    }
    /* 5. Another part. */
    if (res->n_parts > 1)
        return MB_EMULTIPLE;

    /* 6. Candidates. */
    const double s = sqrt(res->area / loc->m_area);
    double angles[MB_LOCATE_MAX_CANDIDATES];
    int n = 0;
    if (loc->symmetric) {
        angles[n++] = 0.0;
    } else if (res->roundness > loc->p.round_ratio ||
               loc->m_round > loc->p.round_ratio) {
        for (int i = 0; i < loc->p.n_round_angles; i++)
            angles[n++] = 2.0 * M_PI * i / loc->p.n_round_angles;
    } else {
        angles[n++] = remainder(res->angle - loc->m_angle, 2.0 * M_PI);
        angles[n++] = remainder(res->angle - loc->m_angle + M_PI, 2.0 * M_PI);
    }
    for (int i = 0; i < n; i++) {
        mb_pose *c = &res->candidates[i];
        double ca = cos(angles[i]), sa = sin(angles[i]);
        c->scale = s;
        c->angle = angles[i];
        c->tx = res->x - s * (ca * loc->m_cx - sa * loc->m_cy);
        c->ty = res->y - s * (sa * loc->m_cx + ca * loc->m_cy);
    }
    res->n_candidates = n;
    return MB_OK;
}
