/*
 * capture/synth_parts.c - the part families of the synthetic line (invented
 * demo parts) and their natural variation, built as dense closed outlines
 * in the part frame (mm, x right, y down, origin near the part's middle).
 *
 * Every family is a short table of shape parameters, each with a nominal
 * value and the standard deviation of its part-to-part variation, plus a
 * builder that turns the parameters into outlines made of straight lines
 * and circular arcs sampled about one pixel apart. Sharp corners are always
 * vertices, so the sampled polygon is the part (nothing is rounded away).
 */
#include "render.h"
#include "synth_internal.h"

#include <string.h>

/* ---- outline sets */

void mb_synth_polys_clear(mb_synth_polys *p)
{
    p->n = 0;
    p->n_outlines = 0;
    p->first[0] = 0;
    p->overflow = 0;
}

void mb_synth_polys_begin(mb_synth_polys *p)
{
    if (p->n_outlines >= MB_MAX_OUTLINES) {
        p->overflow = 1;
        return;
    }
    p->first[p->n_outlines] = p->n;
}

void mb_synth_polys_point(mb_synth_polys *p, double x, double y)
{
    if (p->n >= p->cap) {
        p->overflow = 1;
        return;
    }
    p->xy[2 * p->n] = x;
    p->xy[2 * p->n + 1] = y;
    p->n++;
}

void mb_synth_polys_line(mb_synth_polys *p, double x, double y, double step)
{
    if (p->n == 0 || p->n == p->first[p->n_outlines]) {
        mb_synth_polys_point(p, x, y);
        return;
    }
    double x0 = p->xy[2 * (p->n - 1)], y0 = p->xy[2 * (p->n - 1) + 1];
    double len = hypot(x - x0, y - y0);
    if (len < 1e-12)
        return;
    int n = (int)ceil(len / step);
    for (int k = 1; k <= n; k++) {
        double t = (double)k / n;
        mb_synth_polys_point(p, x0 + t * (x - x0), y0 + t * (y - y0));
    }
}

void mb_synth_polys_arc(mb_synth_polys *p, double cx, double cy, double r,
                        double a0, double a1, double step)
{
    double da = a1 - a0;
    int n = (int)ceil(fabs(da) * r / step);
    int nmin = (int)ceil(fabs(da) / (M_PI / 16));
    if (n < nmin)
        n = nmin;
    if (n < 1)
        n = 1;
    int k0 = 0;
    if (p->n > p->first[p->n_outlines]) {
        double lx = p->xy[2 * (p->n - 1)], ly = p->xy[2 * (p->n - 1) + 1];
        if (hypot(lx - (cx + r * cos(a0)), ly - (cy + r * sin(a0))) < 1e-9)
            k0 = 1;
    }
    for (int k = k0; k <= n; k++) {
        double a = a0 + da * k / n;
        mb_synth_polys_point(p, cx + r * cos(a), cy + r * sin(a));
    }
}

void mb_synth_polys_end(mb_synth_polys *p)
{
    if (p->n_outlines >= MB_MAX_OUTLINES) {
        p->overflow = 1;
        return;
    }
    int f = p->first[p->n_outlines];
    if (p->n - f >= 2 &&
        hypot(p->xy[2 * (p->n - 1)] - p->xy[2 * f],
              p->xy[2 * (p->n - 1) + 1] - p->xy[2 * f + 1]) < 1e-9)
        p->n--;
    if (p->n - f < 3) { /* degenerate: drop it */
        p->n = f;
        return;
    }
    p->n_outlines++;
    p->first[p->n_outlines] = p->n;
}

static void reverse_outline(mb_synth_polys *p, int o)
{
    /* keep the first point, reverse the rest */
    double *a = p->xy + 2 * (p->first[o] + 1);
    int n = mb_synth_polys_count(p, o) - 1;
    for (int i = 0, j = n - 1; i < j; i++, j--) {
        double tx = a[2 * i], ty = a[2 * i + 1];
        a[2 * i] = a[2 * j];
        a[2 * i + 1] = a[2 * j + 1];
        a[2 * j] = tx;
        a[2 * j + 1] = ty;
    }
}

void mb_synth_polys_orient(mb_synth_polys *p)
{
    for (int o = 0; o < p->n_outlines; o++) {
        double a = mb_polygon_area(p->xy + 2 * p->first[o],
                                   mb_synth_polys_count(p, o));
        if ((o == 0 && a < 0) || (o > 0 && a > 0))
            reverse_outline(p, o);
    }
}

void mb_synth_polys_copy(mb_synth_polys *dst, const mb_synth_polys *src)
{
    if (src->n > dst->cap) {
        dst->overflow = 1;
        return;
    }
    memcpy(dst->xy, src->xy, sizeof(double) * 2 * (size_t)src->n);
    dst->n = src->n;
    dst->n_outlines = src->n_outlines;
    memcpy(dst->first, src->first, sizeof src->first);
    dst->overflow = src->overflow;
}

static void transform(mb_synth_polys *p, int from, double m00, double m01,
                      double m10, double m11, double tx, double ty)
{
    for (int i = from; i < p->n; i++) {
        double x = p->xy[2 * i], y = p->xy[2 * i + 1];
        p->xy[2 * i] = m00 * x + m01 * y + tx;
        p->xy[2 * i + 1] = m10 * x + m11 * y + ty;
    }
}

/* Rounded rectangle centred at (cx, cy), half sizes a, b, corner radius r,
   starting at the left end of the top edge (y = cy - b). */
static void rounded_rect(mb_synth_polys *p, double cx, double cy, double a,
                         double b, double r, double step)
{
    mb_synth_polys_begin(p);
    mb_synth_polys_point(p, cx - a + r, cy - b);
    mb_synth_polys_line(p, cx + a - r, cy - b, step);
    mb_synth_polys_arc(p, cx + a - r, cy - b + r, r, -M_PI / 2, 0, step);
    mb_synth_polys_line(p, cx + a, cy + b - r, step);
    mb_synth_polys_arc(p, cx + a - r, cy + b - r, r, 0, M_PI / 2, step);
    mb_synth_polys_line(p, cx - a + r, cy + b, step);
    mb_synth_polys_arc(p, cx - a + r, cy + b - r, r, M_PI / 2, M_PI, step);
    mb_synth_polys_line(p, cx - a, cy - b + r, step);
    mb_synth_polys_arc(p, cx - a + r, cy - b + r, r, M_PI, 1.5 * M_PI, step);
    mb_synth_polys_end(p);
}

static void circle(mb_synth_polys *p, double cx, double cy, double r,
                   double step)
{
    mb_synth_polys_begin(p);
    mb_synth_polys_arc(p, cx, cy, r, 0, 2 * M_PI, step);
    mb_synth_polys_end(p);
}

/* ---- ring RG-4030: annulus; ovality squeezes the whole ring along an axis */

enum { RING_R_OUT, RING_R_IN, RING_OVAL, RING_AXIS, RING_DX, RING_DY, RING_N };

static void build_ring(const mb_synth_shape *s, double step, mb_synth_polys *p)
{
    const double *q = s->p;
    circle(p, 0, 0, q[RING_R_OUT], step);
    circle(p, q[RING_DX], q[RING_DY], q[RING_R_IN], step);
    /* ovality: scale by (1 + e) along the axis, (1 - e) across it */
    double c = cos(q[RING_AXIS]), sn = sin(q[RING_AXIS]), e = q[RING_OVAL];
    double l1 = 1 + e, l2 = 1 - e;
    transform(p, 0, l1 * c * c + l2 * sn * sn, (l1 - l2) * c * sn,
              (l1 - l2) * c * sn, l1 * sn * sn + l2 * c * c, 0, 0);
}

/* ---- flange FG-3426: rounded rectangle, stadium opening, four bolt holes */

enum {
    FL_A,
    FL_B,
    FL_R,
    FL_OPEN_A,
    FL_OPEN_B,
    FL_HOLE_R,
    FL_H0X,
    FL_H0Y,
    FL_H1X,
    FL_H1Y,
    FL_H2X,
    FL_H2Y,
    FL_H3X,
    FL_H3Y,
    FL_BOW,
    FL_N
};

static const double flange_holes[4][2] = {
    {12.5, -8.5}, {12.5, 8.5}, {-12.5, 8.5}, {-12.5, -8.5}};

static void build_flange(const mb_synth_shape *s, double step,
                         mb_synth_polys *p)
{
    const double *q = s->p;
    rounded_rect(p, 0, 0, q[FL_A], q[FL_B], q[FL_R], step);
    rounded_rect(p, 0, 0, q[FL_OPEN_A], q[FL_OPEN_B], q[FL_OPEN_B], step);
    for (int h = 0; h < 4; h++) {
        if (h == s->hole_missing)
            continue;
        circle(p, flange_holes[h][0] + q[FL_H0X + 2 * h],
               flange_holes[h][1] + q[FL_H0Y + 2 * h], q[FL_HOLE_R], step);
    }
    /* bow: the long axis bends, deflection q[FL_BOW] at its ends */
    double k = q[FL_BOW] / (17.0 * 17.0);
    for (int i = 0; i < p->n; i++)
        p->xy[2 * i + 1] += k * p->xy[2 * i] * p->xy[2 * i];
}

/* ---- hose HS-0642: a band of constant width along a bent centre line */

enum { HO_LEN, HO_WIDTH, HO_BEND, HO_SBEND, HO_CUT0, HO_CUT1, HO_N };

/* Centre line point and tangent angle at u in [-0.5, 0.5]: the tangent
   turns by psi(u) = bend * u + 2 * sbend * u^2 (constant plus linearly
   varying curvature), starting along +x at u = 0, the origin. */
static double hose_psi(const double *q, double u)
{
    return q[HO_BEND] * u + 2.0 * q[HO_SBEND] * u * u;
}

/* Add to (x, y) the centre line's advance from u0 to u1 (Simpson's rule
   on two sub-intervals: the integrand is smooth and the steps are short,
   so the error is far below 1e-9 mm). */
static void hose_advance(const double *q, double u0, double u1, double *x,
                         double *y)
{
    double um = 0.5 * (u0 + u1), h = (u1 - u0) / 6.0;
    double p0 = hose_psi(q, u0), pm = hose_psi(q, um), p1 = hose_psi(q, u1);
    *x += q[HO_LEN] * h * (cos(p0) + 4 * cos(pm) + cos(p1));
    *y += q[HO_LEN] * h * (sin(p0) + 4 * sin(pm) + sin(p1));
}

/* One side point at u: the centre (x, y) offset by side * hw along the
   left normal, and by `shift` along the tangent (for a slanted cut). */
static void hose_side(mb_synth_polys *p, const double *q, double u, double x,
                      double y, double side, double shift)
{
    double psi = hose_psi(q, u), tx = cos(psi), ty = sin(psi);
    mb_synth_polys_point(p, x - side * ty + shift * tx,
                         y + side * tx + shift * ty);
}

static void build_hose(const mb_synth_shape *s, double step, mb_synth_polys *p)
{
    const double *q = s->p;
    double hw = 0.5 * q[HO_WIDTH];
    double t0 = hw * tan(q[HO_CUT0]), t1 = hw * tan(q[HO_CUT1]);
    int n = (int)ceil(q[HO_LEN] / step) + 1;
    mb_synth_polys_begin(p);
    int base = p->n;
    /* the centre line at u = -0.5, integrating back from the origin */
    double x = 0, y = 0;
    for (int k = 0; k < n / 2; k++)
        hose_advance(q, -0.5 * k / (n / 2), -0.5 * (k + 1) / (n / 2), &x, &y);
    /* left side, u from -0.5 to 0.5 */
    double u = -0.5;
    for (int k = 0; k < n; k++) {
        double un = -0.5 + (double)k / (n - 1);
        hose_advance(q, u, un, &x, &y);
        u = un;
        hose_side(p, q, u, x, y, hw, k == 0 ? -t0 : (k == n - 1 ? t1 : 0));
    }
    /* end cap at u = 0.5 (slanted by cut1), then the right side back */
    {
        double psi = hose_psi(q, 0.5), tx = cos(psi), ty = sin(psi);
        mb_synth_polys_line(p, x + hw * ty - t1 * tx, y - hw * tx - t1 * ty,
                            step);
    }
    for (int k = n - 2; k >= 0; k--) {
        double un = -0.5 + (double)k / (n - 1);
        hose_advance(q, u, un, &x, &y);
        u = un;
        hose_side(p, q, u, x, y, -hw, k == 0 ? t0 : 0);
    }
    /* the cap at u = -0.5 back to the first point */
    mb_synth_polys_line(p, p->xy[2 * base], p->xy[2 * base + 1], step);
    mb_synth_polys_end(p);
}

/* ---- lipseal LS-2218: a heel with rounded corners and a tapered lip */

enum { LS_ALPHA, LS_LIP_LEN, LS_TIP, LS_HEEL_H, LS_ROOT, LS_N };

static void build_lipseal(const mb_synth_shape *s, double step,
                          mb_synth_polys *p)
{
    const double *q = s->p;
    const double left = -12.0, right = 8.0, bottom = -2.0, rc = 1.2;
    const double root_c = 4.0, ox = 1.0, oy = 1.8;
    double top = bottom - q[LS_HEEL_H], al = q[LS_ALPHA];
    double dx = sin(al), dy = cos(al), mx = cos(al), my = -sin(al);
    double tcx = root_c + q[LS_LIP_LEN] * dx, tcy = bottom + q[LS_LIP_LEN] * dy;
    double th = q[LS_TIP], rh = q[LS_ROOT];
    int first = p->n;
    mb_synth_polys_begin(p);
    mb_synth_polys_point(p, left + rc, top);
    mb_synth_polys_line(p, right - rc, top, step);
    mb_synth_polys_arc(p, right - rc, top + rc, rc, -M_PI / 2, 0, step);
    mb_synth_polys_line(p, right, bottom - rc, step);
    mb_synth_polys_arc(p, right - rc, bottom - rc, rc, 0, M_PI / 2, step);
    mb_synth_polys_line(p, root_c + rh, bottom, step);
    mb_synth_polys_line(p, tcx + th * mx, tcy + th * my, step);
    mb_synth_polys_arc(p, tcx, tcy, th, -al, M_PI - al, step);
    mb_synth_polys_line(p, root_c - rh, bottom, step);
    mb_synth_polys_line(p, left + rc, bottom, step);
    mb_synth_polys_arc(p, left + rc, bottom - rc, rc, M_PI / 2, M_PI, step);
    mb_synth_polys_line(p, left, top + rc, step);
    mb_synth_polys_arc(p, left + rc, top + rc, rc, M_PI, 1.5 * M_PI, step);
    mb_synth_polys_end(p);
    transform(p, first, s->mirror ? -1 : 1, 0, 0, 1, s->mirror ? -ox : ox, oy);
}

/* ---- the family table */

#define DEG (M_PI / 180.0)

/* clang-format off */
/* Nominal values and part-to-part standard deviations (mm, radians). The
   deformation defect pushes one parameter deform_lo..deform_hi standard
   deviations away from nominal (the good range ends at 3). */
static const mb_synth_family_def families[MB_SYNTH_N_FAMILIES] = {
    {.name = "ring",
     .part_number = "RG-4030",
     .n_params = RING_N,
     .params = {{"outer_radius", 20.0, 0.0},
                {"inner_radius", 15.0, 0.09},
                {"ovality", 0.0, 0.008},
                {"ovality_axis", 0.0, -M_PI},
                {"bore_dx", 0.0, 0.04},
                {"bore_dy", 0.0, 0.04}},
     .size_sd = 0.004,
     .main_mm = 40.0,
     .deform_param = RING_OVAL,
     .deform_lo = 5.0,
     .deform_hi = 10.0,
     .build = build_ring},
    {.name = "flange",
     .part_number = "FG-3426",
     .n_params = FL_N,
     .params = {{"half_length", 17.0, 0.068},
                {"half_width", 13.0, 0.052},
                {"corner_radius", 5.0, 0.08},
                {"opening_half_length", 9.0, 0.09},
                {"opening_half_width", 4.5, 0.045},
                {"hole_radius", 1.6, 0.02},
                {"hole0_dx", 0, 0.04}, {"hole0_dy", 0, 0.04},
                {"hole1_dx", 0, 0.04}, {"hole1_dy", 0, 0.04},
                {"hole2_dx", 0, 0.04}, {"hole2_dy", 0, 0.04},
                {"hole3_dx", 0, 0.04}, {"hole3_dy", 0, 0.04},
                {"bow", 0.0, 0.1}},
     .size_sd = 0.004,
     .main_mm = 34.0,
     .deform_param = FL_BOW,
     .deform_lo = 8.0,
     .deform_hi = 20.0,
     .build = build_flange},
    {.name = "hose",
     .part_number = "HS-0642",
     .n_params = HO_N,
     .params = {{"length", 42.0, 0.21},
                {"width", 6.0, 0.09},
                {"bend", 70.0 * DEG, 6.0 * DEG},
                {"s_bend", 0.0, 5.0 * DEG},
                {"cut0", 0.0, 1.0 * DEG},
                {"cut1", 0.0, 1.0 * DEG}},
     .size_sd = 0.0, /* the length varies instead */
     .main_mm = 42.0,
     .deform_param = HO_BEND,
     .deform_lo = 5.0,
     .deform_hi = 10.0,
     .build = build_hose},
    {.name = "lipseal",
     .part_number = "LS-2218",
     .n_params = LS_N,
     .params = {{"lip_angle", 35.0 * DEG, 1.5 * DEG},
                {"lip_length", 9.0, 0.08},
                {"tip_half_width", 1.0, 0.03},
                {"heel_height", 8.0, 0.05},
                {"root_half_width", 2.5, 0.03}},
     .size_sd = 0.004,
     .main_mm = 22.0,
     .deform_param = LS_ALPHA,
     .deform_lo = 6.0,
     .deform_hi = 13.0,
     .build = build_lipseal},
};
/* clang-format on */

const mb_synth_family_def *mb_synth_family_get(int family)
{
    if (family < 0 || family >= MB_SYNTH_N_FAMILIES)
        return NULL;
    return &families[family];
}

/* Normal, truncated at 3 standard deviations (redrawn beyond). */
static double truncated_normal(mb_synth_rng *r)
{
    for (int i = 0; i < 16; i++) {
        double z = mb_synth_rng_normal(r);
        if (fabs(z) <= 3.0)
            return z;
    }
    return 0.0;
}

void mb_synth_shape_draw(const mb_synth_family_def *f, double variation,
                         mb_synth_rng *r, mb_synth_shape *s)
{
    memset(s, 0, sizeof *s);
    s->hole_missing = -1;
    /* draw every value even at variation 0, so the stream stays aligned */
    s->size = 1.0 + variation * f->size_sd * truncated_normal(r);
    for (int i = 0; i < f->n_params; i++) {
        const mb_synth_param *pa = &f->params[i];
        if (pa->sd < 0)
            s->p[i] = pa->nominal + mb_synth_rng_uniform(r) * -pa->sd;
        else
            s->p[i] = pa->nominal + variation * pa->sd * truncated_normal(r);
    }
}

void mb_synth_shape_build(const mb_synth_family_def *f, const mb_synth_shape *s,
                          double step, mb_synth_polys *out)
{
    mb_synth_polys_clear(out);
    f->build(s, step / s->size, out);
    for (int i = 0; i < out->n; i++) {
        out->xy[2 * i] *= s->size;
        out->xy[2 * i + 1] *= s->size;
    }
    mb_synth_polys_orient(out);
}
