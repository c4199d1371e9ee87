/*
 * fit/outline.c - outlines of a part from an image (see outline.h for the
 * rules and conventions).
 *
 * Threshold: Otsu, "A threshold selection method from gray-level
 * histograms", IEEE Trans. Systems, Man, and Cybernetics 9(1), 1979: choose
 * t maximising the between-class variance
 *     sigma_B^2(t) = (N S0 - n0 S)^2 / (N^2 n0 (N - n0)),
 * n0, S0 the count and grey sum of {g <= t}, N, S those of all pixels; the
 * separability eta = sigma_B^2 / sigma_T^2 is the paper's own figure of
 * merit and tells a part on a field (eta near 1) from noise alone (about
 * 2/pi for Gaussian noise).
 *
 * Components: two-pass labelling with union-find (Rosenfeld & Pfaltz,
 * "Sequential operations in digital picture processing", JACM 13(4), 1966),
 * the part class 8-connected and the field class 4-connected so that the
 * boundary of every component is one simple closed crack curve.
 *
 * Tracing: crack following with the component on the right. At each pixel
 * corner the two pixels ahead decide: ahead-right in and ahead-left out, go
 * straight; both out, turn right; both in, turn left; ahead-left in only (a
 * diagonal corner), turn left for an 8-connected component and right for a
 * 4-connected one. Each crack lies between an inside and an outside pixel;
 * its point is where the grey level, interpolated linearly between the two
 * pixel centres, crosses t + 0.5 (the pixels being integers on either side
 * of t). This is marching squares on the working level.
 *
 * Sub-pixel edges. A straight edge blurred by a Gaussian point spread of
 * sigma_o and integrated over square pixels has, across the edge, a grey
 * profile close to g(d) = a + (b - a) Phi((d - e) / sigma), sigma^2 =
 * sigma_o^2 + 1/12. The model is fitted by Gauss-Newton in (a, b, e, sigma)
 * to the raw pixels of a strip of the image across the edge (no
 * interpolation, so no interpolation bias, and every pixel is an independent
 * sample of the noise). On a curved outline the pixel's distance d is taken
 * to the osculating circle (d + kappa t^2 / 2 at tangential offset t). And
 * blurring moves the mid-level line of a curved edge towards its centre of
 * curvature by kappa sigma^2 / 2, which is added back. (To first order in
 * kappa sigma: a point at distance delta outside a disc of curvature kappa,
 * blurred by a Gaussian of sigma, sees the fraction
 * Phi(-delta / sigma) - phi(delta / sigma) kappa sigma / 2 of it, which is
 * one half at delta = -kappa sigma^2 / 2.) Measured on rendered discs and
 * lines with blur 1 px and noise 2 grey levels (tests/fit/test_outline.c)
 * this gives about 0.02 px RMS at a contrast of 190 grey levels; the 50 %
 * crossing of an interpolated profile, tried first, gave 0.03-0.08 px on
 * lines and a bias of up to 0.1 px on circles of radius 6-10 px.
 *
 * Phi is computed with the rational approximation of Abramowitz & Stegun,
 * Handbook of Mathematical Functions (1964), 7.1.26 (|error of erf| <=
 * 1.5e-7; coefficients written from memory and checked against glibc's erf
 * during development: largest difference 1.4e-7 on [0, 6]), which shares its
 * exponential with the density.
 */
#include "outline.h"

#include "stats.h"

#include "error.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

/* most pixels of one edge fit window: (2 * (8 + 4) + 3)^2 with the config
 * limits edge_across <= 8 and edge_along <= 4 */
#define EDGE_MAX_PIXELS 729

/* arc length, px, between a measured point and the neighbours its normal
 * and curvature are taken from */
#define STENCIL_PX 5.0

/* Standard normal density and distribution at z (A&S 7.1.26 for erf);
 * used to fill the tables below. */
static void normal_pdf_cdf(double z, double *pdf, double *cdf)
{
    double x = fabs(z) * M_SQRT1_2;
    double t = 1.0 / (1.0 + 0.3275911 * x);
    double ex = exp(-x * x);
    double poly = ((((1.061405429 * t - 1.453152027) * t + 1.421413741) * t -
                    0.284496736) *
                       t +
                   0.254829592) *
                  t;
    double erfx = 1.0 - poly * ex;
    *cdf = z >= 0 ? 0.5 * (1.0 + erfx) : 0.5 * (1.0 - erfx);
    *pdf = 0.3989422804014327 * ex;
}

/* The edge fit evaluates the normal density and distribution some 10^5
 * times per frame: tables at steps of 1/64 over [-8, 8] with linear
 * interpolation (error below 1e-5, far under a grey level at any contrast)
 * are cheaper than the exponential of the direct formula. */
#define NTAB_STEPS 64
#define NTAB_HALF 8
#define NTAB_N (2 * NTAB_HALF * NTAB_STEPS + 1)

typedef struct {
    double pdf[NTAB_N + 1], cdf[NTAB_N + 1]; /* one spare entry for the lerp */
} normal_table;

static void normal_table_fill(normal_table *nt)
{
    for (int i = 0; i <= NTAB_N; i++)
        normal_pdf_cdf((double)(i - NTAB_HALF * NTAB_STEPS) / NTAB_STEPS,
                       &nt->pdf[i], &nt->cdf[i]);
}

static void normal_lookup(const normal_table *nt, double z, double *pdf,
                          double *cdf)
{
    double u = (z + NTAB_HALF) * NTAB_STEPS;
    if (!(u > 0)) {
        *pdf = 0;
        *cdf = 0;
        return;
    }
    if (u >= NTAB_N - 1) {
        *pdf = 0;
        *cdf = 1;
        return;
    }
    int i = (int)u;
    double f = u - i;
    *pdf = nt->pdf[i] + f * (nt->pdf[i + 1] - nt->pdf[i]);
    *cdf = nt->cdf[i] + f * (nt->cdf[i + 1] - nt->cdf[i]);
}

typedef struct {
    int x0, x1;    /* columns, inclusive */
    int32_t label; /* provisional label */
    unsigned char cls;
} run;

typedef struct {
    int area;           /* pixels at the working level */
    int x0, y0, x1, y1; /* bounding box, inclusive */
    int first;          /* index of the raster-first pixel */
    unsigned char cls;  /* 1 bright, 0 dark */
    unsigned char border;
} comp;

typedef struct {
    int start, count;    /* into the trace buffer (points) */
    double length, area; /* area signed: > 0 outer, < 0 holes */
    double cx, cy;       /* centroid of the enclosed area */
    double s0;           /* arc length of the first output point */
} trace_info;

struct mb_outliner {
    int width, height;
    mb_outline_config cfg;
    mb_pyramid *own;       /* pyramid for mb_outliner_run */
    const mb_pyramid *pyr; /* pyramid of the last run */
    int lw, lh;            /* working level size */
    run *runs;             /* 2 * lw: this row's and the last row's runs */
    int32_t *label;        /* lw * lh provisional labels */
    int32_t *parent;       /* union-find over labels, cap_labels + 1 */
    comp *comps;           /* per label, cap_labels + 1 */
    int cap_labels;
    double *trace; /* traced and refined points, 2 * cap_trace */
    double *cum;   /* cumulative arc length per traced point */
    int cap_trace;
    trace_info info[MB_MAX_OUTLINES];
    int n_outlines;
    int ok;                 /* last run found outlines */
    mb_outline_result last; /* and what it found */
    double *points;         /* 2 * cfg.points */
    double *sigmas, *steps; /* per measured point, for medians */
    double *nrm, *kap;      /* normals and curvatures, cfg.points each */
    double *scratch;        /* copy of one trace, 2 * cap_trace */
    normal_table ntab;
    mb_layout layout;
    double mid; /* grey half-way between the class means */
    int part_dark;
    double min_step; /* smallest accepted edge contrast */
};

void mb_outline_config_default(mb_outline_config *cfg)
{
    if (!cfg)
        return;
    cfg->level = 2;
    cfg->points = 1024;
    cfg->min_points = 16;
    cfg->min_blob_area = 150;
    cfg->min_part_area = 400;
    cfg->min_hole_area = 40;
    cfg->min_contrast = 20;
    cfg->min_separability = 0.75;
    cfg->edge_across = 3.5;
    cfg->edge_along = 2.0;
}

void mb_outline_histogram(const mb_image *img, uint32_t hist[256])
{
    memset(hist, 0, 256 * sizeof *hist);
    if (!img || !img->pixels)
        return;
    /* four partial histograms: runs of equal grey values (a plain field)
     * would otherwise make every increment wait for the previous one */
    uint32_t part[4][256];
    memset(part, 0, sizeof part);
    for (int y = 0; y < img->height; y++) {
        const uint8_t *r = img->pixels + (size_t)y * img->stride;
        int x = 0;
        for (; x + 4 <= img->width; x += 4) {
            part[0][r[x]]++;
            part[1][r[x + 1]]++;
            part[2][r[x + 2]]++;
            part[3][r[x + 3]]++;
        }
        for (; x < img->width; x++)
            part[0][r[x]]++;
    }
    for (int g = 0; g < 256; g++)
        hist[g] = part[0][g] + part[1][g] + part[2][g] + part[3][g];
}

int mb_outline_threshold(const uint32_t hist[256], mb_otsu *out)
{
    if (!hist || !out)
        return MB_EINVAL;
    memset(out, 0, sizeof *out);
    uint64_t n = 0, s = 0;
    double s2 = 0;
    int lo = -1;
    for (int g = 0; g < 256; g++) {
        n += hist[g];
        s += (uint64_t)g * hist[g];
        s2 += (double)g * g * hist[g];
        if (hist[g] && lo < 0)
            lo = g;
    }
    if (n == 0)
        return MB_EDEGENERATE;
    const double N = (double)n, mean = (double)s / N;
    double best = -1;
    uint64_t n0 = 0, s0 = 0, bn0 = 0, bs0 = 0;
    for (int t = 0; t < 255; t++) {
        n0 += hist[t];
        s0 += (uint64_t)t * hist[t];
        if (n0 == 0 || n0 == n)
            continue;
        /* exact integer numerator: N S0 - n0 S (fits easily for any image
         * of up to 2^31 pixels: |value| < 2^31 * 2^31 * 255) */
        double num = (double)((int64_t)(n * s0) - (int64_t)(n0 * s));
        double v = num * num / ((double)n0 * (double)(n - n0));
        if (v > best) {
            best = v;
            out->threshold = t;
            bn0 = n0;
            bs0 = s0;
        }
    }
    if (best < 0) {
        out->threshold = lo;
        out->mean_dark = out->mean_bright = lo;
        out->weight_dark = 1;
        return MB_EDEGENERATE;
    }
    double var_t = s2 / N - mean * mean;
    double var_b = best / (N * N);
    out->eta = var_t > 0 ? var_b / var_t : 0;
    out->mean_dark = (double)bs0 / (double)bn0;
    out->mean_bright = (double)(s - bs0) / (double)(n - bn0);
    out->weight_dark = (double)bn0 / N;
    return MB_OK;
}

int mb_outline_counts(const double *lengths, int n, int points, int min_points,
                      mb_layout *layout)
{
    if (!lengths || !layout || n < 1 || n > MB_MAX_OUTLINES || min_points < 3)
        return MB_EINVAL;
    for (int i = 0; i < n; i++)
        if (!(lengths[i] > 0) || !isfinite(lengths[i]))
            return MB_EINVAL;
    if (min_points > MB_MAX_OUTLINE_POINTS || points < n * min_points ||
        (long)points > (long)n * MB_MAX_OUTLINE_POINTS)
        return MB_ERANGE;
    int fixed[MB_MAX_OUTLINES] = {0};
    int c[MB_MAX_OUTLINES];
    double frac[MB_MAX_OUTLINES];
    for (;;) {
        long left = points;
        double total = 0;
        for (int i = 0; i < n; i++) {
            if (fixed[i])
                left -= c[i];
            else
                total += lengths[i];
        }
        /* outlines whose share falls below the minimum get the minimum;
         * then those above the cap get the cap; then share the rest */
        int changed = 0;
        for (int i = 0; i < n; i++)
            if (!fixed[i] && (double)left * lengths[i] / total < min_points) {
                fixed[i] = 1;
                c[i] = min_points;
                changed = 1;
            }
        if (changed)
            continue;
        for (int i = 0; i < n; i++)
            if (!fixed[i] &&
                (double)left * lengths[i] / total > MB_MAX_OUTLINE_POINTS) {
                fixed[i] = 1;
                c[i] = MB_MAX_OUTLINE_POINTS;
                changed = 1;
            }
        if (changed)
            continue;
        long used = 0;
        for (int i = 0; i < n; i++)
            if (!fixed[i]) {
                double share = (double)left * lengths[i] / total;
                c[i] = (int)floor(share);
                frac[i] = share - c[i];
                used += c[i];
            }
        long rem = left - used;
        while (rem > 0) {
            int best = -1;
            for (int i = 0; i < n; i++)
                if (!fixed[i] && c[i] < MB_MAX_OUTLINE_POINTS &&
                    (best < 0 || frac[i] > frac[best]))
                    best = i;
            MB_ASSERT(best >= 0);
            c[best]++;
            frac[best] = -1;
            rem--;
        }
        break;
    }
    layout->n_outlines = n;
    layout->n_points = 0;
    for (int i = 0; i < n; i++) {
        layout->counts[i] = c[i];
        layout->n_points += c[i];
    }
    for (int i = n; i < MB_MAX_OUTLINES; i++)
        layout->counts[i] = 0;
    return MB_OK;
}

void mb_outliner_close(mb_outliner *o)
{
    if (!o)
        return;
    mb_pyramid_close(o->own);
    free(o->runs);
    free(o->label);
    free(o->parent);
    free(o->comps);
    free(o->trace);
    free(o->cum);
    free(o->points);
    free(o->sigmas);
    free(o->steps);
    free(o->nrm);
    free(o->kap);
    free(o->scratch);
    free(o);
}

static int check_config(const mb_outline_config *c, char *err)
{
    if (c->level < 0 || c->level > 6)
        return mb_err_set(err, MB_EINVAL,
                          "outline config: level must be 0..6, not %d",
                          c->level);
    if (c->min_points < 3 || c->min_points > MB_MAX_OUTLINE_POINTS)
        return mb_err_set(err, MB_EINVAL,
                          "outline config: min_points must be 3..%d, not %d",
                          MB_MAX_OUTLINE_POINTS, c->min_points);
    if (c->points < c->min_points ||
        (long)c->points > (long)MB_MAX_OUTLINES * MB_MAX_OUTLINE_POINTS)
        return mb_err_set(
            err, MB_EINVAL, "outline config: points must be %d..%ld, not %d",
            c->min_points, (long)MB_MAX_OUTLINES * MB_MAX_OUTLINE_POINTS,
            c->points);
    if (!(c->min_blob_area >= 0) || !(c->min_part_area >= 0) ||
        !(c->min_hole_area >= 0) || !isfinite(c->min_blob_area) ||
        !isfinite(c->min_part_area) || !isfinite(c->min_hole_area))
        return mb_err_set(err, MB_EINVAL,
                          "outline config: min_blob_area, min_part_area and "
                          "min_hole_area must be finite and >= 0");
    if (!(c->min_contrast >= 0 && c->min_contrast < 255))
        return mb_err_set(err, MB_EINVAL,
                          "outline config: min_contrast must be 0..255, not %g",
                          c->min_contrast);
    if (!(c->min_separability >= 0 && c->min_separability <= 1))
        return mb_err_set(
            err, MB_EINVAL,
            "outline config: min_separability must be 0..1, not %g",
            c->min_separability);
    if (!(c->edge_across >= 1.5 && c->edge_across <= 8))
        return mb_err_set(
            err, MB_EINVAL,
            "outline config: edge_across must be 1.5..8 px, not %g",
            c->edge_across);
    if (!(c->edge_along >= 0.5 && c->edge_along <= 4))
        return mb_err_set(
            err, MB_EINVAL,
            "outline config: edge_along must be 0.5..4 px, not %g",
            c->edge_along);
    return MB_OK;
}

int mb_outliner_create(int width, int height, const mb_outline_config *cfg,
                       mb_outliner **out, char *err)
{
    if (!out)
        return mb_err_set(err, MB_EINVAL, "outliner: no place for the handle");
    *out = NULL;
    mb_outline_config def;
    if (!cfg) {
        mb_outline_config_default(&def);
        cfg = &def;
    }
    int rc = check_config(cfg, err);
    if (rc)
        return rc;
    if (width < 1 || height < 1 || width > 65536 || height > 65536)
        return mb_err_set(err, MB_EINVAL,
                          "outliner: frame size %d x %d is not 1..65536", width,
                          height);
    mb_outliner *o = calloc(1, sizeof *o);
    if (!o)
        return mb_err_set(err, MB_ENOMEM, "outliner: out of memory");
    o->width = width;
    o->height = height;
    o->cfg = *cfg;
    normal_table_fill(&o->ntab);
    if (mb_pyramid_create(width, height, cfg->level + 1, &o->own) != MB_OK)
        goto fail;
    const mb_image *lv = mb_pyramid_level(o->own, cfg->level);
    o->lw = lv->width;
    o->lh = lv->height;
    size_t npx = (size_t)o->lw * (size_t)o->lh;
    /* a new provisional label needs a new pixel: at most one per pixel */
    o->cap_labels = (int)npx;
    /* every crack lies on at most one traced outline */
    o->cap_trace = (int)(2 * npx + (size_t)o->lw + (size_t)o->lh + 4);
    o->runs = malloc(2 * (size_t)o->lw * sizeof *o->runs);
    o->label = malloc(npx * sizeof *o->label);
    o->parent = malloc(((size_t)o->cap_labels + 1) * sizeof *o->parent);
    o->comps = malloc(((size_t)o->cap_labels + 1) * sizeof *o->comps);
    o->trace = malloc(2 * (size_t)o->cap_trace * sizeof *o->trace);
    o->cum = malloc(((size_t)o->cap_trace + 1) * sizeof *o->cum);
    o->points = malloc(2 * (size_t)cfg->points * sizeof *o->points);
    o->sigmas = malloc((size_t)cfg->points * sizeof *o->sigmas);
    o->steps = malloc((size_t)cfg->points * sizeof *o->steps);
    o->nrm = malloc(2 * (size_t)cfg->points * sizeof *o->nrm);
    o->kap = malloc((size_t)cfg->points * sizeof *o->kap);
    o->scratch = malloc(2 * (size_t)o->cap_trace * sizeof *o->scratch);
    if (!o->runs || !o->label || !o->parent || !o->comps || !o->trace ||
        !o->cum || !o->points || !o->sigmas || !o->steps || !o->nrm ||
        !o->kap || !o->scratch)
        goto fail;
    *out = o;
    return MB_OK;
fail:
    mb_outliner_close(o);
    return mb_err_set(err, MB_ENOMEM,
                      "outliner: out of memory for %d x %d frames", width,
                      height);
}

/* ---- components ------------------------------------------------------- */

static int32_t find_root(int32_t *parent, int32_t l)
{
    int32_t r = l;
    while (parent[r] != r)
        r = parent[r];
    while (parent[l] != r) { /* path compression */
        int32_t next = parent[l];
        parent[l] = r;
        l = next;
    }
    return r;
}

/* Join the sets of a and b; the smaller root (the earlier label, whose
 * first pixel is the set's raster-first pixel) stays root. */
static int32_t join(int32_t *parent, int32_t a, int32_t b)
{
    if (a == b)
        return a;
    int32_t ra = find_root(parent, a), rb = find_root(parent, b);
    if (ra < rb) {
        parent[rb] = ra;
        return ra;
    }
    parent[ra] = rb;
    return rb;
}

/* Label the working level lv split at t (bright: grey > t): class
 * part_cls 8-connected, the other class 4-connected. Works on runs of equal
 * class along each row: a run joins the runs of its class in the row above
 * that overlap it (4-connected) or overlap or touch it diagonally
 * (8-connected). Afterwards parent[l] is the root of every label l and
 * comps[root] holds the component's statistics. Returns the number of
 * labels. */
static int label_components(mb_outliner *o, const mb_image *lv, int t,
                            int part_cls)
{
    const int W = o->lw, H = o->lh;
    int32_t *lab = o->label, *parent = o->parent;
    comp *cs = o->comps;
    run *prev = o->runs, *cur = o->runs + W;
    int n = 0, n_prev = 0;
    for (int y = 0; y < H; y++) {
        const uint8_t *r = lv->pixels + (size_t)y * lv->stride;
        int n_cur = 0, j = 0;
        for (int x0 = 0; x0 < W;) {
            const int c = r[x0] > t;
            int x1 = x0;
            while (x1 + 1 < W && (r[x1 + 1] > t) == c)
                x1++;
            /* runs of the row above that can touch [x0, x1] */
            const int d = c == part_cls; /* diagonal reach */
            while (j < n_prev && prev[j].x1 < x0 - 1)
                j++;
            int32_t l = 0;
            for (int k = j; k < n_prev && prev[k].x0 <= x1 + 1; k++) {
                if (prev[k].cls != c || prev[k].x1 < x0 - d ||
                    prev[k].x0 > x1 + d)
                    continue;
                l = l ? join(parent, l, prev[k].label) : prev[k].label;
            }
            if (!l) {
                l = ++n;
                MB_ASSERT(n <= o->cap_labels);
                parent[l] = l;
                cs[l].area = 0;
                cs[l].x0 = x0;
                cs[l].x1 = x1;
                cs[l].y0 = cs[l].y1 = y;
                cs[l].first = y * W + x0;
                cs[l].cls = (unsigned char)c;
                cs[l].border = 0;
            }
            comp *k = &cs[l];
            k->area += x1 - x0 + 1;
            if (x0 < k->x0)
                k->x0 = x0;
            if (x1 > k->x1)
                k->x1 = x1;
            k->y1 = y;
            if (x0 == 0 || x1 == W - 1 || y == 0 || y == H - 1)
                k->border = 1;
            int32_t *row = lab + (size_t)y * W;
            for (int x = x0; x <= x1; x++)
                row[x] = l;
            cur[n_cur].x0 = x0;
            cur[n_cur].x1 = x1;
            cur[n_cur].cls = (unsigned char)c;
            cur[n_cur].label = l;
            n_cur++;
            x0 = x1 + 1;
        }
        run *tmp = prev;
        prev = cur;
        cur = tmp;
        n_prev = n_cur;
    }
    /* flatten and merge the statistics into the roots; the root is the
     * smallest label of its set, so its first pixel is the set's first */
    for (int32_t l = 1; l <= n; l++) {
        int32_t r = find_root(parent, l);
        parent[l] = r;
        if (r == l)
            continue;
        comp *a = &cs[r], *b = &cs[l];
        a->area += b->area;
        if (b->x0 < a->x0)
            a->x0 = b->x0;
        if (b->x1 > a->x1)
            a->x1 = b->x1;
        if (b->y0 < a->y0)
            a->y0 = b->y0;
        if (b->y1 > a->y1)
            a->y1 = b->y1;
        a->border |= b->border;
    }
    return n;
}

/* ---- tracing ---------------------------------------------------------- */

static int inside(const mb_outliner *o, int x, int y, int32_t root)
{
    if (x < 0 || y < 0 || x >= o->lw || y >= o->lh)
        return 0;
    return o->parent[o->label[(size_t)y * o->lw + x]] == root;
}

/* Follow the cracks around component root with it on the right, from the
 * top crack of its first pixel; write one point per crack (full-res px)
 * to dst. Returns the number of points. */
static int trace_component(const mb_outliner *o, const mb_image *lv,
                           int32_t root, int conn8, double iso, double *dst,
                           int cap)
{
    const int first = o->comps[root].first;
    const int x0 = first % o->lw, y0 = first / o->lw;
    const double scale = ldexp(1.0, o->cfg.level);
    int x = x0, y = y0, dx = 1, dy = 0, n = 0;
    do {
        /* the crack from corner (x, y) (at x - 0.5, y - 0.5) along (dx, dy):
         * inside pixel on its right, outside pixel on its left */
        int rx = x + (dx - dy - 1) / 2, ry = y + (dy + dx - 1) / 2;
        int lx = x + (dx + dy - 1) / 2, ly = y + (dy - dx - 1) / 2;
        double vi = lv->pixels[(size_t)ry * lv->stride + rx];
        double vo = lv->pixels[(size_t)ly * lv->stride + lx];
        double f = (iso - vi) / (vo - vi);
        MB_ASSERT(n < cap);
        dst[2 * n] = scale * (rx + f * (lx - rx));
        dst[2 * n + 1] = scale * (ry + f * (ly - ry));
        n++;
        x += dx;
        y += dy;
        int ar = inside(o, x + (dx - dy - 1) / 2, y + (dy + dx - 1) / 2, root);
        int al = inside(o, x + (dx + dy - 1) / 2, y + (dy - dx - 1) / 2, root);
        int t;
        if (ar && !al)
            continue;              /* straight on */
        if (al && (ar || conn8)) { /* turn left */
            t = dx;
            dx = dy;
            dy = -t;
        } else { /* turn right */
            t = dx;
            dx = -dy;
            dy = t;
        }
    } while (!(x == x0 && y == y0 && dx == 1 && dy == 0));
    return n;
}

static void reverse_points(double *p, int n)
{
    for (int i = 0, j = n - 1; i < j; i++, j--) {
        double tx = p[2 * i], ty = p[2 * i + 1];
        p[2 * i] = p[2 * j];
        p[2 * i + 1] = p[2 * j + 1];
        p[2 * j] = tx;
        p[2 * j + 1] = ty;
    }
}

/* ---- sub-pixel edges ---------------------------------------------------- */

/* Outward unit normal at point i of a closed polyline of n points, from
 * its neighbours k away (part on the right: background on the left). */
static int normal_at(const double *p, int n, int i, int k, double *nx,
                     double *ny)
{
    int a = ((i - k) % n + n) % n, b = (i + k) % n;
    double tx = p[2 * b] - p[2 * a], ty = p[2 * b + 1] - p[2 * a + 1];
    double len = hypot(tx, ty);
    if (!(len > 1e-9))
        return -1;
    *nx = ty / len;
    *ny = -tx / len;
    return 0;
}

/* Move (px, py) along n to where the grey level of img crosses mid from
 * the part side to the field side; the crossing nearest the point within
 * +-range px. sign: +1 when the field is brighter than the part. */
static void edge_cross(const mb_image *img, double *px, double *py, double nx,
                       double ny, int range, double mid, double sign)
{
    double best = INFINITY, e = 0;
    double hp =
        sign *
        (mb_pyramid_sample(img, *px - range * nx, *py - range * ny) - mid);
    for (int k = -range + 1; k <= range; k++) {
        double h =
            sign * (mb_pyramid_sample(img, *px + k * nx, *py + k * ny) - mid);
        if (hp <= 0 && h > 0) {
            double s = k - 1 + hp / (hp - h);
            if (fabs(s) < fabs(best)) {
                best = s;
                e = s;
            }
        }
        hp = h;
    }
    if (isfinite(best)) {
        *px += e * nx;
        *py += e * ny;
    }
}

typedef struct {
    double e, sigma, step;
} edge_result;

/* Intersect [*lo, *hi] with {q : a <= c q <= b}. Returns 0 when empty. */
static int interval(double c, double a, double b, double *lo, double *hi)
{
    if (fabs(c) < 1e-12)
        return a <= 0 && 0 <= b;
    double u = a / c, v = b / c;
    if (u > v) {
        double w = u;
        u = v;
        v = w;
    }
    if (u > *lo)
        *lo = u;
    if (v < *hi)
        *hi = v;
    return *lo <= *hi + 1e-9;
}

/* Least-squares fit of a + (b - a) Phi((d - e) / sigma) to the pixels of
 * img in the strip |t| <= along, |d| <= across around (px, py), d along
 * the unit normal n (part side negative), d corrected for the curvature
 * kappa (> 0 where the part is convex); then e corrected by kappa sigma^2/2.
 * sign: +1 when the field is brighter. Returns 0, or -1 when the fit is
 * not trustworthy (too few pixels, no step of the expected sign, the edge
 * not inside the window). */
static int edge_fit(const normal_table *nt, const mb_image *img, double px,
                    double py, double nx, double ny, double kappa,
                    double across, double along, double sign, double min_step,
                    double sigma0, edge_result *res)
{
    double dd[EDGE_MAX_PIXELS], gg[EDGE_MAX_PIXELS];
    const double reach = across + along;
    int xa = (int)floor(px - reach), xb = (int)ceil(px + reach);
    int ya = (int)floor(py - reach), yb = (int)ceil(py + reach);
    if (xa < 0)
        xa = 0;
    if (ya < 0)
        ya = 0;
    if (xb > img->width - 1)
        xb = img->width - 1;
    if (yb > img->height - 1)
        yb = img->height - 1;
    int m = 0, na = 0, nb = 0;
    double a = 0, b = 0;
    for (int y = ya; y <= yb; y++) {
        const uint8_t *row = img->pixels + (size_t)y * img->stride;
        double qy = y - py;
        /* the columns of this row inside the strip: |d| <= across and
         * |t| <= along are each an interval of qx (rounded outwards, the
         * exact test follows) */
        double lo = xa - px, hi = xb - px;
        if (!interval(nx, -across - qy * ny, across - qy * ny, &lo, &hi) ||
            !interval(-ny, -along - qy * nx, along - qy * nx, &lo, &hi))
            continue;
        int x0 = (int)floor(px + lo), x1 = (int)ceil(px + hi);
        if (x0 < xa)
            x0 = xa;
        if (x1 > xb)
            x1 = xb;
        for (int x = x0; x <= x1; x++) {
            double qx = x - px;
            double d = qx * nx + qy * ny, t = qy * nx - qx * ny;
            if (fabs(t) > along || fabs(d) > across)
                continue;
            d += 0.5 * kappa * t * t;
            MB_ASSERT(m < EDGE_MAX_PIXELS);
            dd[m] = d;
            gg[m] = row[x];
            if (d < -1.5) {
                a += gg[m];
                na++;
            } else if (d > 1.5) {
                b += gg[m];
                nb++;
            }
            m++;
        }
    }
    if (na < 2 || nb < 2 || m < 8)
        return -1;
    a /= na;
    b /= nb;
    double e = 0, sg = sigma0;
    const double sg_max = across / 1.5;
    for (int it = 0; it < 10; it++) {
        /* normal equations J'J d = J'r, accumulated in scalars (the
         * inner loop of the whole outliner) */
        double s00 = 0, s10 = 0, s11 = 0, s20 = 0, s21 = 0, s22 = 0;
        double s30 = 0, s31 = 0, s32 = 0, s33 = 0, q0 = 0, q1 = 0, q2 = 0,
               q3 = 0;
        const double isg = 1.0 / sg, ba = b - a, c = -ba * isg;
        for (int k = 0; k < m; k++) {
            double z = (dd[k] - e) * isg, pdf, cdf;
            normal_lookup(nt, z, &pdf, &cdf);
            double r = gg[k] - a - ba * cdf;
            double j0 = 1 - cdf, j1 = cdf, j2 = c * pdf, j3 = j2 * z;
            q0 += j0 * r;
            q1 += j1 * r;
            q2 += j2 * r;
            q3 += j3 * r;
            s00 += j0 * j0;
            s10 += j1 * j0;
            s11 += j1 * j1;
            s20 += j2 * j0;
            s21 += j2 * j1;
            s22 += j2 * j2;
            s30 += j3 * j0;
            s31 += j3 * j1;
            s32 += j3 * j2;
            s33 += j3 * j3;
        }
        const double A[4][4] = {{s00, 0, 0, 0},
                                {s10, s11, 0, 0},
                                {s20, s21, s22, 0},
                                {s30, s31, s32, s33}};
        const double r4[4] = {q0, q1, q2, q3};
        /* Cholesky of the 4 x 4 normal matrix, with a tiny ridge */
        double L[4][4] = {{0}}, z4[4], d4[4];
        for (int u = 0; u < 4; u++) {
            for (int v = 0; v <= u; v++) {
                double s = A[u][v] + (u == v ? 1e-9 * (A[u][u] + 1e-12) : 0);
                for (int w = 0; w < v; w++)
                    s -= L[u][w] * L[v][w];
                if (u == v) {
                    if (!(s > 0))
                        return -1;
                    L[u][u] = sqrt(s);
                } else {
                    L[u][v] = s / L[v][v];
                }
            }
        }
        for (int u = 0; u < 4; u++) {
            double s = r4[u];
            for (int w = 0; w < u; w++)
                s -= L[u][w] * z4[w];
            z4[u] = s / L[u][u];
        }
        for (int u = 3; u >= 0; u--) {
            double s = z4[u];
            for (int w = u + 1; w < 4; w++)
                s -= L[w][u] * d4[w];
            d4[u] = s / L[u][u];
        }
        double de = d4[2], ds = d4[3];
        if (de > 1)
            de = 1;
        if (de < -1)
            de = -1;
        a += d4[0];
        b += d4[1];
        e += de;
        sg += ds;
        if (sg < 0.25)
            sg = 0.25;
        if (sg > sg_max)
            sg = sg_max;
        /* Gauss-Newton converges fast this close to the answer: the step
         * after a 0.005 px step is far below the noise (about 0.02 px) */
        if (fabs(de) < 5e-3 && fabs(ds) < 2e-2)
            break;
    }
    if (!isfinite(e) || fabs(e) > 0.5 * across || sign * (b - a) < min_step)
        return -1;
    res->e = e + 0.5 * kappa * sg * sg;
    res->sigma = sg;
    res->step = fabs(b - a);
    return 0;
}

/* ---- arc length --------------------------------------------------------- */

/* Length, signed area, centroid and cumulative arc length of trace i; and
 * the arc position of its first output point (rule 10). */
static void measure_trace(mb_outliner *o, int i)
{
    trace_info *ti = &o->info[i];
    const double *p = o->trace + 2 * (size_t)ti->start;
    double *cum = o->cum + ti->start;
    const int n = ti->count;
    double len = 0, a2 = 0, cx = 0, cy = 0;
    for (int k = 0; k < n; k++) {
        int j = k + 1 < n ? k + 1 : 0;
        double x0 = p[2 * k], y0 = p[2 * k + 1], x1 = p[2 * j],
               y1 = p[2 * j + 1];
        double c = x0 * y1 - x1 * y0;
        cum[k] = len;
        len += hypot(x1 - x0, y1 - y0);
        a2 += c;
        cx += (x0 + x1) * c;
        cy += (y0 + y1) * c;
    }
    ti->length = len;
    ti->area = 0.5 * a2;
    if (fabs(a2) > 0) {
        cx /= 3 * a2;
        cy /= 3 * a2;
    } else {
        cx = p[0];
        cy = p[1];
    }
    ti->cx = cx;
    ti->cy = cy;
    /* last crossing of the ray y = cy, x > cx: the crossing of largest x */
    double bestx = -INFINITY, s0 = 0;
    int kmax = 0;
    for (int k = 0; k < n; k++) {
        int j = k + 1 < n ? k + 1 : 0;
        double y0 = p[2 * k + 1], y1 = p[2 * j + 1];
        if (p[2 * k] > p[2 * kmax])
            kmax = k;
        if (!((y0 <= cy && cy < y1) || (y1 <= cy && cy < y0)))
            continue;
        double f = (cy - y0) / (y1 - y0);
        double x = p[2 * k] + f * (p[2 * j] - p[2 * k]);
        if (x > cx && x > bestx) {
            bestx = x;
            double seg = (j ? cum[j] : len) - cum[k];
            s0 = cum[k] + f * seg;
        }
    }
    if (!isfinite(bestx))
        s0 = cum[kmax];
    ti->s0 = s0;
}

/* Median of v[0..n-1] by quickselect (reorders v); 0 for n == 0. */
static double median(double *v, int n)
{
    return mb_stats_median_inplace(v, n);
}

/* Resample every trace with o->layout and measure each point (rule 6);
 * write o->points and the per-outline figures of res. */
static void resample_and_measure(mb_outliner *o, mb_outline_result *res)
{
    const mb_image *full = mb_pyramid_level(o->pyr, 0);
    const double sign = o->part_dark ? 1.0 : -1.0;
    int outp = 0, n_fit = 0, unrefined = 0;
    double sigma0 = 1.0;
    for (int i = 0; i < o->n_outlines; i++) {
        const trace_info *ti = &o->info[i];
        const double *p = o->trace + 2 * (size_t)ti->start;
        const double *cum = o->cum + ti->start;
        const int n = ti->count, N = o->layout.counts[i];
        const double step = ti->length / N;
        double *q = o->points + 2 * (size_t)outp;
        /* points evenly spaced by arc length along the refined trace */
        int k = 0;
        for (int j = 0; j < N; j++) {
            double s = ti->s0 + j * step;
            if (s >= ti->length)
                s -= ti->length;
            if (cum[k] > s)
                k = 0; /* wrapped past the end */
            while (k + 1 < n && cum[k + 1] <= s)
                k++;
            int kn = k + 1 < n ? k + 1 : 0;
            double seg = (k + 1 < n ? cum[k + 1] : ti->length) - cum[k];
            double f = seg > 0 ? (s - cum[k]) / seg : 0;
            q[2 * j] = p[2 * k] + f * (p[2 * kn] - p[2 * k]);
            q[2 * j + 1] = p[2 * k + 1] + f * (p[2 * kn + 1] - p[2 * k + 1]);
        }
        /* normals and curvatures from the resampled points about
         * STENCIL_PX of arc either side (noise of the traced points
         * averages out over a longer chord; exact on a circle), all taken
         * before any point of this outline moves */
        int kst = (int)floor(STENCIL_PX / step + 0.5);
        if (kst < 1)
            kst = 1;
        if (kst > N / 4)
            kst = N / 4 > 1 ? N / 4 : 1;
        double *nrm = o->nrm, *kap = o->kap;
        for (int j = 0; j < N; j++) {
            if (normal_at(q, N, j, kst, &nrm[2 * j], &nrm[2 * j + 1]) != 0) {
                kap[j] = NAN;
                continue;
            }
            int a = ((j - kst) % N + N) % N, b = (j + kst) % N;
            double sx = q[2 * a] + q[2 * b] - 2 * q[2 * j];
            double sy = q[2 * a + 1] + q[2 * b + 1] - 2 * q[2 * j + 1];
            double la = hypot(q[2 * j] - q[2 * a], q[2 * j + 1] - q[2 * a + 1]);
            double lb = hypot(q[2 * b] - q[2 * j], q[2 * b + 1] - q[2 * j + 1]);
            double kappa =
                la > 0 && lb > 0
                    ? -(sx * nrm[2 * j] + sy * nrm[2 * j + 1]) / (la * lb)
                    : 0;
            /* radius of curvature below 4 px: a corner, where the circle
             * model does not hold; limit its effect */
            kap[j] = kappa > 0.25 ? 0.25 : kappa < -0.25 ? -0.25 : kappa;
        }
        for (int j = 0; j < N; j++) {
            edge_result er;
            if (isnan(kap[j]) ||
                edge_fit(&o->ntab, full, q[2 * j], q[2 * j + 1], nrm[2 * j],
                         nrm[2 * j + 1], kap[j], o->cfg.edge_across,
                         o->cfg.edge_along, sign, o->min_step, sigma0,
                         &er) != 0) {
                unrefined++;
                continue;
            }
            q[2 * j] += er.e * nrm[2 * j];
            q[2 * j + 1] += er.e * nrm[2 * j + 1];
            o->sigmas[n_fit] = er.sigma;
            o->steps[n_fit] = er.step;
            n_fit++;
            sigma0 =
                er.sigma; /* the blur varies slowly: start the next fit there */
        }
        /* perimeter and area of the measured polygon */
        double len = 0, a2 = 0;
        for (int j = 0; j < N; j++) {
            int jn = j + 1 < N ? j + 1 : 0;
            len += hypot(q[2 * jn] - q[2 * j], q[2 * jn + 1] - q[2 * j + 1]);
            a2 += q[2 * j] * q[2 * jn + 1] - q[2 * jn] * q[2 * j + 1];
        }
        res->length[i] = len;
        res->area[i] = 0.5 * fabs(a2);
        res->spacing[i] = len / N;
        outp += N;
    }
    res->unrefined = unrefined;
    res->blur = median(o->sigmas, n_fit);
    res->contrast = median(o->steps, n_fit);
    res->layout = o->layout;
    res->points = o->points;
    res->outlines.n_outlines = o->layout.n_outlines;
    for (int i = 0; i < MB_MAX_OUTLINES; i++)
        res->outlines.counts[i] = o->layout.counts[i];
    res->outlines.xy = o->points;
}

/* ---- the run ------------------------------------------------------------ */

static void clear_result(mb_outline_result *res)
{
    memset(res, 0, sizeof *res);
}

int mb_outliner_run_pyramid(mb_outliner *o, const mb_pyramid *pyr,
                            mb_outline_result *res, char *err)
{
    if (!o || !pyr || !res)
        return mb_err_set(err, MB_EINVAL, "outliner: NULL argument");
    clear_result(res);
    o->ok = 0;
    const int L = o->cfg.level;
    if (mb_pyramid_levels(pyr) < L + 1)
        return mb_err_set(
            err, MB_EINVAL,
            "outliner: the pyramid has %d levels, level %d needs %d",
            mb_pyramid_levels(pyr), L, L + 1);
    const mb_image *full = mb_pyramid_level(pyr, 0),
                   *lv = mb_pyramid_level(pyr, L);
    if (!full->pixels)
        return mb_err_set(err, MB_EINVAL,
                          "outliner: the pyramid was never built");
    if (full->width != o->width || full->height != o->height)
        return mb_err_set(
            err, MB_ESIZE,
            "outliner: frame is %d x %d, the outliner was made for %d x %d",
            full->width, full->height, o->width, o->height);
    MB_ASSERT(lv->width == o->lw && lv->height == o->lh);
    o->pyr = pyr;
    const int W = o->lw, H = o->lh;
    const double px_area = ldexp(1.0, 2 * L); /* full-res px^2 per level px */

    /* 1. threshold */
    uint32_t hist[256];
    mb_outline_histogram(lv, hist);
    if (mb_outline_threshold(hist, &res->otsu) != MB_OK)
        return mb_err_set(err, MB_ENOPART,
                          "no part: the frame has one grey level (%d)",
                          res->otsu.threshold);
    const mb_otsu *ot = &res->otsu;
    if (ot->mean_bright - ot->mean_dark < o->cfg.min_contrast)
        return mb_err_set(err, MB_ENOPART,
                          "no part: the two grey classes differ by %.1f grey "
                          "levels, less than "
                          "min_contrast %.1f",
                          ot->mean_bright - ot->mean_dark, o->cfg.min_contrast);
    if (ot->eta < o->cfg.min_separability)
        return mb_err_set(err, MB_ENOPART,
                          "no part: Otsu separability %.3f is below "
                          "min_separability %.3f (noise "
                          "or texture only)",
                          ot->eta, o->cfg.min_separability);
    const int t = ot->threshold;

    /* 2. polarity */
    long border_bright = 0, border_all = 0;
    for (int y = 0; y < H; y++) {
        const uint8_t *r = lv->pixels + (size_t)y * lv->stride;
        if (y == 0 || y == H - 1) {
            for (int x = 0; x < W; x++)
                border_bright += r[x] > t;
            border_all += W;
        } else {
            border_bright += (r[0] > t) + (W > 1 && r[W - 1] > t);
            border_all += W > 1 ? 2 : 1;
        }
    }
    long border_dark = border_all - border_bright;
    int part_bright;
    if (border_bright != border_dark)
        part_bright = border_bright < border_dark;
    else /* the minority class; on a tie, dark */
        part_bright = ot->weight_dark > 0.5;
    const int part_cls = part_bright;
    o->part_dark = res->part_dark = !part_bright;
    o->mid = 0.5 * (ot->mean_dark + ot->mean_bright);
    o->min_step = 0.5 * o->cfg.min_contrast;

    /* 3. components and the part */
    int n_labels = label_components(o, lv, t, part_cls);
    const double blob_px = o->cfg.min_blob_area / px_area;
    const double part_px = o->cfg.min_part_area / px_area;
    const double hole_px = o->cfg.min_hole_area / px_area;
    int32_t part = 0;
    int best_area = 0, runner = 0;
    for (int32_t l = 1; l <= n_labels; l++) {
        const comp *c = &o->comps[l];
        if (o->parent[l] != l || c->cls != part_cls || c->area < blob_px)
            continue;
        if (c->area >= part_px)
            res->candidates++;
        if (c->area > best_area) {
            if (best_area >= part_px)
                runner = best_area;
            best_area = c->area;
            part = l;
        } else if (c->area >= part_px && c->area > runner) {
            runner = c->area;
        }
    }
    if (!part)
        return mb_err_set(
            err, MB_ENOPART, "no part: no %s component of %.0f px^2 or more",
            part_bright ? "bright" : "dark", o->cfg.min_blob_area);
    const comp *pc = &o->comps[part];
    res->part_area = pc->area * px_area;
    res->runner_up_area = runner * px_area;
    const int sc = 1 << L;
    res->box[0] = pc->x0 * sc;
    res->box[1] = pc->y0 * sc;
    res->box[2] = (pc->x1 - pc->x0 + 1) * sc;
    res->box[3] = (pc->y1 - pc->y0 + 1) * sc;
    if (pc->border)
        return mb_err_set(err, MB_EEDGE,
                          "part touches the frame edge: the largest %s "
                          "component (%.0f px^2, box "
                          "x %d..%d, y %d..%d) reaches the border",
                          part_bright ? "bright" : "dark", res->part_area,
                          res->box[0], res->box[0] + res->box[2] - 1,
                          res->box[1], res->box[1] + res->box[3] - 1);
    if (pc->area < part_px)
        return mb_err_set(err, MB_EDEGENERATE,
                          "part too small: %.0f px^2, min_part_area is %.0f",
                          res->part_area, o->cfg.min_part_area);

    /* 4. holes: the largest MB_MAX_OUTLINES - 1, by pixel count */
    int32_t holes[MB_MAX_OUTLINES - 1];
    int n_holes = 0;
    for (int32_t l = 1; l <= n_labels; l++) {
        const comp *c = &o->comps[l];
        if (o->parent[l] != l || c->cls == part_cls || c->border ||
            c->area < hole_px || c->area < 1)
            continue;
        /* the pixel above a component's first pixel lies on its outer
         * border, which belongs to the component around it */
        if (o->parent[o->label[c->first - W]] != part)
            continue;
        if (n_holes == MB_MAX_OUTLINES - 1 &&
            c->area <= o->comps[holes[n_holes - 1]].area) {
            res->holes_dropped++;
            continue;
        }
        if (n_holes == MB_MAX_OUTLINES - 1) {
            n_holes--;
            res->holes_dropped++;
        }
        int k = n_holes++;
        while (k > 0 && o->comps[holes[k - 1]].area < c->area) {
            holes[k] = holes[k - 1];
            k--;
        }
        holes[k] = l;
    }

    /* 5. tracing, and 6a. the traced points onto the mid-level crossing */
    const double iso = t + 0.5;
    const int range = (1 << L) + 3;
    const double sign = o->part_dark ? 1.0 : -1.0;
    int used = 0;
    o->n_outlines = 1 + n_holes;
    for (int i = 0; i < o->n_outlines; i++) {
        int32_t root = i ? holes[i - 1] : part;
        double *dst = o->trace + 2 * (size_t)used;
        int n =
            trace_component(o, lv, root, i == 0, iso, dst, o->cap_trace - used);
        if (i)
            reverse_points(dst, n); /* traced with the hole on the right */
        /* normals from the unmoved trace (a copy), then move */
        memcpy(o->scratch, dst, 2 * (size_t)n * sizeof *dst);
        for (int k = 0; k < n; k++) {
            double nx, ny;
            if (normal_at(o->scratch, n, k, 2, &nx, &ny) != 0)
                continue;
            edge_cross(full, &dst[2 * k], &dst[2 * k + 1], nx, ny, range,
                       o->mid, sign);
        }
        o->info[i].start = used;
        o->info[i].count = n;
        used += n;
        measure_trace(o, i);
    }

    /* 8. holes by decreasing enclosed area (stable: ties keep the order by
     * pixel count, then raster order) */
    for (int i = 2; i < o->n_outlines; i++) {
        trace_info ti = o->info[i];
        int k = i;
        while (k > 1 && fabs(o->info[k - 1].area) < fabs(ti.area)) {
            o->info[k] = o->info[k - 1];
            k--;
        }
        o->info[k] = ti;
    }

    /* 9. points per outline, 6b. resample and measure */
    double lengths[MB_MAX_OUTLINES];
    for (int i = 0; i < o->n_outlines; i++)
        lengths[i] = o->info[i].length;
    int rc = mb_outline_counts(lengths, o->n_outlines, o->cfg.points,
                               o->cfg.min_points, &o->layout);
    if (rc != MB_OK)
        return mb_err_set(
            err, MB_EDEGENERATE,
            "part has %d outlines: the budget of %d points cannot give each of "
            "them %d points",
            o->n_outlines, o->cfg.points, o->cfg.min_points);
    resample_and_measure(o, res);
    o->last = *res;
    o->ok = 1;
    return MB_OK;
}

int mb_outliner_run(mb_outliner *o, const mb_image *frame,
                    mb_outline_result *res, char *err)
{
    if (!o || !frame || !res)
        return mb_err_set(err, MB_EINVAL, "outliner: NULL argument");
    clear_result(res);
    o->ok = 0;
    int rc = mb_pyramid_build(o->own, frame);
    if (rc == MB_ESIZE)
        return mb_err_set(
            err, MB_ESIZE,
            "outliner: frame is %d x %d, the outliner was made for "
            "%d x %d",
            frame->width, frame->height, o->width, o->height);
    if (rc != MB_OK)
        return mb_err_set(err, rc, "outliner: the frame has no pixels");
    return mb_outliner_run_pyramid(o, o->own, res, err);
}

int mb_outliner_resample(mb_outliner *o, const mb_layout *layout,
                         mb_outline_result *res, char *err)
{
    if (!o || !layout || !res)
        return mb_err_set(err, MB_EINVAL, "outliner: NULL argument");
    if (!o->ok)
        return mb_err_set(
            err, MB_EINVAL,
            "outliner: no outlines to resample (no successful run)");
    if (mb_layout_check(layout) != MB_OK)
        return mb_err_set(
            err, MB_EINVAL,
            "outliner: the layout is invalid (counts 3..%d summing "
            "to n_points)",
            MB_MAX_OUTLINE_POINTS);
    if (layout->n_outlines != o->n_outlines)
        return mb_err_set(
            err, MB_ESIZE,
            "outliner: the layout has %d outlines, the part has %d",
            layout->n_outlines, o->n_outlines);
    if (layout->n_points > o->cfg.points)
        return mb_err_set(err, MB_ESIZE,
                          "outliner: the layout has %d points, more than the "
                          "budget of %d",
                          layout->n_points, o->cfg.points);
    /* what the run found, with the points redone */
    *res = o->last;
    o->layout = *layout;
    resample_and_measure(o, res);
    return MB_OK;
}
