/*
 * tests/calibration/render_target.c - frames of the calibration target
 * through a known camera (render_target.h). Everything geometric is
 * written here again rather than taken from calibration/camera.c.
 */
#include "render_target.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#define M(h, r, c) ((h)[(r) + 3 * (c)])

void rt_scene_default(rt_scene *sc)
{
    memset(sc, 0, sizeof *sc);
    sc->width = 800;
    sc->height = 600;
    sc->f = 1000.0;
    sc->height_mm = 250.0;
    sc->white = 220.0;
    sc->black = 25.0;
    sc->conveyor = 90.0;
    sc->margin_pitch = 1.5;
    sc->supersample = 8;
    sc->seed = 1;
}

void rt_scene_tilted(rt_scene *sc)
{
    rt_scene_default(sc);
    sc->tilt_x_deg = 8.0;
    sc->tilt_y_deg = -5.0;
    sc->roll_deg = 3.0;
    sc->k[0] = -0.08;
    sc->k[1] = 0.02;
    sc->k[2] = 0.002;
    sc->k[3] = -0.001;
    sc->blur = 0.7;
}

void rt_scene_pose(rt_scene *sc, const mb_target *t, double a, double dx, double dy)
{
    double mx = 0.5 * (t->cols - 1) * t->pitch, my = 0.5 * (t->rows - 1) * t->pitch;
    double r = a * M_PI / 180.0;
    sc->angle_deg = a;
    sc->shift_mm[0] = mx + dx - (cos(r) * mx - sin(r) * my);
    sc->shift_mm[1] = my + dy - (sin(r) * mx + cos(r) * my);
}

static void rot_mul(const double a[9], const double b[9], double o[9])
{
    double t[9];
    for (int r = 0; r < 3; r++)
        for (int c = 0; c < 3; c++)
            M(t, r, c) = M(a, r, 0) * M(b, 0, c) + M(a, r, 1) * M(b, 1, c) +
                         M(a, r, 2) * M(b, 2, c);
    memcpy(o, t, sizeof t);
}

void rt_homography(const rt_scene *sc, const mb_target *t, double h[9])
{
    const double d = M_PI / 180.0;
    double ax = sc->tilt_x_deg * d, ay = sc->tilt_y_deg * d,
           az = sc->roll_deg * d;
    double Rx[9] = {1, 0, 0, 0, cos(ax), sin(ax), 0, -sin(ax), cos(ax)};
    double Ry[9] = {cos(ay), 0, -sin(ay), 0, 1, 0, sin(ay), 0, cos(ay)};
    double Rz[9] = {cos(az), sin(az), 0, -sin(az), cos(az), 0, 0, 0, 1};
    double R[9];
    rot_mul(Ry, Rx, R);
    rot_mul(Rz, R, R);
    const double xm = 0.5 * (t->cols - 1) * t->pitch;
    const double ym = 0.5 * (t->rows - 1) * t->pitch;
    /* Columns r1, r2 and t = (0, 0, Z0) - xm r1 - ym r2. */
    double B[9];
    for (int r = 0; r < 3; r++) {
        M(B, r, 0) = M(R, r, 0);
        M(B, r, 1) = M(R, r, 1);
        M(B, r, 2) =
            (r == 2 ? sc->height_mm : 0.0) - xm * M(R, r, 0) - ym * M(R, r, 1);
    }
    double cx = 0.5 * (sc->width - 1), cy = 0.5 * (sc->height - 1);
    double K[9] = {sc->f, 0, 0, 0, sc->f, 0, cx, cy, 1};
    rot_mul(K, B, h);
    double s = h[8];
    for (int i = 0; i < 9; i++)
        h[i] /= s;
}

static void distort_n(const double k[4], double u, double v, double *ud,
                      double *vd)
{
    double r2 = u * u + v * v;
    double g = 1.0 + k[0] * r2 + k[1] * r2 * r2;
    *ud = u * g + 2.0 * k[2] * u * v + k[3] * (r2 + 2.0 * u * u);
    *vd = v * g + k[2] * (r2 + 2.0 * v * v) + 2.0 * k[3] * u * v;
}

/* The distortion's Jacobian determinant at (u, v), by differences. */
static double dist_det(const double k[4], double u, double v)
{
    const double e = 1e-7;
    double fx, fy, ax, ay, bx, by;
    distort_n(k, u, v, &fx, &fy);
    distort_n(k, u + e, v, &ax, &ay);
    distort_n(k, u, v + e, &bx, &by);
    return ((ax - fx) * (by - fy) - (bx - fx) * (ay - fy)) / (e * e);
}

/* Inverse of the distortion by Newton's method with a numerical Jacobian
   (independent of camera.c's analytic one), from the caller's guess in
   (*u, *v). Only the branch where the lens does not fold over counts
   (positive Jacobian determinant and radial factor): strong barrel
   distortion has unphysical solutions beyond the fold. */
static int undistort_n(const double k[4], double ud, double vd, double *u,
                       double *v)
{
    double x = *u, y = *v;
    for (int it = 0; it < 100; it++) {
        double fx, fy;
        distort_n(k, x, y, &fx, &fy);
        double ex = fx - ud, ey = fy - vd;
        if (ex * ex + ey * ey < 1e-28)
            break;
        const double e = 1e-7;
        double ax, ay, bx, by;
        distort_n(k, x + e, y, &ax, &ay);
        distort_n(k, x, y + e, &bx, &by);
        double j00 = (ax - fx) / e, j10 = (ay - fy) / e;
        double j01 = (bx - fx) / e, j11 = (by - fy) / e;
        double det = j00 * j11 - j01 * j10;
        if (fabs(det) < 1e-12)
            return -1;
        x -= (j11 * ex - j01 * ey) / det;
        y -= (-j10 * ex + j00 * ey) / det;
    }
    double fx, fy;
    distort_n(k, x, y, &fx, &fy);
    double r2 = x * x + y * y;
    if (hypot(fx - ud, fy - vd) < 1e-12 && dist_det(k, x, y) > 0.0 &&
        1.0 + k[0] * r2 + k[1] * r2 * r2 > 0.0) {
        *u = x;
        *v = y;
        return 0;
    }
    return -1;
}

static double radius_of(const rt_scene *sc)
{
    return 0.5 * hypot(sc->width, sc->height);
}

void rt_project(const rt_scene *sc, const mb_target *t, double qx, double qy,
                double *x, double *y)
{
    double h[9];
    rt_homography(sc, t, h);
    double a = sc->angle_deg * M_PI / 180.0;
    double X = cos(a) * qx - sin(a) * qy + sc->shift_mm[0];
    double Y = sin(a) * qx + cos(a) * qy + sc->shift_mm[1];
    double w = M(h, 2, 0) * X + M(h, 2, 1) * Y + M(h, 2, 2);
    double xu = (M(h, 0, 0) * X + M(h, 0, 1) * Y + M(h, 0, 2)) / w;
    double yu = (M(h, 1, 0) * X + M(h, 1, 1) * Y + M(h, 1, 2)) / w;
    double cx = 0.5 * (sc->width - 1), cy = 0.5 * (sc->height - 1);
    double rho = radius_of(sc), ud, vd;
    distort_n(sc->k, (xu - cx) / rho, (yu - cy) / rho, &ud, &vd);
    *x = cx + rho * ud;
    *y = cy + rho * vd;
}

static int inverse3(const double h[9], double g[9])
{
    double a = M(h, 0, 0), b = M(h, 0, 1), c = M(h, 0, 2);
    double d = M(h, 1, 0), e = M(h, 1, 1), f = M(h, 1, 2);
    double p = M(h, 2, 0), q = M(h, 2, 1), r = M(h, 2, 2);
    double det =
        a * (e * r - f * q) - b * (d * r - f * p) + c * (d * q - e * p);
    if (fabs(det) < 1e-300)
        return -1;
    M(g, 0, 0) = (e * r - f * q) / det;
    M(g, 0, 1) = (c * q - b * r) / det;
    M(g, 0, 2) = (b * f - c * e) / det;
    M(g, 1, 0) = (f * p - d * r) / det;
    M(g, 1, 1) = (a * r - c * p) / det;
    M(g, 1, 2) = (c * d - a * f) / det;
    M(g, 2, 0) = (d * q - e * p) / det;
    M(g, 2, 1) = (b * p - a * q) / det;
    M(g, 2, 2) = (a * e - b * d) / det;
    return 0;
}

typedef struct {
    double g[9]; /* inverse homography */
    double cx, cy, rho;
    double ca, sa; /* frame pose */
} inv_map;

static void inv_map_init(const rt_scene *sc, const mb_target *t, inv_map *m)
{
    double h[9];
    rt_homography(sc, t, h);
    inverse3(h, m->g);
    m->cx = 0.5 * (sc->width - 1);
    m->cy = 0.5 * (sc->height - 1);
    m->rho = radius_of(sc);
    m->ca = cos(sc->angle_deg * M_PI / 180.0);
    m->sa = sin(sc->angle_deg * M_PI / 180.0);
}

static int inv_apply_from(const rt_scene *sc, const inv_map *m, double x,
                          double y, double *pu, double *pv, double *X,
                          double *Y, double *qx, double *qy);

/* Pixel -> plane (frame 0) and target coordinates. */
static int inv_apply(const rt_scene *sc, const inv_map *m, double x, double y,
                     double *X, double *Y, double *qx, double *qy)
{
    double u = (x - m->cx) / m->rho, v = (y - m->cy) / m->rho;
    return inv_apply_from(sc, m, x, y, &u, &v, X, Y, qx, qy);
}

/* The same, starting Newton's method from (*u, *v) (normalised), which
   gets the undistorted normalised position. */
static int inv_apply_from(const rt_scene *sc, const inv_map *m, double x,
                          double y, double *pu, double *pv, double *X,
                          double *Y, double *qx, double *qy)
{
    double u = *pu, v = *pv;
    const double ud = (x - m->cx) / m->rho, vd = (y - m->cy) / m->rho;
    if (undistort_n(sc->k, ud, vd, &u, &v) < 0) {
        u = ud; /* the warm start failed: start from the pixel itself */
        v = vd;
        if (undistort_n(sc->k, ud, vd, &u, &v) < 0)
            return -1;
    }
    *pu = u;
    *pv = v;
    double xu = m->cx + m->rho * u, yu = m->cy + m->rho * v;
    double w = M(m->g, 2, 0) * xu + M(m->g, 2, 1) * yu + M(m->g, 2, 2);
    *X = (M(m->g, 0, 0) * xu + M(m->g, 0, 1) * yu + M(m->g, 0, 2)) / w;
    *Y = (M(m->g, 1, 0) * xu + M(m->g, 1, 1) * yu + M(m->g, 1, 2)) / w;
    double dx = *X - sc->shift_mm[0], dy = *Y - sc->shift_mm[1];
    *qx = m->ca * dx + m->sa * dy;
    *qy = -m->sa * dx + m->ca * dy;
    return 0;
}

int rt_plane_of_px(const rt_scene *sc, const mb_target *t, double x, double y,
                   double *X, double *Y)
{
    inv_map m;
    double qx, qy;
    inv_map_init(sc, t, &m);
    return inv_apply(sc, &m, x, y, X, Y, &qx, &qy);
}

double rt_mm_per_px(const rt_scene *sc, const mb_target *t, double x, double y)
{
    const double e = 0.25;
    double X1, Y1, X2, Y2, X3, Y3, X4, Y4;
    rt_plane_of_px(sc, t, x + e, y, &X1, &Y1);
    rt_plane_of_px(sc, t, x - e, y, &X2, &Y2);
    rt_plane_of_px(sc, t, x, y + e, &X3, &Y3);
    rt_plane_of_px(sc, t, x, y - e, &X4, &Y4);
    double j00 = (X1 - X2) / (2 * e), j10 = (Y1 - Y2) / (2 * e);
    double j01 = (X3 - X4) / (2 * e), j11 = (Y3 - Y4) / (2 * e);
    return sqrt(fabs(j00 * j11 - j01 * j10));
}

void rt_dot_centroid(const rt_scene *sc, const mb_target *t, int r, int c,
                     double *x, double *y)
{
    enum { NV = 256 };
    double px[NV], py[NV], ox, oy;
    double rd = 0.5 * t->dot_diameter;
    rt_project(sc, t, c * t->pitch, r * t->pitch, &ox, &oy);
    for (int i = 0; i < NV; i++) {
        double phi = 2.0 * M_PI * i / NV;
        rt_project(sc, t, c * t->pitch + rd * cos(phi),
                   r * t->pitch + rd * sin(phi), &px[i], &py[i]);
    }
    double a2 = 0, sx = 0, sy = 0;
    for (int i = 0; i < NV; i++) {
        int j = (i + 1) % NV;
        double xi = px[i] - ox, yi = py[i] - oy, xj = px[j] - ox,
               yj = py[j] - oy;
        double cr = xi * yj - xj * yi;
        a2 += cr;
        sx += (xi + xj) * cr;
        sy += (yi + yj) * cr;
    }
    *x = ox + sx / (3.0 * a2);
    *y = oy + sy / (3.0 * a2);
}

/* Scene at target point (qx, qy): grey of ink, sheet or conveyor, and the
   distance (mm) to the nearest edge between them. */
static double scene_at(const rt_scene *sc, const mb_target *t,
                       const char *marks, double qx, double qy, double *edge)
{
    const double p = t->pitch, rd = 0.5 * t->dot_diameter,
                 rm = 0.5 * t->mark_diameter;
    int c = (int)floor(qx / p + 0.5), r = (int)floor(qy / p + 0.5);
    c = c < 0 ? 0 : c >= t->cols ? t->cols - 1 : c;
    r = r < 0 ? 0 : r >= t->rows ? t->rows - 1 : r;
    double ex = qx - c * p, ey = qy - r * p;
    double dd = sqrt(ex * ex + ey * ey) - rd;
    double best = fabs(dd);
    int ink = dd <= 0.0;
    if (!sc->no_marks) {
        int mc = (int)floor(qx / p), mr = (int)floor(qy / p);
        mc = mc < 0 ? 0 : mc > t->cols - 2 ? t->cols - 2 : mc;
        mr = mr < 0 ? 0 : mr > t->rows - 2 ? t->rows - 2 : mr;
        if (marks[mr * (t->cols - 1) + mc]) {
            double mx = qx - (mc + 0.5) * p, my = qy - (mr + 0.5) * p;
            double dm = sqrt(mx * mx + my * my) - rm;
            best = fmin(best, fabs(dm));
            ink = ink || dm <= 0.0;
        }
    }
    double m = sc->margin_pitch * p;
    double x0 = -m, x1 = (t->cols - 1) * p + m, y0 = -m,
           y1 = (t->rows - 1) * p + m;
    double inside = fmin(fmin(qx - x0, x1 - qx), fmin(qy - y0, y1 - qy));
    best = fmin(best, fabs(inside));
    *edge = best;
    if (ink)
        return sc->black;
    return inside >= 0.0 ? sc->white : sc->conveyor;
}

static uint64_t rng_state;

static uint64_t rng_next(void) /* xorshift64* (Vigna 2016) */
{
    rng_state ^= rng_state >> 12;
    rng_state ^= rng_state << 25;
    rng_state ^= rng_state >> 27;
    return rng_state * 0x2545f4914f6cdd1dull;
}

static double rng_gauss(void) /* Box-Muller */
{
    double u1 = ((rng_next() >> 11) + 0.5) / 9007199254740992.0;
    double u2 = ((rng_next() >> 11) + 0.5) / 9007199254740992.0;
    return sqrt(-2.0 * log(u1)) * cos(2.0 * M_PI * u2);
}

int rt_render(const rt_scene *sc, const mb_target *t, mb_image *out)
{
    const int w = sc->width, h = sc->height;
    if (mb_image_alloc(w, h, out) < 0)
        return -1;
    double *buf = malloc(sizeof *buf * (size_t)w * h);
    double *tmp = malloc(sizeof *tmp * (size_t)w * h);
    char *marks = malloc((size_t)(t->rows - 1) * (t->cols - 1));
    if (!buf || !tmp || !marks) {
        free(buf);
        free(tmp);
        free(marks);
        mb_image_free(out);
        return -1;
    }
    for (int r = 0; r + 1 < t->rows; r++)
        for (int c = 0; c + 1 < t->cols; c++)
            marks[r * (t->cols - 1) + c] = (char)mb_target_cell_marked(t, r, c);
    inv_map m;
    inv_map_init(sc, t, &m);
    /* Bound on mm per px over the frame (Frobenius norm of the inverse
       map's Jacobian, sampled), for the near-an-edge test. */
    double smax = 0.0;
    for (int i = 0; i <= 8; i++)
        for (int j = 0; j <= 8; j++) {
            double x = (w - 1) * i / 8.0, y = (h - 1) * j / 8.0, X, Y, qx, qy;
            double X1, Y1, X2, Y2;
            if (inv_apply(sc, &m, x, y, &X, &Y, &qx, &qy) < 0 ||
                inv_apply(sc, &m, x + 1, y, &X1, &Y1, &qx, &qy) < 0 ||
                inv_apply(sc, &m, x, y + 1, &X2, &Y2, &qx, &qy) < 0)
                continue;
            smax =
                fmax(smax, hypot(hypot(X1 - X, Y1 - Y), hypot(X2 - X, Y2 - Y)));
        }
    smax *= 1.1; /* margin for the variation between the samples */
    const int ss = sc->supersample > 0 ? sc->supersample : 1;
    for (int y = 0; y < h; y++) {
        /* Newton starts from the last pixel's solution, one pixel on. */
        double gu = (0 - m.cx) / m.rho, gv = (y - m.cy) / m.rho;
        for (int x = 0; x < w; x++) {
            double X, Y, qx, qy, edge;
            double v = sc->conveyor;
            double pu = gu, pv = gv;
            int inv = inv_apply_from(sc, &m, x, y, &pu, &pv, &X, &Y, &qx, &qy);
            if (inv == 0) {
                gu = pu + 1.0 / m.rho;
                gv = pv;
            } else {
                gu = (x + 1 - m.cx) / m.rho;
                gv = (y - m.cy) / m.rho;
            }
            if (inv == 0) {
                v = scene_at(sc, t, marks, qx, qy, &edge);
                if (edge < 0.75 * smax && ss > 1) {
                    /* Local affine map of the pixel square to the target. */
                    double X1, Y1, X2, Y2, q1x, q1y, q2x, q2y;
                    double u1 = pu + 0.5 / m.rho, v1 = pv;
                    double u2 = pu, v2 = pv + 0.5 / m.rho;
                    inv_apply_from(sc, &m, x + 0.5, y, &u1, &v1, &X1, &Y1, &q1x,
                                   &q1y);
                    inv_apply_from(sc, &m, x, y + 0.5, &u2, &v2, &X2, &Y2, &q2x,
                                   &q2y);
                    double ax = 2 * (q1x - qx), ay = 2 * (q1y - qy);
                    double bx = 2 * (q2x - qx), by = 2 * (q2y - qy);
                    double sum = 0.0, e2;
                    for (int j = 0; j < ss; j++)
                        for (int i = 0; i < ss; i++) {
                            double dx = (i + 0.5) / ss - 0.5;
                            double dy = (j + 0.5) / ss - 0.5;
                            sum +=
                                scene_at(sc, t, marks, qx + ax * dx + bx * dy,
                                         qy + ay * dx + by * dy, &e2);
                        }
                    v = sum / (ss * ss);
                }
            }
            if (sc->vignette > 0.0) {
                double cx = 0.5 * (w - 1), cy = 0.5 * (h - 1);
                double r2 = ((x - cx) * (x - cx) + (y - cy) * (y - cy)) /
                            (cx * cx + cy * cy);
                v *= 1.0 - sc->vignette * r2;
            }
            buf[(size_t)y * w + x] = v;
        }
    }
    if (sc->blur > 0.0) {
        int rad = (int)ceil(4.0 * sc->blur);
        double *k = malloc(sizeof *k * (2 * (size_t)rad + 1)), ks = 0.0;
        if (!k) {
            free(buf);
            free(tmp);
            free(marks);
            mb_image_free(out);
            return -1;
        }
        for (int i = -rad; i <= rad; i++)
            ks += k[i + rad] = exp(-0.5 * i * i / (sc->blur * sc->blur));
        for (int i = 0; i <= 2 * rad; i++)
            k[i] /= ks;
        for (int y = 0; y < h; y++)
            for (int x = 0; x < w; x++) {
                double s = 0.0;
                for (int i = -rad; i <= rad; i++) {
                    int xx = x + i < 0 ? 0 : x + i >= w ? w - 1 : x + i;
                    s += k[i + rad] * buf[(size_t)y * w + xx];
                }
                tmp[(size_t)y * w + x] = s;
            }
        for (int y = 0; y < h; y++)
            for (int x = 0; x < w; x++) {
                double s = 0.0;
                for (int i = -rad; i <= rad; i++) {
                    int yy = y + i < 0 ? 0 : y + i >= h ? h - 1 : y + i;
                    s += k[i + rad] * tmp[(size_t)yy * w + x];
                }
                buf[(size_t)y * w + x] = s;
            }
        free(k);
    }
    rng_state = sc->seed ? sc->seed : 1;
    for (int y = 0; y < h; y++)
        for (int x = 0; x < w; x++) {
            double v = buf[(size_t)y * w + x];
            if (sc->noise > 0.0)
                v += sc->noise * rng_gauss();
            v = floor(v + 0.5);
            out->pixels[(size_t)y * out->stride + x] = (uint8_t)(v < 0     ? 0
                                                                 : v > 255 ? 255
                                                                           : v);
        }
    free(buf);
    free(tmp);
    free(marks);
    return 0;
}
