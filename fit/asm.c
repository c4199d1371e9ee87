/*
 * fit/asm.c - multi-resolution Active Shape Model search and the sub-pixel
 * measurement of the outline (see asm.h).
 *
 * Search (Cootes, Taylor, Cooper, Graham, CVIU 61(1), 1995, section 6;
 * Cootes, Taylor, Lanitis, BMVC 1994): at level L a landmark at full-res
 * point p with normal n samples the grey levels
 *     G_j = I_L(p / 2^L + t_j n),  t_j = j - (ns + k + 1/2),  j = 0 .. 2(ns+k)+1
 * once; the candidate profile for a shift s (-ns .. ns) is the window of
 * 2k+1 differences G_{j+1} - G_j centred at t = s, normalised by its sum of
 * absolute values (fit/profile.h), so one landmark costs 2(ns+k)+2 bilinear
 * samples and 2ns+1 Mahalanobis evaluations. The best shift s* is refined
 * by the vertex of the parabola through the costs at s*-1, s*, s*+1 (kept
 * within half a sample), and the landmark's target is p + s* 2^L n.
 *
 * Final fit (fit_measured): Gauss-Newton over pose and b on the distances
 * of the landmarks to the tangent lines through the measured points, with
 * the points that must not count (no edge, outliers such as a nick) simply
 * left out, a trust region, and the model's own prior on b; see
 * fit_measured. When it slides the outline along itself, the model follows
 * the measured polyline and the image is measured again (see asm.h).
 *
 * Sub-pixel edge: a Gaussian-blurred step crosses the mid level between its
 * two plateaus at the edge, and near that point the profile is almost
 * straight (its inflection), so linear interpolation between the two
 * samples either side of the mid level is nearly unbiased; the noise of one
 * point is about sigma_noise / slope, slope ~ C / (2.5 sigma_blur). The mid
 * level is taken from the profile itself, 3 to 5 px either side of the
 * derivative peak nearest the model, so uneven illumination does not bias
 * it; the profile is the mean of three parallel lines (noise / sqrt 3), and
 * the shifts of a curved edge are corrected (see measure).
 */
#include "asm.h"

#include "stats.h"

#include "error.h"

#include <cblas.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

/* A level has also converged when at least CONV_FLOOR of the landmarks
   matched within the central half and the iteration moved no landmark by
   more than CONV_STILL px of that level: on a textured belt or under
   uneven light a few landmarks keep their best match off-centre at every
   iteration while the outline stands still (see asm.h). */
#define CONV_FLOOR 0.5
#define CONV_STILL 0.05
/* Gauss-Newton steps of the final fit, and its prior on b (px^2 per
   sd^2; see fit_measured). */
#define FIT_STEPS 8
#define FIT_PRIOR 1e-3
#define FIT_DAMP 1e-9
#define FIT_TRUST 2.0
#define FIT_TOL 1e-3
/* The tangent line through a measured point stands for the outline only
   near it: a landmark that slides s px along an outline of curvature kappa
   leaves that line by kappa s^2 / 2. A step may slide a landmark until that
   reaches FIT_BEND px, and never more than FIT_SLIDE px. */
#define FIT_SLIDE 8.0
#define FIT_BEND 0.25
/* Measure-and-fit rounds at full resolution: another round while the fit
   slid a landmark along the outline by more than MEASURE_MOVE px (the
   tangent line then misses a curve of radius R by MEASURE_MOVE^2 / 2R:
   0.03 px on a 16 px bolt hole). */
#define MEASURE_ROUNDS 3
#define MEASURE_MOVE 1.0
/* Following a measured outline (see follow): rounds, how many landmarks
   along the outline a landmark may have slid, and the Gauss-Newton steps of
   one round with their slide limits: the polyline is crossed again after
   every round, so the tangent lines need only hold for one round's steps. */
#define FOLLOW_ROUNDS 32
#define FOLLOW_WINDOW 24
#define FOLLOW_STEPS 2
#define FOLLOW_SLIDE 16.0
#define FOLLOW_BEND 1.0

struct mb_asm {
    const mb_shape_model *sm;
    const mb_profile_model *pm;
    mb_asm_params p;
    int width, height;
    int n, k, dim, plen, half; /* landmarks, modes, 2n, 2k+1, k */
    int coarsest, finest;
    double polarity;  /* +1 when grey rises from part to background */
    double contrast;  /* |part - back| taught */
    size_t bytes;
    /* state */
    double *b, *b_best, *b_sd;
    double *xm;       /* 2n model frame */
    double *pts;      /* 2n image px, current model outline */
    double *nrm;      /* 2n normals */
    double *target;   /* 2n */
    double *meas;     /* 2n measured */
    double *dist;     /* n */
    double *absd;     /* n scratch for the medians */
    double *kappa;    /* n signed curvature of the model outline */
    double blur;      /* edge blur estimated by the last measurement, px */
    double radius;    /* RMS radius of the mean shape, model units */
    double *sd;       /* k: sqrt(lambda) */
    double *gn_a, *gn_g; /* final fit: (4+k)^2, 4+k */
    double *gn_r, *gn_res; /* final fit: n x (4+k), n */
    double *poly;     /* 2n: a measured outline being followed */
    double *prev;     /* 2n: the outline before a search iteration's fit */
    uint8_t *pvalid;  /* n */
    int *seg;         /* n: polyline segment (index along its outline, may
                         run past either end) a landmark crossed last */
    uint8_t *valid;   /* n */
    uint8_t *use;     /* n: in the final fit */
    double *fit_work; /* mb_shape_model_fit_work_size */
    double *grey;     /* samples along one normal */
    double *diff;     /* differences along one normal */
    double *g;        /* one profile */
    double *cwork;    /* profile cost scratch */
    double *cost;     /* 2ns + 1 */
    /* dense measurement (see dense) */
    int dense_cap, dense_n, dense_n_valid;
    double dense_spacing;
    double *dense_xy, *dense_nrm, *dense_dist, *dense_frac; /* 2c, 2c, c, c */
    int *dense_seg;   /* c */
    uint8_t *dense_valid; /* c */
};

void mb_asm_params_default(mb_asm_params *p)
{
    if (!p)
        return;
    p->search_range = 3;
    p->max_iter = 10;
    p->start_iter = 3;
    p->conv_fraction = 0.95;
    p->coarsest_level = -1;
    p->finest_level = 1;
    p->b_limit = 6.0;
    p->b_limit_search = 3.0;
    p->fit_iter = 3;
    p->refine_range = 8;
    p->edge_fraction = 0.1;
    p->outlier_px = 1.0;
    p->dense_step = 1.0;
}

void mb_asm_close(mb_asm *a)
{
    if (!a)
        return;
    free(a->b);
    free(a->b_best);
    free(a->b_sd);
    free(a->xm);
    free(a->pts);
    free(a->nrm);
    free(a->target);
    free(a->meas);
    free(a->dist);
    free(a->absd);
    free(a->kappa);
    free(a->gn_a);
    free(a->gn_g);
    free(a->sd);
    free(a->gn_r);
    free(a->gn_res);
    free(a->poly);
    free(a->prev);
    free(a->pvalid);
    free(a->seg);
    free(a->valid);
    free(a->use);
    free(a->fit_work);
    free(a->grey);
    free(a->diff);
    free(a->g);
    free(a->cwork);
    free(a->cost);
    free(a->dense_xy);
    free(a->dense_nrm);
    free(a->dense_dist);
    free(a->dense_frac);
    free(a->dense_seg);
    free(a->dense_valid);
    free(a);
}

size_t mb_asm_workspace_bytes(const mb_asm *a)
{
    return a ? a->bytes : 0;
}

/* Squared distance of two points (x, y). */
static double sq_dist(const double *p, const double *q)
{
    double dx = p[0] - q[0], dy = p[1] - q[1];
    return dx * dx + dy * dy;
}

static void *take(mb_asm *a, size_t count, size_t size)
{
    a->bytes += count * size;
    return calloc(count, size);
}

int mb_asm_create(const mb_shape_model *sm, const mb_profile_model *pm,
                  int width, int height, const mb_asm_params *p, mb_asm **out,
                  char *err)
{
    mb_asm_params def;
    if (out)
        *out = NULL;
    if (!p) {
        mb_asm_params_default(&def);
        p = &def;
    }
    if (!sm || !pm || !out)
        return mb_err_set(err, MB_EINVAL, "search: missing argument");
    if (width < 1 || height < 1 || width > 65536 || height > 65536)
        return mb_err_set(err, MB_EINVAL, "search: frame size %d x %d out of "
                          "range", width, height);
    const mb_layout *lay = mb_shape_model_layout(sm);
    const mb_layout *play = mb_profile_model_layout(pm);
    if (lay->n_points != play->n_points || lay->n_outlines != play->n_outlines)
        return mb_err_set(err, MB_ESIZE, "search: the shape model has %d "
                          "points, the profile model %d", lay->n_points,
                          play->n_points);
    for (int o = 0; o < lay->n_outlines; o++)
        if (lay->counts[o] != play->counts[o])
            return mb_err_set(err, MB_ESIZE, "search: outline %d has %d "
                              "points in the shape model, %d in the profile "
                              "model", o, lay->counts[o], play->counts[o]);
    const int plevels = mb_profile_model_params(pm)->levels;
    int coarsest = p->coarsest_level < 0 ? plevels - 1 : p->coarsest_level;
    if (p->search_range < 1 || p->search_range > 32 || p->max_iter < 1 ||
        p->start_iter < 1 || p->start_iter > p->max_iter ||
        !(p->conv_fraction >= 0.0 && p->conv_fraction <= 1.0) ||
        coarsest >= plevels || p->finest_level < 0 ||
        p->finest_level > coarsest || !(p->b_limit >= 0.0) ||
        !(p->b_limit_search >= 0.0) || p->fit_iter < 1 ||
        p->refine_range < 1 || p->refine_range > 64 ||
        !(p->edge_fraction >= 0.0 && p->edge_fraction <= 1.0) ||
        !(p->outlier_px > 0.0) ||
        !(p->dense_step == 0.0 || (p->dense_step >= 0.25 && p->dense_step <= 16.0)))
        return mb_err_set(err, MB_EINVAL, "search: a parameter is out of "
                          "range (levels %d..%d of a %d-level profile model)",
                          coarsest, p->finest_level, plevels);
    const mb_profile_stats *st = mb_profile_model_stats(pm);

    mb_asm *a = calloc(1, sizeof *a);
    if (!a)
        return mb_err_set(err, MB_ENOMEM, "search: out of memory");
    a->sm = sm;
    a->pm = pm;
    a->p = *p;
    a->width = width;
    a->height = height;
    a->n = lay->n_points;
    a->dim = 2 * a->n;
    a->k = mb_shape_model_n_modes(sm);
    a->plen = mb_profile_model_len(pm);
    a->half = (a->plen - 1) / 2;
    a->coarsest = coarsest;
    a->finest = p->finest_level;
    a->polarity = st->back_grey >= st->part_grey ? 1.0 : -1.0;
    a->contrast = fabs(st->back_grey - st->part_grey);
    a->radius = 1.0 / sqrt((double)a->n); /* the mean shape has unit norm */

    const size_t n = (size_t)a->n, d = (size_t)a->dim, k = (size_t)a->k;
    const int ns = p->search_range;
    size_t samples = (size_t)(2 * (ns + a->half) + 2);
    size_t rsamples = (size_t)(2 * (p->refine_range + 6) + 1);
    if (rsamples > samples)
        samples = rsamples;
    a->b = take(a, k, sizeof(double));
    a->b_best = take(a, k, sizeof(double));
    a->b_sd = take(a, k, sizeof(double));
    a->xm = take(a, d, sizeof(double));
    a->pts = take(a, d, sizeof(double));
    a->nrm = take(a, d, sizeof(double));
    a->target = take(a, d, sizeof(double));
    a->meas = take(a, d, sizeof(double));
    a->dist = take(a, n, sizeof(double));
    a->absd = take(a, n, sizeof(double));
    a->kappa = take(a, n, sizeof(double));
    a->gn_a = take(a, (4 + k) * (4 + k), sizeof(double));
    a->gn_g = take(a, 4 + k, sizeof(double));
    a->sd = take(a, k, sizeof(double));
    a->gn_r = take(a, n * (4 + k), sizeof(double));
    a->gn_res = take(a, n, sizeof(double));
    a->poly = take(a, d, sizeof(double));
    a->prev = take(a, d, sizeof(double));
    a->pvalid = take(a, n, 1);
    a->seg = take(a, n, sizeof(int));
    a->valid = take(a, n, 1);
    a->use = take(a, n, 1);
    a->fit_work = take(a, (size_t)mb_shape_model_fit_work_size(sm), sizeof(double));
    a->grey = take(a, samples, sizeof(double));
    a->diff = take(a, samples, sizeof(double));
    a->g = take(a, (size_t)a->plen, sizeof(double));
    a->cwork = take(a, (size_t)a->plen, sizeof(double));
    a->cost = take(a, (size_t)(2 * ns + 1), sizeof(double));
    if (p->dense_step > 0.0) {
        /* twice the mean outline's length at the taught size, over the
           step, plus one sample per landmark (see asm.h) */
        const double *mean = mb_shape_model_mean(sm);
        double len = 0.0;
        for (int o = 0, first = 0; o < lay->n_outlines; first += lay->counts[o], o++)
            for (int r = 0; r < lay->counts[o]; r++) {
                int i = first + r, j = first + (r + 1) % lay->counts[o];
                len += sqrt(sq_dist(mean + 2 * i, mean + 2 * j));
            }
        double px = st->size > 0.0 && isfinite(st->size) ? st->size / a->radius
                                                          : (double)(width + height);
        double cap = ceil(2.0 * len * px / p->dense_step) + (double)a->n;
        a->dense_cap = cap < 64.0 * a->n ? (int)cap : 64 * a->n;
        const size_t c = (size_t)a->dense_cap;
        a->dense_xy = take(a, 2 * c, sizeof(double));
        a->dense_nrm = take(a, 2 * c, sizeof(double));
        a->dense_dist = take(a, c, sizeof(double));
        a->dense_frac = take(a, c, sizeof(double));
        a->dense_seg = take(a, c, sizeof(int));
        a->dense_valid = take(a, c, 1);
        if (!a->dense_xy || !a->dense_nrm || !a->dense_dist || !a->dense_frac ||
            !a->dense_seg || !a->dense_valid)
            goto fail;
    }
    if (!a->b || !a->b_best || !a->b_sd || !a->xm || !a->pts || !a->nrm ||
        !a->target || !a->meas || !a->dist || !a->absd || !a->kappa || !a->gn_a || !a->gn_g ||
        !a->sd || !a->gn_r || !a->gn_res || !a->poly || !a->prev || !a->pvalid || !a->seg ||
        !a->valid ||
        !a->use || !a->fit_work || !a->grey || !a->diff || !a->g ||
        !a->cwork || !a->cost)
        goto fail;
    const double *eig = mb_shape_model_eig(sm);
    for (int j = 0; j < a->k; j++)
        a->sd[j] = sqrt(eig[j]);
    *out = a;
    return MB_OK;
fail:
    mb_asm_close(a);
    return mb_err_set(err, MB_ENOMEM, "search: out of memory");
}

/* Model outline in the image for pose and a->b, with its normals. */
static void place(mb_asm *a, const mb_pose *pose)
{
    mb_shape_model_reconstruct(a->sm, a->b, a->xm);
    mb_pose_apply(pose, a->xm, a->n, a->pts);
    /* A degenerate outline (zero-length chord) leaves a zero normal: that
       landmark then simply does not move. */
    (void)mb_profile_normals(mb_shape_model_layout(a->sm), a->pts, a->nrm);
}

/* Is the pose still a sane one for this frame? */
static int pose_sane(const mb_asm *a, const mb_pose *pose, double scale0)
{
    if (!isfinite(pose->tx) || !isfinite(pose->ty) || !isfinite(pose->angle) ||
        !(pose->scale > 0.5 * scale0) || !(pose->scale < 2.0 * scale0))
        return 0;
    /* model centroid is the origin of the model frame */
    return pose->tx > -0.5 * a->width && pose->tx < 1.5 * a->width &&
           pose->ty > -0.5 * a->height && pose->ty < 1.5 * a->height;
}

/*
 * One search iteration on level `level`: move every landmark to its best
 * profile match (targets), fit pose and b. Returns 0 and sets *frac (share
 * of landmarks within the central half of the range) and *mean_cost; or a
 * negative code when the fit breaks down.
 */
static int iterate(mb_asm *a, const mb_image *img, int level, double blim,
                   mb_pose *pose, double *frac, double *mean_cost)
{
    const int ns = a->p.search_range, k = a->half, plen = a->plen;
    const int m = 2 * (ns + k) + 2; /* grey samples */
    const double down = 1.0 / (double)(1 << level), up = (double)(1 << level);
    int central = 0;
    double total = 0.0;
    place(a, pose);
    for (int i = 0; i < a->n; i++) {
        const double x = a->pts[2 * i] * down, y = a->pts[2 * i + 1] * down;
        const double nx = a->nrm[2 * i], ny = a->nrm[2 * i + 1];
        double t = -(double)(ns + k) - 0.5;
        for (int j = 0; j < m; j++, t += 1.0)
            a->grey[j] = mb_pyramid_sample(img, x + t * nx, y + t * ny);
        for (int j = 0; j + 1 < m; j++)
            a->diff[j] = a->grey[j + 1] - a->grey[j];
        int best = 0;
        for (int s = 0; s <= 2 * ns; s++) {
            const double *w = a->diff + s; /* window centred at shift s - ns */
            double norm = 0.0;
            for (int j = 0; j < plen; j++)
                norm += fabs(w[j]);
            double inv = norm > 0.0 ? 1.0 / norm : 0.0;
            for (int j = 0; j < plen; j++)
                a->g[j] = w[j] * inv;
            a->cost[s] = mb_profile_cost(a->pm, level, i, a->g, a->cwork);
            if (a->cost[s] < a->cost[best])
                best = s;
        }
        double shift = best - ns;
        if (best > 0 && best < 2 * ns) {
            double c0 = a->cost[best - 1], c1 = a->cost[best], c2 = a->cost[best + 1];
            double den = c0 - 2.0 * c1 + c2;
            if (den > 0.0) {
                double off = 0.5 * (c0 - c2) / den;
                shift += off > 0.5 ? 0.5 : off < -0.5 ? -0.5 : off;
            }
        }
        if (2 * abs(best - ns) <= ns)
            central++;
        total += a->cost[best];
        a->target[2 * i] = a->pts[2 * i] + shift * up * nx;
        a->target[2 * i + 1] = a->pts[2 * i + 1] + shift * up * ny;
    }
    mb_fit_params fp;
    mb_fit_params_default(&fp);
    fp.b_limit = blim;
    fp.max_iter = a->p.fit_iter;
    fp.tol = 1e-6;
    mb_fit_result fr;
    int rc = mb_shape_model_fit(a->sm, a->target, NULL, &fp, a->b, &fr,
                                a->fit_work);
    if (rc != MB_OK)
        return rc;
    *pose = fr.pose;
    *frac = (double)central / a->n;
    *mean_cost = total / a->n;
    return MB_OK;
}

/* Search one level from *pose, a->b. Returns 1 converged, 0 not, < 0 when
   the search broke down. */
static int search_level(mb_asm *a, const mb_pyramid *pyr, int level,
                        int max_iter, mb_pose *pose, double scale0, int *iters,
                        double *mean_cost)
{
    const mb_image *img = mb_pyramid_level(pyr, level);
    const double blim = level == a->finest ? a->p.b_limit : a->p.b_limit_search;
    for (int it = 1; it <= max_iter; it++) {
        double frac;
        int rc = iterate(a, img, level, blim, pose, &frac, mean_cost);
        (*iters)++;
        if (rc != MB_OK || !pose_sane(a, pose, scale0))
            return -1;
        if (frac >= a->p.conv_fraction)
            return 1;
        if (frac >= CONV_FLOOR) {
            /* standing still: iterate left the outline it started from in
               pts; place the fitted one and compare */
            memcpy(a->prev, a->pts, sizeof *a->pts * (size_t)a->dim);
            place(a, pose);
            double mv = 0.0;
            for (int i = 0; i < a->n; i++)
                mv = fmax(mv, sq_dist(a->prev + 2 * i, a->pts + 2 * i));
            if (mv <= CONV_STILL * CONV_STILL * (double)(1 << level) * (double)(1 << level))
                return 1;
        }
    }
    return 0;
}

/* k-th smallest of v[0..n-1] (reorders v). */
static double select_kth(double *v, int n, int kth)
{
    return mb_stats_select_kth(v, n, kth);
}

/* Tangential offset (px) of the two side lines averaged with the normal
   itself when measuring an edge. */
#define SIDE 0.75

/* The edge is first looked for within +-NEAR_RANGE px (where nearly every
   edge of a good part is after the fit), then, only when none is there,
   within the whole refine_range: the same answer as one search of the
   whole range (the edge nearest the model point wins either way, and
   everything read around it lies inside the short window too), from 15
   samples per line instead of 29 (refine_range 8). */
#define NEAR_RANGE 1

/* mb_pyramid_sample for a point known to lie inside the image, at least
   1 px from its right and bottom edges: the same arithmetic without the
   clamps and the call (the measurement reads some 50 points per normal and
   two thousand normals per frame). */
static inline double sample_inside(const mb_image *img, double x, double y)
{
    const int x0 = (int)x, y0 = (int)y;
    const double fx = x - x0, fy = y - y0;
    const uint8_t *p = img->pixels + (size_t)y0 * img->stride + x0;
    const uint8_t *q = p + img->stride;
    double top = p[0] + fx * (p[1] - p[0]);
    double bot = q[0] + fx * (q[1] - q[0]);
    return top + fy * (bot - top);
}

/*
 * Sub-pixel edge along one normal at full resolution, from the mean of the
 * grey profiles on the normal and on two lines SIDE px either side of it,
 * within +-r px (r <= refine_range). Returns 1, the signed position *t_out
 * (px along the normal from the model point) and *ratio (edge strength
 * over contrast, for the blur estimate) when an edge of the taught polarity
 * is found, else 0.
 */
static int edge_within(mb_asm *a, const mb_image *img, double x, double y,
                       double nx, double ny, int r, double *t_out, double *ratio)
{
    const int m = 2 * (r + 6) + 1, c = r + 6;
    double *gr = a->grey, *dv = a->diff;
    const double tx = -ny * SIDE, ty = nx * SIDE;
    /* every point read lies within c + SIDE of (x, y) */
    const double reach = c + 1.0;
    if (x - reach > 0.0 && y - reach > 0.0 && x + reach < img->width - 1 &&
        y + reach < img->height - 1) {
        for (int j = 0; j < m; j++) {
            double t = j - c, px = x + t * nx, py = y + t * ny;
            gr[j] = (sample_inside(img, px, py) + sample_inside(img, px - tx, py - ty) +
                     sample_inside(img, px + tx, py + ty)) * (1.0 / 3.0);
        }
    } else {
        for (int j = 0; j < m; j++) {
            double t = j - c, px = x + t * nx, py = y + t * ny;
            gr[j] = (mb_pyramid_sample(img, px, py) +
                     mb_pyramid_sample(img, px - tx, py - ty) +
                     mb_pyramid_sample(img, px + tx, py + ty)) * (1.0 / 3.0);
        }
    }
    /* central differences of the taught polarity, grey per px */
    for (int j = 1; j + 1 < m; j++)
        dv[j] = a->polarity * 0.5 * (gr[j + 1] - gr[j - 1]);
    const double thr = a->p.edge_fraction * a->contrast;
    int best = -1;
    for (int j = c - r; j <= c + r; j++) {
        if (!(dv[j] >= thr) || dv[j] < dv[j - 1] || dv[j] < dv[j + 1])
            continue;
        if (best < 0 || abs(j - c) < abs(best - c) ||
            (abs(j - c) == abs(best - c) && dv[j] > dv[best]))
            best = j;
    }
    if (best < 0)
        return 0;
    /* plateaus 3..5 px either side (within the samples: best is at least
       6 samples from either end) */
    double lo = (gr[best - 3] + gr[best - 4] + gr[best - 5]) * (1.0 / 3.0);
    double hi = (gr[best + 3] + gr[best + 4] + gr[best + 5]) * (1.0 / 3.0);
    double mid = 0.5 * (lo + hi);
    if (!(a->polarity * (hi - lo) > 0.0))
        return 0;
    /* the mid-level crossing nearest to the peak: between best-1 and best+1 */
    int found = -1;
    for (int off = 0; off <= 2 && found < 0; off++) {
        int cand[2] = {best - 1 + off, best - 1 - off};
        for (int q = 0; q < 2 && found < 0; q++) {
            int j = cand[q];
            if (j < 0 || j + 1 >= m)
                continue;
            if ((gr[j] - mid) * (gr[j + 1] - mid) <= 0.0 && gr[j] != gr[j + 1])
                found = j;
        }
    }
    if (found < 0)
        return 0;
    double f = (mid - gr[found]) / (gr[found + 1] - gr[found]);
    *t_out = (found - c) + f;
    *ratio = dv[best] / fabs(hi - lo);
    return 1;
}

/* The edge along one normal within refine_range (see NEAR_RANGE). */
static int edge_along(mb_asm *a, const mb_image *img, double x, double y,
                      double nx, double ny, double *t_out, double *ratio)
{
    const int r = a->p.refine_range;
    if (r > NEAR_RANGE && edge_within(a, img, x, y, nx, ny, NEAR_RANGE, t_out, ratio))
        return 1;
    return edge_within(a, img, x, y, nx, ny, r, t_out, ratio);
}

/* Blur sigma (px) of a Gaussian-blurred step whose central difference
   peaks at `ratio` times its contrast: ratio = erf(1 / (sigma sqrt 2)) / 2,
   solved by bisection (monotone in sigma). */
static double blur_of_ratio(double ratio)
{
    double lo = 0.2, hi = 10.0;
    if (!(ratio < 0.5 * erf(1.0 / (lo * M_SQRT2))))
        return lo;
    if (!(ratio > 0.5 * erf(1.0 / (hi * M_SQRT2))))
        return hi;
    for (int it = 0; it < 40; it++) {
        double s = 0.5 * (lo + hi);
        if (0.5 * erf(1.0 / (s * M_SQRT2)) > ratio)
            lo = s;
        else
            hi = s;
    }
    return 0.5 * (lo + hi);
}

/*
 * Measure every landmark along the normals of the current model outline.
 * Two small systematic shifts of a curved edge are taken out, with the
 * signed curvature kappa of the model outline (> 0 where the centre of
 * curvature is on the part side): averaging the side lines SIDE px away
 * moves the edge found by -kappa SIDE^2 / 3, and blurring a curved edge
 * moves its mid-level contour towards the centre of curvature by
 * kappa sigma^2 / 2 (sigma: the frame's edge blur, the median over the
 * landmarks of the value that explains their edge strength).
 */
static int measure(mb_asm *a, const mb_image *img0)
{
    const mb_layout *lay = mb_shape_model_layout(a->sm);
    int nv = 0;
    for (int o = 0, first = 0; o < lay->n_outlines; o++) {
        const int cnt = lay->counts[o];
        for (int q = 0; q < cnt; q++) {
            const int i = first + q;
            const int ip = first + (q == 0 ? cnt - 1 : q - 1);
            const int in = first + (q + 1 == cnt ? 0 : q + 1);
            double x = a->pts[2 * i], y = a->pts[2 * i + 1];
            double nx = a->nrm[2 * i], ny = a->nrm[2 * i + 1];
            a->valid[i] = 0;
            a->dist[i] = 0.0;
            a->kappa[i] = 0.0;
            if (nx == 0.0 && ny == 0.0)
                continue;
            /* curvature of the circle through the landmark and its
               neighbours; its centre lies on the side of the chord's
               midpoint */
            double ax = x - a->pts[2 * ip], ay = y - a->pts[2 * ip + 1];
            double bx = a->pts[2 * in] - x, by = a->pts[2 * in + 1] - y;
            double cx = a->pts[2 * in] - a->pts[2 * ip], cy = a->pts[2 * in + 1] - a->pts[2 * ip + 1];
            double den = sqrt((ax * ax + ay * ay) * (bx * bx + by * by) * (cx * cx + cy * cy));
            if (den > 0.0) {
                double k = 2.0 * fabs(ax * by - ay * bx) / den;
                double mx = 0.5 * (a->pts[2 * ip] + a->pts[2 * in]) - x;
                double my = 0.5 * (a->pts[2 * ip + 1] + a->pts[2 * in + 1]) - y;
                k = k > 1.0 / 3.0 ? 1.0 / 3.0 : k;
                a->kappa[i] = mx * nx + my * ny < 0.0 ? k : -k;
            }
            double t, ratio;
            if (edge_along(a, img0, x, y, nx, ny, &t, &ratio)) {
                a->valid[i] = 1;
                a->dist[i] = t;
                a->absd[nv++] = ratio;
            }
        }
        first += cnt;
    }
    const double sigma = nv > 0 ? blur_of_ratio(select_kth(a->absd, nv, nv / 2)) : 0.0;
    const double shift = SIDE * SIDE / 3.0 + 0.5 * sigma * sigma;
    a->blur = sigma;
    for (int i = 0; i < a->n; i++) {
        double t = a->valid[i] ? a->dist[i] + a->kappa[i] * shift : 0.0;
        a->meas[2 * i] = a->pts[2 * i] + t * a->nrm[2 * i];
        a->meas[2 * i + 1] = a->pts[2 * i + 1] + t * a->nrm[2 * i + 1];
    }
    return nv;
}

/*
 * The dense measurement (asm.h): between every two consecutive landmarks
 * i, j of an outline, m = ceil(L / step) samples at f = q / m, q = 0..m-1,
 * L the chord, on the Catmull-Rom cubic through h, i, j, k (Catmull & Rom,
 * "A class of local interpolating splines", Computer Aided Geometric
 * Design, 1974; uniform parameter):
 *     P(f) = P_i + f (c1 + f (c2 + f c3)),  c1 = (P_j - P_h) / 2,
 *     c2 = (2 P_h - 5 P_i + 4 P_j - P_k) / 2, c3 = (3 (P_i - P_j) + P_k - P_h) / 2,
 * whose tangent at f = 0 is the landmark normal's chord (P_j - P_h) / 2.
 * q = 0 is landmark i: its measurement is copied. Elsewhere the edge is
 * found by edge_along along the cubic's normal and given the same
 * curvature correction as in measure (kappa interpolated between i and j).
 * Sum of m <= total / step + n: step is widened when that would not fit the
 * buffers. Call after distances() on the final outline.
 */
static void dense(mb_asm *a, const mb_image *img0)
{
    const mb_layout *lay = mb_shape_model_layout(a->sm);
    const double *p = a->pts;
    a->dense_n = 0;
    a->dense_n_valid = 0;
    a->dense_spacing = 0.0;
    if (a->dense_cap <= a->n)
        return;
    double total = 0.0;
    for (int o = 0, first = 0; o < lay->n_outlines; first += lay->counts[o], o++)
        for (int r = 0; r < lay->counts[o]; r++)
            total += sqrt(sq_dist(p + 2 * (first + r),
                                  p + 2 * (first + (r + 1) % lay->counts[o])));
    double step = a->p.dense_step;
    if (total > step * (a->dense_cap - a->n))
        step = total / (a->dense_cap - a->n);
    const double shift = SIDE * SIDE / 3.0 + 0.5 * a->blur * a->blur;
    int c = 0, nv = 0;
    for (int o = 0, first = 0; o < lay->n_outlines; first += lay->counts[o], o++) {
        const int cnt = lay->counts[o];
        for (int r = 0; r < cnt && c < a->dense_cap; r++) {
            const int i = first + r, j = first + (r + 1) % cnt;
            const int h = first + (r + cnt - 1) % cnt, k = first + (r + 2) % cnt;
            const double *P0 = p + 2 * h, *P1 = p + 2 * i, *P2 = p + 2 * j, *P3 = p + 2 * k;
            int m = (int)ceil(sqrt(sq_dist(P1, P2)) / step);
            m = m < 1 ? 1 : m > a->dense_cap - c ? a->dense_cap - c : m;
            double c1[2], c2[2], c3[2];
            for (int e = 0; e < 2; e++) {
                c1[e] = 0.5 * (P2[e] - P0[e]);
                c2[e] = 0.5 * (2.0 * P0[e] - 5.0 * P1[e] + 4.0 * P2[e] - P3[e]);
                c3[e] = 0.5 * (3.0 * (P1[e] - P2[e]) + P3[e] - P0[e]);
            }
            for (int q = 0; q < m; q++, c++) {
                double *xy = a->dense_xy + 2 * c, *nv2 = a->dense_nrm + 2 * c;
                const double f = (double)q / m;
                a->dense_seg[c] = i;
                a->dense_frac[c] = f;
                if (q == 0) {
                    xy[0] = P1[0];
                    xy[1] = P1[1];
                    nv2[0] = a->nrm[2 * i];
                    nv2[1] = a->nrm[2 * i + 1];
                    a->dense_dist[c] = a->dist[i];
                    a->dense_valid[c] = a->valid[i];
                    nv += a->valid[i];
                    continue;
                }
                double d[2];
                for (int e = 0; e < 2; e++) {
                    xy[e] = P1[e] + f * (c1[e] + f * (c2[e] + f * c3[e]));
                    d[e] = c1[e] + f * (2.0 * c2[e] + 3.0 * f * c3[e]);
                }
                /* normal of the cubic, on the side of the landmarks' */
                double lx = (1.0 - f) * a->nrm[2 * i] + f * a->nrm[2 * j];
                double ly = (1.0 - f) * a->nrm[2 * i + 1] + f * a->nrm[2 * j + 1];
                double nx = d[1], ny = -d[0], len = hypot(nx, ny);
                if (!(len > 0.0)) {
                    nx = lx;
                    ny = ly;
                    len = hypot(nx, ny);
                }
                a->dense_valid[c] = 0;
                a->dense_dist[c] = 0.0;
                if (!(len > 0.0)) {
                    nv2[0] = nv2[1] = 0.0;
                    continue;
                }
                if (nx * lx + ny * ly < 0.0)
                    len = -len;
                nx /= len;
                ny /= len;
                nv2[0] = nx;
                nv2[1] = ny;
                double t, ratio;
                if (edge_along(a, img0, xy[0], xy[1], nx, ny, &t, &ratio)) {
                    const double kap = (1.0 - f) * a->kappa[i] + f * a->kappa[j];
                    a->dense_valid[c] = 1;
                    a->dense_dist[c] = t + kap * shift;
                    nv++;
                }
            }
        }
    }
    a->dense_n = c;
    a->dense_n_valid = nv;
    a->dense_spacing = c > 0 ? total / c : 0.0;
}

/* Solve the SPD system A x = g (dim x dim, column-major, overwritten by
   its Cholesky factor) in place of g. Returns 0 or MB_ENUMERIC. */
static int solve_spd(double *A, double *g, int dim)
{
    for (int j = 0; j < dim; j++) {
        double d = A[j + (size_t)j * dim];
        for (int q = 0; q < j; q++)
            d -= A[j + (size_t)q * dim] * A[j + (size_t)q * dim];
        if (!(d > 0.0) || !isfinite(d))
            return MB_ENUMERIC;
        d = sqrt(d);
        A[j + (size_t)j * dim] = d;
        for (int i = j + 1; i < dim; i++) {
            double v = A[i + (size_t)j * dim];
            for (int q = 0; q < j; q++)
                v -= A[i + (size_t)q * dim] * A[j + (size_t)q * dim];
            A[i + (size_t)j * dim] = v / d;
        }
    }
    for (int i = 0; i < dim; i++) { /* L y = g */
        double v = g[i];
        for (int q = 0; q < i; q++)
            v -= A[i + (size_t)q * dim] * g[q];
        g[i] = v / A[i + (size_t)i * dim];
    }
    for (int i = dim - 1; i >= 0; i--) { /* L^T x = y */
        double v = g[i];
        for (int q = i + 1; q < dim; q++)
            v -= A[q + (size_t)i * dim] * g[q];
        g[i] = v / A[i + (size_t)i * dim];
    }
    return MB_OK;
}

/*
 * Fit pose + b to the measured points with use[i] set (the others do not
 * count). A measured point says where the outline crosses the model's
 * normal, not which landmark lies there, so the residual of landmark i is
 * its distance to the tangent line through the measured point,
 *     r_i = n_i . (m_i - p_i),
 * and the landmarks may slide along the outline (the point-to-plane
 * distance of Chen & Medioni, Image and Vision Computing 10(3), 1992).
 * Gauss-Newton over u = (tx, ty, angle, log scale, c) with c = b / sd:
 *     dp/dtx = (1, 0), dp/dty = (0, 1), dp/dangle = J (p - t),
 *     dp/dlog s = p - t, dp/dc_j = s R(angle) P_j,i sd_j,
 * J the quarter turn; each step minimises
 *     sum_i (r_i - n_i . J_i du)^2 + FIT_PRIOR |c + dc|^2
 * plus a Levenberg-Marquardt damping of FIT_DAMP times the trace on the
 * diagonal, which only keeps motions the outline cannot see at all (a
 * perfect ring's rotation) from wandering. The prior is
 * the model's own, b ~ N(0, lambda), weighted by the variance of one
 * measured point (~0.03^2 px^2): the maximum a posteriori fit, which
 * leaves every b the outline can see as the measurement says and settles
 * the others at 0. A step is shortened (a trust region: the tangent lines
 * hold only near the measured points) until no landmark moves more than
 * FIT_TRUST px across the outline, nor slides along it more than tr_slide
 * px or so far that it would leave its tangent line by tr_bend px on the
 * outline's curvature (kappa s^2 / 2 for a slide s; kappa from the last
 * measure). At most `steps` steps. b is bounded by
 * b_limit sd after each step. Leaves the outline placed; *clamped: modes on
 * the bound.
 */
static int fit_measured(mb_asm *a, mb_pose *pose, int *clamped, int steps,
                        double tr_slide, double tr_bend)
{
    const int k = a->k, dim = 4 + k, d = a->dim, n = a->n;
    const double *modes = mb_shape_model_modes(a->sm);
    double *A = a->gn_a, *g = a->gn_g, *R = a->gn_r, *res = a->gn_res;
    for (int it = 0; it < steps; it++) {
        const double c = cos(pose->angle) * pose->scale, sn = sin(pose->angle) * pose->scale;
        /* rows n_i . J_i of the used landmarks, column-major m x dim (ld n),
           and their residuals */
        int m = 0;
        for (int i = 0; i < n; i++) {
            if (!a->use[i])
                continue;
            const double nx = a->nrm[2 * i], ny = a->nrm[2 * i + 1];
            const double px = a->pts[2 * i] - pose->tx, py = a->pts[2 * i + 1] - pose->ty;
            res[m] = nx * (a->meas[2 * i] - a->pts[2 * i]) +
                     ny * (a->meas[2 * i + 1] - a->pts[2 * i + 1]);
            R[m] = nx;
            R[m + (size_t)n] = ny;
            R[m + 2 * (size_t)n] = -nx * py + ny * px;
            R[m + 3 * (size_t)n] = nx * px + ny * py;
            /* n . s R(angle) u = u . s R(-angle) n */
            const double rx = c * nx + sn * ny, ry = -sn * nx + c * ny;
            for (int j = 0; j < k; j++) {
                const double *u = modes + (size_t)j * d + 2 * i;
                R[m + (size_t)(4 + j) * n] = a->sd[j] * (rx * u[0] + ry * u[1]);
            }
            m++;
        }
        if (m < 3)
            return MB_EDEGENERATE;
        /* normal equations (lower triangle): A = R^T R, g = R^T res */
        cblas_dsyrk(CblasColMajor, CblasLower, CblasTrans, dim, m, 1.0, R, n, 0.0, A, dim);
        cblas_dgemv(CblasColMajor, CblasTrans, m, dim, 1.0, R, n, res, 1, 0.0, g, 1);
        double tr = 0.0;
        for (int q = 0; q < dim; q++)
            tr += A[q + (size_t)q * dim];
        for (int q = 0; q < dim; q++)
            A[q + (size_t)q * dim] += FIT_DAMP * tr + 1e-300;
        for (int j = 0; j < k; j++) {
            A[(4 + j) + (size_t)(4 + j) * dim] += FIT_PRIOR;
            g[4 + j] -= FIT_PRIOR * a->b[j] / a->sd[j];
        }
        int rc = solve_spd(A, g, dim);
        if (rc != MB_OK)
            return rc;
        /* trust region (see above): the step shrunk until no landmark
           moves more than FIT_TRUST px across the outline nor slides
           beyond its limit along it */
        double far = 0.0, worst = 0.0;
        for (int i = 0; i < n; i++) {
            const double px = a->pts[2 * i] - pose->tx, py = a->pts[2 * i + 1] - pose->ty;
            double ux = 0.0, uy = 0.0; /* mode motion in the model frame */
            for (int j = 0; j < k; j++) {
                const double *u = modes + (size_t)j * d + 2 * i;
                ux += g[4 + j] * a->sd[j] * u[0];
                uy += g[4 + j] * a->sd[j] * u[1];
            }
            double mx = g[0] - g[2] * py + g[3] * px + c * ux - sn * uy;
            double my = g[1] + g[2] * px + g[3] * py + sn * ux + c * uy;
            far = fmax(far, mx * mx + my * my);
            /* across the outline (normal) and along it (slide) */
            const double nx = a->nrm[2 * i], ny = a->nrm[2 * i + 1];
            const double mn = mx * nx + my * ny, mt = my * nx - mx * ny;
            const double kap = fabs(a->kappa[i]);
            const double slide2 = kap * tr_slide * tr_slide > 2.0 * tr_bend
                                      ? 2.0 * tr_bend / kap : tr_slide * tr_slide;
            worst = fmax(worst, fmax(mn * mn * (1.0 / (FIT_TRUST * FIT_TRUST)),
                                     mt * mt / slide2));
        }
        far = sqrt(far);
        double shrink = worst > 1.0 ? 1.0 / sqrt(worst) : 1.0;
        for (int q = 0; q < dim; q++)
            g[q] *= shrink;
        pose->tx += g[0];
        pose->ty += g[1];
        pose->angle += g[2];
        pose->scale *= exp(g[3]);
        *clamped = 0;
        for (int j = 0; j < k; j++) {
            a->b[j] += g[4 + j] * a->sd[j];
            if (a->p.b_limit > 0.0) {
                double lim = a->p.b_limit * a->sd[j];
                if (a->b[j] >= lim || a->b[j] <= -lim) {
                    a->b[j] = a->b[j] > 0.0 ? lim : -lim;
                    (*clamped)++;
                }
            }
        }
        if (!isfinite(pose->tx) || !isfinite(pose->ty) || !isfinite(pose->angle) ||
            !(pose->scale > 0.0) || !isfinite(pose->scale))
            return MB_ENUMERIC;
        place(a, pose);
        if (far * shrink < FIT_TOL)
            break;
    }
    return MB_OK;
}

/*
 * Re-associate the model with an outline measured before (poly, pvalid)
 * after the model has moved along it: each landmark's normal is intersected
 * with the segments of the measured polyline of its own outline within
 * FOLLOW_WINDOW landmarks of it (both ends valid); the nearest crossing
 * within refine_range becomes its measured point. No image access: this
 * lets the fit turn an oval ring by many pixels along its outline, where
 * the point-to-tangent distance of one measurement holds only for slides
 * of a few px. Returns the landmarks given a point.
 */
/* Crossing of the ray p + t n with segment j0 -> j1 of the polyline q:
   1 and *t when it crosses within |t| <= range. */
static int ray_segment(const double *q, int j0, int j1, double px, double py,
                       double nx, double ny, double range, double *t)
{
    double ax = q[2 * j0], ay = q[2 * j0 + 1];
    double ex = q[2 * j1] - ax, ey = q[2 * j1 + 1] - ay;
    double den = nx * ey - ny * ex; /* cross(n, e) */
    if (den == 0.0)
        return 0;
    double dx = ax - px, dy = ay - py;
    double tt = (dx * ey - dy * ex) / den; /* cross(d, e) / den */
    double u = (dx * ny - dy * nx) / den;  /* cross(d, n) / den */
    if (u < 0.0 || u > 1.0 || fabs(tt) > range)
        return 0;
    *t = tt;
    return 1;
}

static int follow(mb_asm *a)
{
    const mb_layout *lay = mb_shape_model_layout(a->sm);
    const double *q = a->poly;
    const double range = a->p.refine_range;
    int nv = 0;
    for (int o = 0, first = 0; o < lay->n_outlines; first += lay->counts[o], o++) {
        const int cnt = lay->counts[o];
        for (int r = 0; r < cnt; r++) {
            const int i = first + r;
            const double px = a->pts[2 * i], py = a->pts[2 * i + 1];
            const double nx = a->nrm[2 * i], ny = a->nrm[2 * i + 1];
            double best = INFINITY, t;
            int best_seg = a->seg[i];
            a->valid[i] = 0;
            /* near the segment found last time first (the model moves a
               little per round), then the whole window */
            for (int pass = 0; pass < 2 && !isfinite(best); pass++) {
                int lo = pass == 0 ? a->seg[i] - 2 : r - FOLLOW_WINDOW;
                int hi = pass == 0 ? a->seg[i] + 2 : r + FOLLOW_WINDOW;
                for (int w = lo; w <= hi; w++) {
                    int j0 = w % cnt, j1;
                    j0 += j0 < 0 ? cnt : 0;
                    j1 = j0 + 1 == cnt ? 0 : j0 + 1;
                    if (!a->pvalid[first + j0] || !a->pvalid[first + j1])
                        continue;
                    if (ray_segment(q, first + j0, first + j1, px, py, nx, ny, range, &t) &&
                        fabs(t) < fabs(best)) {
                        best = t;
                        best_seg = w;
                    }
                }
            }
            if (isfinite(best)) {
                a->valid[i] = 1;
                a->seg[i] = best_seg;
                a->meas[2 * i] = px + best * nx;
                a->meas[2 * i + 1] = py + best * ny;
                nv++;
            }
        }
    }
    memcpy(a->use, a->valid, (size_t)a->n);
    return nv;
}

/* dist = (measured - model) . normal for valid points. */
static void distances(mb_asm *a)
{
    for (int i = 0; i < a->n; i++)
        a->dist[i] = a->valid[i]
                         ? (a->meas[2 * i] - a->pts[2 * i]) * a->nrm[2 * i] +
                               (a->meas[2 * i + 1] - a->pts[2 * i + 1]) * a->nrm[2 * i + 1]
                         : 0.0;
}

static void fill_result(mb_asm *a, const mb_pose *pose, mb_asm_result *res)
{
    const double *eig = mb_shape_model_eig(a->sm);
    for (int i = 0; i < a->k; i++)
        a->b_sd[i] = a->b[i] / sqrt(eig[i]);
    res->pose = *pose;
    res->n_modes = a->k;
    res->b = a->b;
    res->b_sd = a->b_sd;
    res->n_points = a->n;
    res->model_xy = a->pts;
    res->normal_xy = a->nrm;
    res->measured_xy = a->meas;
    res->dist = a->dist;
    res->valid = a->valid;
    res->edge_blur = a->blur;
    res->coarsest = a->coarsest;
    res->finest = a->finest;
    res->dense_n = a->dense_n;
    res->dense_n_valid = a->dense_n_valid;
    res->dense_spacing = a->dense_spacing;
    res->dense_xy = a->dense_xy;
    res->dense_normal = a->dense_nrm;
    res->dense_dist = a->dense_dist;
    res->dense_valid = a->dense_valid;
    res->dense_seg = a->dense_seg;
    res->dense_frac = a->dense_frac;
}

int mb_asm_search(mb_asm *a, const mb_pyramid *pyr, const mb_pose *starts,
                  int n_starts, mb_asm_result *res)
{
    if (!a || !pyr || !starts || n_starts < 1 || !res)
        return MB_EINVAL;
    for (int s = 0; s < n_starts; s++)
        if (!(starts[s].scale > 0.0) || !isfinite(starts[s].scale) ||
            !isfinite(starts[s].tx) || !isfinite(starts[s].ty) ||
            !isfinite(starts[s].angle))
            return MB_EINVAL;
    if (mb_pyramid_levels(pyr) <= a->coarsest)
        return MB_ESIZE;
    const mb_image *img0 = mb_pyramid_level(pyr, 0);
    if (img0->width != a->width || img0->height != a->height)
        return MB_ESIZE;
    memset(res, 0, sizeof *res);
    res->n_starts = n_starts;

    /* Coarsest level from every start, a few iterations each; keep the
       best, let it finish the level, then descend. */
    const size_t kb = (size_t)a->k * sizeof *a->b;
    mb_pose best_pose = starts[0], pose;
    double best_cost = INFINITY, cost = 0.0;
    int best_start = -1, best_conv = 0, best_iters = 0;
    for (int s = 0; s < n_starts; s++) {
        int iters = 0;
        pose = starts[s];
        memset(a->b, 0, kb);
        int conv = search_level(a, pyr, a->coarsest, a->p.start_iter, &pose,
                                starts[s].scale, &iters, &cost);
        if (conv < 0)
            continue;
        if (cost < best_cost) {
            best_cost = cost;
            best_pose = pose;
            best_start = s;
            best_conv = conv;
            best_iters = iters;
            memcpy(a->b_best, a->b, kb);
        }
    }
    int converged = 0, broke = best_start < 0;
    if (!broke) {
        memcpy(a->b, a->b_best, kb);
        pose = best_pose;
        res->start = best_start;
        const double scale0 = starts[best_start].scale;
        int conv = best_conv;
        cost = best_cost;
        if (!conv && best_iters < a->p.max_iter)
            conv = search_level(a, pyr, a->coarsest, a->p.max_iter - best_iters,
                                &pose, scale0, &best_iters, &cost);
        res->iterations[a->coarsest] = best_iters;
        broke = conv < 0;
        res->level_converged[a->coarsest] = conv > 0;
        converged = conv > 0;
        res->profile_cost = cost;
        for (int level = a->coarsest - 1; level >= a->finest && !broke; level--) {
            int iters = 0;
            conv = search_level(a, pyr, level, a->p.max_iter, &pose, scale0,
                                &iters, &cost);
            res->iterations[level] = iters;
            if (conv < 0) {
                broke = 1;
                break;
            }
            res->level_converged[level] = conv;
            res->profile_cost = cost;
            converged = conv;
        }
    }
    if (broke) {
        memset(a->b, 0, kb);
        pose = starts[best_start < 0 ? 0 : best_start];
    }

    /* Measure at full resolution along the fitted outline, fit to the
       measured points, leave out outliers, fit again; when that fit slid
       the outline along itself by more than MEASURE_MOVE px (a rotation
       the search could not see, e.g. of an oval ring), follow the measured
       outline, then measure again along the new normals so that measured
       point i stays beside model point i. */
    res->converged = converged && !broke;
    place(a, &pose);
    for (int round = 1;; round++) {
        res->n_valid = measure(a, img0);
        res->measure_rounds = round;
        res->n_outliers = 0;
        memcpy(a->use, a->valid, (size_t)a->n);
        if (res->n_valid < 3 || broke)
            break;
        mb_pose keep = pose;
        memcpy(a->b_best, a->b, kb);
        memcpy(a->target, a->pts, (size_t)a->dim * sizeof *a->pts);
        int clamped = 0;
        int rc = fit_measured(a, &pose, &clamped, FIT_STEPS, FIT_SLIDE, FIT_BEND);
        if (rc == MB_OK) {
            distances(a);
            int nv = 0;
            for (int i = 0; i < a->n; i++)
                if (a->valid[i])
                    a->absd[nv++] = fabs(a->dist[i]);
            double sigma = 1.4826 * select_kth(a->absd, nv, nv / 2);
            double cut = 3.0 * sigma > a->p.outlier_px ? 3.0 * sigma : a->p.outlier_px;
            int out = 0;
            for (int i = 0; i < a->n; i++) {
                a->use[i] = a->valid[i] && fabs(a->dist[i]) <= cut;
                out += a->valid[i] && !a->use[i];
            }
            if (out > 0 && nv - out >= 3)
                rc = fit_measured(a, &pose, &clamped, FIT_STEPS, FIT_SLIDE, FIT_BEND);
            res->n_outliers = out;
            res->clamped = clamped;
        }
        if (rc != MB_OK) {
            /* keep the search's outline; the result is not converged */
            pose = keep;
            memcpy(a->b, a->b_best, kb);
            res->converged = 0;
            place(a, &pose);
            break;
        }
        /* how far landmarks slid along the outline (the normal part of a
           move keeps the measurement valid: the edge stays on that line) */
        double moved = 0.0;
        for (int i = 0; i < a->n; i++) {
            double dx = a->pts[2 * i] - a->target[2 * i];
            double dy = a->pts[2 * i + 1] - a->target[2 * i + 1];
            double tang = dx * a->nrm[2 * i + 1] - dy * a->nrm[2 * i];
            moved = fmax(moved, tang * tang);
        }
        if (moved <= MEASURE_MOVE * MEASURE_MOVE || round == MEASURE_ROUNDS)
            break;
        /* The fit moved the outline far: follow this measured outline
           until the model settles on it, then measure the image again. */
        memcpy(a->poly, a->meas, (size_t)a->dim * sizeof *a->meas);
        memcpy(a->pvalid, a->valid, (size_t)a->n);
        {
            const mb_layout *lay = mb_shape_model_layout(a->sm);
            for (int o = 0, first = 0; o < lay->n_outlines; first += lay->counts[o], o++)
                for (int r = 0; r < lay->counts[o]; r++)
                    a->seg[first + r] = r;
        }
        for (int f = 0; f < FOLLOW_ROUNDS; f++) {
            if (follow(a) < 3)
                break;
            memcpy(a->target, a->pts, (size_t)a->dim * sizeof *a->pts);
            if (fit_measured(a, &pose, &clamped, FOLLOW_STEPS, FOLLOW_SLIDE, FOLLOW_BEND) !=
                MB_OK)
                break; /* the image measurement below decides */
            double step = 0.0;
            for (int i = 0; i < a->n; i++)
                step = fmax(step, sq_dist(a->pts + 2 * i, a->target + 2 * i));
            res->follow_rounds++;
            if (step <= 0.1 * 0.1)
                break;
        }
    }
    distances(a);
    double ss = 0.0;
    int nu = 0;
    for (int i = 0; i < a->n; i++)
        if (a->valid[i] && a->use[i]) {
            ss += a->dist[i] * a->dist[i];
            nu++;
        }
    res->fit_rms = nu > 0 ? sqrt(ss / nu) : 0.0;
    a->dense_n = 0;
    if (!broke && res->n_valid >= 3)
        dense(a, img0);
    fill_result(a, &pose, res);
    return MB_OK;
}
