/*
 * fit/correspond.c - landmark correspondence without clicking.
 *
 * Input: part j, outline o is a closed polyline P_jo(s), s its arc length
 * in [0, L_jo) (see "Arc length" below). Output: landmarks
 *     x_jki = P_j,pi_j(k)(t_jk + i L / N_k),  i = 0 .. N_k - 1,
 * on layout outline k, i.e. each outline resampled by arc length from a
 * continuous start t_jk, with pi_j saying which input outline (hole) plays
 * layout outline k.
 *
 * Arc length. s is not the raw length of the input polygon: point noise
 * lengthens a polygon (a zig-zag is longer than the line it follows), and
 * unevenly, so raw arc length would slide landmarks along the outline from
 * part to part. s is measured on a copy whose every vertex is replaced by
 * the mean of the continuous polygon over +-w of arc around it (computed
 * exactly from the running integral of the polygon, so uneven vertex
 * spacing biases nothing and a straight edge does not move); the vertices
 * keep their input positions, and landmarks are interpolated on the input
 * polygon at the averaged arc length. w = 0 gives plain arc length.
 *
 * Winding. Every outline is traversed so that its shoelace sum
 * sum (x_i y_i+1 - x_i+1 y_i) is positive (clockwise on screen, y down). A
 * similarity never reflects, so this settles the direction for good; what
 * is left is the start of each outline and the matching of the holes.
 *
 * Layout. N_k proportional to the mean over parts of L_k / sum_k L_k (the
 * part's scale cancels), at least N_min each, summing to the budget
 * (largest remainders).
 *
 * Objective. The GPA objective with the parameterisation left free:
 *     E = sum_j sum_k sum_i | T_j(x_jki) - mu_ki |^2
 * over similarities T_j, starts t_jk, hole matchings pi_j and the mean mu
 * (centred, unit norm). It is lowered block by block:
 *   (1) mu and T_j: generalised Procrustes analysis of the current landmark
 *       shapes (Gower, Psychometrika 1975; Cootes, Taylor, Cooper, Graham,
 *       CVIU 61(1), 1995), then T_j = the Procrustes fit of part j to mu.
 *   (2) pi_j with T_j fixed: the minimum-cost assignment (Kuhn 1955, Munkres
 *       1957) between the part's hole centroids mapped by T_j and the mean's,
 *       cost N_k (|centroid distance|^2 + (difference of equivalent radii)^2),
 *       which is E's hole term when the holes have the same shape. Greedy
 *       nearest matching is not enough when holes are close.
 *   (3) t_jk with T_j fixed, each outline on its own. With nu = T_j^-1(mu_k)
 *       (the mean's outline in the part's pixels; that only scales E by s^2)
 *           E_jk(t) = sum_i | P(t + i h) - nu_i |^2,  h = L / N_k.
 *       On the grid t = c h it is a cyclic cross-correlation of the complex
 *       points q_i = P(i h):
 *           E_jk(c h) = |q|^2 + |nu|^2 - 2 Re sum_i conj(q_i+c) nu_i,
 *       all N_k shifts in O(N_k^2). Where the best c is not next to the
 *       current start (at the start, a new hole partner, a jump) it is
 *       refined to a continuous t in [(c - 1) h, (c + 1) h] by
 *       golden-section search (Kiefer, Proc. AMS 1953) on the exact E_jk(t).
 *   (4) T_j and all t_jk of part j together, by Gauss-Newton: to first
 *       order x_jki moves by e_i dt along its unit tangent e_i, so E is
 *       quadratic in the 4 similarity parameters and the K start changes;
 *       the start block of the normal equations is diagonal and is
 *       eliminated, leaving 4 x 4 (see part_polish). Steps that do not
 *       lower E are halved (the outlines are polygons).
 *   A continuous start matters: an integer shift alone leaves up to h/2 of
 *   tangential jitter per part, which PCA would then model as variation.
 * Repeat until, in the frame of the mean, no part's landmarks move by more
 * than tol spacings (RMS per outline) in a round and no hole changes
 * partner.
 *
 * Rotation symmetry. For a round outline the start and the rotation are the
 * same freedom: "turn the part and move every start with it" costs nothing.
 * Step (3) picks a start with the rotation fixed, step (1) a rotation with
 * the starts fixed, and step (4) moves both only along directions that
 * lower E, with a small ridge so that a direction of no cost gets no step.
 * So in the aligned frame every landmark ends where the mean's landmark is;
 * the shared freedom moves all outlines of a part together and is absorbed
 * by T_j, and no tangential slide enters the shape vectors (a ring's inner
 * and outer edges cannot slide against each other). Were a similarity and
 * a start chosen per outline, noise would pick the start of a round outline
 * and its landmarks would slide from part to part. For the same reason
 * convergence is judged on landmarks in the aligned frame, not on starts: a
 * ring may turn a little with its starts from round to round at no cost.
 *
 * Gauge. Moving every part's start on an outline by the same fraction of
 * its perimeter, and the mean's landmarks with them, leaves E (nearly)
 * unchanged; nothing holds that common start in place and it would creep
 * from round to round. The common part of each round's start changes is
 * taken back out.
 *
 * Start. T_j is unknown at first. The reference is the first usable part.
 * For a part and every grid shift c of its outer edge against the
 * reference's, the closed-form similarity of the centred complex points a
 * (reference) and b (part), w = z(c) / |b|^2 with z(c) = sum conj(b_i+c) a_i,
 * leaves |a|^2 - |z(c)|^2 / |b|^2; at that pose the holes are assigned as in
 * (2) and their cost added. The best shift gives T_j, pi_j and t_j0, and the
 * holes' starts follow from (3). Because the holes take part in choosing the
 * shift, the rotation is found also when the outer edge is round and only
 * the holes fix it.
 */
#include "correspond.h"

#include "error.h"
#include "procrustes.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Start refinement (golden section, Gauss-Newton) stops at this fraction
   of a landmark spacing. */
#define START_RESOLUTION 1e-4
/* Rounds of "iterate, then refuse parts whose holes do not match". */
#define MAX_ROUNDS 5
/* Gauss-Newton steps of the joint refinement per part and round, and its
   ridge (relative to the unit diagonal of the scaled pose system). */
#define POLISH_STEPS 4
#define POLISH_RIDGE 1e-6

/* One input outline, brought to the common winding. */
struct contour {
    int n;         /* distinct points */
    double *xy;    /* 2n, starting at the input's first point */
    double *s;     /* n + 1 cumulative arc lengths of the averaged outline
                      (the parameter, see "Arc length"), s[n] = length */
    double *s_in;  /* n + 1 cumulative arc lengths of the input */
    double length; /* px, of the averaged outline */
    double cx, cy; /* arc-length centroid, px */
    int reversed;  /* 1 when the input ran the other way */
};

struct part {
    int status; /* 0 usable, else the MB_E code it was refused with */
    int n_outlines;
    struct contour c[MB_MAX_OUTLINES]; /* input order */
    int perm[MB_MAX_OUTLINES]; /* layout outline k <- input outline perm[k] */
    double t[MB_MAX_OUTLINES]; /* start along contour perm[k], px */
    mb_pose pose;              /* part px -> mean frame */
    double residual;           /* of the last Procrustes fit, mean frame */
};

/* Scratch for the start search on one outline of up to nmax points. */
struct scratch {
    double *q, *nu, *tmp; /* 2 nmax each */
    double *zre, *zim;    /* nmax each */
};

struct ctx {
    const mb_correspond_params *p;
    int m;
    struct part *parts;
    mb_correspond_info *info;
    char *err;
    int n_holes; /* outlines - 1, common to the usable parts */
    mb_layout lay;
    int mu;          /* usable parts */
    int *cols;       /* their indices, mu of them */
    double *X;       /* 2n x m, ld 2n: resampled shapes, column c = cols[c] */
    double *aligned; /* 2n x m, GPA scratch */
    double *mean;    /* 2n */
    double *moved;   /* m x outlines: start changes of one round,
                        fractions of the perimeter (NAN: new partner) */
    double *poly_xy, *poly_tan;   /* 2n each: one part's landmarks, tangents */
    double *poly_xy2, *poly_tan2; /* the same for a trial step */
    struct scratch w;
    mb_gpa_params gp;
};

/* ---- outlines -------------------------------------------------------- */

static void contour_free(struct contour *c)
{
    free(c->xy);
    free(c->s);
    free(c->s_in);
    memset(c, 0, sizeof *c);
}

/* Largest j in [0, n-1] with s[j] <= t, for t in [0, s[n]). */
static int segment_find(const double *s, int n, double t)
{
    int lo = 0, hi = n - 1;
    while (lo < hi) {
        int mid = (lo + hi + 1) / 2;
        if (s[mid] <= t)
            lo = mid;
        else
            hi = mid - 1;
    }
    return lo;
}

/* F(a) = integral of the polygon P over arc length from its first point
   to a (any real a; whole turns add F(L)), both coordinates. s: n + 1
   cumulative arc lengths; Fv: F at the vertices (n + 1 pairs). */
static void running_integral(const double *xy, const double *s,
                             const double *Fv, int n, double a, double out[2])
{
    double L = s[n];
    double turns = floor(a / L);
    a -= turns * L;
    if (a >= L) { /* rounding */
        a = 0.0;
        turns += 1.0;
    }
    int j = segment_find(s, n, a);
    int q = (j + 1) % n;
    double u = a - s[j], len = s[j + 1] - s[j];
    double f = len > 0.0 ? 0.5 * u * u / len : 0.0;
    out[0] = turns * Fv[2 * n] + Fv[2 * j] + u * xy[2 * j] +
             f * (xy[2 * q] - xy[2 * j]);
    out[1] = turns * Fv[2 * n + 1] + Fv[2 * j + 1] + u * xy[2 * j + 1] +
             f * (xy[2 * q + 1] - xy[2 * j + 1]);
}

/* Copy an input outline without zero-length steps, bring it to positive
   winding, and measure it (window: w of "Arc length", px). Returns 0,
   MB_ENUMERIC, MB_EDEGENERATE or MB_ENOMEM; *why gets a phrase on the
   first two. */
static int contour_prepare(const double *in, int count, double window,
                           struct contour *c, const char **why)
{
    memset(c, 0, sizeof *c);
    for (int i = 0; i < 2 * count; i++)
        if (!isfinite(in[i])) {
            *why = "has a point that is not a finite number";
            return MB_ENUMERIC;
        }
    double *xy = malloc(sizeof(double) * 2 * (size_t)(count > 0 ? count : 1));
    if (!xy)
        return MB_ENOMEM;
    int n = 0;
    for (int i = 0; i < count; i++) {
        double x = in[2 * i], y = in[2 * i + 1];
        if (n > 0 && x == xy[2 * n - 2] && y == xy[2 * n - 1])
            continue;
        xy[2 * n] = x;
        xy[2 * n + 1] = y;
        n++;
    }
    while (n > 1 && xy[2 * n - 2] == xy[0] && xy[2 * n - 1] == xy[1])
        n--;
    if (n < 3) {
        free(xy);
        *why = "has fewer than 3 distinct points";
        return MB_EDEGENERATE;
    }
    /* Shoelace sum about the first point (keeps the products small). */
    double area2 = 0.0;
    for (int i = 1; i + 1 < n; i++) {
        double ax = xy[2 * i] - xy[0], ay = xy[2 * i + 1] - xy[1];
        double bx = xy[2 * i + 2] - xy[0], by = xy[2 * i + 3] - xy[1];
        area2 += ax * by - bx * ay;
    }
    if (area2 < 0.0) {
        /* Reverse, keeping the first point first: new i = old (n - i) % n. */
        for (int i = 1, k = n - 1; i < k; i++, k--) {
            double tx = xy[2 * i], ty = xy[2 * i + 1];
            xy[2 * i] = xy[2 * k];
            xy[2 * i + 1] = xy[2 * k + 1];
            xy[2 * k] = tx;
            xy[2 * k + 1] = ty;
        }
        c->reversed = 1;
    }
    double *s = malloc(sizeof(double) * (size_t)(n + 1));
    if (!s) {
        free(xy);
        return MB_ENOMEM;
    }
    s[0] = 0.0;
    double sx = 0.0, sy = 0.0;
    for (int i = 0; i < n; i++) {
        int k = (i + 1) % n;
        double dx = xy[2 * k] - xy[2 * i], dy = xy[2 * k + 1] - xy[2 * i + 1];
        double len = hypot(dx, dy);
        s[i + 1] = s[i] + len;
        sx += len * 0.5 * (xy[2 * k] + xy[2 * i]);
        sy += len * 0.5 * (xy[2 * k + 1] + xy[2 * i + 1]);
    }
    double L = s[n];
    if (!(fabs(area2) > 1e-9 * L * L)) {
        free(xy);
        free(s);
        *why = "encloses no area";
        return MB_EDEGENERATE;
    }
    double *ps = malloc(sizeof(double) * (size_t)(n + 1));
    double *sm = malloc(sizeof(double) * (4 * (size_t)n + 2));
    if (!ps || !sm) {
        free(ps);
        free(sm);
        free(xy);
        free(s);
        return MB_ENOMEM;
    }
    if (window > 0.0) {
        /* Moving average of the continuous polygon over the arc
           [s_i - w, s_i + w], from the running integral F(a) of P over
           arc length (F is quadratic on each segment). Exact for the
           polygon, so uneven point spacing biases nothing: a straight edge
           stays where it is however its points are spread. */
        double w = window < 0.5 * L ? window : 0.5 * L;
        double *F = sm + 2 * (size_t)n;
        F[0] = F[1] = 0.0;
        for (int k = 0; k < n; k++) {
            int q = (k + 1) % n;
            double len = s[k + 1] - s[k];
            F[2 * k + 2] = F[2 * k] + 0.5 * len * (xy[2 * k] + xy[2 * q]);
            F[2 * k + 3] =
                F[2 * k + 1] + 0.5 * len * (xy[2 * k + 1] + xy[2 * q + 1]);
        }
        for (int i = 0; i < n; i++) {
            double hi[2], lo[2];
            running_integral(xy, s, F, n, s[i] + w, hi);
            running_integral(xy, s, F, n, s[i] - w, lo);
            sm[2 * i] = (hi[0] - lo[0]) / (2.0 * w);
            sm[2 * i + 1] = (hi[1] - lo[1]) / (2.0 * w);
        }
    } else {
        memcpy(sm, xy, sizeof(double) * 2 * (size_t)n);
    }
    ps[0] = 0.0;
    for (int i = 0; i < n; i++) {
        int k = (i + 1) % n;
        double len =
            hypot(sm[2 * k] - sm[2 * i], sm[2 * k + 1] - sm[2 * i + 1]);
        if (!(len > 1e-9 * (s[i + 1] - s[i])))
            len = s[i + 1] - s[i];
        ps[i + 1] = ps[i] + len;
    }
    free(sm);
    c->n = n;
    c->xy = xy;
    c->s = ps;
    c->s_in = s;
    c->length = ps[n];
    c->cx = sx / L;
    c->cy = sy / L;
    return MB_OK;
}

/* n points at arc lengths t + i L / n (wrapping), interleaved into out;
   tan (may be NULL) gets the unit direction of the segment each lies on. */
static void contour_resample(const struct contour *c, double t, int n,
                             double *out, double *tan)
{
    double L = c->length, h = L / n;
    t = fmod(t, L);
    if (t < 0.0)
        t += L;
    int j = segment_find(c->s, c->n, t);
    int wrapped = 0;
    for (int i = 0; i < n; i++) {
        double pos = t + i * h;
        if (pos >= L) {
            pos -= L;
            if (!wrapped) {
                wrapped = 1;
                j = 0;
            }
        }
        while (j < c->n - 1 && c->s[j + 1] <= pos)
            j++;
        int k = (j + 1) % c->n;
        double len = c->s[j + 1] - c->s[j];
        double f = len > 0.0 ? (pos - c->s[j]) / len : 0.0;
        if (f > 1.0)
            f = 1.0;
        out[2 * i] = c->xy[2 * j] + f * (c->xy[2 * k] - c->xy[2 * j]);
        out[2 * i + 1] =
            c->xy[2 * j + 1] + f * (c->xy[2 * k + 1] - c->xy[2 * j + 1]);
        if (tan) {
            tan[2 * i] = (c->xy[2 * k] - c->xy[2 * j]) / len;
            tan[2 * i + 1] = (c->xy[2 * k + 1] - c->xy[2 * j + 1]) / len;
        }
    }
}

/* Arc length along the input polyline (common winding) of the point at
   parameter t. */
static double input_arc(const struct contour *c, double t)
{
    t = fmod(t, c->length);
    if (t < 0.0)
        t += c->length;
    int j = segment_find(c->s, c->n, t);
    double len = c->s[j + 1] - c->s[j];
    double f = len > 0.0 ? (t - c->s[j]) / len : 0.0;
    return c->s_in[j] + f * (c->s_in[j + 1] - c->s_in[j]);
}

/* z[c] = sum_i conj(b[(i + c) % n]) a[i], points read as complex x + iy. */
static void cyclic_xcorr(const double *a, const double *b, int n, double *zre,
                         double *zim)
{
    for (int c = 0; c < n; c++) {
        double re = 0.0, im = 0.0;
        const double *bb = b + 2 * c;
        int run = n - c; /* i with i + c < n, then the wrapped rest */
        for (int i = 0; i < run; i++) {
            re += bb[2 * i] * a[2 * i] + bb[2 * i + 1] * a[2 * i + 1];
            im += bb[2 * i] * a[2 * i + 1] - bb[2 * i + 1] * a[2 * i];
        }
        for (int i = run; i < n; i++) {
            const double *bw = b + 2 * (i - run);
            re += bw[0] * a[2 * i] + bw[1] * a[2 * i + 1];
            im += bw[0] * a[2 * i + 1] - bw[1] * a[2 * i];
        }
        zre[c] = re;
        zim[c] = im;
    }
}

static double sq_dist(const double *a, const double *b, int n)
{
    double e = 0.0;
    for (int i = 0; i < 2 * n; i++) {
        double d = a[i] - b[i];
        e += d * d;
    }
    return e;
}

static double start_cost(const struct contour *c, double t, int n,
                         const double *nu, double *tmp)
{
    contour_resample(c, t, n, tmp, NULL);
    return sq_dist(tmp, nu, n);
}

/* Step (3), coarse: the grid shift c minimising
   sum_i |P((c + i) h) - nu_i|^2, by cyclic cross-correlation. */
static int start_coarse(const struct contour *c, int n, const double *nu,
                        const struct scratch *w)
{
    contour_resample(c, 0.0, n, w->q, NULL);
    cyclic_xcorr(nu, w->q, n, w->zre, w->zim);
    int best = 0;
    for (int k = 1; k < n; k++)
        if (w->zre[k] > w->zre[best])
            best = k;
    return best;
}

/* Step (3), fine: golden-section search for the continuous start in
   [(c - 1) h, (c + 1) h]; returns it in [0, L). */
static double start_refine(const struct contour *c, int n, const double *nu,
                           const struct scratch *w, int grid)
{
    double L = c->length, h = L / n;
    double tb = grid * h;
    double fb = start_cost(c, tb, n, nu, w->tmp);
    const double g = 0.5 * (sqrt(5.0) - 1.0);
    double lo = tb - h, hi = tb + h;
    double x1 = hi - g * (hi - lo), x2 = lo + g * (hi - lo);
    double f1 = start_cost(c, x1, n, nu, w->tmp);
    double f2 = start_cost(c, x2, n, nu, w->tmp);
    while (hi - lo > START_RESOLUTION * h) {
        if (f1 < fb) {
            fb = f1;
            tb = x1;
        }
        if (f2 < fb) {
            fb = f2;
            tb = x2;
        }
        if (f1 < f2) {
            hi = x2;
            x2 = x1;
            f2 = f1;
            x1 = hi - g * (hi - lo);
            f1 = start_cost(c, x1, n, nu, w->tmp);
        } else {
            lo = x1;
            x1 = x2;
            f1 = f2;
            x2 = lo + g * (hi - lo);
            f2 = start_cost(c, x2, n, nu, w->tmp);
        }
    }
    if (f1 < fb)
        tb = x1;
    else if (f2 < fb)
        tb = x2;
    tb = fmod(tb, L);
    return tb < 0.0 ? tb + L : tb;
}

static double start_search(const struct contour *c, int n, const double *nu,
                           const struct scratch *w)
{
    return start_refine(c, n, nu, w, start_coarse(c, n, nu, w));
}

/* Signed difference a - b on a circle of circumference L, in (-L/2, L/2]. */
static double circ_diff(double a, double b, double L)
{
    double d = fmod(a - b, L);
    if (d > 0.5 * L)
        d -= L;
    else if (d <= -0.5 * L)
        d += L;
    return d;
}

/* ---- assignment ------------------------------------------------------ */

/*
 * Shortest augmenting paths with dual potentials: rows enter one at a time;
 * for the new row a Dijkstra-like search over columns on the reduced costs
 * cost - u - v (kept >= 0) finds the cheapest way to give it a column,
 * possibly moving earlier rows, and the potentials are raised as it goes.
 * O(n^3). Column 0 is a virtual start. Work: u, v, dist (n + 1 doubles
 * each), owner, prev (n + 1 ints each), done (n + 1 chars).
 */
static double assign_solve(const double *cost, int n, int *assign, double *u,
                           double *v, double *dist, int *owner, int *prev,
                           char *done)
{
    for (int j = 0; j <= n; j++) {
        u[j] = v[j] = 0.0;
        owner[j] = 0;
        prev[j] = 0;
    }
    for (int row = 1; row <= n; row++) {
        owner[0] = row;
        int col = 0;
        for (int j = 0; j <= n; j++) {
            dist[j] = HUGE_VAL;
            done[j] = 0;
        }
        do {
            done[col] = 1;
            int r = owner[col], next = 0;
            double step = HUGE_VAL;
            for (int j = 1; j <= n; j++) {
                if (done[j])
                    continue;
                double red = cost[(r - 1) + (size_t)(j - 1) * n] - u[r] - v[j];
                if (red < dist[j]) {
                    dist[j] = red;
                    prev[j] = col;
                }
                if (dist[j] < step) {
                    step = dist[j];
                    next = j;
                }
            }
            for (int j = 0; j <= n; j++) {
                if (done[j]) {
                    u[owner[j]] += step;
                    v[j] -= step;
                } else {
                    dist[j] -= step;
                }
            }
            col = next;
        } while (owner[col] != 0);
        /* Augment: shift owners back along the path to the virtual column. */
        while (col != 0) {
            int back = prev[col];
            owner[col] = owner[back];
            col = back;
        }
    }
    double total = 0.0;
    for (int j = 1; j <= n; j++) {
        assign[owner[j] - 1] = j - 1;
        total += cost[(owner[j] - 1) + (size_t)(j - 1) * n];
    }
    return total;
}

/* Fixed-size work for the internal hole matching (n <= MB_MAX_OUTLINES). */
struct assign_work {
    double u[MB_MAX_OUTLINES + 1], v[MB_MAX_OUTLINES + 1];
    double dist[MB_MAX_OUTLINES + 1];
    int owner[MB_MAX_OUTLINES + 1], prev[MB_MAX_OUTLINES + 1];
    char done[MB_MAX_OUTLINES + 1];
};

static double assign_small(const double *cost, int n, int *assign,
                           struct assign_work *aw)
{
    MB_ASSERT(n >= 1 && n <= MB_MAX_OUTLINES);
    return assign_solve(cost, n, assign, aw->u, aw->v, aw->dist, aw->owner,
                        aw->prev, aw->done);
}

int mb_correspond_assign(const double *cost, int n, int *assign)
{
    if (!cost || !assign || n < 1 || n > 1000000)
        return MB_EINVAL;
    for (size_t i = 0; i < (size_t)n * (size_t)n; i++)
        if (!isfinite(cost[i]))
            return MB_ENUMERIC;
    size_t k = (size_t)n + 1;
    double *d = malloc(sizeof(double) * 3 * k);
    int *iw = malloc(sizeof(int) * 2 * k);
    char *done = malloc(k);
    if (!d || !iw || !done) {
        free(d);
        free(iw);
        free(done);
        return MB_ENOMEM;
    }
    assign_solve(cost, n, assign, d, d + k, d + 2 * k, iw, iw + k, done);
    free(d);
    free(iw);
    free(done);
    return MB_OK;
}

/* ---- layout ---------------------------------------------------------- */

/* Landmarks per outline proportional to frac[k] (summing to 1), at least
   minimum each, summing to the budget (raised to k * minimum if needed). */
static void layout_apportion(const double *frac, int k, int budget, int minimum,
                             mb_layout *lay)
{
    int floor_of[MB_MAX_OUTLINES];
    double ideal[MB_MAX_OUTLINES];
    char pinned[MB_MAX_OUTLINES] = {0};
    if (budget < k * minimum)
        budget = k * minimum;
    int free_budget = budget;
    for (int changed = 1; changed;) {
        changed = 0;
        double fsum = 0.0;
        free_budget = budget;
        for (int i = 0; i < k; i++) {
            if (pinned[i])
                free_budget -= minimum;
            else
                fsum += frac[i];
        }
        for (int i = 0; i < k; i++) {
            if (pinned[i])
                continue;
            ideal[i] = fsum > 0.0 ? frac[i] / fsum * free_budget : minimum;
            if (ideal[i] < minimum) {
                pinned[i] = 1;
                changed = 1;
            }
        }
    }
    int used = 0;
    for (int i = 0; i < k; i++) {
        floor_of[i] = pinned[i] ? minimum : (int)floor(ideal[i]);
        if (!pinned[i])
            used += floor_of[i];
    }
    /* Largest remainders take the points the floors left over. */
    for (int left = free_budget - used; left > 0; left--) {
        int best = -1;
        double rbest = -1.0;
        for (int i = 0; i < k; i++) {
            if (pinned[i])
                continue;
            double r = ideal[i] - floor_of[i];
            if (r > rbest) {
                rbest = r;
                best = i;
            }
        }
        if (best < 0)
            break;
        floor_of[best]++;
        ideal[best] = floor_of[best]; /* remainder used up */
    }
    lay->n_outlines = k;
    lay->n_points = 0;
    for (int i = 0; i < k; i++) {
        int c = floor_of[i];
        if (c > MB_MAX_OUTLINE_POINTS)
            c = MB_MAX_OUTLINE_POINTS;
        lay->counts[i] = c;
        lay->n_points += c;
    }
}

/* ---- refusals -------------------------------------------------------- */

static int refuse(struct ctx *x, int j, int code, const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 4, 5)))
#endif
    ;

/* Record why part j cannot be used; in strict mode also fail with it. */
static int refuse(struct ctx *x, int j, int code, const char *fmt, ...)
{
    mb_correspond_part *ip = &x->info->parts[j];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(ip->reason, sizeof ip->reason, fmt, ap);
    va_end(ap);
    ip->status = code;
    ip->column = -1;
    x->parts[j].status = code;
    if (!x->p->skip_bad)
        return mb_err_set(x->err, code, "%s", ip->reason);
    return MB_OK;
}

/* ---- the steps ------------------------------------------------------- */

static void part_resample(const struct ctx *x, const struct part *pt,
                          double *out)
{
    for (int k = 0, f = 0; k < x->lay.n_outlines; k++) {
        contour_resample(&pt->c[pt->perm[k]], pt->t[k], x->lay.counts[k],
                         out + 2 * f, NULL);
        f += x->lay.counts[k];
    }
}

/* Centroid and equivalent radius (perimeter / 2 pi) of n landmarks. */
static void landmark_circle(const double *xy, int n, double *cx, double *cy,
                            double *r)
{
    double sx = 0.0, sy = 0.0, per = 0.0;
    for (int i = 0; i < n; i++) {
        int k = (i + 1) % n;
        sx += xy[2 * i];
        sy += xy[2 * i + 1];
        per += hypot(xy[2 * k] - xy[2 * i], xy[2 * k + 1] - xy[2 * i + 1]);
    }
    *cx = sx / n;
    *cy = sy / n;
    *r = per / (2.0 * M_PI);
}

/* Hole targets: centroid, radius and weight of each hole of the mean (or
   of the reference), in its own frame. */
struct hole_targets {
    double cx[MB_MAX_OUTLINES], cy[MB_MAX_OUTLINES], r[MB_MAX_OUTLINES];
    double weight[MB_MAX_OUTLINES];
};

/* Step (2): match the part's holes to the targets with the part mapped by
   pose (part px -> target frame): perm[1 + a] = the input outline given to
   target hole a. Returns the assignment cost. */
static double holes_match(const struct part *pt, int nh, const mb_pose *pose,
                          const struct hole_targets *ht, int *perm)
{
    double cost[MB_MAX_OUTLINES * MB_MAX_OUTLINES];
    int assign[MB_MAX_OUTLINES];
    struct assign_work aw;
    for (int b = 0; b < nh; b++) {
        const struct contour *c = &pt->c[1 + b];
        double src[2] = {c->cx, c->cy}, dst[2];
        mb_pose_apply(pose, src, 1, dst);
        double r = pose->scale * c->length / (2.0 * M_PI);
        for (int a = 0; a < nh; a++) {
            double dx = dst[0] - ht->cx[a], dy = dst[1] - ht->cy[a];
            double dr = r - ht->r[a];
            cost[a + b * nh] = ht->weight[a] * (dx * dx + dy * dy + dr * dr);
        }
    }
    double total = assign_small(cost, nh, assign, &aw);
    for (int a = 0; a < nh; a++)
        perm[1 + a] = 1 + assign[a];
    return total;
}

/* Start: align part pt to the reference (landmarks R with the layout in x,
   holes ht), choosing the outer edge's grid shift, the pose and the hole
   matching together, then the holes' starts. */
static void part_initial(const struct ctx *x, struct part *pt, const double *R,
                         const struct hole_targets *ht)
{
    const struct scratch *w = &x->w;
    int n0 = x->lay.counts[0], nh = x->n_holes;
    const struct contour *outer = &pt->c[0];
    double *a = w->nu, *b = w->q;
    double ca[2] = {0.0, 0.0}, cb[2] = {0.0, 0.0};
    contour_resample(outer, 0.0, n0, b, NULL);
    for (int i = 0; i < n0; i++) {
        ca[0] += R[2 * i];
        ca[1] += R[2 * i + 1];
        cb[0] += b[2 * i];
        cb[1] += b[2 * i + 1];
    }
    ca[0] /= n0;
    ca[1] /= n0;
    cb[0] /= n0;
    cb[1] /= n0;
    double aa = 0.0, bb = 0.0;
    for (int i = 0; i < n0; i++) {
        a[2 * i] = R[2 * i] - ca[0];
        a[2 * i + 1] = R[2 * i + 1] - ca[1];
        b[2 * i] -= cb[0];
        b[2 * i + 1] -= cb[1];
        aa += a[2 * i] * a[2 * i] + a[2 * i + 1] * a[2 * i + 1];
        bb += b[2 * i] * b[2 * i] + b[2 * i + 1] * b[2 * i + 1];
    }
    cyclic_xcorr(a, b, n0, w->zre, w->zim);
    double best = HUGE_VAL;
    int perm[MB_MAX_OUTLINES];
    for (int c = 0; c < n0; c++) {
        double zr = w->zre[c], zi = w->zim[c];
        double total = aa - (zr * zr + zi * zi) / bb;
        /* w = z / |b|^2 maps centred part points onto centred reference. */
        mb_pose pose;
        pose.scale = hypot(zr, zi) / bb;
        pose.angle = atan2(zi, zr);
        double wr = zr / bb, wi = zi / bb;
        pose.tx = ca[0] - (wr * cb[0] - wi * cb[1]);
        pose.ty = ca[1] - (wi * cb[0] + wr * cb[1]);
        if (nh > 0 && total < best)
            total += holes_match(pt, nh, &pose, ht, perm);
        if (total < best) {
            best = total;
            pt->pose = pose;
            pt->t[0] = c * outer->length / n0;
            for (int k = 1; k <= nh; k++)
                pt->perm[k] = perm[k];
        }
    }
    pt->perm[0] = 0;
    /* Holes' starts against the reference's holes at that pose. */
    mb_pose inv = mb_pose_invert(&pt->pose);
    for (int k = 1; k <= nh; k++) {
        int f = mb_layout_first(&x->lay, k), n = x->lay.counts[k];
        mb_pose_apply(&inv, R + 2 * f, n, w->nu);
        pt->t[k] = start_search(&pt->c[pt->perm[k]], n, w->nu, w);
    }
}

static void mean_holes(const struct ctx *x, struct hole_targets *ht)
{
    for (int a = 0; a < x->n_holes; a++) {
        int k = 1 + a;
        int f = mb_layout_first(&x->lay, k);
        landmark_circle(x->mean + 2 * f, x->lay.counts[k], &ht->cx[a],
                        &ht->cy[a], &ht->r[a]);
        ht->weight[a] = x->lay.counts[k];
    }
}

/* Step (1): resample every usable part and run GPA for the mean. */
static int mean_update(struct ctx *x)
{
    int n = x->lay.n_points, d = 2 * n;
    for (int c = 0; c < x->mu; c++)
        part_resample(x, &x->parts[x->cols[c]], x->X + (size_t)c * d);
    return mb_gpa_align(x->X, d, n, x->mu, &x->gp, x->aligned, d, x->mean, NULL,
                        NULL, x->err);
}

/* Solve the symmetric positive definite 4 x 4 system a z = b (Cholesky);
   a is destroyed. Returns 0, or -1 when a is not positive definite. */
static int spd4_solve(double a[4][4], const double b[4], double z[4])
{
    for (int i = 0; i < 4; i++) {
        for (int k = 0; k < i; k++)
            a[i][i] -= a[i][k] * a[i][k];
        if (!(a[i][i] > 0.0))
            return -1;
        a[i][i] = sqrt(a[i][i]);
        for (int r = i + 1; r < 4; r++) {
            for (int k = 0; k < i; k++)
                a[r][i] -= a[r][k] * a[i][k];
            a[r][i] /= a[i][i];
        }
    }
    double y[4];
    for (int i = 0; i < 4; i++) {
        y[i] = b[i];
        for (int k = 0; k < i; k++)
            y[i] -= a[i][k] * y[k];
        y[i] /= a[i][i];
    }
    for (int i = 3; i >= 0; i--) {
        z[i] = y[i];
        for (int k = i + 1; k < 4; k++)
            z[i] -= a[k][i] * z[k];
        z[i] /= a[i][i];
    }
    return 0;
}

/* Landmarks (y), tangents (e), Procrustes pose onto the mean and its
   residual for one part at starts t. */
static int polish_eval(const struct ctx *x, const struct part *pt,
                       const double *t, double *y, double *e, mb_pose *pose,
                       double *cost)
{
    for (int k = 0, f = 0; k < x->lay.n_outlines; k++) {
        contour_resample(&pt->c[pt->perm[k]], t[k], x->lay.counts[k], y + 2 * f,
                         e + 2 * f);
        f += x->lay.counts[k];
    }
    return mb_procrustes_fit(y, x->mean, x->lay.n_points, NULL, pose, cost);
}

/*
 * Step (4): one part's similarity and all its starts refined together by
 * Gauss-Newton. With w = s e^{ia} (complex), centred landmarks x~_i, unit
 * tangents e_i and the current exact fit (w0, tau0), the landmarks in the
 * mean frame move to first order as
 *     y_i = (w0 + dw) x~_i + tau0 + dtau + w0 e_i d_k(i),
 * linear in the 4 pose unknowns (dw, dtau) and one start change d_k per
 * outline. The start columns of different outlines never overlap, so their
 * block of the normal equations is diagonal (|w0|^2 N_k) and is eliminated
 * (Schur complement), leaving a 4 x 4 system, solved after scaling to unit
 * diagonal with a small ridge. The ridge is what keeps rotation symmetry
 * harmless: on a ring "turn the part and move every start with it" is a
 * direction of (almost) no cost, and the ridge gives it (almost) no step, so
 * nothing slides. Coordinate-wise steps (3) alone crawl along that
 * direction; this step crosses it at once.
 */
static int part_polish(struct ctx *x, struct part *pt)
{
    int n = x->lay.n_points, K = x->n_holes + 1;
    double *y = x->poly_xy, *e = x->poly_tan;
    double *y2 = x->poly_xy2, *e2 = x->poly_tan2;
    double t[MB_MAX_OUTLINES], tt[MB_MAX_OUTLINES];
    for (int k = 0; k < K; k++)
        t[k] = pt->t[k];
    mb_pose pose;
    double cost;
    int rc = polish_eval(x, pt, t, y, e, &pose, &cost);
    if (rc < 0)
        return rc;
    for (int step = 0; step < POLISH_STEPS; step++) {
        double wr = pose.scale * cos(pose.angle);
        double wi = pose.scale * sin(pose.angle);
        double xb = 0.0, yb = 0.0;
        for (int i = 0; i < n; i++) {
            xb += y[2 * i];
            yb += y[2 * i + 1];
        }
        xb /= n;
        yb /= n;
        double t0x = wr * xb - wi * yb + pose.tx;
        double t0y = wi * xb + wr * yb + pose.ty;
        double A[4][4] = {{0}}, g[4] = {0};
        double B[MB_MAX_OUTLINES][4], tr[MB_MAX_OUTLINES], D[MB_MAX_OUTLINES];
        for (int k = 0, f = 0; k < K; k++) {
            int nk = x->lay.counts[k];
            for (int q = 0; q < 4; q++)
                B[k][q] = 0.0;
            tr[k] = 0.0;
            D[k] = 0.0;
            for (int i = f; i < f + nk; i++) {
                double xt = y[2 * i] - xb, yt = y[2 * i + 1] - yb;
                double rx = x->mean[2 * i] - (wr * xt - wi * yt + t0x);
                double ry = x->mean[2 * i + 1] - (wi * xt + wr * yt + t0y);
                double cx = wr * e[2 * i] - wi * e[2 * i + 1];
                double cy = wi * e[2 * i] + wr * e[2 * i + 1];
                /* Pose columns at this landmark: dw real, dw imaginary,
                   dtau x, dtau y. */
                const double px[4] = {xt, -yt, 1.0, 0.0};
                const double py[4] = {yt, xt, 0.0, 1.0};
                for (int a = 0; a < 4; a++) {
                    for (int b = 0; b < 4; b++)
                        A[a][b] += px[a] * px[b] + py[a] * py[b];
                    g[a] += px[a] * rx + py[a] * ry;
                    B[k][a] += px[a] * cx + py[a] * cy;
                }
                tr[k] += cx * rx + cy * ry;
                D[k] += cx * cx + cy * cy;
            }
            f += nk;
        }
        double S[4][4], gs[4], d[4], z[4];
        for (int a = 0; a < 4; a++) {
            gs[a] = g[a];
            for (int b = 0; b < 4; b++)
                S[a][b] = A[a][b];
            for (int k = 0; k < K; k++) {
                gs[a] -= B[k][a] * tr[k] / D[k];
                for (int b = 0; b < 4; b++)
                    S[a][b] -= B[k][a] * B[k][b] / D[k];
            }
        }
        for (int a = 0; a < 4; a++)
            d[a] = S[a][a] > 0.0 ? sqrt(S[a][a]) : 1.0;
        for (int a = 0; a < 4; a++) {
            for (int b = 0; b < 4; b++)
                S[a][b] /= d[a] * d[b];
            S[a][a] += POLISH_RIDGE;
            gs[a] /= d[a];
        }
        if (spd4_solve(S, gs, z) < 0)
            break;
        for (int a = 0; a < 4; a++)
            z[a] /= d[a];
        double delta[MB_MAX_OUTLINES], largest = 0.0;
        for (int k = 0; k < K; k++) {
            double h = pt->c[pt->perm[k]].length / x->lay.counts[k];
            double dk = tr[k];
            for (int a = 0; a < 4; a++)
                dk -= B[k][a] * z[a];
            dk /= D[k];
            if (dk > 0.5 * h)
                dk = 0.5 * h;
            else if (dk < -0.5 * h)
                dk = -0.5 * h;
            delta[k] = dk;
            if (fabs(dk) / h > largest)
                largest = fabs(dk) / h;
        }
        /* Take the step, or a fraction of it, only if it lowers the cost:
           the outlines are polygons, so the linear model can overshoot at
           a vertex. */
        int taken = 0;
        for (double frac = 1.0; frac > 0.1 && !taken; frac *= 0.5) {
            mb_pose pose2;
            double cost2;
            for (int k = 0; k < K; k++)
                tt[k] = t[k] + frac * delta[k];
            rc = polish_eval(x, pt, tt, y2, e2, &pose2, &cost2);
            if (rc < 0)
                return rc;
            if (cost2 < cost) {
                taken = 1;
                cost = cost2;
                pose = pose2;
                for (int k = 0; k < K; k++)
                    t[k] = tt[k];
                double *sw = y;
                y = y2;
                y2 = sw;
                sw = e;
                e = e2;
                e2 = sw;
            }
        }
        if (!taken || largest < START_RESOLUTION)
            break;
    }
    for (int k = 0; k < K; k++) {
        double L = pt->c[pt->perm[k]].length;
        double v = fmod(t[k], L);
        pt->t[k] = v < 0.0 ? v + L : v;
    }
    return MB_OK;
}

/* Steps (1, pose) (2) (3) (4) for one part whose landmarks are col.
   moved[k] gets the change of start k as a signed fraction of the
   perimeter, or NAN when outline k changed partner (then *swapped is
   set). */
static int part_update(struct ctx *x, struct part *pt, const double *col,
                       const struct hole_targets *ht, double *moved,
                       int *swapped)
{
    int n = x->lay.n_points, nh = x->n_holes;
    int rc = mb_procrustes_fit(col, x->mean, n, NULL, &pt->pose, &pt->residual);
    if (rc < 0)
        return rc;
    double before[MB_MAX_OUTLINES];
    for (int k = 0; k <= nh; k++) {
        moved[k] = 0.0;
        before[k] = pt->t[k];
    }
    if (nh > 1) {
        int perm[MB_MAX_OUTLINES];
        holes_match(pt, nh, &pt->pose, ht, perm);
        for (int k = 1; k <= nh; k++)
            if (perm[k] != pt->perm[k]) {
                pt->perm[k] = perm[k];
                moved[k] = NAN;
                *swapped = 1;
            }
    }
    /* Step (3) only where the best grid shift is not next to the current
       start (a new partner, or a jump); step (4) refines all. */
    mb_pose inv = mb_pose_invert(&pt->pose);
    for (int k = 0, f = 0; k <= nh; k++) {
        int nk = x->lay.counts[k];
        const struct contour *c = &pt->c[pt->perm[k]];
        mb_pose_apply(&inv, x->mean + 2 * f, nk, x->w.nu);
        int grid = start_coarse(c, nk, x->w.nu, &x->w);
        double h = c->length / nk;
        if (isnan(moved[k]) ||
            fabs(circ_diff(grid * h, pt->t[k], c->length)) > h)
            pt->t[k] = start_refine(c, nk, x->w.nu, &x->w, grid);
        f += nk;
    }
    rc = part_polish(x, pt);
    if (rc < 0)
        return rc;
    for (int k = 0; k <= nh; k++)
        if (!isnan(moved[k])) {
            double L = pt->c[pt->perm[k]].length;
            moved[k] = circ_diff(pt->t[k], before[k], L) / L;
        }
    return MB_OK;
}

/* How far a round moved the part's landmarks in the mean frame: the
   largest RMS displacement on any outline, in that outline's landmark
   spacing (of the mean). col: its landmarks before the round, whose
   Procrustes fit is pt->pose. A ring turning together with its starts
   moves nothing here. */
static int landmarks_moved(struct ctx *x, const struct part *pt,
                           const double *col, double *change)
{
    int n = x->lay.n_points;
    double *now = x->poly_xy, *before = x->poly_xy2;
    mb_pose pose;
    int rc = polish_eval(x, pt, pt->t, now, x->poly_tan, &pose, NULL);
    if (rc < 0)
        return rc;
    mb_pose_apply(&pose, now, n, now);
    mb_pose_apply(&pt->pose, col, n, before);
    *change = 0.0;
    for (int k = 0, f = 0; k < x->lay.n_outlines; k++) {
        int nk = x->lay.counts[k];
        double cx, cy, r, sum = 0.0;
        landmark_circle(x->mean + 2 * f, nk, &cx, &cy, &r);
        for (int i = f; i < f + nk; i++) {
            double dx = now[2 * i] - before[2 * i];
            double dy = now[2 * i + 1] - before[2 * i + 1];
            sum += dx * dx + dy * dy;
        }
        double ch = sqrt(sum / nk) / (2.0 * M_PI * r / nk);
        if (ch > *change)
            *change = ch;
        f += nk;
    }
    return MB_OK;
}

/* Alternate steps (1)-(4) until the landmarks settle; the gauge is
   fixed as described at the top. */
static int iterate(struct ctx *x, mb_correspond_info *info)
{
    struct hole_targets ht;
    int K = x->n_holes + 1;
    info->converged = 0;
    info->iterations = 0;
    for (int it = 0; it < x->p->max_iter; it++) {
        int rc = mean_update(x);
        if (rc < 0)
            return rc;
        mean_holes(x, &ht);
        int swapped = 0;
        for (int c = 0; c < x->mu; c++) {
            rc = part_update(x, &x->parts[x->cols[c]],
                             x->X + (size_t)c * 2 * x->lay.n_points, &ht,
                             x->moved + (size_t)c * K, &swapped);
            if (rc < 0)
                return mb_err_set(x->err, rc,
                                  "part %d: its landmarks have no spread",
                                  x->cols[c]);
        }
        for (int k = 0; k < K; k++) {
            double common = 0.0;
            int count = 0;
            for (int c = 0; c < x->mu; c++)
                if (!isnan(x->moved[(size_t)c * K + k])) {
                    common += x->moved[(size_t)c * K + k];
                    count++;
                }
            common = count ? common / count : 0.0;
            for (int c = 0; c < x->mu; c++) {
                if (isnan(x->moved[(size_t)c * K + k]))
                    continue;
                struct part *pt = &x->parts[x->cols[c]];
                double L = pt->c[pt->perm[k]].length;
                double t = fmod(pt->t[k] - common * L, L);
                pt->t[k] = t < 0.0 ? t + L : t;
            }
        }
        double change = 0.0;
        for (int c = 0; c < x->mu; c++) {
            double ch;
            rc = landmarks_moved(x, &x->parts[x->cols[c]],
                                 x->X + (size_t)c * 2 * x->lay.n_points, &ch);
            if (rc < 0)
                return mb_err_set(x->err, rc,
                                  "part %d: its landmarks have no spread",
                                  x->cols[c]);
            if (ch > change)
                change = ch;
        }
        info->iterations = it + 1;
        info->last_change = change;
        if (change < x->p->tol && !swapped) {
            info->converged = 1;
            break;
        }
    }
    /* Final shapes, mean and poses from the final starts. */
    int rc = mean_update(x);
    if (rc < 0)
        return rc;
    for (int c = 0; c < x->mu; c++) {
        struct part *pt = &x->parts[x->cols[c]];
        rc = mb_procrustes_fit(x->X + (size_t)c * 2 * x->lay.n_points, x->mean,
                               x->lay.n_points, NULL, &pt->pose, &pt->residual);
        if (rc < 0)
            return mb_err_set(x->err, rc,
                              "part %d: its landmarks have no spread",
                              x->cols[c]);
    }
    return MB_OK;
}

/* Refuse usable parts whose matched holes are too far from the mean's.
   Returns the number refused, or a negative code in strict mode. */
static int holes_check(struct ctx *x)
{
    int nh = x->n_holes, refused = 0;
    if (nh == 0)
        return 0;
    struct hole_targets ht;
    mean_holes(x, &ht);
    double limit[MB_MAX_OUTLINES];
    for (int a = 0; a < nh; a++) {
        limit[a] = x->p->hole_shift_max * ht.r[a];
        for (int b = 0; b < nh; b++) {
            if (b == a)
                continue;
            double half = 0.5 * hypot(ht.cx[a] - ht.cx[b], ht.cy[a] - ht.cy[b]);
            if (half < limit[a])
                limit[a] = half;
        }
    }
    for (int c = 0; c < x->mu; c++) {
        int j = x->cols[c];
        struct part *pt = &x->parts[j];
        for (int a = 0; a < nh; a++) {
            const struct contour *h = &pt->c[pt->perm[1 + a]];
            double src[2] = {h->cx, h->cy}, dst[2];
            mb_pose_apply(&pt->pose, src, 1, dst);
            double dist = hypot(dst[0] - ht.cx[a], dst[1] - ht.cy[a]);
            if (dist > limit[a]) {
                int rc =
                    refuse(x, j, MB_ERANGE,
                           "part %d: hole %d (input outline %d) lies "
                           "%.1f px from where the model's hole %d is "
                           "(at most %.1f px): a hole is missing, moved "
                           "or extra",
                           j, a + 1, pt->perm[1 + a], dist / pt->pose.scale,
                           a + 1, limit[a] / pt->pose.scale);
                if (rc < 0)
                    return rc;
                refused++;
                break;
            }
        }
    }
    return refused;
}

static void columns_update(struct ctx *x)
{
    x->mu = 0;
    for (int j = 0; j < x->m; j++)
        if (x->parts[j].status == 0)
            x->cols[x->mu++] = j;
}

static int too_few(struct ctx *x)
{
    const char *first = "";
    int first_j = -1;
    for (int j = 0; j < x->m && first_j < 0; j++)
        if (x->parts[j].status != 0) {
            first_j = j;
            first = x->info->parts[j].reason;
        }
    return mb_err_set(x->err, MB_EDEGENERATE,
                      "only %d of %d parts can be corresponded, fewer than "
                      "the %d needed%s%s",
                      x->mu, x->m, x->p->min_parts, first_j >= 0 ? "; " : "",
                      first);
}

/* ---- the run --------------------------------------------------------- */

void mb_correspond_params_default(mb_correspond_params *p)
{
    p->budget = 256;
    p->min_per_outline = 16;
    p->max_iter = 30;
    p->tol = 1e-2;
    p->hole_shift_max = 1.0;
    p->skip_bad = 1;
    p->min_parts = 2;
    p->arc_smoothing = 2.5;
}

void mb_correspond_info_free(mb_correspond_info *info)
{
    if (!info)
        return;
    free(info->parts);
    memset(info, 0, sizeof *info);
}

static int params_check(const mb_correspond_params *p, char *err)
{
    if (p->budget < 3 || p->budget > 1000000)
        return mb_err_set(err, MB_EINVAL,
                          "correspondence: budget %d is outside 3 .. 1000000",
                          p->budget);
    if (p->min_per_outline < 3 || p->min_per_outline > MB_MAX_OUTLINE_POINTS)
        return mb_err_set(err, MB_EINVAL,
                          "correspondence: min_per_outline %d is outside "
                          "3 .. %d",
                          p->min_per_outline, MB_MAX_OUTLINE_POINTS);
    if (p->max_iter < 1 || !(p->tol > 0.0) || !(p->hole_shift_max > 0.0) ||
        p->min_parts < 2 || !(p->arc_smoothing >= 0.0) ||
        !(p->arc_smoothing < 1e6))
        return mb_err_set(err, MB_EINVAL,
                          "correspondence: max_iter must be >= 1, tol and "
                          "hole_shift_max > 0, min_parts >= 2, "
                          "arc_smoothing >= 0 and finite");
    return MB_OK;
}

/* Prepare every part's outlines and refuse the unusable ones. */
static int parts_prepare(struct ctx *x, const mb_polyline_set *in)
{
    for (int j = 0; j < x->m; j++) {
        struct part *pt = &x->parts[j];
        const double *xy = in[j].xy;
        pt->n_outlines = in[j].n_outlines;
        for (int o = 0; o < pt->n_outlines; o++) {
            const char *why = "";
            int rc = contour_prepare(xy, in[j].counts[o], x->p->arc_smoothing,
                                     &pt->c[o], &why);
            if (rc == MB_ENOMEM)
                return mb_err_set(x->err, rc, "correspondence: out of memory");
            if (rc < 0) {
                rc = refuse(x, j, rc, "part %d: outline %d %s", j, o, why);
                if (rc < 0)
                    return rc;
                break;
            }
            xy += 2 * (size_t)in[j].counts[o];
        }
    }
    /* The most common outline count decides; ties go to the earliest. */
    int best = -1, best_votes = 0;
    for (int j = 0; j < x->m; j++) {
        if (x->parts[j].status != 0)
            continue;
        int votes = 0;
        for (int i = 0; i < x->m; i++)
            votes += x->parts[i].status == 0 &&
                     x->parts[i].n_outlines == x->parts[j].n_outlines;
        if (votes > best_votes) {
            best_votes = votes;
            best = x->parts[j].n_outlines;
        }
    }
    if (best < 0)
        return MB_OK;
    x->n_holes = best - 1;
    for (int j = 0; j < x->m; j++) {
        struct part *pt = &x->parts[j];
        if (pt->status == 0 && pt->n_outlines != best) {
            int rc = refuse(x, j, MB_ESIZE,
                            "part %d has %d hole%s where most parts have %d", j,
                            pt->n_outlines - 1, pt->n_outlines == 2 ? "" : "s",
                            best - 1);
            if (rc < 0)
                return rc;
        }
    }
    return MB_OK;
}

/* Start: reference, provisional layout, alignment of all to the reference,
   then the layout from the matched outlines' mean lengths. */
static int start_all(struct ctx *x)
{
    int K = x->n_holes + 1;
    struct part *ref = &x->parts[x->cols[0]];
    double frac[MB_MAX_OUTLINES] = {0}, total = 0.0;
    for (int k = 0; k < K; k++)
        total += ref->c[k].length;
    for (int k = 0; k < K; k++)
        frac[k] = ref->c[k].length / total;
    layout_apportion(frac, K, x->p->budget, x->p->min_per_outline, &x->lay);
    int n = x->lay.n_points;
    double *R = malloc(sizeof(double) * 2 * (size_t)n);
    if (!R)
        return mb_err_set(x->err, MB_ENOMEM, "correspondence: out of memory");
    for (int k = 0; k < K; k++) {
        ref->perm[k] = k;
        ref->t[k] = 0.0;
    }
    ref->pose = mb_pose_identity();
    part_resample(x, ref, R);
    struct hole_targets ht;
    for (int a = 0; a < x->n_holes; a++) {
        const struct contour *c = &ref->c[1 + a];
        ht.cx[a] = c->cx;
        ht.cy[a] = c->cy;
        ht.r[a] = c->length / (2.0 * M_PI);
        ht.weight[a] = x->lay.counts[1 + a];
    }
    for (int c = 1; c < x->mu; c++)
        part_initial(x, &x->parts[x->cols[c]], R, &ht);
    free(R);

    /* Final layout from the mean share of each matched outline. */
    for (int k = 0; k < K; k++)
        frac[k] = 0.0;
    for (int c = 0; c < x->mu; c++) {
        const struct part *pt = &x->parts[x->cols[c]];
        double sum = 0.0;
        for (int k = 0; k < K; k++)
            sum += pt->c[k].length;
        for (int k = 0; k < K; k++)
            frac[k] += pt->c[pt->perm[k]].length / sum / x->mu;
    }
    layout_apportion(frac, K, x->p->budget, x->p->min_per_outline, &x->lay);
    return MB_OK;
}

static void info_fill(struct ctx *x, mb_correspond_info *info)
{
    info->n_used = x->mu;
    for (int c = 0; c < x->mu; c++) {
        int j = x->cols[c];
        const struct part *pt = &x->parts[j];
        mb_correspond_part *ip = &info->parts[j];
        ip->status = 0;
        ip->reason[0] = '\0';
        ip->column = c;
        for (int k = 0; k < x->lay.n_outlines; k++) {
            const struct contour *cc = &pt->c[pt->perm[k]];
            ip->source[k] = pt->perm[k];
            ip->reversed[k] = cc->reversed;
            double L = cc->s_in[cc->n];
            double s = input_arc(cc, pt->t[k]);
            s = fmod(cc->reversed ? L - s : s, L);
            ip->start[k] = s < 0.0 ? s + L : s;
        }
        ip->rms = sqrt(pt->residual / x->lay.n_points) / pt->pose.scale;
    }
}

int mb_correspond_run(const mb_polyline_set *parts, int m,
                      const mb_correspond_params *p, mb_layout *layout,
                      double **shapes, mb_correspond_info *info, char *err)
{
    mb_correspond_params defaults;
    mb_correspond_info own_info;
    if (info)
        memset(info, 0, sizeof *info);
    else
        info = &own_info;
    memset(info, 0, sizeof *info);
    if (shapes)
        *shapes = NULL;
    if (!parts || !layout || !shapes || m < 2)
        return mb_err_set(err, MB_EINVAL,
                          "correspondence: needs at least 2 parts, a layout "
                          "and a place for the shapes");
    if (!p) {
        mb_correspond_params_default(&defaults);
        p = &defaults;
    }
    int rc = params_check(p, err);
    if (rc < 0)
        return rc;
    for (int j = 0; j < m; j++) {
        if (parts[j].n_outlines < 1 || parts[j].n_outlines > MB_MAX_OUTLINES)
            return mb_err_set(err, MB_EINVAL,
                              "correspondence: part %d has %d outlines "
                              "(expected 1 .. %d)",
                              j, parts[j].n_outlines, MB_MAX_OUTLINES);
        for (int o = 0; o < parts[j].n_outlines; o++)
            if (parts[j].counts[o] < 0 ||
                (parts[j].counts[o] > 0 && !parts[j].xy))
                return mb_err_set(err, MB_EINVAL,
                                  "correspondence: part %d, outline %d has "
                                  "a negative point count or no points",
                                  j, o);
    }

    struct ctx x;
    memset(&x, 0, sizeof x);
    x.p = p;
    x.m = m;
    x.err = err;
    x.info = info;
    mb_gpa_params_default(&x.gp);
    info->n_parts = m;
    info->parts = calloc((size_t)m, sizeof *info->parts);
    x.parts = calloc((size_t)m, sizeof *x.parts);
    x.cols = malloc(sizeof(int) * (size_t)m);
    if (!info->parts || !x.parts || !x.cols) {
        rc = mb_err_set(err, MB_ENOMEM, "correspondence: out of memory");
        goto done;
    }
    for (int j = 0; j < m; j++)
        info->parts[j].column = -1;

    rc = parts_prepare(&x, parts);
    if (rc < 0)
        goto done;
    columns_update(&x);
    if (x.mu < p->min_parts) {
        rc = too_few(&x);
        goto done;
    }

    /* No outline gets more landmarks than the (raised) budget. */
    size_t nmax = (size_t)p->budget;
    if (nmax < (size_t)(x.n_holes + 1) * (size_t)p->min_per_outline)
        nmax = (size_t)(x.n_holes + 1) * (size_t)p->min_per_outline;
    if (nmax > MB_MAX_OUTLINE_POINTS)
        nmax = MB_MAX_OUTLINE_POINTS;
    x.w.q = malloc(sizeof(double) * 8 * nmax);
    if (!x.w.q) {
        rc = mb_err_set(err, MB_ENOMEM, "correspondence: out of memory");
        goto done;
    }
    x.w.nu = x.w.q + 2 * nmax;
    x.w.tmp = x.w.nu + 2 * nmax;
    x.w.zre = x.w.tmp + 2 * nmax;
    x.w.zim = x.w.zre + nmax;

    rc = start_all(&x);
    if (rc < 0)
        goto done;
    size_t d = 2 * (size_t)x.lay.n_points;
    x.X = malloc(sizeof(double) * d * (size_t)m);
    x.aligned = malloc(sizeof(double) * d * (size_t)m);
    x.mean = malloc(sizeof(double) * d);
    x.moved = malloc(sizeof(double) * (size_t)m * (size_t)(x.n_holes + 1));
    x.poly_xy = malloc(sizeof(double) * 4 * d);
    if (x.poly_xy) {
        x.poly_tan = x.poly_xy + d;
        x.poly_xy2 = x.poly_tan + d;
        x.poly_tan2 = x.poly_xy2 + d;
    }
    if (!x.X || !x.aligned || !x.mean || !x.moved || !x.poly_xy) {
        rc = mb_err_set(err, MB_ENOMEM, "correspondence: out of memory");
        goto done;
    }

    for (int round = 0; round < MAX_ROUNDS; round++) {
        rc = iterate(&x, info);
        if (rc < 0)
            goto done;
        int refused = holes_check(&x);
        if (refused < 0) {
            rc = refused;
            goto done;
        }
        columns_update(&x);
        if (x.mu < p->min_parts) {
            rc = too_few(&x);
            goto done;
        }
        if (refused == 0)
            break;
        if (round == MAX_ROUNDS - 1) {
            /* Out of rounds: shapes of the parts still usable, as they are. */
            rc = mean_update(&x);
            if (rc < 0)
                goto done;
        }
    }

    *shapes = malloc(sizeof(double) * d * (size_t)x.mu);
    if (!*shapes) {
        rc = mb_err_set(err, MB_ENOMEM, "correspondence: out of memory");
        goto done;
    }
    memcpy(*shapes, x.X, sizeof(double) * d * (size_t)x.mu);
    *layout = x.lay;
    info_fill(&x, info);
    rc = MB_OK;

done:
    if (x.parts)
        for (int j = 0; j < m; j++)
            for (int o = 0; o < MB_MAX_OUTLINES; o++)
                contour_free(&x.parts[j].c[o]);
    free(x.parts);
    free(x.cols);
    free(x.X);
    free(x.aligned);
    free(x.mean);
    free(x.moved);
    free(x.poly_xy);
    free(x.w.q);
    if (info == &own_info)
        mb_correspond_info_free(info);
    return rc;
}
