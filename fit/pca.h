/*
 * fit/pca.h - principal component analysis of aligned shape vectors.
 *
 * Covariance S = 1/(m-1) sum (x_j - mean)(x_j - mean)^T. When the dimension
 * d = 2n is at most the number of samples m, S (d x d) is decomposed;
 * otherwise the small Gram matrix G = D^T D / (m-1) (m x m) is decomposed
 * and its eigenvectors are lifted (u = D v / sqrt((m-1) l)), which gives the
 * same non-zero eigenvalues and eigenvectors at a fraction of the cost. The
 * eigen-decomposition runs the steps of LAPACKE_dsyevr/dsyevx one by one
 * (dsytrd, dsterf, dstein or dstemr, dormtr) so that all eigenvalues but
 * only the k kept eigenvectors are computed from one tridiagonal reduction.
 * Eigenvalues come out sorted, largest first; each eigenvector's sign is
 * fixed so its largest-magnitude component is positive.
 */
#ifndef MB_PCA_H
#define MB_PCA_H

typedef struct {
    double variance_fraction; /**< keep the fewest modes explaining at least
                                   this fraction of the total variance;
                                   default 0.98; ignored when fixed_modes > 0 */
    int fixed_modes;          /**< > 0: keep exactly this many (capped at the
                                   rank); default 0 */
    double rank_tol;          /**< eigenvalues below rank_tol * largest count as
                                   zero and are never kept; default 1e-12 */
    int route;                /**< MB_PCA_AUTO (default): covariance when
                                   d <= m, Gram otherwise; MB_PCA_COVARIANCE
                                   or MB_PCA_GRAM force one (for tests) */
} mb_pca_params;

enum { MB_PCA_AUTO = 0, MB_PCA_COVARIANCE = 1, MB_PCA_GRAM = 2 };

typedef struct {
    int dim;          /**< d = 2n */
    int n_modes;      /**< k modes kept */
    int n_eig;        /**< eigenvalues stored: min(d, m - 1) */
    double *mean;     /**< d */
    double *modes;    /**< d x k column-major, ld = dim; orthonormal columns */
    double *eig;      /**< n_eig eigenvalues (variances), largest first, >= 0 */
    double total_var; /**< sum of all eigenvalues (trace of S) */
} mb_pca;

void mb_pca_params_default(mb_pca_params *p);

/**
 * PCA of m vectors of dimension d (column-major d x m, leading dimension ld).
 * out is filled with freshly allocated arrays; release with mb_pca_free.
 * All vectors count as equal when their RMS deviation from the mean is at
 * most 1e-10 times the norm of the mean (rounding noise).
 * Return value: 0; MB_EINVAL; MB_EDEGENERATE (m < 2 or all vectors equal);
 * MB_ENUMERIC (NaN/inf, or LAPACK failed); MB_ENOMEM.
 */
int mb_pca_compute(const double *x, int ld, int d, int m,
                   const mb_pca_params *p, mb_pca *out, char *err);

/**
 * The same as mb_pca_compute without the copy of the data: x is used as
 * scratch and holds the deviations x_j - mean on success (undefined after a
 * failure). For callers that own a temporary matrix (the model build).
 */
int mb_pca_compute_inplace(double *x, int ld, int d, int m,
                           const mb_pca_params *p, mb_pca *out, char *err);

/** Free the arrays of a PCA result and zero it. NULL-safe. */
void mb_pca_free(mb_pca *pca);

#endif
