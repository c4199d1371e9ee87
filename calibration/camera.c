/*
 * calibration/camera.c - the flat-conveyor camera model (camera.h): plane
 * homography + Brown-Conrady distortion, its fit by Levenberg-Marquardt,
 * and the maps px <-> mm.
 *
 * The fit works in normalised units so that every unknown is of order 1:
 * image points as u = (x - c) / rho (the distortion's own normalisation),
 * plane points as (P - P0) / L with P0 the centroid of the target's dots
 * and L their largest distance from it. The normalised homography Hn has
 * Hn[2][2] = 1 and 8 free entries; the plane origin lies in view, so it is
 * never near 0 there.
 *
 * Levenberg-Marquardt (More 1978). Each step solves the damped linear
 * least-squares problem
 *     min || J delta + r ||^2 + lambda || D delta ||^2
 * as one QR least-squares problem [J; sqrt(lambda) D] delta = [-r; 0]
 * (LAPACKE_dgels), never forming J^T J (its condition number would be
 * squared). D holds the largest column norms of J seen so far (More's
 * scaling, which makes the method invariant to the units of each unknown).
 * The gain ratio rho = actual / predicted reduction drives lambda: a step
 * is taken when rho > 1e-4; lambda / 3 when rho > 0.75, x 2 when rho <
 * 0.25, x 4 after a refused step (More's 0.25 / 0.75 bounds). It stops
 * when the scaled step is below 1e-10 of the scaled parameters, when both
 * reductions are below 1e-14 of the cost, when the gradient is orthogonal
 * to the columns of J to 1e-12 (cosine), or at an exact fit.
 */
#include "camera.h"

#include "error.h"

#include <cblas.h>
#include <lapacke.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#define HM(h, r, c) ((h)[(r) + 3 * (c)])

/* Frame sizes a calibration may claim (the image reader's largest side). */
#define CALIB_MAX_SIDE 16384
/* Vertices of the imaged dot outline in the centroid offset correction. */
#define BIAS_VERTICES 64

void mb_calib_options_default(mb_calib_options *opt)
{
    if (!opt)
        return;
    opt->radial_terms = 2;
    opt->tangential = 1;
    opt->max_iterations = 200;
    opt->bias_passes = 2;
}

/* ---- 3x3 helpers (column-major) ---- */

static void mul3(const double *a, const double *b, double *out)
{
    double t[9];
    for (int r = 0; r < 3; r++)
        for (int c = 0; c < 3; c++)
            HM(t, r, c) = HM(a, r, 0) * HM(b, 0, c) +
                          HM(a, r, 1) * HM(b, 1, c) + HM(a, r, 2) * HM(b, 2, c);
    memcpy(out, t, sizeof t);
}

double mb_calib_homography_apply(const double h[9], double x, double y,
                                 double *ox, double *oy)
{
    double w = HM(h, 2, 0) * x + HM(h, 2, 1) * y + HM(h, 2, 2);
    double X = HM(h, 0, 0) * x + HM(h, 0, 1) * y + HM(h, 0, 2);
    double Y = HM(h, 1, 0) * x + HM(h, 1, 1) * y + HM(h, 1, 2);
    *ox = X / w;
    *oy = Y / w;
    return w;
}

int mb_calib_homography_invert(const double h[9], double inv[9])
{
    double a = HM(h, 0, 0), b = HM(h, 0, 1), c = HM(h, 0, 2);
    double d = HM(h, 1, 0), e = HM(h, 1, 1), f = HM(h, 1, 2);
    double g = HM(h, 2, 0), k = HM(h, 2, 1), l = HM(h, 2, 2);
    double A = e * l - f * k, B = -(d * l - f * g), C = d * k - e * g;
    double det = a * A + b * B + c * C;
    double scale = 0.0;
    for (int i = 0; i < 9; i++)
        scale = fmax(scale, fabs(h[i]));
    if (!isfinite(det) || scale == 0.0 ||
        fabs(det) <= 1e-14 * scale * scale * scale)
        return MB_EDEGENERATE;
    double t[9];
    HM(t, 0, 0) = A;
    HM(t, 1, 0) = B;
    HM(t, 2, 0) = C;
    HM(t, 0, 1) = -(b * l - c * k);
    HM(t, 1, 1) = a * l - c * g;
    HM(t, 2, 1) = -(a * k - b * g);
    HM(t, 0, 2) = b * f - c * e;
    HM(t, 1, 2) = -(a * f - c * d);
    HM(t, 2, 2) = a * e - b * d;
    double s = t[8] != 0.0 ? 1.0 / t[8] : 1.0 / det;
    for (int i = 0; i < 9; i++)
        inv[i] = t[i] * s;
    return MB_OK;
}

/* ---- distortion in normalised coordinates ---- */

/* D(u, v) and, when jac is not NULL, its Jacobian dD/d(u, v), column-major
   (jac[0] = dDu/du, jac[1] = dDv/du, jac[2] = dDu/dv, jac[3] = dDv/dv). */
static void dist_apply(const double k[4], double u, double v, double *du,
                       double *dv, double *jac)
{
    double r2 = u * u + v * v;
    double rad = 1.0 + k[0] * r2 + k[1] * r2 * r2;
    *du = u * rad + 2.0 * k[2] * u * v + k[3] * (r2 + 2.0 * u * u);
    *dv = v * rad + k[2] * (r2 + 2.0 * v * v) + 2.0 * k[3] * u * v;
    if (jac) {
        double g = k[0] + 2.0 * k[1] * r2; /* d rad / d r^2 */
        jac[0] = rad + 2.0 * u * u * g + 2.0 * k[2] * v + 6.0 * k[3] * u;
        jac[1] = 2.0 * u * v * g + 2.0 * k[2] * u + 2.0 * k[3] * v;
        jac[2] = jac[1];
        jac[3] = rad + 2.0 * v * v * g + 6.0 * k[2] * v + 2.0 * k[3] * u;
    }
}

/* Solve D(u, v) = (du, dv) by Newton's method with step halving, from
   (du, dv). Fails where the Jacobian is not positive definite in the sense
   of a positive determinant (the map folds there). */
static int dist_ok(const double k[4], double u, double v)
{
    /* The physical branch: beyond the fold a strong barrel distortion
       has further solutions, mirrored through the centre (radial factor
       negative) or folded back (Jacobian determinant negative). */
    double r2 = u * u + v * v;
    return 1.0 + k[0] * r2 + k[1] * r2 * r2 > 0.0;
}

static int dist_invert(const double k[4], double du, double dv, double *u,
                       double *v)
{
    double x = du, y = dv, fx, fy, J[4];
    dist_apply(k, x, y, &fx, &fy, J);
    double e = hypot(fx - du, fy - dv);
    for (int it = 0; it < 50; it++) {
        if (e <= 1e-12) {
            if (!(J[0] * J[3] - J[1] * J[2] > 0.0) || !dist_ok(k, x, y))
                return MB_ENOCONV;
            *u = x;
            *v = y;
            return MB_OK;
        }
        double det = J[0] * J[3] - J[1] * J[2];
        if (!(det > 0.0))
            return MB_ENOCONV;
        double ex = fx - du, ey = fy - dv;
        double sx = (J[3] * ex - J[2] * ey) / det;
        double sy = (-J[1] * ex + J[0] * ey) / det;
        double t = 1.0, nx = x, ny = y, ne = e, nJ[4], nfx = fx, nfy = fy;
        int better = 0;
        for (int b = 0; b < 40; b++, t *= 0.5) {
            nx = x - t * sx;
            ny = y - t * sy;
            dist_apply(k, nx, ny, &nfx, &nfy, nJ);
            ne = hypot(nfx - du, nfy - dv);
            if (ne < e) {
                better = 1;
                break;
            }
        }
        if (!better)
            break;
        x = nx;
        y = ny;
        fx = nfx;
        fy = nfy;
        e = ne;
        memcpy(J, nJ, sizeof J);
    }
    if (e <= 1e-12 && J[0] * J[3] - J[1] * J[2] > 0.0 && dist_ok(k, x, y)) {
        *u = x;
        *v = y;
        return MB_OK;
    }
    return MB_ENOCONV;
}

static void calib_k(const mb_calib *cal, double k[4])
{
    k[0] = cal->k1;
    k[1] = cal->k2;
    k[2] = cal->p1;
    k[3] = cal->p2;
}

void mb_calib_distort(const mb_calib *cal, double xu, double yu, double *xd,
                      double *yd)
{
    double k[4], du, dv;
    calib_k(cal, k);
    dist_apply(k, (xu - cal->cx) / cal->radius, (yu - cal->cy) / cal->radius,
               &du, &dv, NULL);
    *xd = cal->cx + cal->radius * du;
    *yd = cal->cy + cal->radius * dv;
}

int mb_calib_undistort(const mb_calib *cal, double xd, double yd, double *xu,
                       double *yu)
{
    double k[4], u, v;
    calib_k(cal, k);
    int rc = dist_invert(k, (xd - cal->cx) / cal->radius,
                         (yd - cal->cy) / cal->radius, &u, &v);
    if (rc < 0)
        return rc;
    *xu = cal->cx + cal->radius * u;
    *yu = cal->cy + cal->radius * v;
    return MB_OK;
}

/* Undistorted px -> plane mm through the inverse homography g; w of the
   plane point under h must be positive (in front of the horizon). */
static int plane_of(const mb_calib *cal, const double g[9], double xu,
                    double yu, double *X, double *Y)
{
    double w = mb_calib_homography_apply(g, xu, yu, X, Y);
    if (!(fabs(w) > 0.0) || !isfinite(*X) || !isfinite(*Y))
        return MB_ERANGE;
    double wf =
        HM(cal->h, 2, 0) * *X + HM(cal->h, 2, 1) * *Y + HM(cal->h, 2, 2);
    return wf > 0.0 ? MB_OK : MB_ERANGE;
}

int mb_calib_px_to_mm(const mb_calib *cal, double x, double y, double *X,
                      double *Y)
{
    double g[9], xu, yu;
    int rc;
    if ((rc = mb_calib_undistort(cal, x, y, &xu, &yu)) < 0)
        return rc;
    if (mb_calib_homography_invert(cal->h, g) < 0)
        return MB_ERANGE;
    return plane_of(cal, g, xu, yu, X, Y);
}

int mb_calib_mm_to_px(const mb_calib *cal, double X, double Y, double *x,
                      double *y)
{
    double xu, yu;
    double w = mb_calib_homography_apply(cal->h, X, Y, &xu, &yu);
    if (!(w > 0.0) || !isfinite(xu) || !isfinite(yu))
        return MB_ERANGE;
    mb_calib_distort(cal, xu, yu, x, y);
    return MB_OK;
}

int mb_calib_points_to_mm(const mb_calib *cal, int n, const double *xy_px,
                          double *xy_mm)
{
    double g[9];
    if (mb_calib_homography_invert(cal->h, g) < 0)
        return MB_ERANGE;
    for (int i = 0; i < n; i++) {
        double xu, yu, X, Y;
        int rc =
            mb_calib_undistort(cal, xy_px[2 * i], xy_px[2 * i + 1], &xu, &yu);
        if (rc < 0 || (rc = plane_of(cal, g, xu, yu, &X, &Y)) < 0)
            return rc;
        xy_mm[2 * i] = X;
        xy_mm[2 * i + 1] = Y;
    }
    return MB_OK;
}

int mb_calib_local_scale(const mb_calib *cal, double x, double y,
                         mb_calib_scale *out)
{
    double g[9], xu, yu, X, Y, k[4], du, dv, Jd[4];
    int rc;
    if ((rc = mb_calib_undistort(cal, x, y, &xu, &yu)) < 0)
        return rc;
    if (mb_calib_homography_invert(cal->h, g) < 0)
        return MB_ERANGE;
    if ((rc = plane_of(cal, g, xu, yu, &X, &Y)) < 0)
        return rc;
    /* d(X, Y)/d(xu, yu) of the inverse homography. */
    double w = HM(g, 2, 0) * xu + HM(g, 2, 1) * yu + HM(g, 2, 2);
    double G[4] = {(HM(g, 0, 0) - X * HM(g, 2, 0)) / w,
                   (HM(g, 1, 0) - Y * HM(g, 2, 0)) / w,
                   (HM(g, 0, 1) - X * HM(g, 2, 1)) / w,
                   (HM(g, 1, 1) - Y * HM(g, 2, 1)) / w};
    /* d(xu, yu)/d(xd, yd) = (dD/du)^-1 (rho cancels). */
    calib_k(cal, k);
    dist_apply(k, (xu - cal->cx) / cal->radius, (yu - cal->cy) / cal->radius,
               &du, &dv, Jd);
    double det = Jd[0] * Jd[3] - Jd[1] * Jd[2];
    if (!(det > 0.0))
        return MB_ERANGE;
    double Ji[4] = {Jd[3] / det, -Jd[1] / det, -Jd[2] / det, Jd[0] / det};
    double *J = out->jacobian;
    J[0] = G[0] * Ji[0] + G[2] * Ji[1];
    J[1] = G[1] * Ji[0] + G[3] * Ji[1];
    J[2] = G[0] * Ji[2] + G[2] * Ji[3];
    J[3] = G[1] * Ji[2] + G[3] * Ji[3];
    double dj = J[0] * J[3] - J[1] * J[2];
    double fro = J[0] * J[0] + J[1] * J[1] + J[2] * J[2] + J[3] * J[3];
    double disc = sqrt(fmax(fro * fro - 4.0 * dj * dj, 0.0));
    out->mm_per_px = sqrt(fabs(dj));
    out->mm_per_px_max = sqrt(0.5 * (fro + disc));
    out->mm_per_px_min =
        out->mm_per_px_max > 0.0 ? fabs(dj) / out->mm_per_px_max : 0.0;
    return MB_OK;
}

int mb_calib_check_frame(const mb_calib *cal, int width, int height, char *err)
{
    if (!cal)
        return mb_err_set(err, MB_EINVAL, "calibration: none given");
    if (cal->width != width || cal->height != height)
        return mb_err_set(err, MB_ESIZE,
                          "calibration: made for %dx%d px frames, but this "
                          "frame is %dx%d px; calibrate again for this "
                          "camera setting",
                          cal->width, cal->height, width, height);
    return MB_OK;
}

/* ---- validation ---- */

int mb_calib_validate(const mb_calib *cal, char *err)
{
    if (!cal)
        return mb_err_set(err, MB_EINVAL, "calibration: none given");
    if (cal->width < 2 || cal->height < 2 || cal->width > CALIB_MAX_SIDE ||
        cal->height > CALIB_MAX_SIDE)
        return mb_err_set(err, MB_ERANGE,
                          "calibration: frame size %dx%d px is not 2..%d "
                          "on each side",
                          cal->width, cal->height, CALIB_MAX_SIDE);
    const double vals[] = {cal->cx, cal->cy, cal->radius, cal->k1,
                           cal->k2, cal->p1, cal->p2};
    for (int i = 0; i < 9; i++)
        if (!isfinite(cal->h[i]))
            return mb_err_set(err, MB_ENUMERIC,
                              "calibration: homography entry %d is not finite",
                              i);
    for (size_t i = 0; i < sizeof vals / sizeof vals[0]; i++)
        if (!isfinite(vals[i]))
            return mb_err_set(err, MB_ENUMERIC,
                              "calibration: a distortion value is not finite");
    if (!(cal->radius > 0.0))
        return mb_err_set(err, MB_ERANGE,
                          "calibration: distortion radius %g px is not "
                          "positive",
                          cal->radius);
    if (cal->h[8] != 1.0)
        return mb_err_set(err, MB_ERANGE,
                          "calibration: homography h33 is %.17g, expected 1",
                          cal->h[8]);
    double g[9];
    if (mb_calib_homography_invert(cal->h, g) < 0)
        return mb_err_set(err, MB_ERANGE,
                          "calibration: the homography is singular");
    /* The distortion must invert at every pixel of the frame (a 17 x 17
       grid, corners included) and the radial part must grow with the
       radius out to the farthest of them: otherwise it folds over. */
    double k[4], rmax = 0.0;
    calib_k(cal, k);
    const int n = 17;
    for (int i = 0; i < n; i++)
        for (int j = 0; j < n; j++) {
            double x = (cal->width - 1) * (double)i / (n - 1);
            double y = (cal->height - 1) * (double)j / (n - 1);
            double xu, yu, X, Y;
            if (mb_calib_undistort(cal, x, y, &xu, &yu) < 0)
                return mb_err_set(err, MB_ERANGE,
                                  "calibration: the lens distortion cannot "
                                  "be undone at pixel (%.0f, %.0f): it folds "
                                  "over inside the frame",
                                  x, y);
            rmax = fmax(rmax, hypot(xu - cal->cx, yu - cal->cy) / cal->radius);
            if (plane_of(cal, g, xu, yu, &X, &Y) < 0)
                return mb_err_set(err, MB_ERANGE,
                                  "calibration: pixel (%.0f, %.0f) looks at "
                                  "or beyond the plane's horizon",
                                  x, y);
        }
    for (int i = 0; i <= 200; i++) {
        double r = 1.05 * rmax * i / 200.0, r2 = r * r;
        if (!(1.0 + 3.0 * k[0] * r2 + 5.0 * k[1] * r2 * r2 > 0.0))
            return mb_err_set(err, MB_ERANGE,
                              "calibration: the radial distortion (k1 %g, "
                              "k2 %g) folds over at %.0f px from the centre",
                              k[0], k[1], r * cal->radius);
    }
    return MB_OK;
}

/* ---- normalised DLT ---- */

/* T moves the points to their centroid and scales their mean distance to
   sqrt(2) (Hartley 1997). Returns -1 when all points coincide. */
static int normalising_transform(int n, const double *p, double T[9])
{
    double mx = 0.0, my = 0.0, md = 0.0;
    for (int i = 0; i < n; i++) {
        mx += p[2 * i];
        my += p[2 * i + 1];
    }
    mx /= n;
    my /= n;
    for (int i = 0; i < n; i++)
        md += hypot(p[2 * i] - mx, p[2 * i + 1] - my);
    md /= n;
    if (!(md > 0.0))
        return -1;
    double s = sqrt(2.0) / md;
    memset(T, 0, 9 * sizeof *T);
    HM(T, 0, 0) = s;
    HM(T, 1, 1) = s;
    HM(T, 0, 2) = -s * mx;
    HM(T, 1, 2) = -s * my;
    HM(T, 2, 2) = 1.0;
    return 0;
}

int mb_calib_homography_dlt(int n, const double *src, const double *dst,
                            double h[9])
{
    if (!src || !dst || !h)
        return MB_EINVAL;
    if (n < 4)
        return MB_EDEGENERATE;
    for (int i = 0; i < 2 * n; i++)
        if (!isfinite(src[i]) || !isfinite(dst[i]))
            return MB_ENUMERIC;
    double T1[9], T2[9], T2i[9];
    if (normalising_transform(n, src, T1) < 0 ||
        normalising_transform(n, dst, T2) < 0)
        return MB_EDEGENERATE;
    int m = 2 * n < 9 ? 9 : 2 * n; /* a zero row pads 4 points to 9 rows */
    double *A = calloc((size_t)m * 9, sizeof *A);
    if (!A)
        return MB_ENOMEM;
    for (int i = 0; i < n; i++) {
        double x, y, xp, yp;
        mb_calib_homography_apply(T1, src[2 * i], src[2 * i + 1], &x, &y);
        mb_calib_homography_apply(T2, dst[2 * i], dst[2 * i + 1], &xp, &yp);
        /* Unknowns: H row by row, (h11 h12 h13 h21 h22 h23 h31 h32 h33). */
        const double r0[9] = {0, 0, 0, -x, -y, -1, yp * x, yp * y, yp};
        const double r1[9] = {x, y, 1, 0, 0, 0, -xp * x, -xp * y, -xp};
        for (int j = 0; j < 9; j++) {
            A[2 * i + (size_t)m * j] = r0[j];
            A[2 * i + 1 + (size_t)m * j] = r1[j];
        }
    }
    double S[9], VT[81], superb[8];
    lapack_int info = LAPACKE_dgesvd(LAPACK_COL_MAJOR, 'N', 'A', m, 9, A, m, S,
                                     NULL, 1, VT, 9, superb);
    free(A);
    if (info != 0)
        return MB_ENUMERIC;
    /* One null direction only: the second smallest singular value must
       stand clear of zero (collinear points leave several). */
    if (!(S[7] > 1e-10 * S[0]))
        return MB_EDEGENERATE;
    double Hn[9];
    for (int r = 0; r < 3; r++)
        for (int c = 0; c < 3; c++)
            HM(Hn, r, c) = VT[8 + 9 * (3 * r + c)];
    if (mb_calib_homography_invert(T2, T2i) < 0)
        return MB_EDEGENERATE;
    mul3(Hn, T1, Hn);
    mul3(T2i, Hn, Hn);
    double scale = 0.0;
    for (int i = 0; i < 9; i++)
        scale = fmax(scale, fabs(Hn[i]));
    if (!(fabs(Hn[8]) > 1e-12 * scale))
        return MB_EDEGENERATE;
    for (int i = 0; i < 9; i++)
        h[i] = Hn[i] / Hn[8];
    return MB_OK;
}

/* ---- the fit ---- */

typedef struct {
    const mb_calib_problem *prob;
    int nobs;       /* n_points * n_frames */
    int m, n;       /* residuals, unknowns */
    int nd;         /* distortion unknowns */
    int dist_at[4]; /* k1 k2 p1 p2: index in theta, or -1 (held at 0) */
    double cx, cy, rho;
    double X0, Y0, L;  /* plane normalisation */
    const double *obs; /* 2 nobs normalised observations (corrected) */
} lm_model;

/* Layout of theta: Hn row by row (8), free distortion terms (nd), then
   (angle, shift x / L, shift y / L) for every frame after the first. */
static int pose_at(const lm_model *M, int f)
{
    return 8 + M->nd + 3 * (f - 1);
}

static void theta_k(const lm_model *M, const double *th, double k[4])
{
    for (int i = 0; i < 4; i++)
        k[i] = M->dist_at[i] >= 0 ? th[M->dist_at[i]] : 0.0;
}

/* The normalised plane point of target point (qx, qy) in frame f. */
static void plane_point(const lm_model *M, const double *th, int f, double qx,
                        double qy, double *a, double *b)
{
    if (f == 0) {
        *a = (qx - M->X0) / M->L;
        *b = (qy - M->Y0) / M->L;
        return;
    }
    const double *p = th + pose_at(M, f);
    double c = cos(p[0]), s = sin(p[0]);
    *a = (c * qx - s * qy - M->X0) / M->L + p[1];
    *b = (s * qx + c * qy - M->Y0) / M->L + p[2];
}

/* Normalised observed position of target point (qx, qy) in frame f. */
static void project(const lm_model *M, const double *th, const double k[4],
                    int f, double qx, double qy, double *ud, double *vd)
{
    double a, b;
    plane_point(M, th, f, qx, qy, &a, &b);
    double w = th[6] * a + th[7] * b + 1.0;
    double u = (th[0] * a + th[1] * b + th[2]) / w;
    double v = (th[3] * a + th[4] * b + th[5]) / w;
    dist_apply(k, u, v, ud, vd, NULL);
}

/* Residuals r (m) and, when J is not NULL, the Jacobian (m x n,
   column-major, leading dimension m). */
static void lm_eval(const lm_model *M, const double *th, double *r, double *J)
{
    const mb_calib_problem *P = M->prob;
    const int N = P->n_points, m = M->m;
    double k[4];
    theta_k(M, th, k);
    if (J)
        memset(J, 0, sizeof *J * (size_t)m * (size_t)M->n);
    for (int f = 0; f < P->n_frames; f++) {
        double c = 1.0, s = 0.0;
        int pf = f > 0 ? pose_at(M, f) : -1;
        if (f > 0) {
            c = cos(th[pf]);
            s = sin(th[pf]);
        }
        for (int q = 0; q < N; q++) {
            const double qx = P->target_xy[2 * q], qy = P->target_xy[2 * q + 1];
            double a, b;
            plane_point(M, th, f, qx, qy, &a, &b);
            double w = th[6] * a + th[7] * b + 1.0;
            double u = (th[0] * a + th[1] * b + th[2]) / w;
            double v = (th[3] * a + th[4] * b + th[5]) / w;
            double ud, vd, Jd[4];
            dist_apply(k, u, v, &ud, &vd, Jd);
            const int i = f * N + q, ru = 2 * i, rv = 2 * i + 1;
            r[ru] = ud - M->obs[ru];
            r[rv] = vd - M->obs[rv];
            if (!J)
                continue;
            /* Chain rule: residual = D(hom(plane(theta))). d(u, v)/dh: */
            double duh[8] = {a / w, b / w, 1.0 / w,    0,
                             0,     0,     -u * a / w, -u * b / w};
            double dvh[8] = {0,     0,       0,          a / w,
                             b / w, 1.0 / w, -v * a / w, -v * b / w};
            for (int j = 0; j < 8; j++) {
                J[ru + (size_t)m * j] = Jd[0] * duh[j] + Jd[2] * dvh[j];
                J[rv + (size_t)m * j] = Jd[1] * duh[j] + Jd[3] * dvh[j];
            }
            /* Distortion terms. */
            double r2 = u * u + v * v;
            const double dku[4] = {u * r2, u * r2 * r2, 2.0 * u * v,
                                   r2 + 2.0 * u * u};
            const double dkv[4] = {v * r2, v * r2 * r2, r2 + 2.0 * v * v,
                                   2.0 * u * v};
            for (int t = 0; t < 4; t++)
                if (M->dist_at[t] >= 0) {
                    J[ru + (size_t)m * M->dist_at[t]] = dku[t];
                    J[rv + (size_t)m * M->dist_at[t]] = dkv[t];
                }
            if (f == 0)
                continue;
            /* Pose: d(a, b)/d(angle, sx, sy), through d(u, v)/d(a, b). */
            double uab[4] = {(th[0] - u * th[6]) / w, (th[3] - v * th[6]) / w,
                             (th[1] - u * th[7]) / w, (th[4] - v * th[7]) / w};
            double abp[6] = {(-s * qx - c * qy) / M->L,
                             (c * qx - s * qy) / M->L,
                             1.0,
                             0.0,
                             0.0,
                             1.0};
            for (int t = 0; t < 3; t++) {
                double da = abp[2 * t], db = abp[2 * t + 1];
                double du_ = uab[0] * da + uab[2] * db;
                double dv_ = uab[1] * da + uab[3] * db;
                J[ru + (size_t)m * (pf + t)] = Jd[0] * du_ + Jd[2] * dv_;
                J[rv + (size_t)m * (pf + t)] = Jd[1] * du_ + Jd[3] * dv_;
            }
        }
    }
}

typedef struct {
    double *J, *A, *B, *r, *rn, *thn, *D, *delta, *tmp;
} lm_work;

static double half_sq(const double *v, int n)
{
    double s = 0.0;
    for (int i = 0; i < n; i++)
        s += v[i] * v[i];
    return 0.5 * s;
}

/* One Levenberg-Marquardt run from th. Return value: 0 (converged),
   MB_ENOCONV, MB_ENUMERIC. *iters += iterations done. */
static int lm_run(const lm_model *M, double *th, int max_it, lm_work *W,
                  int *iters, char *err)
{
    const int m = M->m, n = M->n, ma = m + n;
    const double ftol = 1e-14, xtol = 1e-10, gtol = 1e-12;
    lm_eval(M, th, W->r, W->J);
    double cost = half_sq(W->r, m);
    if (!isfinite(cost))
        return mb_err_set(err, MB_ENUMERIC,
                          "calibration: the starting model gives non-finite "
                          "residuals");
    for (int j = 0; j < n; j++) {
        double c = cblas_dnrm2(m, W->J + (size_t)m * j, 1);
        W->D[j] = c > 0.0 ? c : 1.0;
    }
    double lambda = 1e-3;
    for (int it = 0; it < max_it; it++) {
        (*iters)++;
        if (cost <= 1e-300)
            return MB_OK;
        /* Gradient test: largest cosine between r and a column of J. */
        double rn = sqrt(2.0 * cost), gmax = 0.0;
        for (int j = 0; j < n; j++) {
            const double *col = W->J + (size_t)m * j;
            double cn = cblas_dnrm2(m, col, 1);
            if (cn > 0.0)
                gmax = fmax(gmax,
                            fabs(cblas_ddot(m, col, 1, W->r, 1)) / (cn * rn));
        }
        if (gmax <= gtol)
            return MB_OK;
        /* Damped step: [J; sqrt(lambda) D] delta = [-r; 0]. */
        double sl = sqrt(lambda);
        for (int j = 0; j < n; j++) {
            memcpy(W->A + (size_t)ma * j, W->J + (size_t)m * j,
                   sizeof *W->A * (size_t)m);
            memset(W->A + (size_t)ma * j + m, 0, sizeof *W->A * (size_t)n);
            W->A[(size_t)ma * j + m + j] = sl * W->D[j];
        }
        for (int i = 0; i < m; i++)
            W->B[i] = -W->r[i];
        memset(W->B + m, 0, sizeof *W->B * (size_t)n);
        lapack_int info =
            LAPACKE_dgels(LAPACK_COL_MAJOR, 'N', ma, n, 1, W->A, ma, W->B, ma);
        if (info != 0)
            return mb_err_set(err, MB_ENUMERIC,
                              "calibration: the least-squares step failed "
                              "(LAPACK dgels info %d)",
                              (int)info);
        memcpy(W->delta, W->B, sizeof *W->delta * (size_t)n);
        double dnorm = 0.0, xnorm = 0.0;
        for (int j = 0; j < n; j++) {
            W->thn[j] = th[j] + W->delta[j];
            dnorm += (W->D[j] * W->delta[j]) * (W->D[j] * W->delta[j]);
            xnorm += (W->D[j] * th[j]) * (W->D[j] * th[j]);
        }
        dnorm = sqrt(dnorm);
        xnorm = sqrt(xnorm);
        /* Predicted reduction from the linear model: |r|^2 - |r + J d|^2. */
        memcpy(W->tmp, W->r, sizeof *W->tmp * (size_t)m);
        cblas_dgemv(CblasColMajor, CblasNoTrans, m, n, 1.0, W->J, m, W->delta,
                    1, 1.0, W->tmp, 1);
        double pred = cost - half_sq(W->tmp, m);
        lm_eval(M, W->thn, W->rn, NULL);
        double cost_new = half_sq(W->rn, m);
        double actual = isfinite(cost_new) ? cost - cost_new : -INFINITY;
        double gain = pred > 0.0 ? actual / pred : -1.0;
        if (gain > 1e-4) {
            double cost_old = cost;
            memcpy(th, W->thn, sizeof *th * (size_t)n);
            cost = cost_new;
            lm_eval(M, th, W->r, W->J);
            for (int j = 0; j < n; j++)
                W->D[j] =
                    fmax(W->D[j], cblas_dnrm2(m, W->J + (size_t)m * j, 1));
            if (gain > 0.75)
                lambda = fmax(lambda / 3.0, 1e-15);
            else if (gain < 0.25)
                lambda *= 2.0;
            if (actual <= ftol * cost_old && pred <= ftol * cost_old)
                return MB_OK;
            if (dnorm <= xtol * (xnorm + xtol))
                return MB_OK;
        } else {
            /* At the minimum, rounding leaves steps that gain nothing. */
            if (dnorm <= xtol * (xnorm + xtol) ||
                (pred <= ftol * cost && fabs(actual) <= ftol * cost))
                return MB_OK;
            lambda *= 4.0;
            if (lambda > 1e20)
                return mb_err_set(err, MB_ENOCONV,
                                  "calibration: Levenberg-Marquardt could no "
                                  "longer reduce the reprojection error");
        }
    }
    return mb_err_set(err, MB_ENOCONV,
                      "calibration: Levenberg-Marquardt did not converge in "
                      "%d iterations",
                      max_it);
}

/* Area centroid of the polygon (x_i, y_i), i < nv, relative to (ox, oy). */
static void polygon_centroid(const double *x, const double *y, int nv,
                             double ox, double oy, double *gx, double *gy)
{
    double a2 = 0.0, sx = 0.0, sy = 0.0;
    for (int i = 0; i < nv; i++) {
        int j = (i + 1) % nv;
        double xi = x[i] - ox, yi = y[i] - oy, xj = x[j] - ox, yj = y[j] - oy;
        double cr = xi * yj - xj * yi;
        a2 += cr;
        sx += (xi + xj) * cr;
        sy += (yi + yj) * cr;
    }
    *gx = ox + sx / (3.0 * a2);
    *gy = oy + sy / (3.0 * a2);
}

/* Observations corrected for the offset of the imaged dot's area centroid
   from the image of its centre, under the model th. */
static void correct_bias(const lm_model *M, const double *th, const double *raw,
                         double *obs)
{
    const mb_calib_problem *P = M->prob;
    double k[4], xs[BIAS_VERTICES], ys[BIAS_VERTICES];
    theta_k(M, th, k);
    for (int f = 0; f < P->n_frames; f++)
        for (int q = 0; q < P->n_points; q++) {
            const double qx = P->target_xy[2 * q], qy = P->target_xy[2 * q + 1];
            double cu, cv, gx, gy;
            project(M, th, k, f, qx, qy, &cu, &cv);
            for (int t = 0; t < BIAS_VERTICES; t++) {
                double phi = 2.0 * M_PI * t / BIAS_VERTICES;
                project(M, th, k, f, qx + P->dot_radius * cos(phi),
                        qy + P->dot_radius * sin(phi), &xs[t], &ys[t]);
            }
            polygon_centroid(xs, ys, BIAS_VERTICES, cu, cv, &gx, &gy);
            const int i = f * P->n_points + q;
            obs[2 * i] = raw[2 * i] - (gx - cu);
            obs[2 * i + 1] = raw[2 * i + 1] - (gy - cv);
        }
}

/* Area of the convex hull of n points (Andrew's monotone chain, 1979). */
static int cmp_xy(const void *pa, const void *pb)
{
    const double *a = pa, *b = pb;
    if (a[0] != b[0])
        return a[0] < b[0] ? -1 : 1;
    return (a[1] > b[1]) - (a[1] < b[1]);
}

static double cross3(const double *o, const double *a, const double *b)
{
    return (a[0] - o[0]) * (b[1] - o[1]) - (a[1] - o[1]) * (b[0] - o[0]);
}

static double hull_area(double *pts, int n, double *hull)
{
    if (n < 3)
        return 0.0;
    qsort(pts, (size_t)n, 2 * sizeof *pts, cmp_xy);
    int k = 0;
    for (int i = 0; i < n; i++) {
        while (k >= 2 &&
               cross3(hull + 2 * (k - 2), hull + 2 * (k - 1), pts + 2 * i) <= 0)
            k--;
        hull[2 * k] = pts[2 * i];
        hull[2 * k + 1] = pts[2 * i + 1];
        k++;
    }
    for (int i = n - 2, lo = k + 1; i >= 0; i--) {
        while (k >= lo &&
               cross3(hull + 2 * (k - 2), hull + 2 * (k - 1), pts + 2 * i) <= 0)
            k--;
        hull[2 * k] = pts[2 * i];
        hull[2 * k + 1] = pts[2 * i + 1];
        k++;
    }
    double a = 0.0;
    for (int i = 0; i + 1 < k; i++)
        a += hull[2 * i] * hull[2 * i + 3] - hull[2 * i + 2] * hull[2 * i + 1];
    return 0.5 * fabs(a);
}

static int check_problem(const mb_calib_problem *P, const mb_calib_options *o,
                         char *err)
{
    if (P->width < 2 || P->height < 2 || P->width > CALIB_MAX_SIDE ||
        P->height > CALIB_MAX_SIDE)
        return mb_err_set(err, MB_EINVAL,
                          "calibration: frame size %dx%d px is out of range",
                          P->width, P->height);
    if (P->n_frames < 1 || P->n_frames > MB_CALIB_MAX_FRAMES)
        return mb_err_set(err, MB_EINVAL,
                          "calibration: %d frames given, expected 1 to %d",
                          P->n_frames, MB_CALIB_MAX_FRAMES);
    if (P->n_points < 8)
        return mb_err_set(err, MB_EDEGENERATE,
                          "calibration: %d dots per frame, at least 8 needed",
                          P->n_points);
    if ((long)P->n_points * P->n_frames > MB_CALIB_MAX_OBS)
        return mb_err_set(err, MB_EINVAL,
                          "calibration: %d dots x %d frames is more than the "
                          "%d observations one fit takes",
                          P->n_points, P->n_frames, MB_CALIB_MAX_OBS);
    if (!(P->dot_radius >= 0.0) || !isfinite(P->dot_radius))
        return mb_err_set(err, MB_EINVAL,
                          "calibration: dot radius %g mm is not valid",
                          P->dot_radius);
    if (o->radial_terms < 0 || o->radial_terms > 2 || o->tangential < 0 ||
        o->tangential > 1 || o->max_iterations < 1 || o->bias_passes < 0 ||
        o->bias_passes > 10)
        return mb_err_set(err, MB_EINVAL, "calibration: options out of range");
    for (int i = 0; i < 2 * P->n_points; i++)
        if (!isfinite(P->target_xy[i]))
            return mb_err_set(err, MB_ENUMERIC,
                              "calibration: target point %d is not finite",
                              i / 2);
    for (long i = 0; i < 2L * P->n_points * P->n_frames; i++)
        if (!isfinite(P->image_xy[i]))
            return mb_err_set(err, MB_ENUMERIC,
                              "calibration: frame %ld, dot %ld: image "
                              "position is not finite",
                              i / (2L * P->n_points) + 1,
                              (i / 2) % P->n_points);
    return MB_OK;
}

/* Starting values: normalised DLT per frame, no distortion, each later
   frame's pose from its homography relative to frame 0. */
static int initialise(lm_model *M, double *th, char *err)
{
    const mb_calib_problem *P = M->prob;
    const int N = P->n_points;
    double H0[9], H0i[9], Hf[9], Nimg[9] = {0}, Npl[9] = {0};
    int rc;
    for (int f = 0; f < P->n_frames; f++) {
        rc = mb_calib_homography_dlt(
            N, P->target_xy, P->image_xy + 2 * (size_t)N * f, f == 0 ? H0 : Hf);
        if (rc < 0)
            return mb_err_set(err, rc == MB_ENOMEM ? MB_ENOMEM : MB_EDEGENERATE,
                              "calibration: frame %d: no homography fits its "
                              "dots (collinear or coincident points)",
                              f + 1);
        if (f == 0) {
            if (mb_calib_homography_invert(H0, H0i) < 0)
                return mb_err_set(err, MB_EDEGENERATE,
                                  "calibration: frame 1: singular homography");
            continue;
        }
        /* Frame f's target points on frame 0's plane, then the rigid
           motion that best maps the target there (2-D Procrustes). */
        double Mf[9], mq[2] = {0, 0}, mp[2] = {0, 0}, sc = 0.0, ss = 0.0;
        mul3(H0i, Hf, Mf);
        double *pp = malloc(sizeof *pp * 2 * (size_t)N);
        if (!pp)
            return mb_err_set(err, MB_ENOMEM, "calibration: out of memory");
        for (int q = 0; q < N; q++) {
            mb_calib_homography_apply(Mf, P->target_xy[2 * q],
                                      P->target_xy[2 * q + 1], &pp[2 * q],
                                      &pp[2 * q + 1]);
            mq[0] += P->target_xy[2 * q] / N;
            mq[1] += P->target_xy[2 * q + 1] / N;
            mp[0] += pp[2 * q] / N;
            mp[1] += pp[2 * q + 1] / N;
        }
        double a11 = 0, a12 = 0, a21 = 0, a22 = 0;
        for (int q = 0; q < N; q++) {
            double qx = P->target_xy[2 * q] - mq[0];
            double qy = P->target_xy[2 * q + 1] - mq[1];
            double px = pp[2 * q] - mp[0], py = pp[2 * q + 1] - mp[1];
            sc += qx * px + qy * py;
            ss += qx * py - qy * px;
            a11 += px * qx;
            a12 += px * qy;
            a21 += py * qx;
            a22 += py * qy;
        }
        free(pp);
        /* The sign of the cross-covariance's determinant tells a mirror. */
        if (a11 * a22 - a12 * a21 < 0.0)
            return mb_err_set(err, MB_EDEGENERATE,
                              "calibration: frame %d shows the target "
                              "mirrored relative to frame 1",
                              f + 1);
        double ang = atan2(ss, sc), c = cos(ang), s = sin(ang);
        double tx = mp[0] - (c * mq[0] - s * mq[1]);
        double ty = mp[1] - (s * mq[0] + c * mq[1]);
        double *p = th + pose_at(M, f);
        p[0] = ang;
        p[1] = tx / M->L;
        p[2] = ty / M->L;
    }
    /* Hn = Nimg H0 Nplane^-1. */
    HM(Nimg, 0, 0) = HM(Nimg, 1, 1) = 1.0 / M->rho;
    HM(Nimg, 0, 2) = -M->cx / M->rho;
    HM(Nimg, 1, 2) = -M->cy / M->rho;
    HM(Nimg, 2, 2) = 1.0;
    HM(Npl, 0, 0) = HM(Npl, 1, 1) = M->L;
    HM(Npl, 0, 2) = M->X0;
    HM(Npl, 1, 2) = M->Y0;
    HM(Npl, 2, 2) = 1.0;
    double Hn[9];
    mul3(H0, Npl, Hn);
    mul3(Nimg, Hn, Hn);
    if (!(fabs(HM(Hn, 2, 2)) > 0.0))
        return mb_err_set(err, MB_EDEGENERATE,
                          "calibration: the target's centre maps to infinity");
    for (int i = 0; i < 9; i++)
        Hn[i] /= HM(Hn, 2, 2);
    th[0] = HM(Hn, 0, 0);
    th[1] = HM(Hn, 0, 1);
    th[2] = HM(Hn, 0, 2);
    th[3] = HM(Hn, 1, 0);
    th[4] = HM(Hn, 1, 1);
    th[5] = HM(Hn, 1, 2);
    th[6] = HM(Hn, 2, 0);
    th[7] = HM(Hn, 2, 1);
    for (int i = 0; i < M->nd; i++)
        th[8 + i] = 0.0;
    return MB_OK;
}

int mb_calib_estimate(const mb_calib_problem *prob, const mb_calib_options *opt,
                      mb_calib *out, double *residuals, char *err)
{
    mb_calib_options def;
    if (!prob || !out || !prob->target_xy || !prob->image_xy)
        return mb_err_set(err, MB_EINVAL, "calibration: nothing to fit");
    if (!opt) {
        mb_calib_options_default(&def);
        opt = &def;
    }
    int rc = check_problem(prob, opt, err);
    if (rc < 0)
        return rc;

    lm_model M;
    memset(&M, 0, sizeof M);
    M.prob = prob;
    M.nobs = prob->n_points * prob->n_frames;
    M.cx = 0.5 * (prob->width - 1);
    M.cy = 0.5 * (prob->height - 1);
    M.rho = 0.5 * hypot(prob->width, prob->height);
    for (int i = 0; i < 4; i++)
        M.dist_at[i] = -1;
    if (opt->radial_terms >= 1)
        M.dist_at[0] = 8 + M.nd++;
    if (opt->radial_terms >= 2)
        M.dist_at[1] = 8 + M.nd++;
    if (opt->tangential) {
        M.dist_at[2] = 8 + M.nd++;
        M.dist_at[3] = 8 + M.nd++;
    }
    M.m = 2 * M.nobs;
    M.n = 8 + M.nd + 3 * (prob->n_frames - 1);
    for (int q = 0; q < prob->n_points; q++) {
        M.X0 += prob->target_xy[2 * q] / prob->n_points;
        M.Y0 += prob->target_xy[2 * q + 1] / prob->n_points;
    }
    for (int q = 0; q < prob->n_points; q++)
        M.L = fmax(M.L, hypot(prob->target_xy[2 * q] - M.X0,
                              prob->target_xy[2 * q + 1] - M.Y0));
    if (!(M.L > 0.0))
        return mb_err_set(err, MB_EDEGENERATE,
                          "calibration: the target's points coincide");
    if (M.m < M.n)
        return mb_err_set(err, MB_EDEGENERATE,
                          "calibration: %d residuals for %d unknowns", M.m,
                          M.n);

    const size_t m = (size_t)M.m, n = (size_t)M.n;
    lm_work W;
    memset(&W, 0, sizeof W);
    double *th = NULL, *raw = NULL, *obs = NULL, *hull = NULL;
    W.J = malloc(sizeof *W.J * m * n);
    W.A = malloc(sizeof *W.A * (m + n) * n);
    W.B = malloc(sizeof *W.B * (m + n));
    W.r = malloc(sizeof *W.r * m);
    W.rn = malloc(sizeof *W.rn * m);
    W.tmp = malloc(sizeof *W.tmp * m);
    W.thn = malloc(sizeof *W.thn * n);
    W.D = malloc(sizeof *W.D * n);
    W.delta = malloc(sizeof *W.delta * n);
    th = calloc(n, sizeof *th);
    raw = malloc(sizeof *raw * m);
    obs = malloc(sizeof *obs * m);
    hull = malloc(sizeof *hull * (m + 4));
    if (!W.J || !W.A || !W.B || !W.r || !W.rn || !W.tmp || !W.thn || !W.D ||
        !W.delta || !th || !raw || !obs || !hull) {
        rc = mb_err_set(err, MB_ENOMEM, "calibration: out of memory");
        goto fail;
    }
    for (size_t i = 0; i < m / 2; i++) {
        raw[2 * i] = (prob->image_xy[2 * i] - M.cx) / M.rho;
        raw[2 * i + 1] = (prob->image_xy[2 * i + 1] - M.cy) / M.rho;
    }
    memcpy(obs, raw, sizeof *obs * m);
    M.obs = obs;
    if ((rc = initialise(&M, th, err)) < 0)
        goto fail;

    int iters = 0;
    if ((rc = lm_run(&M, th, opt->max_iterations, &W, &iters, err)) < 0)
        goto fail;
    if (prob->dot_radius > 0.0)
        for (int pass = 0; pass < opt->bias_passes; pass++) {
            correct_bias(&M, th, raw, obs);
            if ((rc = lm_run(&M, th, opt->max_iterations, &W, &iters, err)) < 0)
                goto fail;
        }

    /* The result in px and mm: H = Nimg^-1 Hn Nplane. */
    mb_calib c;
    memset(&c, 0, sizeof c);
    c.width = prob->width;
    c.height = prob->height;
    c.cx = M.cx;
    c.cy = M.cy;
    c.radius = M.rho;
    double k[4];
    theta_k(&M, th, k);
    c.k1 = k[0];
    c.k2 = k[1];
    c.p1 = k[2];
    c.p2 = k[3];
    {
        double Hn[9] = {th[0], th[3], th[6], th[1], th[4],
                        th[7], th[2], th[5], 1.0};
        double Ni[9] = {M.rho, 0, 0, 0, M.rho, 0, M.cx, M.cy, 1};
        double Np[9] = {1.0 / M.L, 0,           0,           0, 1.0 / M.L,
                        0,         -M.X0 / M.L, -M.Y0 / M.L, 1};
        double H[9];
        mul3(Hn, Np, H);
        mul3(Ni, H, H);
        if (!(fabs(H[8]) > 0.0)) {
            rc = mb_err_set(err, MB_ERANGE,
                            "calibration: the target origin maps to infinity");
            goto fail;
        }
        for (int i = 0; i < 9; i++)
            c.h[i] = H[i] / H[8];
        c.h[8] = 1.0;
    }
    c.rows = prob->rows;
    c.cols = prob->cols;
    c.pitch = prob->pitch;
    c.n_frames = prob->n_frames;
    c.n_points = prob->n_points;
    c.iterations = iters;
    for (int f = 1; f < prob->n_frames; f++) {
        const double *p = th + pose_at(&M, f);
        double ang = remainder(p[0], 2.0 * M_PI);
        c.frame_angle_deg[f] = ang * 180.0 / M_PI;
        c.frame_shift_mm[f][0] = p[1] * M.L;
        c.frame_shift_mm[f][1] = p[2] * M.L;
    }
    /* Residuals in px, against the corrected observations (that is,
       predicted dot centroid against the measured one). */
    lm_eval(&M, th, W.r, NULL);
    double sum = 0.0;
    c.worst_px = -1.0;
    for (int f = 0; f < prob->n_frames; f++) {
        double fs = 0.0;
        for (int q = 0; q < prob->n_points; q++) {
            int i = f * prob->n_points + q;
            double ex = W.r[2 * i] * M.rho, ey = W.r[2 * i + 1] * M.rho;
            double e2 = ex * ex + ey * ey;
            if (residuals) {
                residuals[2 * i] = ex;
                residuals[2 * i + 1] = ey;
            }
            fs += e2;
            if (sqrt(e2) > c.worst_px) {
                c.worst_px = sqrt(e2);
                c.worst_frame = f;
                c.worst_point = q;
            }
        }
        sum += fs;
        c.frame_rms_px[f] = sqrt(fs / prob->n_points);
    }
    c.rms_px = sqrt(sum / M.nobs);
    memcpy(obs, prob->image_xy, sizeof *obs * m);
    c.coverage =
        hull_area(obs, M.nobs, hull) / ((double)prob->width * prob->height);
    {
        char why[MB_ERR_LEN];
        if ((rc = mb_calib_validate(&c, why)) < 0) {
            /* "calibration: " starts why; keep the rest. */
            const char *w = strncmp(why, "calibration: ", 13) ? why : why + 13;
            mb_err_set(err, rc,
                       "calibration: the fitted model is not usable (%s; "
                       "reprojection RMS %.3f px): the frames do not fit one "
                       "flat plane seen through one lens. Check that the "
                       "target lay flat and the camera did not move, or add "
                       "frames with the target near the corners",
                       w, c.rms_px);
            goto fail;
        }
    }
    *out = c;
    rc = MB_OK;
fail:
    free(W.J);
    free(W.A);
    free(W.B);
    free(W.r);
    free(W.rn);
    free(W.tmp);
    free(W.thn);
    free(W.D);
    free(W.delta);
    free(th);
    free(raw);
    free(obs);
    free(hull);
    return rc;
}
