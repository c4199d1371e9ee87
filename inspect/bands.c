/*
 * inspect/bands.c - acceptance limits learned from the good set, leave one
 * out. The statistics and their sources are described in bands.h.
 *
 * Leave-one-out is done on the aligned shapes of one GPA of all parts: for
 * part i the mean and modes come from a PCA of the other m - 1 aligned
 * shapes, and part i is aligned again onto that mean (similarity, then the
 * tangent-space projection) before it is scored. Re-running the whole GPA
 * per part would change the frame by a fraction of the alignment noise and
 * cost m times as much.
 */
#include "bands.h"

#include "error.h"
#include "procrustes.h"
#include "profile.h"
#include "stats.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

void mb_bands_params_default(mb_bands_params *p)
{
    p->alpha = 0.002;
    p->max_judged = 0;
    p->local_window = 3;
    p->local_floor = 0.4;
    p->screen_alpha = 1e-4;
}

void mb_bands_scores_free(mb_bands_scores *s)
{
    if (!s)
        return;
    free(s->size);
    free(s->t2);
    free(s->spe);
    free(s->mode_sd);
    free(s->local_ratio);
    free(s->local_worst);
    free(s->fails);
    free(s->outlier);
    memset(s, 0, sizeof *s);
}

/* Everything the limits are derived from: leave-one-out scores. */
typedef struct {
    int m, k, nj, n;
    const mb_layout *layout;
    double *size, *t2, *spe;
    double *z;    /* m x k standardised mode values */
    double *dev;  /* m x n local normal deviations, px */
    double *sq;   /* n: sum over parts of dev^2 */
} loo_scores;

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* Median of v[0..n) without index excl (-1: none); tmp has n slots. */
static double median_excl(const double *v, int n, int excl, double *tmp)
{
    int c = 0;
    for (int i = 0; i < n; i++)
        if (i != excl)
            tmp[c++] = v[i];
    qsort(tmp, (size_t)c, sizeof *tmp, cmp_double);
    return c % 2 ? tmp[c / 2] : 0.5 * (tmp[c / 2 - 1] + tmp[c / 2]);
}

/* Landmark index of the neighbour `off` away on the same closed outline. */
static int neighbour(const mb_layout *l, int j, int off)
{
    int first = 0;
    for (int o = 0; o < l->n_outlines; o++) {
        if (j < first + l->counts[o]) {
            int c = l->counts[o];
            int r = ((j - first + off) % c + c) % c;
            return first + r;
        }
        first += l->counts[o];
    }
    return j;
}

/* Limits from the scores of every part but excl (-1: all) at target alpha. */
static void derive(const loo_scores *s, int excl, double alpha,
                   const mb_bands_params *p, mb_limits *lim, double *tmp)
{
    int mm = excl >= 0 ? s->m - 1 : s->m;
    int n_checks = 4 + s->nj;
    double a = alpha / n_checks, infl = sqrt(1.0 + 1.0 / mm);
    double tq = mb_stats_t_quantile(1.0 - a / 2.0, mm - 1);

    lim->alpha = alpha;
    lim->n_train = mm;
    lim->n_modes = s->k;
    lim->n_judged = s->nj;

    double sm = 0.0, ss = 0.0;
    for (int i = 0; i < s->m; i++)
        if (i != excl)
            sm += s->size[i];
    sm /= mm;
    for (int i = 0; i < s->m; i++)
        if (i != excl)
            ss += (s->size[i] - sm) * (s->size[i] - sm);
    double sd = sqrt(ss / (mm - 1));
    lim->size_mean = sm;
    lim->size_lo = sm - tq * sd * infl;
    lim->size_hi = sm + tq * sd * infl;
    lim->size_sd = sd;

    for (int q = 0; q < s->nj; q++) {
        double acc = 0.0;
        for (int i = 0; i < s->m; i++)
            if (i != excl)
                acc += s->z[i * s->k + q] * s->z[i * s->k + q];
        /* the leave-one-out spread only ever widens the band: below 1 it
           is the mode order changing between the leave-one-out models
           (close eigenvalues), not a mode that varies less */
        double sq = sqrt(acc / mm);
        lim->mode_band[q] = tq * (sq > 1.0 ? sq : 1.0) * infl;
    }

    double ucl = mb_stats_t2_limit_new(a, s->k, mm);
    double fac = (double)s->k * (mm + 1) * (mm - 1) / ((double)mm * (mm - s->k));
    double med_theory = fac * mb_stats_f_quantile(0.5, s->k, mm - s->k);
    double med_loo = median_excl(s->t2, s->m, excl, tmp);
    lim->t2_phase2 = ucl;
    lim->t2_inflation = med_loo > med_theory ? med_loo / med_theory : 1.0;
    lim->t2_limit = ucl * lim->t2_inflation;

    double mu = 0.0, var = 0.0;
    for (int i = 0; i < s->m; i++)
        if (i != excl)
            mu += s->spe[i];
    mu /= mm;
    for (int i = 0; i < s->m; i++)
        if (i != excl)
            var += (s->spe[i] - mu) * (s->spe[i] - mu);
    var /= (mm - 1);
    if (var > 0.0 && mu > 0.0) {
        double g = var / (2.0 * mu), h = 2.0 * mu * mu / var;
        lim->spe_limit = g * mb_stats_chi2_quantile_upper(a, h);
    } else {
        lim->spe_limit = 2.0 * mu;
    }
    /* The moment fit above takes mean and variance of a few dozen values
       as exact, and a scaled chi-square's tail is light. A prediction
       limit for one new part on the log scale (where the residual of good
       parts is close to normal and its tail heavier) with Student's t for
       the small sample, as the size band does, is the floor. */
    double lm = 0.0, lv = 0.0;
    int nl = 0;
    for (int i = 0; i < s->m; i++)
        if (i != excl && s->spe[i] > 0.0) {
            lm += log(s->spe[i]);
            nl++;
        }
    if (nl >= 3) {
        lm /= nl;
        for (int i = 0; i < s->m; i++)
            if (i != excl && s->spe[i] > 0.0)
                lv += (log(s->spe[i]) - lm) * (log(s->spe[i]) - lm);
        double lsd = sqrt(lv / (nl - 1));
        double tl1 = mb_stats_t_quantile(1.0 - a, nl - 1);
        double pl = exp(lm + tl1 * lsd * sqrt(1.0 + 1.0 / nl));
        if (pl > lim->spe_limit)
            lim->spe_limit = pl;
    }

    /* Per landmark: the spread pooled over +-w neighbours (stable), but
       never below the landmark's own spread or its next neighbours' (a
       corner or a cut end varies more than the arc beside it, and pooling
       alone would hide that). Quantile with the degrees of freedom of the
       own estimate (m - 1), the conservative of the two. */
    int w = p->local_window;
    int pooled = mm * (2 * w + 1);
    double tl = mb_stats_t_quantile(1.0 - a / (2.0 * s->n), mm - 1) * infl;
    for (int j = 0; j < s->n; j++) {
        double acc = 0.0, own = 0.0;
        for (int off = -w; off <= w; off++) {
            int jj = neighbour(s->layout, j, off);
            double v = s->sq[jj];
            if (excl >= 0)
                v -= s->dev[(size_t)excl * s->n + jj] * s->dev[(size_t)excl * s->n + jj];
            if (v < 0)
                v = 0;
            acc += v;
            if (off >= -1 && off <= 1 && v / mm > own)
                own = v / mm;
        }
        double vj = acc / pooled;
        if (own > vj)
            vj = own;
        double sig = sqrt(vj);
        lim->local_sigma[j] = sig;
        lim->local_limit[j] = fmax(p->local_floor, tl * sig);
    }
}

/* Which checks part i fails against lim; worst local ratio and landmark. */
static int judge(const loo_scores *s, int i, const mb_limits *lim,
                 double *ratio, int *worst)
{
    int f = 0;
    if (s->size[i] < lim->size_lo || s->size[i] > lim->size_hi)
        f |= MB_BAND_SIZE;
    for (int q = 0; q < s->nj; q++)
        if (fabs(s->z[i * s->k + q]) > lim->mode_band[q])
            f |= MB_BAND_MODE;
    if (s->t2[i] > lim->t2_limit)
        f |= MB_BAND_T2;
    if (s->spe[i] > lim->spe_limit)
        f |= MB_BAND_SPE;
    double r = 0.0;
    int wj = 0;
    for (int j = 0; j < s->n; j++) {
        double v = fabs(s->dev[(size_t)i * s->n + j]) / lim->local_limit[j];
        if (v > r) {
            r = v;
            wj = j;
        }
    }
    if (r > 1.0)
        f |= MB_BAND_LOCAL;
    if (ratio)
        *ratio = r;
    if (worst)
        *worst = wj;
    return f;
}

/* Score every part leave-one-out. */
static int score_all(const double *shapes, int ld, loo_scores *s, char *err)
{
    int m = s->m, n = s->n, d = 2 * n, k = s->k, rc;
    double *aligned = malloc((size_t)d * m * sizeof *aligned);
    double *others = malloc((size_t)d * (m - 1) * sizeof *others);
    double *gmean = malloc((size_t)d * sizeof *gmean);
    double *y = malloc((size_t)d * sizeof *y);
    double *nrm = malloc((size_t)d * sizeof *nrm);
    mb_pca pca;
    memset(&pca, 0, sizeof pca);
    if (!aligned || !others || !gmean || !y || !nrm) {
        rc = mb_err_set(err, MB_ENOMEM, "out of memory while learning the limits");
        goto done;
    }
    mb_gpa_params gp;
    mb_gpa_params_default(&gp);
    rc = mb_gpa_align(shapes, ld, n, m, &gp, aligned, d, gmean, NULL, NULL, err);
    if (rc < 0)
        goto done;
    mb_pca_params pp;
    mb_pca_params_default(&pp);
    pp.fixed_modes = k;
    for (int i = 0; i < m; i++) {
        const double *raw = shapes + (size_t)i * ld;
        double cx = 0.0, cy = 0.0, r2 = 0.0;
        for (int j = 0; j < n; j++) {
            cx += raw[2 * j];
            cy += raw[2 * j + 1];
        }
        cx /= n;
        cy /= n;
        for (int j = 0; j < n; j++)
            r2 += (raw[2 * j] - cx) * (raw[2 * j] - cx) +
                  (raw[2 * j + 1] - cy) * (raw[2 * j + 1] - cy);
        s->size[i] = sqrt(r2 / n);

        for (int c = 0, col = 0; c < m; c++)
            if (c != i)
                memcpy(others + (size_t)(col++) * d, aligned + (size_t)c * d,
                       (size_t)d * sizeof *others);
        mb_pca_free(&pca);
        rc = mb_pca_compute(others, d, d, m - 1, &pp, &pca, err);
        if (rc < 0)
            goto done;
        if (pca.n_modes < k) {
            rc = mb_err_set(err, MB_EDEGENERATE,
                            "leaving part %d out leaves only %d modes of "
                            "variation, fewer than the %d kept",
                            i + 1, pca.n_modes, k);
            goto done;
        }
        mb_pose pose;
        rc = mb_procrustes_fit(raw, pca.mean, n, NULL, &pose, NULL);
        if (rc < 0) {
            mb_err_set(err, rc, "part %d cannot be aligned to the others", i + 1);
            goto done;
        }
        mb_pose_apply(&pose, raw, n, y);
        double ym = 0.0, mm2 = 0.0;
        for (int c = 0; c < d; c++) {
            ym += y[c] * pca.mean[c];
            mm2 += pca.mean[c] * pca.mean[c];
        }
        if (!(ym > 0.0)) {
            rc = mb_err_set(err, MB_EDEGENERATE, "part %d is degenerate", i + 1);
            goto done;
        }
        double tscale = mm2 / ym; /* tangent-space projection */
        for (int c = 0; c < d; c++)
            y[c] = y[c] * tscale - pca.mean[c];
        double t2 = 0.0;
        for (int q = 0; q < k; q++) {
            const double *u = pca.modes + (size_t)q * d;
            double b = 0.0;
            for (int c = 0; c < d; c++)
                b += u[c] * y[c];
            for (int c = 0; c < d; c++)
                y[c] -= b * u[c];
            double z = b / sqrt(pca.eig[q]);
            s->z[i * k + q] = z;
            t2 += z * z;
        }
        double spe = 0.0;
        for (int c = 0; c < d; c++)
            spe += y[c] * y[c];
        s->t2[i] = t2;
        s->spe[i] = spe;
        /* residual per landmark along the normal, back in px */
        /* normals from the part into the background (fit/profile.h), the
           sign the search and the verdict use: + = material added */
        mb_profile_normals(s->layout, pca.mean, nrm);
        double px = 1.0 / (pose.scale * tscale);
        for (int j = 0; j < n; j++) {
            double v = (y[2 * j] * nrm[2 * j] + y[2 * j + 1] * nrm[2 * j + 1]) * px;
            s->dev[(size_t)i * n + j] = v;
            s->sq[j] += v * v;
        }
    }
    rc = MB_OK;
done:
    mb_pca_free(&pca);
    free(nrm);
    free(y);
    free(gmean);
    free(others);
    free(aligned);
    return rc;
}

int mb_bands_learn(const double *shapes, int ld, const mb_layout *layout,
                   int m, int k, const mb_bands_params *p, mb_limits *lim,
                   mb_bands_scores *scores, char *err)
{
    mb_bands_params defp;
    if (!p) {
        mb_bands_params_default(&defp);
        p = &defp;
    }
    if (!shapes || !layout || !lim || mb_layout_check(layout) < 0)
        return mb_err_set(err, MB_EINVAL, "bad arguments to the band learner");
    memset(lim, 0, sizeof *lim);
    if (scores)
        memset(scores, 0, sizeof *scores);
    if (m < 5)
        return mb_err_set(err, MB_EINVAL,
                          "%d good parts are too few to learn limits from; "
                          "at least 5 are needed", m);
    if (k < 1 || k > m - 2)
        return mb_err_set(err, MB_EINVAL,
                          "%d modes cannot be judged with %d good parts "
                          "(at most %d)", k, m, m - 2);
    int n = layout->n_points;
    loo_scores s;
    memset(&s, 0, sizeof s);
    s.m = m;
    s.k = k;
    s.n = n;
    s.layout = layout;
    int nj = p->max_judged > 0 ? p->max_judged : m / 8;
    if (nj < 1)
        nj = 1;
    if (nj > k)
        nj = k;
    if (nj > MB_MAX_JUDGED_MODES)
        nj = MB_MAX_JUDGED_MODES;
    s.nj = nj;
    s.size = calloc((size_t)m, sizeof *s.size);
    s.t2 = calloc((size_t)m, sizeof *s.t2);
    s.spe = calloc((size_t)m, sizeof *s.spe);
    s.z = calloc((size_t)m * k, sizeof *s.z);
    s.dev = calloc((size_t)m * n, sizeof *s.dev);
    s.sq = calloc((size_t)n, sizeof *s.sq);
    double *tmp = calloc((size_t)m, sizeof *tmp);
    mb_limits scratch;
    memset(&scratch, 0, sizeof scratch);
    int rc = MB_ENOMEM;
    if (!s.size || !s.t2 || !s.spe || !s.z || !s.dev || !s.sq || !tmp ||
        mb_limits_alloc(&scratch, n) < 0 || mb_limits_alloc(lim, n) < 0) {
        mb_err_set(err, rc, "out of memory while learning the limits");
        goto fail;
    }
    if ((rc = score_all(shapes, ld, &s, err)) < 0)
        goto fail;
    derive(&s, -1, p->alpha, p, lim, tmp);

    if (scores) {
        scores->m = m;
        scores->n_judged = nj;
        scores->size = malloc((size_t)m * sizeof(double));
        scores->t2 = malloc((size_t)m * sizeof(double));
        scores->spe = malloc((size_t)m * sizeof(double));
        scores->mode_sd = malloc((size_t)m * nj * sizeof(double));
        scores->local_ratio = malloc((size_t)m * sizeof(double));
        scores->local_worst = malloc((size_t)m * sizeof(int));
        scores->fails = malloc((size_t)m * sizeof(int));
        scores->outlier = malloc((size_t)m * sizeof(int));
        if (!scores->size || !scores->t2 || !scores->spe || !scores->mode_sd ||
            !scores->local_ratio || !scores->local_worst || !scores->fails ||
            !scores->outlier) {
            rc = mb_err_set(err, MB_ENOMEM, "out of memory for the scores");
            goto fail;
        }
        memcpy(scores->size, s.size, (size_t)m * sizeof(double));
        memcpy(scores->t2, s.t2, (size_t)m * sizeof(double));
        memcpy(scores->spe, s.spe, (size_t)m * sizeof(double));
        for (int i = 0; i < m; i++)
            for (int q = 0; q < nj; q++)
                scores->mode_sd[i * nj + q] = s.z[i * k + q];
    }
    int rejects = 0;
    for (int i = 0; i < m; i++) {
        double ratio;
        int worst;
        derive(&s, i, p->alpha, p, &scratch, tmp);
        int f = judge(&s, i, &scratch, &ratio, &worst);
        rejects += f != 0;
        if (scores) {
            scores->fails[i] = f;
            scores->local_ratio[i] = ratio;
            scores->local_worst[i] = worst;
            derive(&s, i, p->screen_alpha, p, &scratch, tmp);
            scores->outlier[i] = judge(&s, i, &scratch, NULL, NULL) != 0;
        }
    }
    lim->loo_rejects = rejects;
    lim->frr_loo = (double)rejects / m;
    /* one-sided 95 % Clopper-Pearson upper bound of a binomial proportion */
    lim->frr_upper = rejects >= m ? 1.0
                                  : mb_stats_beta_quantile(0.95, rejects + 1, m - rejects);
    {
        mb_pca pca;
        mb_pca_params pp;
        mb_pca_params_default(&pp);
        pp.fixed_modes = k;
        double *al = malloc((size_t)2 * n * m * sizeof *al);
        double *mean = malloc((size_t)2 * n * sizeof *mean);
        mb_gpa_params gp;
        mb_gpa_params_default(&gp);
        memset(&pca, 0, sizeof pca);
        lim->spe_jm = 0.0;
        if (al && mean &&
            mb_gpa_align(shapes, ld, n, m, &gp, al, 2 * n, mean, NULL, NULL, NULL) == 0 &&
            mb_pca_compute(al, 2 * n, 2 * n, m, &pp, &pca, NULL) == 0) {
            mb_q_limit q;
            if (mb_stats_q_limit_jm(pca.eig, pca.n_eig, k, p->alpha / (4 + nj), &q) == 0) {
                lim->spe_jm = q.q;
                /* The residual spectrum in-sample is biased low but its
                   shape (how the residual spreads over the discarded
                   directions) is better determined by the whole spectrum
                   than by the variance of a few dozen leave-one-out values.
                   Scale the Jackson-Mudholkar limit by the ratio of the
                   mean leave-one-out residual to theta1 and keep the wider
                   of the two limits. */
                double mu = 0.0;
                for (int i = 0; i < m; i++)
                    mu += s.spe[i];
                mu /= m;
                if (q.theta1 > 0 && mu > q.theta1) {
                    double scaled = q.q * mu / q.theta1;
                    if (scaled > lim->spe_limit)
                        lim->spe_limit = scaled;
                }
            }
        }
        mb_pca_free(&pca);
        free(al);
        free(mean);
    }
    rc = MB_OK;
fail:
    if (rc < 0) {
        mb_limits_free(lim);
        if (scores)
            mb_bands_scores_free(scores);
    }
    mb_limits_free(&scratch);
    free(tmp);
    free(s.size);
    free(s.t2);
    free(s.spe);
    free(s.z);
    free(s.dev);
    free(s.sq);
    return rc;
}

int mb_bands_parts_advised(int m, int k, double alpha, double within)
{
    double chi = mb_stats_chi2_quantile_upper(alpha, k);
    for (int n = m; n <= 2000; n++) {
        if (n <= k + 1)
            continue;
        double ucl = mb_stats_t2_limit_new(alpha, k, n);
        if (isfinite(ucl) && ucl <= within * chi)
            return n;
    }
    return 0;
}
