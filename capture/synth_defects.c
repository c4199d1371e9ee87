/*
 * capture/synth_defects.c - defects of the synthetic line, applied to a good
 * part's outlines in the part frame (mm).
 *
 * Local defects (nick, flash, tear, missing segment) replace a stretch of
 * one outline by a displaced copy: each point of the stretch moves along the
 * edge normal, into the material or out of it, by a profile that is zero at
 * both ends of the stretch. The stretch is resampled finely (a slit a few
 * pixels wide keeps its shape). A position is accepted only on a smooth
 * stretch (no corner, curvature radius well above the depth) and when the
 * moved points keep clear of every other edge, so a defect never cuts
 * through the part or into a hole.
 *
 * Shape defects (deformation, wrong size, wrong variant) change the part's
 * parameters and rebuild it; their size is measured on the geometry: the
 * largest distance of the new outline from the reference outline.
 */
#include "error.h"
#include "render.h"
#include "synth_internal.h"

#include <string.h>

/* ---- geometry helpers */

/* Cumulative arc length of outline o into arc[0..n]; returns its length. */
static double arc_lengths(const mb_synth_polys *p, int o, double *arc)
{
    const double *xy = p->xy + 2 * p->first[o];
    int n = mb_synth_polys_count(p, o);
    arc[0] = 0;
    for (int i = 1; i <= n; i++) {
        int j = i % n;
        arc[i] = arc[i - 1] + hypot(xy[2 * j] - xy[2 * (i - 1)],
                                    xy[2 * j + 1] - xy[2 * (i - 1) + 1]);
    }
    return arc[n];
}

/* Point at arc position s (any real; taken modulo the length). */
static void point_at(const double *xy, const double *arc, int n, double s,
                     double *x, double *y)
{
    double len = arc[n];
    s = fmod(s, len);
    if (s < 0)
        s += len;
    int lo = 0, hi = n; /* arc[lo] <= s < arc[hi] */
    while (hi - lo > 1) {
        int mid = (lo + hi) / 2;
        if (arc[mid] <= s)
            lo = mid;
        else
            hi = mid;
    }
    int j = hi % n;
    double seg = arc[hi] - arc[lo], t = seg > 0 ? (s - arc[lo]) / seg : 0;
    *x = xy[2 * lo] + t * (xy[2 * j] - xy[2 * lo]);
    *y = xy[2 * lo + 1] + t * (xy[2 * j + 1] - xy[2 * lo + 1]);
}

/* Unit normal into the material at arc position s: the left normal of the
   direction of travel (outer edge positive, holes negative area). */
static void normal_at(const double *xy, const double *arc, int n, double s,
                      double h, double *nx, double *ny)
{
    double x0, y0, x1, y1;
    point_at(xy, arc, n, s - h, &x0, &y0);
    point_at(xy, arc, n, s + h, &x1, &y1);
    double tx = x1 - x0, ty = y1 - y0, l = hypot(tx, ty);
    if (l <= 0) {
        *nx = *ny = 0;
        return;
    }
    *nx = -ty / l;
    *ny = tx / l;
}

static double seg_dist2(double px, double py, double ax, double ay, double bx,
                        double by)
{
    double dx = bx - ax, dy = by - ay, l2 = dx * dx + dy * dy;
    double t = l2 > 0 ? ((px - ax) * dx + (py - ay) * dy) / l2 : 0;
    t = t < 0 ? 0 : (t > 1 ? 1 : t);
    double ex = ax + t * dx - px, ey = ay + t * dy - py;
    return ex * ex + ey * ey;
}

/* Distance from (px, py) to the closed polyline b (nb points), searching
   segments j0 - w .. j0 + w (cyclic); w >= nb searches all. */
static double dist_to_polyline(const double *b, int nb, double px, double py,
                               int j0, int w)
{
    double best = INFINITY;
    int lo = j0 - w, hi = j0 + w;
    if (2 * w + 1 >= nb) {
        lo = 0;
        hi = nb - 1;
    }
    for (int jj = lo; jj <= hi; jj++) {
        int j = ((jj % nb) + nb) % nb, k = (j + 1) % nb;
        double d =
            seg_dist2(px, py, b[2 * j], b[2 * j + 1], b[2 * k], b[2 * k + 1]);
        if (d < best)
            best = d;
    }
    return sqrt(best);
}

double mb_synth_max_deviation(const mb_synth_polys *a, const mb_synth_polys *b,
                              int *at)
{
    double worst = 0;
    int where = 0;
    int no = a->n_outlines < b->n_outlines ? a->n_outlines : b->n_outlines;
    for (int o = 0; o < no; o++) {
        const double *pa = a->xy + 2 * a->first[o];
        const double *pb = b->xy + 2 * b->first[o];
        int na = mb_synth_polys_count(a, o), nb = mb_synth_polys_count(b, o);
        /* Brute force when small; else search a window around the point of
           b at the same fraction of the outline (both are sampled by arc
           length from corresponding starts). */
        int w = (double)na * nb <= 1e6 ? nb : nb / 4;
        for (int i = 0; i < na; i++) {
            int j0 = (int)((double)i * nb / na);
            double d =
                dist_to_polyline(pb, nb, pa[2 * i], pa[2 * i + 1], j0, w);
            if (d > worst) {
                worst = d;
                where = a->first[o] + i;
            }
        }
    }
    if (at)
        *at = where;
    return worst;
}

/* Outline index of point i of set p. */
static int outline_of(const mb_synth_polys *p, int i)
{
    int o = 0;
    while (o + 1 < p->n_outlines && p->first[o + 1] <= i)
        o++;
    return o;
}

/* Locate point i of p in d (outline, arc fraction, x, y in mm). */
static void locate_point(const mb_synth_polys *p, int i, double *arc,
                         mb_synth_defect *d)
{
    int o = outline_of(p, i);
    double len = arc_lengths(p, o, arc);
    d->outline = o;
    d->arc = len > 0 ? arc[i - p->first[o]] / len : 0;
    d->x = p->xy[2 * i];
    d->y = p->xy[2 * i + 1];
}

/* Smallest distance from the points pts[0..n) to the points of p, leaving
   out outline `skip_o`'s points whose arc position lies within `skip` of
   s_c (cyclic); the other outlines count in full. Point-to-point distances
   are enough here: outlines are sampled about a pixel apart and the limit
   is several times that. */
static double clearance(const mb_synth_polys *p, const double *arc, int skip_o,
                        double s_c, double skip, const double *pts, int n)
{
    double best = INFINITY;
    for (int o = 0; o < p->n_outlines; o++) {
        const double *xy = p->xy + 2 * p->first[o];
        int m = mb_synth_polys_count(p, o);
        double len = o == skip_o ? arc[m] : 0;
        for (int j = 0; j < m; j++) {
            if (o == skip_o) {
                double ds = fabs(arc[j] - s_c);
                ds = fmin(ds, len - ds);
                if (ds < skip)
                    continue;
            }
            for (int i = 0; i < n; i++) {
                double dx = pts[2 * i] - xy[2 * j],
                       dy = pts[2 * i + 1] - xy[2 * j + 1];
                double d2 = dx * dx + dy * dy;
                if (d2 < best)
                    best = d2;
            }
        }
    }
    return sqrt(best);
}

/* Largest turn between consecutive segments (radians) and the smallest
   radius of curvature (turn over a window of about `win` mm) along the
   stretch [s0, s1] of outline o. */
static void smoothness(const double *xy, const double *arc, int n, double s0,
                       double s1, double win, double *max_turn,
                       double *min_radius)
{
    *max_turn = 0;
    *min_radius = INFINITY;
    double len = arc[n];
    for (double s = s0; s <= s1; s += win * 0.5) {
        double ax, ay, bx, by, cx, cy;
        point_at(xy, arc, n, s - win, &ax, &ay);
        point_at(xy, arc, n, s, &bx, &by);
        point_at(xy, arc, n, s + win, &cx, &cy);
        double t1 = atan2(by - ay, bx - ax), t2 = atan2(cy - by, cx - bx);
        double turn = fabs(remainder(t2 - t1, 2 * M_PI));
        if (turn > 1e-12) {
            double r = win / turn;
            if (r < *min_radius)
                *min_radius = r;
        }
    }
    /* single-vertex corners */
    for (int i = 0; i < n; i++) {
        double s = arc[i], ds0 = s - s0;
        ds0 = fmod(fmod(ds0, len) + len, len);
        if (ds0 > s1 - s0)
            continue;
        int a = (i + n - 1) % n, c = (i + 1) % n;
        double t1 = atan2(xy[2 * i + 1] - xy[2 * a + 1], xy[2 * i] - xy[2 * a]);
        double t2 = atan2(xy[2 * c + 1] - xy[2 * i + 1], xy[2 * c] - xy[2 * i]);
        double turn = fabs(remainder(t2 - t1, 2 * M_PI));
        if (turn > *max_turn)
            *max_turn = turn;
    }
}

typedef struct {
    double s, x, y;
} arc_point;

/* Displacement profile at t in [-1, 1] (fraction of the depth). */
static double profile(int type, int shape, double t, double phase)
{
    double a = fabs(t);
    if (a >= 1)
        return 0;
    switch (type) {
    case MB_SYNTH_NICK: return shape ? sqrt(1 - t * t) : 1 - a; /* U or V */
    case MB_SYNTH_TEAR: return 1 - a;
    case MB_SYNTH_FLASH: { /* ramps, ragged crest */
        double ramp = fmin(1.0, (1 - a) / 0.25);
        return ramp * (0.85 + 0.15 * (0.5 + 0.5 * sin(9.0 * t + phase)));
    }
    case MB_SYNTH_MISSING: return fmin(1.0, (1 - a) / 0.12);
    default: return 0;
    }
}

/* Per-type size ranges (mm) and stretch half-lengths. */
static void local_ranges(int type, double *lo, double *hi)
{
    switch (type) {
    case MB_SYNTH_NICK:
        *lo = 0.2;
        *hi = 2.0;
        break;
    case MB_SYNTH_FLASH:
        *lo = 0.2;
        *hi = 1.5;
        break;
    case MB_SYNTH_TEAR:
        *lo = 0.6;
        *hi = 3.0;
        break;
    case MB_SYNTH_MISSING:
        *lo = 1.0;
        *hi = 2.5;
        break;
    default:
        *lo = 0.5;
        *hi = 2.5;
        break; /* contamination */
    }
}

static double draw_size(int type, const mb_synth_defect_opts *o,
                        mb_synth_rng *r)
{
    double lo, hi;
    local_ranges(type, &lo, &hi);
    if (o->max_mm > 0) {
        lo = o->min_mm;
        hi = o->max_mm;
    }
    return mb_synth_rng_range(r, lo, hi);
}

/* Pick an outline and an arc position on it, weighted by length. */
static void pick_position(const mb_synth_polys *p, double *arc, mb_synth_rng *r,
                          int *o_out, double *s_out)
{
    double total = 0, lens[MB_MAX_OUTLINES];
    for (int o = 0; o < p->n_outlines; o++) {
        lens[o] = arc_lengths(p, o, arc);
        total += lens[o];
    }
    double u = mb_synth_rng_uniform(r) * total;
    int o = 0;
    while (o + 1 < p->n_outlines && u >= lens[o]) {
        u -= lens[o];
        o++;
    }
    arc_lengths(p, o, arc);
    *o_out = o;
    *s_out = u;
}

static int local_defect(int type, const mb_synth_defect_opts *opt,
                        mb_synth_rng *r, mb_synth_polys *part,
                        mb_synth_scratch *sc, mb_synth_defect *d)
{
    double depth = draw_size(type, opt, r), hw;
    int shape = mb_synth_rng_uniform(r) < 0.5;
    double phase = mb_synth_rng_range(r, 0, 2 * M_PI);
    switch (type) {
    case MB_SYNTH_NICK: hw = depth * mb_synth_rng_range(r, 0.6, 1.5); break;
    case MB_SYNTH_FLASH: hw = mb_synth_rng_range(r, 1.0, 3.0); break;
    case MB_SYNTH_TEAR: hw = mb_synth_rng_range(r, 0.1, 0.25); break;
    default: hw = mb_synth_rng_range(r, 1.5, 4.0); break; /* missing */
    }
    if (hw < 2 * opt->step)
        hw = 2 * opt->step;
    double sign = type == MB_SYNTH_FLASH ? -1.0 : 1.0; /* + into material */
    double ds = fmin(0.5 * opt->step, 2 * hw / 40);
    int nf = (int)ceil(2 * hw / ds) + 1;
    if (nf > sc->cap / 4)
        nf = sc->cap / 4;
    double *arc = sc->arc;
    /* the moved points go into the tail of sc->sorted as plain xy */
    double *fine = sc->sorted + 3 * (size_t)sc->cap - 2 * (size_t)nf;
    /* 64 positions; when none takes the depth (a thin lip, a narrow band),
       the defect is made shallower and tried again: what is recorded is
       what was made */
    for (int attempt = 0; attempt < 320; attempt++) {
        if (attempt > 0 && attempt % 64 == 0)
            depth *= 0.7;
        int o;
        double s_c;
        pick_position(part, arc, r, &o, &s_c);
        const double *xy = part->xy + 2 * part->first[o];
        int n = mb_synth_polys_count(part, o);
        double len = arc[n];
        if (2 * hw + 4 * depth > 0.5 * len)
            continue;
        double max_turn, min_radius;
        smoothness(xy, arc, n, s_c - hw - depth, s_c + hw + depth,
                   fmax(depth, 2 * opt->step), &max_turn, &min_radius);
        if (max_turn > 0.35 || min_radius < 1.5 * depth)
            continue;
        /* the displaced stretch */
        double peak = 0;
        for (int k = 0; k < nf; k++) {
            double t = -1.0 + 2.0 * k / (nf - 1), s = s_c + t * hw;
            double x, y, nx, ny;
            point_at(xy, arc, n, s, &x, &y);
            normal_at(xy, arc, n, s, opt->step, &nx, &ny);
            double f = depth * profile(type, shape, t, phase);
            if (f > peak)
                peak = f;
            fine[2 * k] = x + sign * f * nx;
            fine[2 * k + 1] = y + sign * f * ny;
        }
        /* keep clear of every other edge by 0.3 mm (and of this outline
           beyond the stretch) */
        double clear =
            clearance(part, arc, o, s_c, hw + 2 * depth + opt->step, fine, nf);
        if (clear < 0.3 + 0.5 * opt->step)
            continue;
        /* merge, by arc position: the points outside the stretch (in order
           already) and the fine samples (in order but for one wrap past
           the outline's start); a linear merge, no sort, no allocation */
        if (n + nf > sc->cap)
            return MB_ERANGE;
        arc_point *m = (arc_point *)sc->sorted;
        int wrap = 0; /* first fine sample past the wrap, or 0 */
        double prev = -1;
        for (int k = 0; k < nf; k++) {
            double sk = s_c + (-1.0 + 2.0 * k / (nf - 1)) * hw;
            sk = fmod(fmod(sk, len) + len, len);
            if (k > 0 && sk < prev)
                wrap = k;
            prev = sk;
        }
        int cnt = 0, j = 0, f = 0;
        while (j < n || f < nf) {
            /* next original outside the stretch */
            while (j < n && fabs(remainder(arc[j] - s_c, len)) <= hw + 1e-9)
                j++;
            int kk = (wrap + f) % nf;
            double sf = INFINITY;
            if (f < nf) {
                sf = s_c + (-1.0 + 2.0 * kk / (nf - 1)) * hw;
                sf = fmod(fmod(sf, len) + len, len);
            }
            if (j < n && arc[j] < sf) {
                m[cnt].s = arc[j];
                m[cnt].x = xy[2 * j];
                m[cnt].y = xy[2 * j + 1];
                j++;
            } else if (f < nf) {
                m[cnt].s = sf;
                m[cnt].x = fine[2 * kk];
                m[cnt].y = fine[2 * kk + 1];
                f++;
            } else {
                break;
            }
            cnt++;
        }
        /* rebuild the set with outline o replaced */
        mb_synth_polys *t = &sc->tmp;
        mb_synth_polys_clear(t);
        for (int oo = 0; oo < part->n_outlines; oo++) {
            mb_synth_polys_begin(t);
            if (oo == o) {
                for (int i = 0; i < cnt; i++)
                    mb_synth_polys_point(t, m[i].x, m[i].y);
            } else {
                const double *q = part->xy + 2 * part->first[oo];
                for (int i = 0; i < mb_synth_polys_count(part, oo); i++)
                    mb_synth_polys_point(t, q[2 * i], q[2 * i + 1]);
            }
            mb_synth_polys_end(t);
        }
        if (t->overflow)
            return MB_ERANGE;
        double ex, ey;
        point_at(xy, arc, n, s_c, &ex, &ey);
        d->size_mm = peak;
        d->extent_mm = 2 * hw;
        d->outline = o;
        d->arc = s_c / len;
        d->x = ex;
        d->y = ey;
        mb_synth_polys_copy(part, t);
        return part->overflow ? MB_ERANGE : 0;
    }
    return MB_ERANGE;
}

/* ---- contamination: a blob or a fibre across an edge */

static int contamination(const mb_synth_defect_opts *opt, mb_synth_rng *r,
                         const mb_synth_polys *part, mb_synth_polys *c,
                         mb_synth_scratch *sc, mb_synth_defect *d)
{
    double *arc = sc->arc;
    int o;
    double s_c;
    pick_position(part, arc, r, &o, &s_c);
    const double *xy = part->xy + 2 * part->first[o];
    int n = mb_synth_polys_count(part, o);
    double frac = s_c / arc[n]; /* arc is reused as scratch below */
    double ex, ey, nx, ny;
    point_at(xy, arc, n, s_c, &ex, &ey);
    normal_at(xy, arc, n, s_c, fmax(opt->step, 0.2), &nx, &ny);
    double tx = ny, ty = -nx; /* direction of travel */
    mb_synth_polys_clear(c);
    mb_synth_polys_begin(c);
    double size = draw_size(MB_SYNTH_CONTAMINATION, opt, r);
    if (mb_synth_rng_uniform(r) < 0.6) {
        /* blob: an irregular ellipse, overlapping the edge */
        double a = 0.5 * size, b = a * mb_synth_rng_range(r, 0.5, 1.0);
        double phi = mb_synth_rng_range(r, 0, M_PI);
        double c1 = mb_synth_rng_range(r, 0, 2 * M_PI);
        double c2 = mb_synth_rng_range(r, 0, 2 * M_PI);
        double off = b * mb_synth_rng_range(r, 0.2, 0.7);
        double cx = ex - nx * off, cy = ey - ny * off;
        int m = (int)ceil(2 * M_PI * a / opt->step);
        if (m < 32)
            m = 32;
        for (int k = 0; k < m; k++) {
            double t = 2 * M_PI * k / m;
            double ca = cos(t), sa = sin(t);
            double re = a * b / sqrt(b * b * ca * ca + a * a * sa * sa);
            double rad =
                re * (1 + 0.06 * sin(3 * t + c1) + 0.04 * sin(5 * t + c2));
            mb_synth_polys_point(c, cx + rad * cos(t + phi),
                                 cy + rad * sin(t + phi));
        }
        double ext = 0;
        for (int k = 0; k < m; k++)
            for (int j = k + 1; j < m; j++) {
                const double *p = c->xy + 2 * (c->first[0] + k);
                const double *q = c->xy + 2 * (c->first[0] + j);
                double dd = hypot(p[0] - q[0], p[1] - q[1]);
                if (dd > ext)
                    ext = dd;
            }
        size = ext;
    } else {
        /* fibre: a thin, gently curved band crossing the edge, longer than
           a blob is wide (1.5-6 mm unless the caller fixed the range) */
        double len = opt->max_mm > 0 ? size : mb_synth_rng_range(r, 1.5, 6.0);
        double w = mb_synth_rng_range(r, 0.15, 0.3);
        size = len;
        double beta = mb_synth_rng_range(r, 30, 150) * M_PI / 180;
        double kappa = mb_synth_rng_range(r, -0.8, 0.8) / len;
        double q = mb_synth_rng_range(r, 0.15, 0.4);
        double dx = cos(beta) * tx - sin(beta) * nx;
        double dy = cos(beta) * ty - sin(beta) * ny; /* points out */
        double ang0 = atan2(dy, dx);
        int m = (int)ceil(len / opt->step) + 1;
        if (m < 8)
            m = 8;
        if (2 * m + 8 > c->cap)
            m = (c->cap - 8) / 2;
        /* centre line from the start inside the material, through the
           edge point at arc length q * len */
        double sx = ex, sy = ey;
        {
            /* walk back q * len along the curved line */
            double ang = ang0;
            int nb = 64;
            double h = q * len / nb;
            for (int k = 0; k < nb; k++) {
                ang -= kappa * h * 0.5;
                sx -= h * cos(ang);
                sy -= h * sin(ang);
                ang -= kappa * h * 0.5;
            }
            ang0 = ang;
        }
        double *cl = sc->arc; /* centre line x, y, angle */
        double x = sx, y = sy, ang = ang0, h = len / (m - 1);
        for (int k = 0; k < m; k++) {
            cl[3 * k] = x;
            cl[3 * k + 1] = y;
            cl[3 * k + 2] = ang;
            ang += kappa * h * 0.5;
            x += h * cos(ang);
            y += h * sin(ang);
            ang += kappa * h * 0.5;
        }
        for (int k = 0; k < m; k++)
            mb_synth_polys_point(c, cl[3 * k] - 0.5 * w * sin(cl[3 * k + 2]),
                                 cl[3 * k + 1] + 0.5 * w * cos(cl[3 * k + 2]));
        for (int k = m - 1; k >= 0; k--)
            mb_synth_polys_point(c, cl[3 * k] + 0.5 * w * sin(cl[3 * k + 2]),
                                 cl[3 * k + 1] - 0.5 * w * cos(cl[3 * k + 2]));
    }
    mb_synth_polys_end(c);
    if (c->overflow)
        return MB_ERANGE;
    mb_synth_polys_orient(c);
    d->size_mm = size;
    d->extent_mm = 0;
    d->outline = o;
    d->arc = frac;
    d->x = ex;
    d->y = ey;
    return 0;
}

/* ---- shape defects */

static int rebuild_and_measure(const mb_synth_family_def *f,
                               const mb_synth_shape *s,
                               const mb_synth_defect_opts *o,
                               mb_synth_polys *part, mb_synth_scratch *sc,
                               mb_synth_defect *d)
{
    mb_synth_shape_build(f, s, o->step, part);
    if (part->overflow)
        return MB_ERANGE;
    int at = 0;
    d->size_mm = mb_synth_max_deviation(part, &sc->ref, &at);
    locate_point(part, at, sc->arc, d);
    return 0;
}

/* Smallest distance between outline o of p and the other outlines. */
static double outline_clearance(const mb_synth_polys *p, int o)
{
    double best = INFINITY;
    const double *a = p->xy + 2 * p->first[o];
    int na = mb_synth_polys_count(p, o);
    for (int oo = 0; oo < p->n_outlines; oo++) {
        if (oo == o)
            continue;
        const double *b = p->xy + 2 * p->first[oo];
        int nb = mb_synth_polys_count(p, oo);
        for (int i = 0; i < na; i++)
            for (int j = 0; j < nb; j++) {
                double dx = a[2 * i] - b[2 * j],
                       dy = a[2 * i + 1] - b[2 * j + 1];
                double d2 = dx * dx + dy * dy;
                if (d2 < best)
                    best = d2;
            }
    }
    return sqrt(best);
}

static int wrong_variant(const mb_synth_family_def *f,
                         const mb_synth_defect_opts *o, mb_synth_rng *r,
                         mb_synth_shape *s, mb_synth_polys *part,
                         mb_synth_scratch *sc, mb_synth_defect *d)
{
    double sign = mb_synth_rng_uniform(r) < 0.5 ? -1 : 1;
    mb_synth_polys_copy(&sc->ref, part);
    if (f == mb_synth_family_get(MB_SYNTH_RING)) {
        s->p[1] += sign * mb_synth_rng_range(r, 1.0, 2.5); /* other bore */
        return rebuild_and_measure(f, s, o, part, sc, d);
    }
    if (f == mb_synth_family_get(MB_SYNTH_HOSE)) {
        s->p[1] += sign * mb_synth_rng_range(r, 1.2, 2.5); /* other width */
        return rebuild_and_measure(f, s, o, part, sc, d);
    }
    if (f == mb_synth_family_get(MB_SYNTH_LIPSEAL)) {
        s->mirror = 1; /* the profile of the other hand */
        return rebuild_and_measure(f, s, o, part, sc, d);
    }
    /* flange: a bolt hole missing, or moved */
    int hole = (int)(mb_synth_rng_uniform(r) * 4);
    if (mb_synth_rng_uniform(r) < 0.5) {
        int oi = 2 + hole; /* outer edge, opening, then the holes */
        double cx = 0, cy = 0;
        int n = mb_synth_polys_count(part, oi);
        for (int i = 0; i < n; i++) {
            cx += part->xy[2 * (part->first[oi] + i)];
            cy += part->xy[2 * (part->first[oi] + i) + 1];
        }
        s->hole_missing = hole;
        mb_synth_shape_build(f, s, o->step, part);
        if (part->overflow)
            return MB_ERANGE;
        d->size_mm = 2 * s->p[5] * s->size; /* hole diameter */
        d->outline = -1;
        d->arc = -1;
        d->x = cx / n;
        d->y = cy / n;
        return 0;
    }
    double dist = mb_synth_rng_range(r, 1.0, 3.0);
    for (int attempt = 0; attempt < 32; attempt++) {
        double phi = mb_synth_rng_range(r, 0, 2 * M_PI);
        mb_synth_shape t = *s;
        t.p[6 + 2 * hole] += dist * cos(phi);
        t.p[7 + 2 * hole] += dist * sin(phi);
        mb_synth_shape_build(f, &t, o->step, part);
        if (part->overflow)
            return MB_ERANGE;
        if (outline_clearance(part, 2 + hole) < 0.8)
            continue;
        *s = t;
        int at = 0;
        d->size_mm = mb_synth_max_deviation(part, &sc->ref, &at);
        locate_point(part, at, sc->arc, d);
        return 0;
    }
    mb_synth_polys_copy(part, &sc->ref);
    return MB_ERANGE;
}

int mb_synth_defect_apply(const mb_synth_family_def *f, int type,
                          const mb_synth_defect_opts *o, mb_synth_rng *r,
                          mb_synth_shape *shape, mb_synth_polys *part,
                          mb_synth_polys *contam, mb_synth_scratch *sc,
                          mb_synth_defect *d)
{
    mb_synth_polys_clear(contam);
    memset(d, 0, sizeof *d);
    d->type = type;
    d->outline = -1;
    d->arc = -1;
    switch (type) {
    case MB_SYNTH_NICK:
    case MB_SYNTH_FLASH:
    case MB_SYNTH_TEAR:
    case MB_SYNTH_MISSING: return local_defect(type, o, r, part, sc, d);
    case MB_SYNTH_CONTAMINATION:
        return contamination(o, r, part, contam, sc, d);
    case MB_SYNTH_DEFORM: {
        /* push the family's deformation parameter beyond its good range;
           the reference is the same part at the edge of that range */
        int k = f->deform_param;
        double sd = f->params[k].sd, nom = f->params[k].nominal;
        double sign = mb_synth_rng_uniform(r) < 0.5 ? -1 : 1;
        double beyond = mb_synth_rng_range(r, f->deform_lo, f->deform_hi);
        mb_synth_shape edge = *shape;
        edge.p[k] = nom + sign * 3.0 * sd * o->variation;
        mb_synth_shape_build(f, &edge, o->step, &sc->ref);
        shape->p[k] = nom + sign * beyond * sd;
        return rebuild_and_measure(f, shape, o, part, sc, d);
    }
    case MB_SYNTH_WRONG_SIZE: {
        double sign = mb_synth_rng_uniform(r) < 0.5 ? -1 : 1;
        double rel = sign * mb_synth_rng_range(r, 0.025, 0.08);
        shape->size *= 1 + rel;
        mb_synth_shape_build(f, shape, o->step, part);
        d->size_mm = fabs(rel) * f->main_mm;
        d->x = d->y = 0;
        return part->overflow ? MB_ERANGE : 0;
    }
    case MB_SYNTH_WRONG_VARIANT:
        return wrong_variant(f, o, r, shape, part, sc, d);
    default: return MB_EINVAL;
    }
}
