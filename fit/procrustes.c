/*
 * fit/procrustes.c - ordinary Procrustes fit of two 2-D point sets and
 * generalised Procrustes analysis (GPA) of many.
 *
 * Ordinary Procrustes in the plane has a closed form (no SVD). With weighted
 * centroids removed, p_i from src and q_i from dst, weights w_i:
 *     A = sum w_i (p_i . q_i),  B = sum w_i (p_i x q_i),  S = sum w_i |p_i|^2
 *     angle = atan2(B, A),  scale = sqrt(A^2 + B^2) / S,
 *     t = centroid(dst) - scale R(angle) centroid(src).
 * Writing the rotation as an angle makes it proper by construction: a
 * mirror-image target gets the best rotation, never a reflection.
 *
 * GPA follows Gower, "Generalized Procrustes analysis", Psychometrika 40,
 * 1975, in the form used for point distribution models by Cootes, Taylor,
 * Cooper, Graham, "Active Shape Models - their training and application",
 * CVIU 61(1), 1995, section 3.2: centre each shape and scale it to unit
 * norm; take the first shape as the initial mean; repeat { rotate every
 * shape onto the mean; average; rotate the average onto the first shape
 * (fixes the orientation) and scale it to unit norm } until the mean moves
 * less than tol. Optionally each aligned shape x is projected into the
 * tangent space of the mean, x / (x . mean), inside the loop, so that at
 * convergence the average of the aligned shapes is the unit-norm mean
 * itself and every deviation x - mean is orthogonal to the mean.
 */
#include "procrustes.h"

#include "error.h"

#include <cblas.h>
#include <float.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

/* Spread below this fraction of the magnitude (squared) is rounding noise:
   the points coincide. */
#define ZERO_SPREAD_REL 1e-28

int mb_procrustes_fit(const double *src, const double *dst, int n,
                      const double *w, mb_pose *pose, double *residual)
{
    if (!src || !dst || !pose || n < 1)
        return MB_EINVAL;

    double sw = 0.0, sx = 0.0, sy = 0.0, dx = 0.0, dy = 0.0;
    for (int i = 0; i < n; i++) {
        double wi = w ? w[i] : 1.0;
        if (!(wi >= 0.0) || !isfinite(wi))
            return MB_EINVAL;
        sw += wi;
        sx += wi * src[2 * i];
        sy += wi * src[2 * i + 1];
        dx += wi * dst[2 * i];
        dy += wi * dst[2 * i + 1];
    }
    if (!(sw > 0.0))
        return MB_EDEGENERATE;
    sx /= sw;
    sy /= sw;
    dx /= sw;
    dy /= sw;

    double a = 0.0, b = 0.0, s2 = 0.0, raw = 0.0;
    for (int i = 0; i < n; i++) {
        double wi = w ? w[i] : 1.0;
        double px = src[2 * i] - sx, py = src[2 * i + 1] - sy;
        double qx = dst[2 * i] - dx, qy = dst[2 * i + 1] - dy;
        a += wi * (px * qx + py * qy);
        b += wi * (px * qy - py * qx);
        s2 += wi * (px * px + py * py);
        raw += wi * (src[2 * i] * src[2 * i] + src[2 * i + 1] * src[2 * i + 1]);
    }
    if (!isfinite(a) || !isfinite(b) || !isfinite(s2) || !isfinite(raw) ||
        !isfinite(dx) || !isfinite(dy))
        return MB_ENUMERIC;
    if (s2 <= ZERO_SPREAD_REL * raw || s2 <= DBL_MIN)
        return MB_EDEGENERATE;

    double scale = hypot(a, b) / s2;
    double angle = atan2(b, a);
    double c = scale * cos(angle), s = scale * sin(angle);
    pose->scale = scale;
    pose->angle = angle;
    pose->tx = dx - (c * sx - s * sy);
    pose->ty = dy - (s * sx + c * sy);

    if (residual) {
        /* Summed explicitly (not as |q|^2 - (A^2+B^2)/S) so a near-perfect
           fit does not lose its digits to cancellation. */
        double r = 0.0;
        for (int i = 0; i < n; i++) {
            double wi = w ? w[i] : 1.0;
            double px = src[2 * i] - sx, py = src[2 * i + 1] - sy;
            double ex = c * px - s * py - (dst[2 * i] - dx);
            double ey = s * px + c * py - (dst[2 * i + 1] - dy);
            r += wi * (ex * ex + ey * ey);
        }
        *residual = r;
    }
    return MB_OK;
}

void mb_gpa_params_default(mb_gpa_params *p)
{
    if (!p)
        return;
    p->tol = 1e-10;
    p->max_iter = 100;
    p->tangent = 1;
}

/* Rotate the n interleaved points of z (in place) by the angle with cosine c
   and sine s. */
static void rotate(double *z, int n, double c, double s)
{
    for (int i = 0; i < n; i++) {
        double x = z[2 * i], y = z[2 * i + 1];
        z[2 * i] = c * x - s * y;
        z[2 * i + 1] = s * x + c * y;
    }
}

/* Rotate v (in place) onto ref by the best angle. */
static void rotate_onto(double *v, const double *ref, int n)
{
    double a = 0.0, b = 0.0;
    for (int i = 0; i < n; i++) {
        a += v[2 * i] * ref[2 * i] + v[2 * i + 1] * ref[2 * i + 1];
        b += v[2 * i] * ref[2 * i + 1] - v[2 * i + 1] * ref[2 * i];
    }
    double r = hypot(a, b);
    if (r > 0.0)
        rotate(v, n, a / r, b / r);
}

/* Centre column j into z and scale it to unit norm; report its centroid and
   norm. One read pass (sums taken about the first point, so a shape far
   from the origin loses no digits) and one write pass. */
static int standardise(const double *col, int n, int j, double *z, double *cx,
                       double *cy, double *norm, char *err)
{
    const double x0 = col[0], y0 = col[1];
    double sx = 0.0, sy = 0.0, ss = 0.0;
    for (int i = 0; i < n; i++) {
        double x = col[2 * i] - x0, y = col[2 * i + 1] - y0;
        sx += x;
        sy += y;
        ss += x * x + y * y;
    }
    if (!isfinite(sx + sy + ss)) {
        for (int i = 0; i < 2 * n; i++)
            if (!isfinite(col[i]))
                return mb_err_set(err, MB_ENUMERIC,
                                  "shape %d has a NaN or infinite coordinate "
                                  "at point %d",
                                  j, i / 2);
        return mb_err_set(err, MB_ENUMERIC,
                          "shape %d overflows: coordinates too large", j);
    }
    sx /= n;
    sy /= n;
    ss -= n * (sx * sx + sy * sy); /* sum |p - centroid|^2 */
    double raw = n * ((sx + x0) * (sx + x0) + (sy + y0) * (sy + y0));
    if (!(ss > ZERO_SPREAD_REL * raw) || ss <= DBL_MIN)
        return mb_err_set(err, MB_EDEGENERATE,
                          "shape %d has zero size: all its %d points coincide",
                          j, n);
    double r = sqrt(ss);
    *cx = sx + x0;
    *cy = sy + y0;
    for (int i = 0; i < n; i++) {
        z[2 * i] = (col[2 * i] - *cx) / r;
        z[2 * i + 1] = (col[2 * i + 1] - *cy) / r;
    }
    *norm = r;
    return MB_OK;
}

/*
 * One GPA step on the standardised shapes Z (d x m, ld): with A_j = z_j . mean
 * and B_j = sum z_j x mean, the best rotation of z_j onto the mean has
 * cos = A_j / r_j, sin = B_j / r_j, r_j = hypot(A_j, B_j), and the rotated
 * shape has z . mean = r_j. Both sums for all shapes are one product
 * Z^T [mean, J mean] (J: (x, y) -> (y, -x)). The average of the rotated
 * (and tangent-scaled, factor f_j = 1 / r_j) shapes is
 *     (1/m) sum f_j (cos_j z_j + sin_j K z_j),   K: (x, y) -> (-y, x),
 *   = (1/m) (Z alpha + K Z beta),  alpha_j = f_j cos_j, beta_j = f_j sin_j,
 * a second product Z [alpha, beta]. The shapes themselves are not touched.
 */
static int gpa_angles(const double *z, int ld, int d, int m, const double *mean,
                      double *mj, double *ab, char *err)
{
    for (int i = 0; i < d; i += 2) {
        mj[i] = mean[i];
        mj[i + 1] = mean[i + 1];
        mj[d + i] = mean[i + 1];
        mj[d + i + 1] = -mean[i];
    }
    cblas_dgemm(CblasColMajor, CblasTrans, CblasNoTrans, m, 2, d, 1.0, z, ld,
                mj, d, 0.0, ab, m);
    for (int j = 0; j < m; j++) {
        double a = ab[j], b = ab[m + j];
        double r = hypot(a, b);
        if (!(r > DBL_EPSILON))
            return mb_err_set(err, MB_EDEGENERATE,
                              "GPA: shape %d cannot be aligned to the mean (it "
                              "is orthogonal to it in every rotation)",
                              j);
        ab[j] = a / r;     /* cos */
        ab[m + j] = b / r; /* sin */
        ab[2 * m + j] = r; /* z . mean after the rotation */
    }
    return MB_OK;
}

int mb_gpa_align(const double *shapes, int ld, int n, int m,
                 const mb_gpa_params *p, double *aligned, int ld_out,
                 double *mean, mb_pose *poses, mb_gpa_info *info, char *err)
{
    mb_gpa_params defaults;
    if (!p) {
        mb_gpa_params_default(&defaults);
        p = &defaults;
    }
    if (!shapes || !aligned || !mean)
        return mb_err_set(err, MB_EINVAL,
                          "GPA: shapes, aligned and mean must "
                          "not be NULL");
    if (n < 2 || m < 2)
        return mb_err_set(err, MB_EINVAL,
                          "GPA needs at least 2 shapes of at least 2 points; "
                          "got %d shapes of %d points",
                          m, n);
    if (n > (1 << 28) || ld < 2 * n || ld_out < 2 * n)
        return mb_err_set(err, MB_EINVAL,
                          "GPA: leading dimensions %d and %d must be at least "
                          "2n = %d",
                          ld, ld_out, 2 * n);
    if (!(p->tol >= 0.0) || p->max_iter < 1)
        return mb_err_set(
            err, MB_EINVAL,
            "GPA: tol must be >= 0 and max_iter >= 1 (got %g, %d)", p->tol,
            p->max_iter);

    const int d = 2 * n;
    const size_t ldo = (size_t)ld_out, sd = (size_t)d, sm = (size_t)m;
    /* ref, acc: d; mj, pk: d x 2; ab: m x 3 (cos, sin, r); centroids, norms */
    double *buf = malloc((6 * sd + 6 * sm) * sizeof *buf);
    if (!buf)
        return mb_err_set(err, MB_ENOMEM, "GPA: out of memory for %d shapes",
                          m);
    double *ref = buf, *acc = ref + sd, *mj = acc + sd, *pk = mj + 2 * sd,
           *ab = pk + 2 * sd, *cx = ab + 3 * sm, *cy = cx + sm, *rn = cy + sm;
    int rc = MB_OK;

    /* Centre and scale every shape (in place is fine: column j is read
       completely before it is written). */
    for (int j = 0; j < m; j++) {
        rc =
            standardise(shapes + (size_t)j * (size_t)ld, n, j,
                        aligned + (size_t)j * ldo, &cx[j], &cy[j], &rn[j], err);
        if (rc < 0)
            goto done;
    }
    memcpy(ref, aligned, sd * sizeof *ref);
    memcpy(mean, ref, sd * sizeof *mean);

    int iter = 0, converged = 0;
    double change = INFINITY;
    while (iter < p->max_iter) {
        iter++;
        if ((rc = gpa_angles(aligned, ld_out, d, m, mean, mj, ab, err)) < 0)
            goto done;
        for (int j = 0; j < m; j++) {
            double f = p->tangent ? 1.0 / ab[2 * sm + j] : 1.0;
            ab[j] *= f;
            ab[sm + j] *= f;
        }
        cblas_dgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, d, 2, m, 1.0 / m,
                    aligned, ld_out, ab, m, 0.0, pk, d);
        for (int i = 0; i < d; i += 2) {
            acc[i] = pk[i] - pk[d + i + 1];
            acc[i + 1] = pk[i + 1] + pk[d + i];
        }
        rotate_onto(acc, ref, n); /* keep the first shape's orientation */
        double len = cblas_dnrm2(d, acc, 1);
        if (!(len > DBL_MIN)) {
            rc = mb_err_set(err, MB_EDEGENERATE,
                            "GPA: the aligned shapes cancel out (their "
                            "average has zero size)");
            goto done;
        }
        change = 0.0;
        for (int i = 0; i < d; i++) {
            double v = acc[i] / len;
            change += (v - mean[i]) * (v - mean[i]);
            mean[i] = v;
        }
        change = sqrt(change);
        if (change < p->tol) {
            converged = 1;
            break;
        }
    }

    /* Rotate every shape onto the final mean, then the tangent projection. */
    if ((rc = gpa_angles(aligned, ld_out, d, m, mean, mj, ab, err)) < 0)
        goto done;
    for (int j = 0; j < m; j++) {
        double c = ab[j], s = ab[sm + j];
        double f = p->tangent ? 1.0 / ab[2 * sm + j] : 1.0;
        rotate(aligned + (size_t)j * ldo, n, f * c, f * s);
        if (poses) {
            /* aligned = f R(theta) (x - centroid) / norm, so
               x = centroid + (norm / f) R(-theta) aligned. */
            poses[j].tx = cx[j];
            poses[j].ty = cy[j];
            poses[j].scale = rn[j] / f;
            poses[j].angle = -atan2(s, c);
        }
    }
    if (info) {
        info->iterations = iter;
        info->last_change = change;
        info->converged = converged;
    }
done:
    free(buf);
    return rc;
}
