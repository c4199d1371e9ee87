/*
 * fit/shape_model.c - the point distribution model: build, parts, scores and
 * the fit of pose + b to target points.
 *
 * Cootes, Taylor, Cooper, Graham, "Active Shape Models - their training and
 * application", CVIU 61(1), 1995:
 *   - model (section 3): x = mean + P b, P the k kept eigenvectors of the
 *     covariance of the GPA-aligned training shapes, lambda_i = var(b_i);
 *   - fit to target points Y (section 4.1): start from b; repeat
 *       x = mean + P b; find the pose T minimising |Y - T(x)|^2 (weighted
 *       Procrustes); y = T^-1(Y); project y into the tangent plane of the
 *       mean, y / (y . mean) (here y (mean . mean) / (y . mean), the same for
 *       a unit-norm mean); b = P^T (y - mean), bounded;
 *     until b and the pose stop changing.
 * Scores: Hotelling T^2 = sum b_i^2 / lambda_i (the Mahalanobis distance of
 * b); SPE = |x - mean - P b|^2 is the squared residual outside the kept
 * modes, the Q statistic of Jackson & Mudholkar, Technometrics 1979.
 */
#include "shape_model.h"

#include "error.h"
#include "mem_internal.h"

#include <cblas.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

struct mb_shape_model {
    mb_layout layout;
    int d, k, n_eig;
    double *mean;     /* d */
    double *modes;    /* d x k, ld = d */
    double *eig;      /* n_eig */
    double *sd;       /* k: sqrt(eig[i]) */
    double mean_sq;   /* mean . mean */
    double total_var; /* sum of eig */
    mb_train_info info;
};

/* Orthonormality tolerance of the modes given to mb_shape_model_create. */
#define MODES_ORTHO_TOL 1e-6

void mb_shape_model_close(mb_shape_model *m)
{
    if (!m)
        return;
    free(m->mean);
    free(m->modes);
    free(m->eig);
    free(m->sd);
    free(m);
}

static int all_finite(const double *v, size_t n)
{
    for (size_t i = 0; i < n; i++)
        if (!isfinite(v[i]))
            return 0;
    return 1;
}

static int check_modes(const double *modes, int ld, int d, int k, char *err)
{
    double *g = malloc((size_t)k * (size_t)k * sizeof *g);
    if (!g)
        return mb_err_set(err, MB_ENOMEM, "out of memory checking %d modes", k);
    cblas_dsyrk(CblasColMajor, CblasLower, CblasTrans, k, d, 1.0, modes, ld,
                0.0, g, k);
    double worst = 0.0;
    for (int j = 0; j < k; j++)
        for (int i = j; i < k; i++) {
            double e = fabs(g[i + (size_t)j * k] - (i == j ? 1.0 : 0.0));
            if (!(e <= worst))
                worst = e;
        }
    free(g);
    if (!(worst <= MODES_ORTHO_TOL))
        return mb_err_set(err, MB_EINVAL,
                          "model modes are not orthonormal: P^T P differs from "
                          "the identity by %.3g (allowed %g)",
                          worst, MODES_ORTHO_TOL);
    return MB_OK;
}

int mb_shape_model_create(const mb_layout *layout, int k, const double *mean,
                          const double *modes, int ld_modes, int n_eig,
                          const double *eig, const mb_train_info *info,
                          mb_shape_model **out, char *err)
{
    if (!out)
        return mb_err_set(err, MB_EINVAL, "model: no place for the result");
    *out = NULL;
    if (!layout || mb_layout_check(layout) < 0)
        return mb_err_set(err, MB_EINVAL,
                          "model layout is invalid: need 1..%d outlines of "
                          "3..%d points each, summing to n_points",
                          MB_MAX_OUTLINES, MB_MAX_OUTLINE_POINTS);
    if (!mean || !modes || !eig)
        return mb_err_set(err, MB_EINVAL,
                          "model: mean, modes and eigenvalues must be given");
    int d = 2 * layout->n_points;
    if (n_eig < 1 || n_eig > d || k < 1 || k > n_eig)
        return mb_err_set(err, MB_ESIZE,
                          "model sizes do not fit: %d modes and %d eigenvalues "
                          "for dimension %d (need 1 <= modes <= eigenvalues "
                          "<= dimension)",
                          k, n_eig, d);
    if (ld_modes < d)
        return mb_err_set(err, MB_EINVAL,
                          "model: leading dimension of the modes %d is below "
                          "the dimension %d",
                          ld_modes, d);
    if (!all_finite(mean, (size_t)d) || !all_finite(eig, (size_t)n_eig))
        return mb_err_set(err, MB_ENUMERIC,
                          "model mean or eigenvalues hold NaN or infinity");
    for (int j = 0; j < k; j++)
        if (!all_finite(modes + (size_t)j * (size_t)ld_modes, (size_t)d))
            return mb_err_set(err, MB_ENUMERIC,
                              "model mode %d holds NaN or infinity", j);
    for (int i = 0; i < n_eig; i++) {
        if (eig[i] < 0.0 || (i > 0 && eig[i] > eig[i - 1]))
            return mb_err_set(err, MB_EINVAL,
                              "model eigenvalue %d (%.17g) is negative or "
                              "larger than the one before: they must be >= 0 "
                              "and sorted largest first",
                              i, eig[i]);
    }
    if (!(eig[k - 1] > 0.0))
        return mb_err_set(err, MB_EINVAL,
                          "model keeps mode %d whose variance is zero", k - 1);
    int rc = check_modes(modes, ld_modes, d, k, err);
    if (rc < 0)
        return rc;

    mb_shape_model *m = calloc(1, sizeof *m);
    if (!m)
        return mb_err_set(err, MB_ENOMEM, "out of memory for the model");
    m->layout = *layout;
    m->d = d;
    m->k = k;
    m->n_eig = n_eig;
    m->mean = malloc((size_t)d * sizeof *m->mean);
    m->modes = malloc((size_t)d * (size_t)k * sizeof *m->modes);
    m->eig = malloc((size_t)n_eig * sizeof *m->eig);
    m->sd = malloc((size_t)k * sizeof *m->sd);
    if (!m->mean || !m->modes || !m->eig || !m->sd) {
        rc = mb_err_set(err, MB_ENOMEM, "out of memory for the model");
        goto fail;
    }
    memcpy(m->mean, mean, (size_t)d * sizeof *mean);
    for (int j = 0; j < k; j++)
        memcpy(m->modes + (size_t)j * (size_t)d,
               modes + (size_t)j * (size_t)ld_modes, (size_t)d * sizeof *modes);
    memcpy(m->eig, eig, (size_t)n_eig * sizeof *eig);
    m->total_var = 0.0;
    for (int i = 0; i < n_eig; i++)
        m->total_var += eig[i];
    for (int i = 0; i < k; i++)
        m->sd[i] = sqrt(eig[i]);
    m->mean_sq = cblas_ddot(d, mean, 1, mean, 1);
    if (!(m->mean_sq > 0.0)) {
        rc = mb_err_set(err, MB_EINVAL, "model mean has zero size");
        goto fail;
    }
    if (info) {
        m->info = *info;
        m->info.created[sizeof m->info.created - 1] = '\0';
        m->info.source[sizeof m->info.source - 1] = '\0';
    }
    *out = m;
    return MB_OK;
fail:
    mb_shape_model_close(m);
    return rc;
}

int mb_shape_model_build(const double *shapes, int ld, const mb_layout *layout,
                         int m, const mb_gpa_params *gp,
                         const mb_pca_params *pp, const mb_train_info *info,
                         mb_shape_model **out, char *err)
{
    if (!out)
        return mb_err_set(err, MB_EINVAL, "model: no place for the result");
    *out = NULL;
    if (!layout || mb_layout_check(layout) < 0)
        return mb_err_set(err, MB_EINVAL,
                          "shape layout is invalid: need 1..%d outlines of "
                          "3..%d points each, summing to n_points",
                          MB_MAX_OUTLINES, MB_MAX_OUTLINE_POINTS);
    if (!shapes)
        return mb_err_set(err, MB_EINVAL, "no training shapes given");
    if (m < 3)
        return mb_err_set(err, MB_EINVAL,
                          "a model needs at least 3 training shapes, got %d",
                          m);
    int n = layout->n_points, d = 2 * n;
    if (ld < d)
        return mb_err_set(err, MB_EINVAL,
                          "leading dimension %d of the training shapes is "
                          "below 2 x %d points",
                          ld, n);
    mb_gpa_params gdef;
    mb_pca_params pdef;
    if (!gp) {
        mb_gpa_params_default(&gdef);
        gp = &gdef;
    }
    if (!pp) {
        mb_pca_params_default(&pdef);
        pp = &pdef;
    }

    mb_pca pca = {0};
    mb_gpa_info gi = {0};
    double *aligned = mb_big_alloc((size_t)d * (size_t)m * sizeof *aligned);
    double *gmean = malloc((size_t)d * sizeof *gmean);
    int rc;
    if (!aligned || !gmean) {
        rc = mb_err_set(err, MB_ENOMEM, "out of memory for %d shapes", m);
        goto done;
    }
    rc = mb_gpa_align(shapes, ld, n, m, gp, aligned, d, gmean, NULL, &gi, err);
    if (rc < 0)
        goto done;
    rc = mb_pca_compute_inplace(aligned, d, d, m, pp, &pca, err);
    if (rc == MB_EDEGENERATE) {
        mb_err_set(err, rc,
                   "all %d training shapes are the same up to position, "
                   "rotation and scale: there is no shape variation to model",
                   m);
        goto done;
    }
    if (rc < 0)
        goto done;
    mb_train_info ti;
    memset(&ti, 0, sizeof ti);
    if (info) {
        memcpy(ti.created, info->created, sizeof ti.created);
        memcpy(ti.source, info->source, sizeof ti.source);
    }
    ti.n_samples = m;
    ti.gpa_iterations = gi.iterations;
    ti.gpa_converged = gi.converged;
    ti.fixed_modes = pp->fixed_modes > 0 ? pp->fixed_modes : 0;
    ti.variance_fraction = pp->fixed_modes > 0 ? 0.0 : pp->variance_fraction;
    rc = mb_shape_model_create(layout, pca.n_modes, pca.mean, pca.modes, d,
                               pca.n_eig, pca.eig, &ti, out, err);
done:
    mb_pca_free(&pca);
    free(aligned);
    free(gmean);
    return rc;
}

const mb_layout *mb_shape_model_layout(const mb_shape_model *m)
{
    return &m->layout;
}

int mb_shape_model_dim(const mb_shape_model *m)
{
    return m->d;
}
int mb_shape_model_n_modes(const mb_shape_model *m)
{
    return m->k;
}
int mb_shape_model_n_eig(const mb_shape_model *m)
{
    return m->n_eig;
}
const double *mb_shape_model_mean(const mb_shape_model *m)
{
    return m->mean;
}
const double *mb_shape_model_modes(const mb_shape_model *m)
{
    return m->modes;
}
const double *mb_shape_model_eig(const mb_shape_model *m)
{
    return m->eig;
}
double mb_shape_model_total_var(const mb_shape_model *m)
{
    return m->total_var;
}

const mb_train_info *mb_shape_model_info(const mb_shape_model *m)
{
    return &m->info;
}

void mb_shape_model_project(const mb_shape_model *m, const double *x, double *b)
{
    /* Deviation taken per element rather than as P^T x - P^T mean, which
       would cancel digits when x is close to the mean. */
    for (int i = 0; i < m->k; i++) {
        const double *u = m->modes + (size_t)i * (size_t)m->d;
        double s = 0.0;
        for (int r = 0; r < m->d; r++)
            s += u[r] * (x[r] - m->mean[r]);
        b[i] = s;
    }
}

void mb_shape_model_reconstruct(const mb_shape_model *m, const double *b,
                                double *x)
{
    memcpy(x, m->mean, (size_t)m->d * sizeof *x);
    cblas_dgemv(CblasColMajor, CblasNoTrans, m->d, m->k, 1.0, m->modes, m->d, b,
                1, 1.0, x, 1);
}

double mb_shape_model_t2(const mb_shape_model *m, const double *b)
{
    double t2 = 0.0;
    for (int i = 0; i < m->k; i++)
        t2 += b[i] * b[i] / m->eig[i];
    return t2;
}

double mb_shape_model_spe(const mb_shape_model *m, const double *x,
                          double *work)
{
    /* Remove the component along each mode in turn (modified Gram-Schmidt):
       accurate even when the residual is tiny next to x - mean. */
    for (int r = 0; r < m->d; r++)
        work[r] = x[r] - m->mean[r];
    for (int i = 0; i < m->k; i++) {
        const double *u = m->modes + (size_t)i * (size_t)m->d;
        double c = cblas_ddot(m->d, u, 1, work, 1);
        cblas_daxpy(m->d, -c, u, 1, work, 1);
    }
    return cblas_ddot(m->d, work, 1, work, 1);
}

void mb_fit_params_default(mb_fit_params *p)
{
    if (!p)
        return;
    p->b_limit = 0.0;
    p->max_iter = 50;
    p->tol = 1e-8;
}

int mb_shape_model_fit_work_size(const mb_shape_model *m)
{
    return 2 * m->d + m->k;
}

/* Bound b in place; return how many modes sit on the bound. */
static int clamp_b(const mb_shape_model *m, double limit, double *b)
{
    int n = 0;
    if (!(limit > 0.0))
        return 0;
    for (int i = 0; i < m->k; i++) {
        double lim = limit * m->sd[i];
        if (b[i] >= lim) {
            b[i] = lim;
            n++;
        } else if (b[i] <= -lim) {
            b[i] = -lim;
            n++;
        }
    }
    return n;
}

/* How far a pose moved, in model units: relative scale, angle (radians),
   translation divided by the scale. */
static double pose_change(const mb_pose *a, const mb_pose *b)
{
    double ds = fabs(a->scale - b->scale) / b->scale;
    double da = fabs(remainder(a->angle - b->angle, 2.0 * M_PI));
    double dt = hypot(a->tx - b->tx, a->ty - b->ty) / b->scale;
    double c = ds > da ? ds : da;
    return c > dt ? c : dt;
}

int mb_shape_model_fit(const mb_shape_model *m, const double *target,
                       const double *w, const mb_fit_params *p, double *b,
                       mb_fit_result *res, double *work)
{
    mb_fit_params def;
    if (!p) {
        mb_fit_params_default(&def);
        p = &def;
    }
    if (!m || !target || !b || !res || !work)
        return MB_EINVAL;
    if (!(p->b_limit >= 0.0) || p->max_iter < 1 || !(p->tol >= 0.0))
        return MB_EINVAL;
    const int n = m->layout.n_points, d = m->d, k = m->k;
    if (!all_finite(target, (size_t)d) || !all_finite(b, (size_t)k))
        return MB_ENUMERIC;
    double *x = work, *y = work + d, *bprev = work + 2 * d;

    memset(res, 0, sizeof *res);
    clamp_b(m, p->b_limit, b);
    mb_pose pose, prev = mb_pose_identity();
    int rc;
    for (int it = 1; it <= p->max_iter; it++) {
        mb_shape_model_reconstruct(m, b, x);
        rc = mb_procrustes_fit(x, target, n, w, &pose, NULL);
        if (rc < 0)
            return rc;
        if (!(pose.scale > 0.0))
            return MB_EDEGENERATE; /* the targets have no spread */
        mb_pose inv = mb_pose_invert(&pose);
        mb_pose_apply(&inv, target, n, y);
        double c = cblas_ddot(d, y, 1, m->mean, 1) / m->mean_sq;
        if (!(c > 0.0))
            return MB_EDEGENERATE;
        /* Tangent plane of the mean, then the deviation from the mean. */
        for (int r = 0; r < d; r++)
            y[r] = y[r] / c - m->mean[r];
        memcpy(bprev, b, (size_t)k * sizeof *b);
        cblas_dgemv(CblasColMajor, CblasTrans, d, k, 1.0, m->modes, d, y, 1,
                    0.0, b, 1);
        clamp_b(m, p->b_limit, b);
        double change = it > 1 ? pose_change(&pose, &prev) : INFINITY;
        for (int i = 0; i < k; i++) {
            double db = fabs(b[i] - bprev[i]) / m->sd[i];
            if (db > change)
                change = db;
        }
        res->iterations = it;
        prev = pose;
        if (change < p->tol) {
            res->converged = 1;
            break;
        }
    }

    /* The pose that goes with the final b, and the distances it leaves. */
    mb_shape_model_reconstruct(m, b, x);
    rc = mb_procrustes_fit(x, target, n, w, &pose, NULL);
    if (rc < 0)
        return rc;
    if (!(pose.scale > 0.0))
        return MB_EDEGENERATE;
    mb_pose_apply(&pose, x, n, y);
    double ss = 0.0;
    for (int r = 0; r < d; r++)
        ss += (y[r] - target[r]) * (y[r] - target[r]);
    res->pose = pose;
    res->rms = sqrt(ss / n);
    res->clamped = 0;
    if (p->b_limit > 0.0)
        for (int i = 0; i < k; i++)
            if (fabs(b[i]) >= p->b_limit * m->sd[i])
                res->clamped++;
    return MB_OK;
}
