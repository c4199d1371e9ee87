/*
 * tests/fit/test_correspond.c - landmark correspondence without clicking.
 *
 * Parts are generated analytically: every outline is a chain of lines and
 * circular arcs (or a polar oval for rings) whose parameter u in [0, 1) is
 * the arc-length fraction from a known material point. Each part gets a
 * random similarity pose, a random start and direction per outline, a random
 * hole order, uneven point spacing, small natural variation and 0.03 px of
 * noise. The tests then check that the recovered landmarks land on the same
 * generating parameter in every part (to a small fraction of a spacing),
 * that holes are matched across permutations, that the shape model of the
 * corresponded shapes needs few modes, that rings give a model whose modes
 * move the outline along its normals (not a tangential slide), and that bad
 * parts are refused with their index.
 *
 * Figures are printed (RMS tangential error in px and spacings, modes, time
 * for 100 parts) and bounded.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

#include <cmocka.h>

#include "correspond.h"
#include "error.h"
#include "shape_model.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

/* ---- random numbers (splitmix64; Box-Muller) ------------------------- */

typedef struct {
    uint64_t s;
} rng;

static double rng_uniform(rng *r)
{
    uint64_t z = (r->s += 0x9E3779B97F4A7C15ull);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
    z ^= z >> 31;
    return (double)(z >> 11) * (1.0 / 9007199254740992.0);
}

static double rng_normal(rng *r)
{
    double u1 = rng_uniform(r), u2 = rng_uniform(r);
    if (u1 < 1e-300)
        u1 = 1e-300;
    return sqrt(-2.0 * log(u1)) * cos(2.0 * M_PI * u2);
}

/* ---- analytic outlines ----------------------------------------------- */

enum { PIECE_LINE, PIECE_ARC, PIECE_OVAL };

typedef struct {
    int kind;
    double x0, y0, x1, y1;       /* line */
    double cx, cy, r, a0, sweep; /* arc / oval: centre, radius, angles */
    double e, phi;               /* oval: r (1 + e cos 2 (a - phi)) */
    double len;
} piece;

#define MAX_PIECES 12
#define MAX_OUT 8

typedef struct {
    int n;
    piece p[MAX_PIECES];
    double length;
} curve;

static void curve_line(curve *c, double x0, double y0, double x1, double y1)
{
    piece *p = &c->p[c->n++];
    memset(p, 0, sizeof *p);
    p->kind = PIECE_LINE;
    p->x0 = x0;
    p->y0 = y0;
    p->x1 = x1;
    p->y1 = y1;
    p->len = hypot(x1 - x0, y1 - y0);
    c->length += p->len;
}

static void curve_arc(curve *c, double cx, double cy, double r, double a0,
                      double sweep)
{
    piece *p = &c->p[c->n++];
    memset(p, 0, sizeof *p);
    p->kind = PIECE_ARC;
    p->cx = cx;
    p->cy = cy;
    p->r = r;
    p->a0 = a0;
    p->sweep = sweep;
    p->len = r * fabs(sweep);
    c->length += p->len;
}

static void piece_eval(const piece *p, double t, double *x, double *y)
{
    if (p->kind == PIECE_LINE) {
        *x = p->x0 + t * (p->x1 - p->x0);
        *y = p->y0 + t * (p->y1 - p->y0);
        return;
    }
    double a = p->a0 + t * p->sweep;
    double r = p->r;
    if (p->kind == PIECE_OVAL)
        r *= 1.0 + p->e * cos(2.0 * (a - p->phi));
    *x = p->cx + r * cos(a);
    *y = p->cy + r * sin(a);
}

/* The point at arc-length fraction u (wrapping). */
static void curve_eval(const curve *c, double u, double *x, double *y)
{
    u -= floor(u);
    double s = u * c->length;
    for (int i = 0; i < c->n; i++) {
        if (s <= c->p[i].len || i == c->n - 1) {
            double t = s / c->p[i].len;
            piece_eval(&c->p[i], t > 1.0 ? 1.0 : t, x, y);
            return;
        }
        s -= c->p[i].len;
    }
}

/* The point at piece parameter v: each piece takes an equal share of
   [0, 1) whatever its length. For a stretched part this follows the
   material: a straight edge stretches evenly, a corner arc or an end cap
   keeps its angles. */
static void curve_eval_piece(const curve *c, double v, double *x, double *y)
{
    v = (v - floor(v)) * c->n;
    int i = (int)v;
    if (i >= c->n)
        i = c->n - 1;
    piece_eval(&c->p[i], v - i, x, y);
}

/* Rounded rectangle, starting at the middle of the top edge. */
static void curve_rrect(curve *c, double cx, double cy, double a, double b,
                        double rc)
{
    c->n = 0;
    c->length = 0.0;
    curve_line(c, cx, cy - b, cx + a - rc, cy - b);
    curve_arc(c, cx + a - rc, cy - b + rc, rc, -0.5 * M_PI, 0.5 * M_PI);
    curve_line(c, cx + a, cy - b + rc, cx + a, cy + b - rc);
    curve_arc(c, cx + a - rc, cy + b - rc, rc, 0.0, 0.5 * M_PI);
    curve_line(c, cx + a - rc, cy + b, cx - a + rc, cy + b);
    curve_arc(c, cx - a + rc, cy + b - rc, rc, 0.5 * M_PI, 0.5 * M_PI);
    curve_line(c, cx - a, cy + b - rc, cx - a, cy - b + rc);
    curve_arc(c, cx - a + rc, cy - b + rc, rc, M_PI, 0.5 * M_PI);
    curve_line(c, cx - a + rc, cy - b, cx, cy - b);
}

static void curve_circle(curve *c, double cx, double cy, double r)
{
    c->n = 0;
    c->length = 0.0;
    curve_arc(c, cx, cy, r, 0.0, 2.0 * M_PI);
}

/* Polar oval, parameter = polar angle (only rings use it; their test does
   not need an arc-length parameter). */
static void curve_oval(curve *c, double r, double e, double phi)
{
    c->n = 0;
    c->length = 0.0;
    curve_arc(c, 0.0, 0.0, r, 0.0, 2.0 * M_PI);
    c->p[0].kind = PIECE_OVAL;
    c->p[0].e = e;
    c->p[0].phi = phi;
}

/* A band of half width w around a circular centre line of length len and
   curvature kappa > 0, with round ends: outer side, end cap, inner side,
   start cap. */
static void curve_band(curve *c, double len, double kappa, double w)
{
    double rho = 1.0 / kappa, half = 0.5 * len * kappa;
    double ccx = 0.0, ccy = rho; /* centre of curvature */
    c->n = 0;
    c->length = 0.0;
    curve_arc(c, ccx, ccy, rho + w, -half - 0.5 * M_PI, 2.0 * half);
    curve_arc(c, ccx + rho * sin(half), ccy - rho * cos(half), w,
              half - 0.5 * M_PI, M_PI);
    curve_arc(c, ccx, ccy, rho - w, half - 0.5 * M_PI, -2.0 * half);
    curve_arc(c, ccx - rho * sin(half), ccy - rho * cos(half), w,
              0.5 * M_PI - half, M_PI);
}

/* Shoelace sign of a curve traversed by increasing u. */
static int curve_orientation(const curve *c)
{
    double a2 = 0.0, px, py, x, y;
    curve_eval(c, 0.0, &px, &py);
    for (int i = 1; i <= 400; i++) {
        curve_eval(c, i / 400.0, &x, &y);
        a2 += px * y - x * py;
        px = x;
        py = y;
    }
    return a2 > 0.0 ? 1 : -1;
}

/* ---- generated parts ------------------------------------------------- */

typedef struct {
    int n_outlines;
    curve truth[MAX_OUT]; /* generator order: 0 outer, then holes; part frame */
    int gen_of_input[MAX_OUT]; /* input outline -> generator outline */
    double u0[MAX_OUT]; /* generator outline: u of its first input point */
    int dir[MAX_OUT];   /* +1 along u, -1 against */
    mb_pose pose;       /* part frame -> image px */
    double *xy;
    mb_polyline_set set;
} test_part;

static void part_free(test_part *tp)
{
    free(tp->xy);
    tp->xy = NULL;
}

/* Sample the outlines densely (about `spacing` px apart in the image,
   uneven), pose them, add noise, shuffle the holes. */
static void part_sample(test_part *tp, rng *r, double noise)
{
    double spacing = 0.8;
    int order[MAX_OUT];
    int K = tp->n_outlines;
    for (int k = 0; k < K; k++)
        order[k] = k;
    for (int k = K - 1; k > 1; k--) {
        int i = 1 + (int)(rng_uniform(r) * k);
        if (i > k)
            i = k;
        int t = order[k];
        order[k] = order[i];
        order[i] = t;
    }
    size_t total = 0;
    int counts[MAX_OUT];
    for (int k = 0; k < K; k++) {
        int g = order[k];
        counts[k] = (int)ceil(tp->truth[g].length * tp->pose.scale / spacing);
        total += (size_t)counts[k];
    }
    tp->xy = malloc(sizeof(double) * 2 * total);
    assert_non_null(tp->xy);
    memset(&tp->set, 0, sizeof tp->set);
    tp->set.n_outlines = K;
    tp->set.xy = tp->xy;
    double *out = tp->xy;
    for (int k = 0; k < K; k++) {
        int g = order[k], M = counts[k];
        tp->gen_of_input[k] = g;
        tp->u0[g] = rng_uniform(r);
        tp->dir[g] = rng_uniform(r) < 0.5 ? -1 : 1;
        tp->set.counts[k] = M;
        for (int i = 0; i < M; i++) {
            double jit = i == 0 ? 0.0 : 0.6 * (rng_uniform(r) - 0.5);
            double u = tp->u0[g] + tp->dir[g] * (i + jit) / M;
            double p[2];
            curve_eval(&tp->truth[g], u, &p[0], &p[1]);
            mb_pose_apply(&tp->pose, p, 1, out);
            out[0] += noise * rng_normal(r);
            out[1] += noise * rng_normal(r);
            out += 2;
        }
    }
}

static void random_pose(test_part *tp, rng *r)
{
    tp->pose.angle = 2.0 * M_PI * rng_uniform(r);
    tp->pose.scale = 0.9 + 0.2 * rng_uniform(r);
    tp->pose.tx = 300.0 + 700.0 * rng_uniform(r);
    tp->pose.ty = 250.0 + 500.0 * rng_uniform(r);
}

/* Flange gasket: rounded rectangle, off-centre rounded opening, three bolt
   holes. Natural variation: width, height, opening size (3 parameters). */
static const double bolt_at[3][2] = {
    {70.0, -50.0}, {70.0, 50.0}, {-90.0, 45.0}};

static void make_flange(test_part *tp, rng *r, int holes_kept, double moved,
                        double noise)
{
    memset(tp, 0, sizeof *tp);
    double p1 = 0.02 * rng_normal(r), p2 = 0.02 * rng_normal(r);
    double p3 = 0.04 * rng_normal(r);
    curve_rrect(&tp->truth[0], 0.0, 0.0, 120.0 * (1 + p1), 80.0 * (1 + p2),
                20.0);
    curve_rrect(&tp->truth[1], -25.0, 0.0, 35.0 * (1 + p3), 30.0 * (1 + p3),
                12.0);
    tp->n_outlines = 2;
    for (int h = 0; h < holes_kept; h++) {
        double dx = h == 1 ? moved : 0.0;
        curve_circle(&tp->truth[2 + h], bolt_at[h][0] + dx, bolt_at[h][1], 8.0);
        tp->n_outlines++;
    }
    random_pose(tp, r);
    part_sample(tp, r, noise);
}

/* Round flange: circular outer edge and opening; three bolt holes on an
   uneven pattern, one larger, so that only the holes fix the rotation. */
static void make_round_flange(test_part *tp, rng *r)
{
    memset(tp, 0, sizeof *tp);
    double p1 = 0.01 * rng_normal(r), p2 = 0.02 * rng_normal(r);
    curve_circle(&tp->truth[0], 0.0, 0.0, 120.0 * (1 + p1));
    curve_circle(&tp->truth[1], 0.0, 0.0, 55.0 * (1 + p2));
    const double ang[3] = {0.0, 1.8, 3.9}, rad[3] = {8.0, 8.0, 11.0};
    for (int h = 0; h < 3; h++)
        curve_circle(&tp->truth[2 + h], 88.0 * cos(ang[h]), 88.0 * sin(ang[h]),
                     rad[h]);
    tp->n_outlines = 5;
    random_pose(tp, r);
    part_sample(tp, r, 0.03);
}

/* Ring (annulus): both edges share the ovality e and its axis phi. */
static void make_ring(test_part *tp, rng *r, double e_mean, double e_sd)
{
    memset(tp, 0, sizeof *tp);
    double e = e_mean + e_sd * rng_normal(r);
    double phi = M_PI * rng_uniform(r);
    double q = 0.01 * rng_normal(r);
    curve_oval(&tp->truth[0], 150.0, e, phi);
    curve_oval(&tp->truth[1], 100.0 * (1 + q), e, phi);
    tp->n_outlines = 2;
    random_pose(tp, r);
    part_sample(tp, r, 0.03);
}

/* Hose band: length and bend vary (2 parameters). */
static void make_hose(test_part *tp, rng *r)
{
    memset(tp, 0, sizeof *tp);
    double len = 300.0 * (1 + 0.01 * rng_normal(r));
    double kappa = 1.0 / 500.0 + (1.0 / 250.0 - 1.0 / 500.0) * rng_uniform(r);
    curve_band(&tp->truth[0], len, kappa, 15.0);
    tp->n_outlines = 1;
    random_pose(tp, r);
    part_sample(tp, r, 0.03);
}

static mb_polyline_set *sets_of(test_part *tp, int m)
{
    mb_polyline_set *s = malloc(sizeof *s * (size_t)m);
    assert_non_null(s);
    for (int j = 0; j < m; j++)
        s[j] = tp[j].set;
    return s;
}

/* ---- checks ---------------------------------------------------------- */

/* The parameter of the point of a curve nearest to (x, y): a table of K
   samples, searched within `window` samples of `centre` (everywhere when
   centre < 0), then projection on the two chords next to the nearest
   sample, whose index goes to *hint. */
static double curve_project(const double *tab, int K, double x, double y,
                            int centre, int window, int *hint)
{
    int best = 0;
    double bd = HUGE_VAL;
    int lo = 0, hi = K - 1;
    if (centre >= 0) {
        lo = centre - window;
        hi = centre + window;
    }
    for (int i = lo; i <= hi; i++) {
        int k = ((i % K) + K) % K;
        double d = hypot(tab[2 * k] - x, tab[2 * k + 1] - y);
        if (d < bd) {
            bd = d;
            best = k;
        }
    }
    *hint = best;
    double ub = best, db = bd;
    for (int side = -1; side <= 1; side += 2) {
        int a = best, b = ((best + side) % K + K) % K;
        double ex = tab[2 * b] - tab[2 * a],
               ey = tab[2 * b + 1] - tab[2 * a + 1];
        double f = ((x - tab[2 * a]) * ex + (y - tab[2 * a + 1]) * ey) /
                   (ex * ex + ey * ey);
        if (f < 0.0 || f > 1.0)
            continue;
        double px = tab[2 * a] + f * ex, py = tab[2 * a + 1] + f * ey;
        double d = hypot(px - x, py - y);
        if (d < db) {
            db = d;
            ub = best + side * f;
        }
    }
    ub /= K;
    return ub - floor(ub);
}

static double wrap_half(double d)
{
    return d - floor(d + 0.5);
}

typedef struct {
    double start_rms,
        start_max; /* per part and outline: mean offset, spacings */
    double point_rms, point_max; /* per landmark, spacings */
    double point_rms_px;         /* per landmark, image px */
    int holes_consistent;        /* 1 when every part maps layout outline k
                                    to the same generator outline */
    int reversed_ok;             /* info->reversed matches the generator */
    double start_report_err; /* worst |landmark 0 - point at info start|, px */
} match_figures;

/* Where does landmark i of every part lie on the generating curve? */
static void material_check(const test_part *tp, const mb_layout *lay,
                           const double *shapes, const mb_correspond_info *info,
                           int by_piece, match_figures *f)
{
    int m = info->n_parts, n = lay->n_points, K = 8192;
    int mu = info->n_used;
    double *u = malloc(sizeof(double) * (size_t)n * (size_t)mu);
    double *tab = malloc(sizeof(double) * 2 * (size_t)K);
    assert_non_null(u);
    assert_non_null(tab);
    memset(f, 0, sizeof *f);
    f->holes_consistent = 1;
    f->reversed_ok = 1;
    int gen_ref[MAX_OUT];
    int first = 1;
    for (int j = 0; j < m; j++) {
        const mb_correspond_part *ip = &info->parts[j];
        if (ip->status != 0)
            continue;
        const test_part *t = &tp[j];
        const double *x = shapes + (size_t)ip->column * 2 * n;
        mb_pose inv = mb_pose_invert(&t->pose);
        for (int k = 0, fst = 0; k < lay->n_outlines; k++) {
            int g = t->gen_of_input[ip->source[k]];
            if (first)
                gen_ref[k] = g;
            else if (gen_ref[k] != g)
                f->holes_consistent = 0;
            int expect_rev = t->dir[g] * curve_orientation(&t->truth[g]) < 0;
            if (ip->reversed[k] != expect_rev)
                f->reversed_ok = 0;
            /* The reported start reproduces landmark 0 on the input. */
            const double *in = t->set.xy;
            for (int o = 0; o < ip->source[k]; o++)
                in += 2 * t->set.counts[o];
            int cnt = t->set.counts[ip->source[k]];
            double s = ip->start[k], px = in[0], py = in[1];
            for (int i = 0; i < cnt; i++) {
                int q = (i + 1) % cnt;
                double len =
                    hypot(in[2 * q] - in[2 * i], in[2 * q + 1] - in[2 * i + 1]);
                if (s <= len) {
                    px = in[2 * i] + s / len * (in[2 * q] - in[2 * i]);
                    py = in[2 * i + 1] +
                         s / len * (in[2 * q + 1] - in[2 * i + 1]);
                    break;
                }
                s -= len;
            }
            double e0 = hypot(px - x[2 * fst], py - x[2 * fst + 1]);
            if (e0 > f->start_report_err)
                f->start_report_err = e0;
            for (int i = 0; i < K; i++)
                (by_piece ? curve_eval_piece : curve_eval)(
                    &t->truth[g], (double)i / K, &tab[2 * i], &tab[2 * i + 1]);
            /* Landmark 0 everywhere; then around the place the last step
               predicts (steps change by up to 7x between pieces). */
            int hint = -1, prev = -1;
            for (int i = 0; i < lay->counts[k]; i++) {
                double p[2];
                int centre = -1, window = 0;
                if (i == 1) {
                    centre = hint;
                    window = 8 * K / lay->counts[k] + 8;
                } else if (i > 1) {
                    int step = ((hint - prev) % K + K + K / 2) % K - K / 2;
                    centre = hint + step;
                    window = 7 * abs(step) + 16;
                }
                prev = hint;
                mb_pose_apply(&inv, x + 2 * (fst + i), 1, p);
                u[(size_t)ip->column * n + fst + i] =
                    curve_project(tab, K, p[0], p[1], centre, window, &hint);
            }
            fst += lay->counts[k];
        }
        first = 0;
    }
    /* Spread over parts of the parameter of each landmark. */
    double s_start = 0.0, s_point = 0.0, s_px = 0.0;
    int n_start = 0, n_point = 0;
    for (int k = 0, fst = 0; k < lay->n_outlines; k++) {
        int N = lay->counts[k];
        double *off = calloc((size_t)mu, sizeof(double));
        assert_non_null(off);
        for (int i = 0; i < N; i++) {
            double sc = 0.0, ss = 0.0;
            for (int c = 0; c < mu; c++) {
                double a = 2.0 * M_PI * u[(size_t)c * n + fst + i];
                sc += cos(a);
                ss += sin(a);
            }
            double ubar = atan2(ss, sc) / (2.0 * M_PI);
            for (int j = 0; j < m; j++) {
                const mb_correspond_part *ip = &info->parts[j];
                if (ip->status != 0)
                    continue;
                int c = ip->column;
                int g = tp[j].gen_of_input[ip->source[k]];
                double h = tp[j].truth[g].length * tp[j].pose.scale / N;
                double d = wrap_half(u[(size_t)c * n + fst + i] - ubar) * N;
                off[c] += d / N;
                s_point += d * d;
                s_px += d * d * h * h;
                n_point++;
                if (fabs(d) > f->point_max)
                    f->point_max = fabs(d);
            }
        }
        for (int c = 0; c < mu; c++) {
            s_start += off[c] * off[c];
            n_start++;
            if (fabs(off[c]) > f->start_max)
                f->start_max = fabs(off[c]);
        }
        free(off);
        fst += N;
    }
    f->start_rms = sqrt(s_start / n_start);
    f->point_rms = sqrt(s_point / n_point);
    f->point_rms_px = sqrt(s_px / n_point);
    free(u);
    free(tab);
}

/* Share of the squared length of a displacement field v (2n values) that
   runs along the outlines of shape `mean` (tangents by central
   differences within each outline). */
static double tangential_share(const double *mean, const mb_layout *lay,
                               const double *v)
{
    double tt = 0.0, nn = 0.0;
    for (int k = 0, f = 0; k < lay->n_outlines; k++) {
        int N = lay->counts[k];
        for (int i = 0; i < N; i++) {
            int a = f + (i + N - 1) % N, b = f + (i + 1) % N;
            double tx = mean[2 * b] - mean[2 * a];
            double ty = mean[2 * b + 1] - mean[2 * a + 1];
            double tl = hypot(tx, ty);
            tx /= tl;
            ty /= tl;
            double dx = v[2 * (f + i)], dy = v[2 * (f + i) + 1];
            double t = dx * tx + dy * ty, nrm = -dx * ty + dy * tx;
            tt += t * t;
            nn += nrm * nrm;
        }
        f += N;
    }
    return tt / (tt + nn);
}

typedef struct {
    int modes98;         /* modes for 98 % of the variance */
    double total_var;    /* model frame (unit-norm mean) */
    double first_share;  /* variance fraction of mode 1 */
    double tan_first;    /* tangential share of mode 1's displacement */
    double tan_weighted; /* eigenvalue-weighted tangential share, 6 modes */
} model_figures;

static void model_check(const double *shapes, int m, const mb_layout *lay,
                        model_figures *f)
{
    char err[MB_ERR_LEN] = "";
    mb_pca_params pp;
    mb_pca_params_default(&pp);
    mb_shape_model *model = NULL;
    int rc = mb_shape_model_build(shapes, 2 * lay->n_points, lay, m, NULL, &pp,
                                  NULL, &model, err);
    if (rc != 0)
        fprintf(stderr, "model: %s\n", err);
    assert_int_equal(rc, 0);
    f->modes98 = mb_shape_model_n_modes(model);
    f->total_var = mb_shape_model_total_var(model);
    f->first_share = mb_shape_model_eig(model)[0] / f->total_var;
    mb_shape_model_close(model);

    pp.fixed_modes = 6;
    rc = mb_shape_model_build(shapes, 2 * lay->n_points, lay, m, NULL, &pp,
                              NULL, &model, err);
    assert_int_equal(rc, 0);
    const double *mean = mb_shape_model_mean(model);
    const double *modes = mb_shape_model_modes(model);
    const double *eig = mb_shape_model_eig(model);
    int d = mb_shape_model_dim(model), k = mb_shape_model_n_modes(model);
    double wsum = 0.0, tsum = 0.0;
    for (int i = 0; i < k; i++) {
        double t = tangential_share(mean, lay, modes + (size_t)i * d);
        if (i == 0)
            f->tan_first = t;
        tsum += eig[i] * t;
        wsum += eig[i];
    }
    f->tan_weighted = tsum / wsum;
    mb_shape_model_close(model);
}

/* The naive baseline: every input outline, in input order, brought to
   positive winding and resampled by arc length from its first point. */
static double *naive_shapes(const test_part *tp, int m, const mb_layout *lay)
{
    int n = lay->n_points;
    double *X = malloc(sizeof(double) * 2 * (size_t)n * (size_t)m);
    assert_non_null(X);
    for (int j = 0; j < m; j++) {
        const double *in = tp[j].set.xy;
        double *out = X + (size_t)j * 2 * n;
        assert_int_equal(tp[j].set.n_outlines, lay->n_outlines);
        for (int k = 0; k < lay->n_outlines; k++) {
            int M = tp[j].set.counts[k], N = lay->counts[k];
            double a2 = 0.0, L = 0.0;
            for (int i = 0; i < M; i++) {
                int q = (i + 1) % M;
                a2 += in[2 * i] * in[2 * q + 1] - in[2 * q] * in[2 * i + 1];
                L +=
                    hypot(in[2 * q] - in[2 * i], in[2 * q + 1] - in[2 * i + 1]);
            }
            int step = a2 > 0.0 ? 1 : M - 1; /* index step along + winding */
            int i = 0;
            double at = 0.0; /* arc length at point i */
            for (int l = 0; l < N; l++) {
                double want = l * L / N;
                for (;;) {
                    int q = (i + step) % M;
                    double len = hypot(in[2 * q] - in[2 * i],
                                       in[2 * q + 1] - in[2 * i + 1]);
                    if (at + len >= want) {
                        double f = len > 0.0 ? (want - at) / len : 0.0;
                        out[0] = in[2 * i] + f * (in[2 * q] - in[2 * i]);
                        out[1] =
                            in[2 * i + 1] + f * (in[2 * q + 1] - in[2 * i + 1]);
                        break;
                    }
                    at += len;
                    i = q;
                }
                out += 2;
            }
            in += 2 * M;
        }
    }
    return X;
}

static double seconds_now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return ts.tv_sec + 1e-9 * ts.tv_nsec;
}

static double cpu_seconds_now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
    return ts.tv_sec + 1e-9 * ts.tv_nsec;
}

/* One generated training set and what the solver made of it. */
typedef void (*part_maker)(test_part *tp, rng *r, int j);

typedef struct {
    int m;
    test_part *tp;
    mb_layout lay;
    double *shapes;
    mb_correspond_info info;
    double secs[2]; /* wall clock, CPU */
    char err[MB_ERR_LEN];
} corr_case;

static void case_make(corr_case *c, int m, uint64_t seed, part_maker make)
{
    memset(c, 0, sizeof *c);
    c->m = m;
    c->tp = calloc((size_t)m, sizeof *c->tp);
    assert_non_null(c->tp);
    rng r = {seed};
    for (int j = 0; j < m; j++)
        make(&c->tp[j], &r, j);
}

/* Run the solver (p may be NULL); prints nothing. */
static int case_run(corr_case *c, const mb_correspond_params *p)
{
    free(c->shapes);
    mb_correspond_info_free(&c->info);
    mb_polyline_set *sets = sets_of(c->tp, c->m);
    double t0 = seconds_now(), c0 = cpu_seconds_now();
    c->err[0] = '\0';
    int rc =
        mb_correspond_run(sets, c->m, p, &c->lay, &c->shapes, &c->info, c->err);
    c->secs[0] = seconds_now() - t0;
    c->secs[1] = cpu_seconds_now() - c0;
    free(sets);
    if (rc != 0 && rc != MB_ESIZE)
        fprintf(stderr, "correspondence: %s\n", c->err);
    return rc;
}

static void case_free(corr_case *c)
{
    free(c->shapes);
    mb_correspond_info_free(&c->info);
    for (int j = 0; j < c->m; j++)
        part_free(&c->tp[j]);
    free(c->tp);
    memset(c, 0, sizeof *c);
}

static void flange_good(test_part *tp, rng *r, int j)
{
    (void)j;
    make_flange(tp, r, 3, 0.0, 0.03);
}

static void flange_noisy(test_part *tp, rng *r, int j)
{
    (void)j;
    make_flange(tp, r, 3, 0.0, 0.15);
}

/* Part 5 lacks a bolt hole; part 7 has one moved by 25 px. */
static void flange_missing5(test_part *tp, rng *r, int j)
{
    make_flange(tp, r, j == 5 ? 2 : 3, 0.0, 0.03);
}

static void flange_moved7(test_part *tp, rng *r, int j)
{
    make_flange(tp, r, 3, j == 7 ? 25.0 : 0.0, 0.03);
}

static void round_flange(test_part *tp, rng *r, int j)
{
    (void)j;
    make_round_flange(tp, r);
}

static void ring_oval(test_part *tp, rng *r, int j)
{
    (void)j;
    make_ring(tp, r, 0.02, 0.004);
}

static void ring_round(test_part *tp, rng *r, int j)
{
    (void)j;
    make_ring(tp, r, 0.0, 0.001);
}

static void hose(test_part *tp, rng *r, int j)
{
    (void)j;
    make_hose(tp, r);
}

/* ---- tests ----------------------------------------------------------- */

static double assign_brute(const double *cost, int n, int *perm, int depth,
                           int used)
{
    if (depth == n) {
        double s = 0.0;
        for (int i = 0; i < n; i++)
            s += cost[i + perm[i] * n];
        return s;
    }
    double best = HUGE_VAL;
    for (int j = 0; j < n; j++) {
        if (used & (1 << j))
            continue;
        perm[depth] = j;
        double s = assign_brute(cost, n, perm, depth + 1, used | (1 << j));
        if (s < best)
            best = s;
    }
    return best;
}

static void test_assign(void **state)
{
    (void)state;
    /* Hand example, row-major for reading (stored column-major below):
       rows (4 1 3) (2 0 5) (3 2 2); the optimum 0->1, 1->0, 2->2 costs 5
       (all six permutations worked out by hand: 5, 6, 6, 7, 9, 11). */
    const double rows[3][3] = {{4, 1, 3}, {2, 0, 5}, {3, 2, 2}};
    double c[9];
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++)
            c[i + 3 * j] = rows[i][j];
    int a[8];
    assert_int_equal(mb_correspond_assign(c, 3, a), 0);
    assert_int_equal(a[0], 1);
    assert_int_equal(a[1], 0);
    assert_int_equal(a[2], 2);

    /* Random matrices against exhaustive search, with and without ties. */
    rng r = {12345};
    for (int trial = 0; trial < 300; trial++) {
        int n = 1 + trial % 7;
        double cost[49];
        for (int i = 0; i < n * n; i++)
            cost[i] = trial % 2 ? floor(4.0 * rng_uniform(&r))
                                : 100.0 * rng_uniform(&r) - 20.0;
        assert_int_equal(mb_correspond_assign(cost, n, a), 0);
        int seen = 0;
        double s = 0.0;
        for (int i = 0; i < n; i++) {
            assert_true(a[i] >= 0 && a[i] < n);
            seen |= 1 << a[i];
            s += cost[i + a[i] * n];
        }
        assert_int_equal(seen, (1 << n) - 1);
        int perm[8];
        assert_true(fabs(s - assign_brute(cost, n, perm, 0, 0)) < 1e-9);
    }
    assert_int_equal(mb_correspond_assign(NULL, 3, a), MB_EINVAL);
    assert_int_equal(mb_correspond_assign(c, 0, a), MB_EINVAL);
    c[4] = NAN;
    assert_int_equal(mb_correspond_assign(c, 3, a), MB_ENUMERIC);
}

static void print_match(const char *name, const match_figures *f)
{
    printf("%s: start error RMS %.4f spacings (max %.4f); landmark tangential "
           "error RMS %.4f spacings = %.3f px (max %.3f spacings)\n",
           name, f->start_rms, f->start_max, f->point_rms, f->point_rms_px,
           f->point_max);
}

static void test_flange(void **state)
{
    (void)state;
    corr_case c;
    case_make(&c, 100, 2024, flange_good);
    assert_int_equal(case_run(&c, NULL), 0);
    printf("flange: %d parts corresponded in %.3f s (%.3f s of CPU; %d "
           "iterations, converged %d, last change %.2g spacings); layout",
           c.m, c.secs[0], c.secs[1], c.info.iterations, c.info.converged,
           c.info.last_change);
    for (int k = 0; k < c.lay.n_outlines; k++)
        printf(" %d", c.lay.counts[k]);
    printf("\n");
    assert_int_equal(c.info.n_used, c.m);
    assert_int_equal(c.info.converged, 1);
    /* Layout: 5 outlines, the budget exactly, bolt holes at the minimum,
       the outer edge (about 2/3 of the length) with the most. */
    assert_int_equal(c.lay.n_outlines, 5);
    assert_int_equal(c.lay.n_points, 256);
    assert_int_equal(mb_layout_check(&c.lay), 0);
    assert_true(c.lay.counts[0] > 140 && c.lay.counts[0] < 180);
    assert_true(c.lay.counts[1] > 35 && c.lay.counts[1] < 65);
    for (int k = 2; k < 5; k++)
        assert_int_equal(c.lay.counts[k], 16);

    match_figures f;
    material_check(c.tp, &c.lay, c.shapes, &c.info, 0, &f);
    print_match("flange", &f);
    assert_true(f.holes_consistent);
    assert_true(f.reversed_ok);
    assert_true(f.start_report_err < 1e-6);
    /* A grid start alone would leave up to 0.5 spacing (RMS 0.29). */
    assert_true(f.start_rms < 0.05);
    assert_true(f.start_max < 0.25);
    assert_true(f.point_rms < 0.25);
    /* Against the material (straight edges stretch evenly, corners keep
       their angles) arc-length resampling itself slides a little where
       width and height change; printed, loosely bounded. */
    match_figures fm;
    material_check(c.tp, &c.lay, c.shapes, &c.info, 1, &fm);
    print_match("flange, material points", &fm);
    assert_true(fm.point_rms < 0.5);

    model_figures mf, naive;
    model_check(c.shapes, c.m, &c.lay, &mf);
    double *X = naive_shapes(c.tp, c.m, &c.lay);
    model_check(X, c.m, &c.lay, &naive);
    printf("flange: modes for 98 %%: %d (3 generating parameters), total "
           "variance %.3g; naive fixed-start resampling: %d modes, total "
           "variance %.3g (x%.0f)\n",
           mf.modes98, mf.total_var, naive.modes98, naive.total_var,
           naive.total_var / mf.total_var);
    assert_true(mf.modes98 <= 4);
    assert_true(naive.total_var > 20.0 * mf.total_var);
    free(X);
    case_free(&c);
}

/* Noisier outlines (0.15 px per point, 0.8 px apart) lengthen the polyline
   unevenly; measuring arc length on the averaged outline keeps landmarks
   from sliding. */
static void test_flange_noisy(void **state)
{
    (void)state;
    corr_case c;
    case_make(&c, 40, 606, flange_noisy);
    mb_correspond_params p;
    mb_correspond_params_default(&p);
    match_figures f[2];
    model_figures mf[2];
    for (int q = 0; q < 2; q++) {
        if (q == 1)
            p.arc_smoothing = 0.0;
        assert_int_equal(case_run(&c, &p), 0);
        assert_int_equal(c.info.converged, 1);
        material_check(c.tp, &c.lay, c.shapes, &c.info, 0, &f[q]);
        assert_true(f[q].holes_consistent);
        model_check(c.shapes, c.m, &c.lay, &mf[q]);
    }
    print_match("noisy flange", &f[0]);
    print_match("noisy flange, plain arc length", &f[1]);
    printf("noisy flange: modes for 98 %%: %d; with plain arc length: %d\n",
           mf[0].modes98, mf[1].modes98);
    assert_true(f[0].start_rms < 0.05);
    assert_true(f[0].point_rms_px < 0.15);
    assert_true(mf[0].modes98 <= 4);
    assert_true(f[1].point_rms_px > 2.0 * f[0].point_rms_px);
    case_free(&c);
}

static void test_round_flange(void **state)
{
    (void)state;
    corr_case c;
    case_make(&c, 40, 777, round_flange);
    assert_int_equal(case_run(&c, NULL), 0);
    match_figures f;
    material_check(c.tp, &c.lay, c.shapes, &c.info, 0, &f);
    print_match("round flange (rotation fixed by the holes only)", &f);
    assert_true(f.holes_consistent);
    assert_true(f.reversed_ok);
    assert_true(f.start_rms < 0.05);
    assert_true(f.point_rms < 0.1);
    model_figures mf;
    model_check(c.shapes, c.m, &c.lay, &mf);
    printf("round flange: modes for 98 %%: %d (2 generating parameters)\n",
           mf.modes98);
    assert_true(mf.modes98 <= 3);
    case_free(&c);
}

static void ring_case(const char *name, part_maker make, uint64_t seed)
{
    corr_case c;
    case_make(&c, 60, seed, make);
    assert_int_equal(case_run(&c, NULL), 0);
    model_figures mf, naive;
    model_check(c.shapes, c.m, &c.lay, &mf);
    double *X = naive_shapes(c.tp, c.m, &c.lay);
    model_check(X, c.m, &c.lay, &naive);
    printf("%s: %d iterations (converged %d); modes for 98 %%: %d; mode 1 "
           "explains %.0f %%, its displacement is %.1f %% tangential; "
           "6 modes weighted: %.1f %% tangential; total variance %.3g\n",
           name, c.info.iterations, c.info.converged, mf.modes98,
           100 * mf.first_share, 100 * mf.tan_first, 100 * mf.tan_weighted,
           mf.total_var);
    printf("%s: naive fixed-start resampling: %d modes, mode 1 %.1f %% "
           "tangential, total variance %.3g (x%.0f)\n",
           name, naive.modes98, 100 * naive.tan_first, naive.total_var,
           naive.total_var / mf.total_var);
    /* Generating parameters: ovality and thickness. */
    assert_true(mf.modes98 <= 3);
    assert_true(mf.tan_first < 0.2);
    assert_true(mf.tan_weighted < 0.2);
    assert_true(naive.tan_first > 0.5);
    assert_true(naive.total_var > 10.0 * mf.total_var);
    free(X);
    case_free(&c);
}

static void test_ring_oval(void **state)
{
    (void)state;
    ring_case("ring, ovality 2 %", ring_oval, 99);
}

static void test_ring_round(void **state)
{
    (void)state;
    ring_case("ring, nearly round", ring_round, 100);
}

static void test_hose(void **state)
{
    (void)state;
    corr_case c;
    case_make(&c, 60, 31337, hose);
    assert_int_equal(case_run(&c, NULL), 0);
    assert_int_equal(c.lay.n_outlines, 1);
    assert_int_equal(c.lay.n_points, 256);
    match_figures f;
    material_check(c.tp, &c.lay, c.shapes, &c.info, 1, &f);
    print_match("hose, material points", &f);
    assert_true(f.reversed_ok);
    assert_true(f.start_report_err < 1e-6);
    /* The start is consistent; single landmarks slide where bending
       lengthens one side and shortens the other (arc-length resampling). */
    assert_true(f.start_rms < 0.05);
    assert_true(f.point_rms < 1.0);
    model_figures mf;
    model_check(c.shapes, c.m, &c.lay, &mf);
    printf("hose: modes for 98 %%: %d (2 generating parameters), mode 1 "
           "%.1f %% tangential\n",
           mf.modes98, 100 * mf.tan_first);
    assert_true(mf.modes98 <= 3);
    case_free(&c);
}

static void test_refuse_missing_hole(void **state)
{
    (void)state;
    corr_case c;
    case_make(&c, 12, 4242, flange_missing5);
    mb_correspond_params p;
    mb_correspond_params_default(&p);
    assert_int_equal(case_run(&c, &p), 0);
    printf("missing hole: %s\n", c.info.parts[5].reason);
    assert_int_equal(c.info.n_used, c.m - 1);
    assert_int_equal(c.info.parts[5].status, MB_ESIZE);
    assert_int_equal(c.info.parts[5].column, -1);
    assert_non_null(strstr(c.info.parts[5].reason, "part 5"));
    for (int j = 0; j < c.m; j++)
        if (j != 5)
            assert_int_equal(c.info.parts[j].status, 0);
    match_figures f;
    material_check(c.tp, &c.lay, c.shapes, &c.info, 0, &f);
    assert_true(f.holes_consistent);
    assert_true(f.start_rms < 0.05);

    p.skip_bad = 0;
    assert_int_equal(case_run(&c, &p), MB_ESIZE);
    assert_null(c.shapes);
    assert_non_null(strstr(c.err, "part 5"));
    assert_int_equal(c.info.parts[5].status, MB_ESIZE);
    case_free(&c);
}

static void test_refuse_moved_hole(void **state)
{
    (void)state;
    corr_case c;
    case_make(&c, 12, 5151, flange_moved7);
    assert_int_equal(case_run(&c, NULL), 0);
    printf("moved hole: %s\n", c.info.parts[7].reason);
    assert_int_equal(c.info.n_used, c.m - 1);
    assert_int_equal(c.info.parts[7].status, MB_ERANGE);
    assert_non_null(strstr(c.info.parts[7].reason, "part 7"));
    match_figures f;
    material_check(c.tp, &c.lay, c.shapes, &c.info, 0, &f);
    assert_true(f.holes_consistent);
    assert_true(f.start_rms < 0.05);
    case_free(&c);
}

static void test_bad_input(void **state)
{
    (void)state;
    enum { M = 6 };
    test_part tp[M];
    rng r = {8};
    for (int j = 0; j < M; j++)
        make_hose(&tp[j], &r);
    mb_polyline_set *sets = sets_of(tp, M);
    mb_layout lay;
    double *shapes = NULL;
    mb_correspond_info info;
    char err[MB_ERR_LEN] = "";
    assert_int_equal(
        mb_correspond_run(NULL, M, NULL, &lay, &shapes, &info, err), MB_EINVAL);
    mb_correspond_info_free(&info);
    assert_int_equal(
        mb_correspond_run(sets, 1, NULL, &lay, &shapes, &info, err), MB_EINVAL);
    mb_correspond_info_free(&info);
    mb_correspond_params p;
    mb_correspond_params_default(&p);
    p.min_per_outline = 2;
    assert_int_equal(mb_correspond_run(sets, M, &p, &lay, &shapes, &info, err),
                     MB_EINVAL);
    mb_correspond_info_free(&info);

    /* Part 2: three points on a line; part 3: a NaN. */
    const double line[6] = {0, 0, 5, 5, 10, 10};
    sets[2].counts[0] = 3;
    sets[2].xy = line;
    tp[3].xy[7] = NAN;
    assert_int_equal(
        mb_correspond_run(sets, M, NULL, &lay, &shapes, &info, err), 0);
    printf("bad outlines: %s / %s\n", info.parts[2].reason,
           info.parts[3].reason);
    assert_int_equal(info.n_used, M - 2);
    assert_int_equal(info.parts[2].status, MB_EDEGENERATE);
    assert_non_null(strstr(info.parts[2].reason, "part 2"));
    assert_int_equal(info.parts[3].status, MB_ENUMERIC);
    assert_non_null(strstr(info.parts[3].reason, "part 3"));
    free(shapes);
    mb_correspond_info_free(&info);

    /* Closing point repeated and a point doubled: the same part. */
    int c0 = tp[0].set.counts[0];
    double *dup = malloc(sizeof(double) * 2 * (size_t)(c0 + 2));
    assert_non_null(dup);
    memcpy(dup, tp[0].xy, sizeof(double) * 2 * 5);
    memcpy(dup + 10, tp[0].xy + 8, sizeof(double) * 2 * (size_t)(c0 - 4));
    dup[2 * c0 + 2] = dup[0];
    dup[2 * c0 + 3] = dup[1];
    mb_polyline_set clean[2] = {tp[0].set, tp[1].set};
    mb_polyline_set doubled[2] = {tp[0].set, tp[1].set};
    doubled[0].counts[0] = c0 + 2;
    doubled[0].xy = dup;
    double *s1 = NULL, *s2 = NULL;
    mb_layout l1, l2;
    assert_int_equal(mb_correspond_run(clean, 2, NULL, &l1, &s1, &info, err),
                     0);
    double st1 = info.parts[0].start[0];
    mb_correspond_info_free(&info);
    assert_int_equal(mb_correspond_run(doubled, 2, NULL, &l2, &s2, &info, err),
                     0);
    assert_true(fabs(info.parts[0].start[0] - st1) < 1e-9);
    for (int i = 0; i < 2 * l1.n_points * 2; i++)
        assert_true(fabs(s1[i] - s2[i]) < 1e-9);
    mb_correspond_info_free(&info);
    free(s1);
    free(s2);
    free(dup);

    /* Too few usable parts left. */
    assert_int_equal(
        mb_correspond_run(sets + 2, 2, NULL, &lay, &shapes, &info, err),
        MB_EDEGENERATE);
    assert_null(shapes);
    assert_non_null(strstr(err, "only 0 of 2"));
    mb_correspond_info_free(&info);
    free(sets);
    for (int j = 0; j < M; j++)
        part_free(&tp[j]);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_assign),
        cmocka_unit_test(test_flange),
        cmocka_unit_test(test_flange_noisy),
        cmocka_unit_test(test_round_flange),
        cmocka_unit_test(test_ring_oval),
        cmocka_unit_test(test_ring_round),
        cmocka_unit_test(test_hose),
        cmocka_unit_test(test_refuse_missing_hole),
        cmocka_unit_test(test_refuse_moved_hole),
        cmocka_unit_test(test_bad_input),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
