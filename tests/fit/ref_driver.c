/*
 * tests/fit/ref_driver.c - runs the fit/ shape-model core on numbers read
 * from a file and writes the results as JSON, for the reference checks
 * (ref_procrustes.py, ref_gpa.py, ref_pca.py) that compare them with scipy,
 * numpy and scikit-learn.
 *
 * usage: ref_driver MODE IN OUT
 * IN is plain text, numbers separated by white space:
 *   procrustes: pairs, then per pair n, src (2n values) and dst (2n values)
 *   gpa:        n m tangent tol max_iter, then m shapes of 2n values
 *   pca:        d m route fraction fixed, then m vectors of d values
 *               (d even; the scores, reconstructions, T^2 and SPE come from
 *               a shape model made of the PCA with mb_shape_model_create)
 *   build:      n m fraction, then m shapes (mb_shape_model_build, defaults)
 * OUT gets one JSON object; doubles printed with 17 significant digits.
 * Exit status 0, or 1 with a sentence on stderr.
 */
#include "error.h"
#include "pca.h"
#include "procrustes.h"
#include "shape_model.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

static FILE *in, *out;

static int read_num(double *v)
{
    return fscanf(in, "%lf", v) == 1 ? 0 : -1;
}

static double *read_array(size_t count)
{
    double *a = malloc((count ? count : 1) * sizeof *a);
    if (!a)
        return NULL;
    for (size_t i = 0; i < count; i++)
        if (read_num(&a[i]) < 0) {
            free(a);
            return NULL;
        }
    return a;
}

static void put_array(const char *name, const double *a, int count, int last)
{
    fprintf(out, "\"%s\": [", name);
    for (int i = 0; i < count; i++)
        fprintf(out, "%s%.17g", i ? ", " : "", a[i]);
    fprintf(out, "]%s\n", last ? "" : ",");
}

/* count columns of `len` values, column j at a + j * ld */
static void put_matrix(const char *name, const double *a, int len, int count,
                       int ld, int last)
{
    fprintf(out, "\"%s\": [", name);
    for (int j = 0; j < count; j++) {
        fprintf(out, "%s[", j ? ",\n  " : "");
        for (int i = 0; i < len; i++)
            fprintf(out, "%s%.17g", i ? ", " : "", a[(size_t)j * ld + i]);
        fprintf(out, "]");
    }
    fprintf(out, "]%s\n", last ? "" : ",");
}

static void put_pose(const mb_pose *p, int last)
{
    fprintf(out,
            "{\"tx\": %.17g, \"ty\": %.17g, \"scale\": %.17g, \"angle\": "
            "%.17g}%s",
            p->tx, p->ty, p->scale, p->angle, last ? "" : ", ");
}

static int run_procrustes(void)
{
    double hp;
    if (read_num(&hp) < 0 || hp < 1)
        return MB_EFORMAT;
    int pairs = (int)hp;
    fprintf(out, "{\"pairs\": [\n");
    for (int k = 0; k < pairs; k++) {
        double hn;
        if (read_num(&hn) < 0 || hn < 1)
            return MB_EFORMAT;
        int n = (int)hn;
        double *src = read_array(2 * (size_t)n),
               *dst = read_array(2 * (size_t)n);
        double *mapped = malloc(2 * (size_t)n * sizeof *mapped);
        if (!src || !dst || !mapped)
            return MB_EFORMAT;
        mb_pose pose;
        double res;
        int rc = mb_procrustes_fit(src, dst, n, NULL, &pose, &res);
        if (rc < 0) {
            fprintf(stderr, "ref_driver: pair %d: %s\n", k, mb_strerror(rc));
            return rc;
        }
        mb_pose_apply(&pose, src, n, mapped);
        fprintf(out, "{\"pose\": ");
        put_pose(&pose, 0);
        fprintf(out, "\"residual\": %.17g, ", res);
        put_array("mapped", mapped, 2 * n, 1);
        fprintf(out, "}%s\n", k + 1 < pairs ? "," : "");
        free(src);
        free(dst);
        free(mapped);
    }
    fprintf(out, "]}\n");
    return 0;
}

static int run_gpa(void)
{
    double hn, hm, ht, tol, hi;
    if (read_num(&hn) < 0 || read_num(&hm) < 0 || read_num(&ht) < 0 ||
        read_num(&tol) < 0 || read_num(&hi) < 0)
        return MB_EFORMAT;
    int n = (int)hn, m = (int)hm, d = 2 * n;
    double *x = read_array((size_t)d * (size_t)m);
    double *aligned = malloc((size_t)d * (size_t)m * sizeof *aligned);
    double *mean = malloc((size_t)d * sizeof *mean);
    mb_pose *poses = malloc((size_t)m * sizeof *poses);
    if (!x || !aligned || !mean || !poses)
        return MB_EFORMAT;
    mb_gpa_params p;
    mb_gpa_params_default(&p);
    p.tangent = (int)ht;
    p.tol = tol;
    p.max_iter = (int)hi;
    mb_gpa_info info;
    char err[MB_ERR_LEN] = "";
    int rc = mb_gpa_align(x, d, n, m, &p, aligned, d, mean, poses, &info, err);
    if (rc < 0) {
        fprintf(stderr, "ref_driver: GPA: %s\n", err);
        return rc;
    }
    fprintf(out,
            "{\"iterations\": %d, \"converged\": %d, \"last_change\": %.17g,\n",
            info.iterations, info.converged, info.last_change);
    put_array("mean", mean, d, 0);
    put_matrix("aligned", aligned, d, m, d, 0);
    fprintf(out, "\"poses\": [");
    for (int j = 0; j < m; j++)
        put_pose(&poses[j], j + 1 == m);
    fprintf(out, "]}\n");
    free(x);
    free(aligned);
    free(mean);
    free(poses);
    return 0;
}

/* Scores, reconstructions, T^2 and SPE of every input vector. */
static int put_model_outputs(const mb_shape_model *model, const double *x,
                             int m)
{
    int d = mb_shape_model_dim(model), k = mb_shape_model_n_modes(model);
    double *b = malloc((size_t)k * (size_t)m * sizeof *b);
    double *rec = malloc((size_t)d * (size_t)m * sizeof *rec);
    double *t2 = malloc((size_t)m * sizeof *t2),
           *spe = malloc((size_t)m * sizeof *spe);
    double *work = malloc((size_t)d * sizeof *work);
    if (!b || !rec || !t2 || !spe || !work)
        return MB_ENOMEM;
    for (int j = 0; j < m; j++) {
        mb_shape_model_project(model, x + (size_t)j * d, b + (size_t)j * k);
        mb_shape_model_reconstruct(model, b + (size_t)j * k,
                                   rec + (size_t)j * d);
        t2[j] = mb_shape_model_t2(model, b + (size_t)j * k);
        spe[j] = mb_shape_model_spe(model, x + (size_t)j * d, work);
    }
    put_matrix("scores", b, k, m, k, 0);
    put_matrix("reconstruction", rec, d, m, d, 0);
    put_array("t2", t2, m, 0);
    put_array("spe", spe, m, 0);
    free(b);
    free(rec);
    free(t2);
    free(spe);
    free(work);
    return 0;
}

static void put_model(const mb_shape_model *model, int last)
{
    int d = mb_shape_model_dim(model), k = mb_shape_model_n_modes(model);
    int n_eig = mb_shape_model_n_eig(model);
    double total = mb_shape_model_total_var(model);
    const double *eig = mb_shape_model_eig(model);
    double *ratio = malloc((size_t)n_eig * sizeof *ratio);
    for (int i = 0; ratio && i < n_eig; i++)
        ratio[i] = eig[i] / total;
    fprintf(
        out,
        "\"dim\": %d, \"n_modes\": %d, \"n_eig\": %d, \"total_var\": %.17g,\n",
        d, k, n_eig, total);
    put_array("mean", mb_shape_model_mean(model), d, 0);
    put_array("eig", eig, n_eig, 0);
    if (ratio)
        put_array("explained_ratio", ratio, n_eig, 0);
    put_matrix("modes", mb_shape_model_modes(model), d, k, d, last);
    free(ratio);
}

static int run_pca(void)
{
    double hd, hm, hr, frac, hf;
    if (read_num(&hd) < 0 || read_num(&hm) < 0 || read_num(&hr) < 0 ||
        read_num(&frac) < 0 || read_num(&hf) < 0)
        return MB_EFORMAT;
    int d = (int)hd, m = (int)hm;
    double *x = read_array((size_t)d * (size_t)m);
    if (!x || d % 2)
        return MB_EFORMAT;
    mb_pca_params p;
    mb_pca_params_default(&p);
    p.route = (int)hr;
    p.variance_fraction = frac;
    p.fixed_modes = (int)hf;
    mb_pca pca;
    char err[MB_ERR_LEN] = "";
    int rc = mb_pca_compute(x, d, d, m, &p, &pca, err);
    if (rc < 0) {
        fprintf(stderr, "ref_driver: PCA: %s\n", err);
        return rc;
    }
    mb_layout layout = {1, {d / 2}, d / 2};
    mb_shape_model *model = NULL;
    rc = mb_shape_model_create(&layout, pca.n_modes, pca.mean, pca.modes, d,
                               pca.n_eig, pca.eig, NULL, &model, err);
    if (rc < 0) {
        fprintf(stderr, "ref_driver: model: %s\n", err);
        return rc;
    }
    fprintf(out, "{");
    put_model(model, 0);
    rc = put_model_outputs(model, x, m);
    fprintf(out, "\"pca_total_var\": %.17g}\n", pca.total_var);
    mb_shape_model_close(model);
    mb_pca_free(&pca);
    free(x);
    return rc;
}

static int run_build(void)
{
    double hn, hm, frac;
    if (read_num(&hn) < 0 || read_num(&hm) < 0 || read_num(&frac) < 0)
        return MB_EFORMAT;
    int n = (int)hn, m = (int)hm, d = 2 * n;
    double *x = read_array((size_t)d * (size_t)m);
    if (!x)
        return MB_EFORMAT;
    mb_layout layout = {1, {n}, n};
    mb_pca_params pp;
    mb_pca_params_default(&pp);
    pp.variance_fraction = frac;
    mb_shape_model *model = NULL;
    char err[MB_ERR_LEN] = "";
    int rc =
        mb_shape_model_build(x, d, &layout, m, NULL, &pp, NULL, &model, err);
    if (rc < 0) {
        fprintf(stderr, "ref_driver: build: %s\n", err);
        return rc;
    }
    fprintf(out, "{\"gpa_iterations\": %d, ",
            mb_shape_model_info(model)->gpa_iterations);
    put_model(model, 1);
    fprintf(out, "}\n");
    mb_shape_model_close(model);
    free(x);
    return 0;
}

int main(int argc, char **argv)
{
    if (argc != 4) {
        fprintf(stderr, "usage: ref_driver procrustes|gpa|pca|build IN OUT\n");
        return 2;
    }
    in = fopen(argv[2], "r");
    out = fopen(argv[3], "w");
    if (!in || !out) {
        fprintf(stderr, "ref_driver: cannot open %s or %s\n", argv[2], argv[3]);
        return 1;
    }
    int rc;
    if (!strcmp(argv[1], "procrustes"))
        rc = run_procrustes();
    else if (!strcmp(argv[1], "gpa"))
        rc = run_gpa();
    else if (!strcmp(argv[1], "pca"))
        rc = run_pca();
    else if (!strcmp(argv[1], "build"))
        rc = run_build();
    else {
        fprintf(stderr, "ref_driver: unknown mode %s\n", argv[1]);
        return 2;
    }
    fclose(in);
    if (fclose(out) != 0 || rc < 0) {
        fprintf(stderr, "ref_driver: %s failed: %s\n", argv[1],
                mb_strerror(rc));
        return 1;
    }
    return 0;
}
