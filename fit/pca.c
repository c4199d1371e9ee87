/*
 * fit/pca.c - principal component analysis of aligned shape vectors, as in
 * the point distribution model of Cootes, Taylor, Cooper, Graham, CVIU
 * 61(1), 1995, section 3.3.
 *
 * With D = [x_1 - mean, ..., x_m - mean] (d x m):
 *   covariance route (d <= m):  S = D D^T / (m-1), S u = l u;
 *   Gram route (m < d):         G = D^T D / (m-1), G v = l v, u = D v /
 * sqrt((m-1) l), since D^T D v = (m-1) l v gives D D^T (D v) = (m-1) l (D v)
 * and |D v|^2 = (m-1) l. Both give the same non-zero eigenvalues.
 *
 * The symmetric eigenproblem is solved in the steps LAPACK's dsyevr and
 * dsyevx take, called one by one so that the O(n^3) reduction is done once:
 * dsytrd (tridiagonal form), dsterf (all eigenvalues, needed first to choose
 * k), dstein (inverse iteration for the k kept eigenvectors only; dstemr if
 * it does not converge), dormtr (back to the full space). A single dsyevr
 * call cannot return all eigenvalues but only some vectors, and two calls
 * would reduce the matrix twice.
 */
#include "pca.h"

#include "error.h"
#include "mem_internal.h"

#include <cblas.h>
#include <lapacke.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

/* A spread below this fraction of the size of the mean is rounding noise:
   the vectors are all equal. */
#define SAME_VECTORS_REL 1e-10

void mb_pca_params_default(mb_pca_params *p)
{
    if (!p)
        return;
    p->variance_fraction = 0.98;
    p->fixed_modes = 0;
    p->rank_tol = 1e-12;
    p->route = MB_PCA_AUTO;
}

void mb_pca_free(mb_pca *pca)
{
    if (!pca)
        return;
    free(pca->mean);
    free(pca->modes);
    free(pca->eig);
    memset(pca, 0, sizeof *pca);
}

/* Number of modes to keep from eigenvalues sorted largest first. */
static int choose_k(const double *eig, int n_eig, double total,
                    const mb_pca_params *p, int *rank_out)
{
    int rank = 0;
    while (rank < n_eig && eig[rank] > p->rank_tol * eig[0])
        rank++;
    *rank_out = rank;
    if (p->fixed_modes > 0)
        return p->fixed_modes < rank ? p->fixed_modes : rank;
    double cum = 0.0;
    for (int i = 0; i < rank; i++) {
        cum += eig[i];
        if (cum >= p->variance_fraction * total)
            return i + 1;
    }
    return rank;
}

/* Largest-magnitude component positive (the first such if tied). */
static void fix_sign(double *u, int d)
{
    int imax = (int)cblas_idamax(d, u, 1);
    if (u[imax] < 0.0)
        cblas_dscal(d, -1.0, u, 1);
}

/*
 * The eigenvectors of the symmetric tridiagonal matrix (diag, off) of order
 * nn for its k largest eigenvalues w_top (ascending, as dsterf found them)
 * into z (nn x k, ascending order). Inverse iteration (dstein, the way
 * dsyevx uses it) is cheap for a few vectors; should it fail to converge,
 * the MRRR routine dstemr computes them instead. scratch: 3 nn doubles;
 * ibuf: 4k + 1 ints.
 */
static lapack_int tridiagonal_vectors(int nn, int k, const double *diag,
                                      const double *off, const double *w_top,
                                      double *z, double *scratch,
                                      lapack_int *ibuf)
{
    lapack_int *iblock = ibuf, *ifail = ibuf + k, *isplit = ibuf + 2 * k;
    for (int i = 0; i < k; i++)
        iblock[i] = 1; /* one block: the whole matrix */
    isplit[0] = nn;
    lapack_int info = LAPACKE_dstein(LAPACK_COL_MAJOR, nn, diag, off, k, w_top,
                                     iblock, isplit, z, nn, ifail);
    if (info == 0)
        return 0;
    double *d2 = scratch, *e2 = scratch + nn;
    memcpy(d2, diag, (size_t)nn * sizeof *d2);
    if (nn > 1)
        memcpy(e2, off, (size_t)(nn - 1) * sizeof *e2);
    e2[nn - 1] = 0.0;
    lapack_int found = 0;
    lapack_logical tryrac = 1;
    info = LAPACKE_dstemr(LAPACK_COL_MAJOR, 'V', 'I', nn, d2, e2, 0.0, 0.0,
                          nn - k + 1, nn, &found, scratch + 2 * nn, z, nn, k,
                          ibuf + k, &tryrac);
    return info == 0 && found != k ? -1000 : info;
}

static int check_params(const mb_pca_params *p, char *err)
{
    if (p->fixed_modes < 0 ||
        (p->fixed_modes == 0 &&
         !(p->variance_fraction > 0.0 && p->variance_fraction <= 1.0)) ||
        !(p->rank_tol >= 0.0 && p->rank_tol < 1.0) ||
        (p->route != MB_PCA_AUTO && p->route != MB_PCA_COVARIANCE &&
         p->route != MB_PCA_GRAM))
        return mb_err_set(err, MB_EINVAL,
                          "PCA: variance_fraction must be in (0, 1], "
                          "fixed_modes >= 0, rank_tol in [0, 1) and route one "
                          "of MB_PCA_*; got %g, %d, %g, %d",
                          p->variance_fraction, p->fixed_modes, p->rank_tol,
                          p->route);
    return MB_OK;
}

/* The arguments both entry points check, in this order; clears *out. */
static int check_data(const double *x, int ld, int d, int m, mb_pca *out,
                      char *err)
{
    if (!x || !out)
        return mb_err_set(err, MB_EINVAL,
                          "PCA: data and result must not be NULL");
    memset(out, 0, sizeof *out);
    if (d < 1 || ld < d)
        return mb_err_set(err, MB_EINVAL,
                          "PCA: dimension %d must be >= 1 and the leading "
                          "dimension %d >= it",
                          d, ld);
    if (m < 2)
        return mb_err_set(err, MB_EDEGENERATE,
                          "PCA needs at least 2 samples, got %d", m);
    return MB_OK;
}

int mb_pca_compute(const double *x, int ld, int d, int m,
                   const mb_pca_params *p, mb_pca *out, char *err)
{
    int rc = check_data(x, ld, d, m, out, err);
    if (rc < 0)
        return rc;
    double *copy = mb_big_alloc((size_t)d * (size_t)m * sizeof *copy);
    if (!copy)
        return mb_err_set(err, MB_ENOMEM,
                          "PCA: out of memory for %d vectors of dimension %d",
                          m, d);
    for (int j = 0; j < m; j++)
        memcpy(copy + (size_t)j * (size_t)d, x + (size_t)j * (size_t)ld,
               (size_t)d * sizeof *copy);
    rc = mb_pca_compute_inplace(copy, d, d, m, p, out, err);
    free(copy);
    return rc;
}

int mb_pca_compute_inplace(double *x, int ld, int d, int m,
                           const mb_pca_params *p, mb_pca *out, char *err)
{
    mb_pca_params defaults;
    if (!p) {
        mb_pca_params_default(&defaults);
        p = &defaults;
    }
    int rc = check_data(x, ld, d, m, out, err);
    if (rc < 0)
        return rc;
    rc = check_params(p, err);
    if (rc < 0)
        return rc;

    int gram = p->route == MB_PCA_GRAM || (p->route == MB_PCA_AUTO && m < d);
    int nn = gram ? m : d; /* order of the eigenproblem */
    int n_eig = d < m - 1 ? d : m - 1;
    size_t sd = (size_t)d, snn = (size_t)nn;

    double *mean = malloc(sd * sizeof *mean);
    double *a = mb_big_alloc(snn * snn * sizeof *a);
    double *tri = malloc(snn * 5 * sizeof *tri);
    double *w = malloc(3 * snn * sizeof *w);
    double *eig = malloc((size_t)n_eig * sizeof *eig);
    double *z = NULL, *modes = NULL;
    double *work = NULL;
    lapack_int *ibuf = NULL;
    if (!mean || !a || !tri || !w || !eig) {
        rc = mb_err_set(err, MB_ENOMEM,
                        "PCA: out of memory for %d vectors of dimension %d", m,
                        d);
        goto fail;
    }
    double *diag = tri, *off = tri + snn, *tau = tri + 2 * snn,
           *diag2 = tri + 3 * snn, *off2 = tri + 4 * snn;
    double *dev = x; /* centred in place */
    const size_t sld = (size_t)ld;

    /* Mean; a NaN or inf anywhere makes the sums non-finite, and only then
       is the culprit looked for. */
    memset(mean, 0, sd * sizeof *mean);
    for (int j = 0; j < m; j++) {
        const double *col = x + (size_t)j * sld;
        for (int i = 0; i < d; i++)
            mean[i] += col[i];
    }
    for (int i = 0; i < d; i++) {
        if (!isfinite(mean[i])) {
            for (int j = 0; j < m; j++)
                if (!isfinite(x[i + (size_t)j * sld])) {
                    rc = mb_err_set(err, MB_ENUMERIC,
                                    "PCA: vector %d has a NaN or infinite "
                                    "value at row %d",
                                    j, i);
                    goto fail;
                }
            rc = mb_err_set(err, MB_ENUMERIC, "PCA: the data overflow");
            goto fail;
        }
        mean[i] /= m;
    }
    double spread = 0.0;
    for (int j = 0; j < m; j++) {
        double *dj = dev + (size_t)j * sld;
        for (int i = 0; i < d; i++) {
            dj[i] -= mean[i];
            spread += dj[i] * dj[i];
        }
    }
    double mean_norm = cblas_dnrm2(d, mean, 1);
    spread = sqrt(spread / (m - 1));
    if (!isfinite(spread)) {
        rc = mb_err_set(err, MB_ENUMERIC, "PCA: the data overflow");
        goto fail;
    }
    if (!(spread > 0.0) || spread <= SAME_VECTORS_REL * mean_norm) {
        rc = mb_err_set(err, MB_EDEGENERATE,
                        "PCA: all %d vectors are the same (spread %.3g against "
                        "size %.3g): there is no variation to model",
                        m, spread, mean_norm);
        goto fail;
    }

    /* S = D D^T / (m-1) or G = D^T D / (m-1), lower triangle. */
    cblas_dsyrk(CblasColMajor, CblasLower, gram ? CblasTrans : CblasNoTrans, nn,
                gram ? d : m, 1.0 / (m - 1), dev, ld, 0.0, a, nn);

    /* Tridiagonal form (the _work interfaces: the data were checked for
       NaN/inf above, and the workspace is ours). */
    double wq = 0.0;
    lapack_int info = LAPACKE_dsytrd_work(LAPACK_COL_MAJOR, 'L', nn, a, nn,
                                          diag, off, tau, &wq, -1);
    lapack_int lwork = info == 0 && wq >= 1.0 ? (lapack_int)wq : 1;
    work = malloc((size_t)lwork * sizeof *work);
    if (!work) {
        rc = mb_err_set(err, MB_ENOMEM, "PCA: out of memory for LAPACK");
        goto fail;
    }
    info = LAPACKE_dsytrd_work(LAPACK_COL_MAJOR, 'L', nn, a, nn, diag, off, tau,
                               work, lwork);
    if (info == 0) {
        memcpy(diag2, diag, snn * sizeof *diag);
        if (nn > 1)
            memcpy(off2, off, (snn - 1) * sizeof *off);
        info = LAPACKE_dsterf(nn, diag2, off2); /* ascending, in diag2 */
    }
    if (info != 0) {
        rc = mb_err_set(err, MB_ENUMERIC,
                        "PCA: the eigenvalue routine failed (LAPACK info %d)",
                        (int)info);
        goto fail;
    }
    double total = 0.0;
    for (int i = 0; i < n_eig; i++) {
        double l = diag2[nn - 1 - i];
        eig[i] = l > 0.0 ? l : 0.0; /* rounding can make zeros negative */
        total += eig[i];
    }
    int rank, k = choose_k(eig, n_eig, total, p, &rank);
    if (k < 1) {
        rc = mb_err_set(err, MB_EDEGENERATE,
                        "PCA: the data have rank 0 at tolerance %g",
                        p->rank_tol);
        goto fail;
    }

    /* The k eigenvectors of the largest eigenvalues. */
    z = malloc(snn * (size_t)k * sizeof *z);
    ibuf = malloc((4 * (size_t)k + 1) * sizeof *ibuf);
    modes = malloc(sd * (size_t)k * sizeof *modes);
    if (!z || !ibuf || !modes) {
        rc = mb_err_set(err, MB_ENOMEM, "PCA: out of memory for %d modes", k);
        goto fail;
    }
    info = tridiagonal_vectors(nn, k, diag, off, diag2 + (nn - k), z, w, ibuf);
    if (info == 0) {
        info = LAPACKE_dormtr_work(LAPACK_COL_MAJOR, 'L', 'L', 'N', nn, k, a,
                                   nn, tau, z, nn, &wq, -1);
        lapack_int need = info == 0 && wq >= 1.0 ? (lapack_int)wq : 1;
        if (info == 0 && need > lwork) {
            free(work);
            lwork = need;
            work = malloc((size_t)lwork * sizeof *work);
            if (!work) {
                rc =
                    mb_err_set(err, MB_ENOMEM, "PCA: out of memory for LAPACK");
                goto fail;
            }
        }
        if (info == 0)
            info = LAPACKE_dormtr_work(LAPACK_COL_MAJOR, 'L', 'L', 'N', nn, k,
                                       a, nn, tau, z, nn, work, lwork);
    }
    if (info != 0) {
        rc = mb_err_set(err, MB_ENUMERIC,
                        "PCA: the eigenvector routine failed (LAPACK info %d)",
                        (int)info);
        goto fail;
    }
    /* Ascending order: reverse so that column 0 goes with eig[0]. */
    if (gram)
        cblas_dgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, d, k, m, 1.0,
                    dev, ld, z, nn, 0.0, modes, d);
    else
        memcpy(modes, z, sd * (size_t)k * sizeof *modes);
    for (int i = 0; i < k / 2; i++)
        cblas_dswap(d, modes + (size_t)i * sd, 1,
                    modes + (size_t)(k - 1 - i) * sd, 1);
    for (int i = 0; i < k; i++) {
        double *u = modes + (size_t)i * sd;
        if (gram) /* |D v|^2 = (m-1) l */
            cblas_dscal(d, 1.0 / sqrt((m - 1) * eig[i]), u, 1);
        fix_sign(u, d);
    }

    out->dim = d;
    out->n_modes = k;
    out->n_eig = n_eig;
    out->mean = mean;
    out->modes = modes;
    out->eig = eig;
    out->total_var = total;
    free(a);
    free(tri);
    free(w);
    free(z);
    free(ibuf);
    free(work);
    return MB_OK;

fail:
    free(mean);
    free(a);
    free(tri);
    free(w);
    free(eig);
    free(z);
    free(ibuf);
    free(work);
    free(modes);
    return rc;
}
