/*
 * fit/profile.c - grey-level profile models (see profile.h).
 *
 * Method (Cootes, Taylor, Cooper, Graham, CVIU 61(1), 1995, section 5):
 * sample the grey levels along the normal of every landmark of every
 * training image, take their derivative (differences of neighbouring
 * samples), normalise it by the sum of absolute values so that a change of
 * contrast or illumination does not change it, and model the distribution
 * of the normalised profiles at each landmark by its mean and covariance.
 * A candidate profile is matched by its Mahalanobis distance. One model per
 * pyramid level (Cootes, Taylor, Lanitis, BMVC 1994): at level L the same
 * number of samples covers 2^L times as much of the frame.
 *
 * Streaming: the mean and covariance are updated frame by frame with
 * Welford's recurrence (Welford, Technometrics 4(3), 1962), generalised to
 * vectors: delta = g - mean; mean += delta / m; M2 += delta (g - mean)^T.
 * The covariance is M2 / (m - 1).
 *
 * Regularisation: with 20-40 training frames and 7..11 samples per profile
 * the sample covariance is noisy and, where the background is flat, nearly
 * singular. It is shrunk toward a scaled identity with the same trace
 * (a fixed-weight form of the shrinkage of Ledoit & Wolf, J. Multivariate
 * Analysis 88, 2004) and given a small floor.
 *
 * Cost: S' = L L^T (Cholesky); f = |L^-1 (g - gbar)|^2 by forward
 * substitution, (p^2 + p) / 2 multiply-adds. L is stored packed by rows
 * with the reciprocal of each diagonal entry, so no division is left in
 * the inner loop.
 */
#include "profile.h"

#include "error.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

struct mb_profile_model {
    mb_layout layout;
    mb_profile_params params;
    mb_profile_stats stats;
    int p;        /* profile length 2k+1 */
    double *mean; /* levels * n * p */
    double *cov;  /* levels * n * p * p, regularised, column-major */
    double *chol; /* levels * n * p(p+1)/2, rows of L packed, 1/L_ii last */
};

struct mb_profile_learner {
    mb_layout layout;
    mb_profile_params params;
    int p, n;
    int count;
    double *mean;  /* levels * n * p running means */
    double *m2;    /* levels * n * p * p running co-moments */
    double *frame; /* levels * n * p profiles of the frame being added */
    double *nrm;   /* 2n normals */
    double sum_part, sum_back, sum_area, sum_size;
};

void mb_profile_params_default(mb_profile_params *p)
{
    if (!p)
        return;
    p->levels = 4;
    p->half_len = 3;
    p->shrink = 0.1;
    p->floor = 1e-5;
}

static int params_check(const mb_profile_params *p)
{
    if (p->levels < 1 || p->levels > MB_PYRAMID_MAX_LEVELS)
        return MB_EINVAL;
    if (p->half_len < 1 || p->half_len > MB_PROFILE_MAX_HALF)
        return MB_EINVAL;
    if (!(p->shrink >= 0.0 && p->shrink <= 1.0) || !(p->floor >= 0.0) ||
        !isfinite(p->floor))
        return MB_EINVAL;
    return MB_OK;
}

/* The checks the model and the learner share; who names the caller in
   the sentence ("profile model: invalid layout"). */
static int check_layout_params(const mb_layout *layout,
                               const mb_profile_params *p, const char *who,
                               char *err)
{
    if (mb_layout_check(layout) != MB_OK)
        return mb_err_set(err, MB_EINVAL, "%s: invalid layout", who);
    if (params_check(p) != MB_OK)
        return mb_err_set(err, MB_EINVAL,
                          "%s: levels must be 1..%d, half length 1..%d, "
                          "shrink 0..1 and floor >= 0",
                          who, MB_PYRAMID_MAX_LEVELS, MB_PROFILE_MAX_HALF);
    return MB_OK;
}

/* Shoelace sum of outline points (twice the signed area; positive when the
   points run clockwise on screen with y down). */
static double twice_area(const double *xy, int n)
{
    double s = 0.0;
    for (int i = 0; i < n; i++) {
        int j = i + 1 == n ? 0 : i + 1;
        s += xy[2 * i] * xy[2 * j + 1] - xy[2 * j] * xy[2 * i + 1];
    }
    return s;
}

int mb_profile_normals(const mb_layout *layout, const double *xy, double *nxy)
{
    if (!layout || !xy || !nxy || mb_layout_check(layout) != MB_OK)
        return MB_EINVAL;
    int rc = MB_OK;
    for (int o = 0, first = 0; o < layout->n_outlines; o++) {
        const int n = layout->counts[o];
        const double *q = xy + 2 * first;
        double *r = nxy + 2 * first;
        double a2 = twice_area(q, n);
        /* (t_y, -t_x) points out of a clockwise (on screen) outline, i.e.
           out of the region it encloses when a2 > 0. The part is inside
           the outer edge and outside every hole. */
        double sgn = a2 > 0.0 ? 1.0 : -1.0;
        if (o > 0)
            sgn = -sgn;
        if (!(a2 != 0.0))
            rc = MB_EDEGENERATE;
        for (int i = 0; i < n; i++) {
            int ip = i == 0 ? n - 1 : i - 1, in = i + 1 == n ? 0 : i + 1;
            double tx = q[2 * in] - q[2 * ip], ty = q[2 * in + 1] - q[2 * ip + 1];
            double len = sqrt(tx * tx + ty * ty);
            if (!(len > 0.0)) {
                r[2 * i] = r[2 * i + 1] = 0.0;
                rc = MB_EDEGENERATE;
                continue;
            }
            r[2 * i] = sgn * ty / len;
            r[2 * i + 1] = -sgn * tx / len;
        }
        first += n;
    }
    return rc;
}

double mb_profile_sample(const mb_image *img, double x, double y, double nx,
                         double ny, int k, double *g)
{
    const int p = 2 * k + 1;
    double t = -(double)k - 0.5;
    double prev = mb_pyramid_sample(img, x + t * nx, y + t * ny);
    double norm = 0.0;
    for (int j = 0; j < p; j++) {
        t += 1.0;
        double cur = mb_pyramid_sample(img, x + t * nx, y + t * ny);
        g[j] = cur - prev;
        norm += fabs(g[j]);
        prev = cur;
    }
    if (norm > 0.0) {
        double s = 1.0 / norm;
        for (int j = 0; j < p; j++)
            g[j] *= s;
    }
    return norm;
}

/* ---- model ------------------------------------------------------------ */

static size_t packed_len(int p)
{
    return (size_t)p * (size_t)(p + 1) / 2;
}

void mb_profile_model_close(mb_profile_model *m)
{
    if (!m)
        return;
    free(m->mean);
    free(m->cov);
    free(m->chol);
    free(m);
}

/* Cholesky factor of the p x p column-major SPD matrix a into packed rows
   (see the top of the file). Returns MB_ENUMERIC when a is not positive
   definite. */
static int cholesky_packed(const double *a, int p, double *l)
{
    for (int i = 0; i < p; i++) {
        double *ri = l + (size_t)i * (i + 1) / 2;
        for (int j = 0; j <= i; j++) {
            const double *rj = l + (size_t)j * (j + 1) / 2;
            double s = a[i + (size_t)j * p];
            for (int q = 0; q < j; q++)
                s -= ri[q] * rj[q];
            if (j < i) {
                ri[j] = s * rj[j]; /* rj[j] holds 1 / L_jj */
            } else {
                if (!(s > 0.0) || !isfinite(s))
                    return MB_ENUMERIC;
                ri[i] = 1.0 / sqrt(s);
            }
        }
    }
    return MB_OK;
}

static int model_alloc(const mb_layout *layout, const mb_profile_params *p,
                       mb_profile_model **out)
{
    mb_profile_model *m = calloc(1, sizeof *m);
    if (!m)
        return MB_ENOMEM;
    m->layout = *layout;
    m->params = *p;
    m->p = 2 * p->half_len + 1;
    size_t cells = (size_t)p->levels * (size_t)layout->n_points;
    m->mean = malloc(cells * (size_t)m->p * sizeof *m->mean);
    m->cov = malloc(cells * (size_t)m->p * (size_t)m->p * sizeof *m->cov);
    m->chol = malloc(cells * packed_len(m->p) * sizeof *m->chol);
    if (!m->mean || !m->cov || !m->chol) {
        mb_profile_model_close(m);
        return MB_ENOMEM;
    }
    *out = m;
    return MB_OK;
}

/* Factorise every covariance of m. */
static int model_factorise(mb_profile_model *m, char *err)
{
    const int p = m->p;
    const size_t cells = (size_t)m->params.levels * (size_t)m->layout.n_points;
    for (size_t c = 0; c < cells; c++) {
        if (cholesky_packed(m->cov + c * (size_t)p * p, p,
                            m->chol + c * packed_len(p)) != MB_OK)
            return mb_err_set(err, MB_ENUMERIC,
                              "profile covariance of level %d, landmark %d "
                              "is not positive definite",
                              (int)(c / (size_t)m->layout.n_points),
                              (int)(c % (size_t)m->layout.n_points));
    }
    return MB_OK;
}

int mb_profile_model_create(const mb_layout *layout,
                            const mb_profile_params *p,
                            const mb_profile_stats *stats, const double *means,
                            const double *covs, mb_profile_model **out,
                            char *err)
{
    if (out)
        *out = NULL;
    if (!layout || !p || !stats || !means || !covs || !out)
        return mb_err_set(err, MB_EINVAL, "profile model: missing argument");
    int rc = check_layout_params(layout, p, "profile model", err);
    if (rc < 0)
        return rc;
    if (stats->n_samples < 2)
        return mb_err_set(err, MB_EINVAL,
                          "profile model: needs at least 2 training frames, "
                          "has %d", stats->n_samples);
    if (!isfinite(stats->part_grey) || !isfinite(stats->back_grey) ||
        !isfinite(stats->area) || !isfinite(stats->size) ||
        !(stats->area > 0.0) || !(stats->size > 0.0))
        return mb_err_set(err, MB_ENUMERIC,
                          "profile model: grey levels, area and size must be "
                          "finite, area and size positive");
    const int pl = 2 * p->half_len + 1;
    const size_t cells = (size_t)p->levels * (size_t)layout->n_points;
    for (size_t c = 0; c < cells; c++) {
        const double *mu = means + c * (size_t)pl;
        const double *a = covs + c * (size_t)pl * pl;
        for (int i = 0; i < pl; i++) {
            if (!isfinite(mu[i]))
                return mb_err_set(err, MB_ENUMERIC,
                                  "profile model: mean of level %d, landmark "
                                  "%d is not finite",
                                  (int)(c / (size_t)layout->n_points),
                                  (int)(c % (size_t)layout->n_points));
            for (int j = 0; j < pl; j++) {
                double aij = a[i + (size_t)j * pl], aji = a[j + (size_t)i * pl];
                double scale = fabs(a[i + (size_t)i * pl]) + fabs(a[j + (size_t)j * pl]);
                if (!isfinite(aij) || fabs(aij - aji) > 1e-9 * scale)
                    return mb_err_set(err, MB_ENUMERIC,
                                      "profile model: covariance of level "
                                      "%d, landmark %d is not finite and "
                                      "symmetric",
                                      (int)(c / (size_t)layout->n_points),
                                      (int)(c % (size_t)layout->n_points));
            }
        }
    }
    mb_profile_model *m = NULL;
    rc = model_alloc(layout, p, &m);
    if (rc != MB_OK)
        return mb_err_set(err, rc, "profile model: out of memory");
    m->stats = *stats;
    memcpy(m->mean, means, cells * (size_t)pl * sizeof *m->mean);
    memcpy(m->cov, covs, cells * (size_t)pl * pl * sizeof *m->cov);
    rc = model_factorise(m, err);
    if (rc != MB_OK)
        goto fail;
    *out = m;
    return MB_OK;
fail:
    mb_profile_model_close(m);
    return rc;
}

const mb_layout *mb_profile_model_layout(const mb_profile_model *m)
{
    return m ? &m->layout : NULL;
}

const mb_profile_params *mb_profile_model_params(const mb_profile_model *m)
{
    return m ? &m->params : NULL;
}

const mb_profile_stats *mb_profile_model_stats(const mb_profile_model *m)
{
    return m ? &m->stats : NULL;
}

int mb_profile_model_len(const mb_profile_model *m)
{
    return m ? m->p : 0;
}

static int cell_index(const mb_profile_model *m, int level, int landmark)
{
    if (!m || level < 0 || level >= m->params.levels || landmark < 0 ||
        landmark >= m->layout.n_points)
        return -1;
    return level * m->layout.n_points + landmark;
}

const double *mb_profile_model_mean(const mb_profile_model *m, int level,
                                    int landmark)
{
    int c = cell_index(m, level, landmark);
    return c < 0 ? NULL : m->mean + (size_t)c * m->p;
}

const double *mb_profile_model_cov(const mb_profile_model *m, int level,
                                   int landmark)
{
    int c = cell_index(m, level, landmark);
    return c < 0 ? NULL : m->cov + (size_t)c * m->p * m->p;
}

double mb_profile_cost(const mb_profile_model *m, int level, int landmark,
                       const double *g, double *work)
{
    const int p = m->p;
    const size_t c = (size_t)level * m->layout.n_points + (size_t)landmark;
    const double *mu = m->mean + c * p;
    const double *l = m->chol + c * packed_len(p);
    double f = 0.0;
    for (int i = 0; i < p; i++) {
        double s = g[i] - mu[i];
        for (int q = 0; q < i; q++)
            s -= l[q] * work[q];
        s *= l[i];
        work[i] = s;
        f += s * s;
        l += i + 1;
    }
    return f;
}

/* ---- learner ---------------------------------------------------------- */

void mb_profile_learner_close(mb_profile_learner *l)
{
    if (!l)
        return;
    free(l->mean);
    free(l->m2);
    free(l->frame);
    free(l->nrm);
    free(l);
}

int mb_profile_learner_create(const mb_layout *layout,
                              const mb_profile_params *p,
                              mb_profile_learner **out, char *err)
{
    mb_profile_params def;
    if (out)
        *out = NULL;
    if (!p) {
        mb_profile_params_default(&def);
        p = &def;
    }
    if (!layout || !out)
        return mb_err_set(err, MB_EINVAL, "profile learner: missing argument");
    int rc = check_layout_params(layout, p, "profile learner", err);
    if (rc < 0)
        return rc;
    mb_profile_learner *l = calloc(1, sizeof *l);
    if (!l)
        return mb_err_set(err, MB_ENOMEM, "profile learner: out of memory");
    l->layout = *layout;
    l->params = *p;
    l->p = 2 * p->half_len + 1;
    l->n = layout->n_points;
    size_t cells = (size_t)p->levels * (size_t)l->n;
    l->mean = calloc(cells * (size_t)l->p, sizeof *l->mean);
    l->m2 = calloc(cells * (size_t)l->p * l->p, sizeof *l->m2);
    l->frame = malloc(cells * (size_t)l->p * sizeof *l->frame);
    l->nrm = malloc(2 * (size_t)l->n * sizeof *l->nrm);
    if (!l->mean || !l->m2 || !l->frame || !l->nrm)
        goto fail;
    *out = l;
    return MB_OK;
fail:
    mb_profile_learner_close(l);
    return mb_err_set(err, MB_ENOMEM, "profile learner: out of memory");
}

int mb_profile_learner_count(const mb_profile_learner *l)
{
    return l ? l->count : 0;
}

int mb_profile_learner_add(mb_profile_learner *l, const mb_pyramid *pyr,
                           const double *shape, char *err)
{
    if (!l || !pyr || !shape)
        return mb_err_set(err, MB_EINVAL, "profile learner: missing argument");
    if (mb_pyramid_levels(pyr) < l->params.levels)
        return mb_err_set(err, MB_ESIZE,
                          "profile learner: the pyramid has %d levels, the "
                          "profiles need %d",
                          mb_pyramid_levels(pyr), l->params.levels);
    const int n = l->n, p = l->p, k = l->params.half_len;
    for (int i = 0; i < 2 * n; i++)
        if (!isfinite(shape[i]))
            return mb_err_set(err, MB_ENUMERIC,
                              "profile learner: landmark %d is not finite",
                              i / 2);
    if (mb_profile_normals(&l->layout, shape, l->nrm) != MB_OK)
        return mb_err_set(err, MB_EDEGENERATE,
                          "profile learner: an outline has no area or two "
                          "coincident landmarks");

    /* Sample everything first so that a refused frame changes nothing. */
    for (int lev = 0; lev < l->params.levels; lev++) {
        const mb_image *img = mb_pyramid_level(pyr, lev);
        const double s = 1.0 / (double)(1 << lev);
        for (int i = 0; i < n; i++)
            mb_profile_sample(img, shape[2 * i] * s, shape[2 * i + 1] * s,
                              l->nrm[2 * i], l->nrm[2 * i + 1], k,
                              l->frame + ((size_t)lev * n + i) * p);
    }

    /* Part and background grey 4 px either side of the outline; area and
       size of the landmark shape. */
    const mb_image *img0 = mb_pyramid_level(pyr, 0);
    double part = 0.0, back = 0.0, cx = 0.0, cy = 0.0;
    for (int i = 0; i < n; i++) {
        double x = shape[2 * i], y = shape[2 * i + 1];
        double nx = l->nrm[2 * i], ny = l->nrm[2 * i + 1];
        part += mb_pyramid_sample(img0, x - 4.0 * nx, y - 4.0 * ny);
        back += mb_pyramid_sample(img0, x + 4.0 * nx, y + 4.0 * ny);
        cx += x;
        cy += y;
    }
    cx /= n;
    cy /= n;
    double ss = 0.0;
    for (int i = 0; i < n; i++)
        ss += (shape[2 * i] - cx) * (shape[2 * i] - cx) +
              (shape[2 * i + 1] - cy) * (shape[2 * i + 1] - cy);
    double area = 0.0;
    for (int o = 0, first = 0; o < l->layout.n_outlines; o++) {
        double a = 0.5 * fabs(twice_area(shape + 2 * first, l->layout.counts[o]));
        area += o == 0 ? a : -a;
        first += l->layout.counts[o];
    }

    /* Welford update of every mean and co-moment. */
    l->count++;
    const double inv = 1.0 / l->count;
    const size_t cells = (size_t)l->params.levels * (size_t)n;
    double delta[2 * MB_PROFILE_MAX_HALF + 1];
    for (size_t c = 0; c < cells; c++) {
        const double *g = l->frame + c * p;
        double *mu = l->mean + c * p;
        double *m2 = l->m2 + c * (size_t)p * p;
        for (int i = 0; i < p; i++) {
            delta[i] = g[i] - mu[i];
            mu[i] += delta[i] * inv;
        }
        for (int j = 0; j < p; j++) {
            double after = g[j] - mu[j];
            for (int i = 0; i < p; i++)
                m2[i + (size_t)j * p] += delta[i] * after;
        }
    }
    l->sum_part += part / n;
    l->sum_back += back / n;
    l->sum_area += area;
    l->sum_size += sqrt(ss);
    return MB_OK;
}

int mb_profile_learner_finish(const mb_profile_learner *l,
                              mb_profile_model **out, char *err)
{
    if (out)
        *out = NULL;
    if (!l || !out)
        return mb_err_set(err, MB_EINVAL, "profile learner: missing argument");
    if (l->count < 2)
        return mb_err_set(err, MB_EDEGENERATE,
                          "profile learner: needs at least 2 training "
                          "frames, has %d", l->count);
    mb_profile_model *m = NULL;
    int rc = model_alloc(&l->layout, &l->params, &m);
    if (rc != MB_OK)
        return mb_err_set(err, rc, "profile learner: out of memory");
    const int p = l->p;
    const size_t cells = (size_t)l->params.levels * (size_t)l->n;
    const double sh = l->params.shrink, fl = l->params.floor;
    memcpy(m->mean, l->mean, cells * (size_t)p * sizeof *m->mean);
    for (size_t c = 0; c < cells; c++) {
        const double *m2 = l->m2 + c * (size_t)p * p;
        double *a = m->cov + c * (size_t)p * p;
        double tr = 0.0;
        for (int i = 0; i < p; i++)
            tr += m2[i + (size_t)i * p];
        tr /= (l->count - 1);
        for (int j = 0; j < p; j++)
            for (int i = 0; i < p; i++) {
                /* symmetrise: the two halves of M2 agree to rounding */
                double s = 0.5 * (m2[i + (size_t)j * p] + m2[j + (size_t)i * p]) /
                           (l->count - 1);
                a[i + (size_t)j * p] = (1.0 - sh) * s;
            }
        for (int i = 0; i < p; i++)
            a[i + (size_t)i * p] += sh * tr / p + fl;
    }
    m->stats.n_samples = l->count;
    m->stats.part_grey = l->sum_part / l->count;
    m->stats.back_grey = l->sum_back / l->count;
    m->stats.area = l->sum_area / l->count;
    m->stats.size = l->sum_size / l->count;
    rc = model_factorise(m, err);
    if (rc != MB_OK)
        goto fail;
    *out = m;
    return MB_OK;
fail:
    mb_profile_model_close(m);
    return rc;
}
