/*
 * calibration/detect.c - the calibration target in a camera frame
 * (detect.h).
 *
 * 1. Blobs. Otsu's threshold t (Otsu, IEEE SMC 9(1), 1979) of the frame's
 *    histogram; pixels <= t are dark; 8-connected components by two-pass
 *    labelling with union-find. A blob is a dot candidate when it does not
 *    touch the frame border, has at least 4 pixels, and is shaped like a
 *    filled ellipse: its area over the area of the ellipse with the same
 *    second moments, A / (4 pi sqrt(det S)) with S the covariance of its
 *    pixel squares (each adds 1/12 to the variances), lies in 0.8 .. 1.2,
 *    and its axes differ by at most 3 times. Letters with holes and thin
 *    lines fail this.
 * 2. Lattice. A candidate whose four nearest similar candidates (area
 *    within a factor 2) form two opposite pairs is a seed; seeds are tried
 *    best first. From a dot at lattice (i, j), the neighbour (i + di, j +
 *    dj) is predicted as 2 p(i, j) - p(i - di, j - dj) when that dot is
 *    known (exact for an even lattice, second order in perspective and
 *    distortion), else p(i, j) + the local lattice vector; the nearest
 *    candidate within 0.3 of the local pitch and with an area within a
 *    factor 2 is joined. A candidate reached twice with different lattice
 *    coordinates ends that lattice.
 * 3. Checks, in detect.h's order. Local pitch and cell shape come from the
 *    lattice's cells (two sides and their 2x2 matrix [a b]): the smallest
 *    side, the largest ratio of the matrix's singular values, and the
 *    spread of sqrt(|det|). A homography of lattice coordinates to pixels
 *    predicts the ring of positions just outside the found rectangle: one
 *    of them outside the frame, or a dot-sized blob near one, means the
 *    grid goes on.
 * 4. Marks. A cell's centre is where its diagonals cross; its mark
 *    contrast is (paper - centre) / (paper - dot), with centre the mean of
 *    7 samples within 0.05 cell, paper the median of 4 samples 0.3 cell
 *    away along the lattice axes, dot the mean grey at the 4 surrounding
 *    dots' centres. The three marked corner cells set the level (their
 *    mean contrast: blur lowers all marks alike); the unmarked corner must
 *    stay under half of it and the weakest marked one above 0.15 and 2.5
 *    times the unmarked one's; a code cell is marked above half the
 *    level.
 * 5. Centres, see detect.h. The weight of a pixel is its darkness
 *    relative to the background, 1 - grey / background: under uneven
 *    light (grey = light x reflectance) that is the dot's coverage times a
 *    constant, so a light gradient across the dot does not pull the
 *    centroid. The background plane is fitted twice, the
 *    second time without ring pixels darker than the first fit by more
 *    than 3 robust standard deviations (a neighbouring mark's blurred edge
 *    at small pitches).
 */
#include "detect.h"

#include "camera.h"
#include "error.h"
#include "outline.h"

#include <math.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Marks: the weakest marked corner cell must reach this contrast, and
   2.5 times the unmarked corner's (or this noise floor). */
#define MARK_MIN_CONTRAST 0.15
#define MARK_NOISE 0.03
/* Centroid window beyond the dot's edge, px (see refine_centre). */
#define WINDOW_MARGIN_PX 4.0
#define MAX_SEEDS_TRIED 40
#define MIN_LATTICE 9
/* Lattice coordinates relative to a seed stay within +-LAT_HALF. */
#define LAT_HALF (2 * MB_TARGET_MAX_SIDE + 2)
#define LAT_SIDE (2 * LAT_HALF + 1)

void mb_detect_config_default(mb_detect_config *cfg)
{
    if (!cfg)
        return;
    cfg->min_pitch_px = 10.0;
    cfg->max_anisotropy = 1.6;
    cfg->max_pitch_ratio = 2.0;
    cfg->max_pitch_error = 0.05;
    cfg->min_contrast = 20.0;
}

int mb_detect_fault_code(mb_detect_fault f)
{
    switch (f) {
    case MB_DETECT_OK: return MB_OK;
    case MB_DETECT_NO_TARGET: return MB_ENOTFOUND;
    case MB_DETECT_MULTIPLE: return MB_EMULTIPLE;
    case MB_DETECT_TOO_SMALL: return MB_ERANGE;
    case MB_DETECT_TOO_OBLIQUE: return MB_EDEGENERATE;
    case MB_DETECT_PARTIAL: return MB_EEDGE;
    case MB_DETECT_GRID_SIZE: return MB_ESIZE;
    case MB_DETECT_ORIENTATION: return MB_EFORMAT;
    case MB_DETECT_PITCH: return MB_EINVAL;
    }
    return MB_EINVAL;
}

const char *mb_detect_fault_name(mb_detect_fault f)
{
    switch (f) {
    case MB_DETECT_OK: return "ok";
    case MB_DETECT_NO_TARGET: return "no target";
    case MB_DETECT_MULTIPLE: return "several targets";
    case MB_DETECT_TOO_SMALL: return "target too small";
    case MB_DETECT_TOO_OBLIQUE: return "target too oblique";
    case MB_DETECT_PARTIAL: return "partial target";
    case MB_DETECT_GRID_SIZE: return "wrong grid size";
    case MB_DETECT_ORIENTATION: return "orientation marks unreadable";
    case MB_DETECT_PITCH: return "wrong pitch";
    }
    return "unknown";
}

/* ---- blobs ---- */

typedef struct {
    double area, cx, cy;  /* px, binary centroid */
    double sxx, syy, sxy; /* central second moments (variances), px^2 */
    int touches;          /* touches the frame border */
    int cand;             /* dot-shaped candidate */
} blob;

typedef struct {
    const mb_image *img;
    const mb_target *t;
    mb_detect_config cfg;
    mb_detect_info *info;
    int *labels; /* per pixel: blob index + 1, 0 = bright */
    blob *blobs;
    int n_blobs;
    int *cand; /* candidate -> blob index */
    int n_cand;
    /* bucket grid of candidates for neighbour queries */
    int gcell, gw, gh;
    int *gstart, *gnext;
    /* lattice */
    int *lat;    /* LAT_SIDE^2: candidate index + 1 at (i, j) */
    int *lat_of; /* candidate -> packed lattice position or -1 */
    double *la;  /* candidate -> local vectors ax, ay, bx, by */
    int *queue;
    int *best;      /* best lattice: packed positions of its dots */
    int *best_cand; /* and their candidates */
    int n_best;
} det_ctx;

static int find_root(int *parent, int a)
{
    while (parent[a] != a) {
        parent[a] = parent[parent[a]];
        a = parent[a];
    }
    return a;
}

static int label_blobs(det_ctx *D, int thr)
{
    const mb_image *im = D->img;
    const int w = im->width, h = im->height;
    size_t cap = (size_t)w * h / 2 + 2;
    int *parent = malloc(sizeof *parent * cap);
    if (!parent)
        return MB_ENOMEM;
    int next = 1;
    parent[0] = 0;
    for (int y = 0; y < h; y++) {
        const uint8_t *row = im->pixels + (size_t)y * im->stride;
        int *lr = D->labels + (size_t)y * w;
        const int *up = y > 0 ? lr - w : NULL;
        for (int x = 0; x < w; x++) {
            if (row[x] > thr) {
                lr[x] = 0;
                continue;
            }
            int nb[4], k = 0;
            if (x > 0 && lr[x - 1])
                nb[k++] = lr[x - 1];
            if (up) {
                if (x > 0 && up[x - 1])
                    nb[k++] = up[x - 1];
                if (up[x])
                    nb[k++] = up[x];
                if (x + 1 < w && up[x + 1])
                    nb[k++] = up[x + 1];
            }
            if (!k) {
                if ((size_t)next >= cap) {
                    size_t nc = cap * 2;
                    int *np = realloc(parent, sizeof *np * nc);
                    if (!np) {
                        free(parent);
                        return MB_ENOMEM;
                    }
                    parent = np;
                    cap = nc;
                }
                parent[next] = next;
                lr[x] = next++;
                continue;
            }
            int r = find_root(parent, nb[0]);
            for (int i = 1; i < k; i++) {
                int s = find_root(parent, nb[i]);
                if (s < r) {
                    parent[r] = s;
                    r = s;
                } else if (s > r) {
                    parent[s] = r;
                }
            }
            lr[x] = r;
        }
    }
    /* Dense blob numbers for the roots. */
    int *dense = malloc(sizeof *dense * (size_t)next);
    if (!dense) {
        free(parent);
        return MB_ENOMEM;
    }
    int nb = 0;
    for (int i = 1; i < next; i++)
        dense[i] = find_root(parent, i) == i ? nb++ : -1;
    for (int i = 1; i < next; i++)
        if (dense[i] < 0)
            dense[i] = dense[find_root(parent, i)];
    free(parent);
    D->blobs = calloc((size_t)nb + 1, sizeof *D->blobs);
    double *sums = calloc((size_t)nb + 1, 5 * sizeof *sums);
    if (!D->blobs || !sums) {
        free(dense);
        free(sums);
        return MB_ENOMEM;
    }
    D->n_blobs = nb;
    for (int y = 0; y < h; y++) {
        int *lr = D->labels + (size_t)y * w;
        for (int x = 0; x < w; x++) {
            if (!lr[x])
                continue;
            int b = dense[lr[x]];
            lr[x] = b + 1;
            blob *B = &D->blobs[b];
            B->area += 1.0;
            double *s = sums + 5 * (size_t)b;
            s[0] += x;
            s[1] += y;
            s[2] += (double)x * x;
            s[3] += (double)y * y;
            s[4] += (double)x * y;
            if (x == 0 || y == 0 || x == w - 1 || y == h - 1)
                B->touches = 1;
        }
    }
    free(dense);
    for (int b = 0; b < nb; b++) {
        blob *B = &D->blobs[b];
        const double *s = sums + 5 * (size_t)b;
        B->cx = s[0] / B->area;
        B->cy = s[1] / B->area;
        B->sxx = s[2] / B->area - B->cx * B->cx + 1.0 / 12.0;
        B->syy = s[3] / B->area - B->cy * B->cy + 1.0 / 12.0;
        B->sxy = s[4] / B->area - B->cx * B->cy;
    }
    free(sums);
    return MB_OK;
}

static int dot_shaped(const blob *B, double max_area)
{
    if (B->touches || B->area < 4.0 || B->area > max_area)
        return 0;
    double det = B->sxx * B->syy - B->sxy * B->sxy;
    if (!(det > 0.0))
        return 0;
    double fill = B->area / (4.0 * M_PI * sqrt(det));
    double tr = B->sxx + B->syy;
    double disc = sqrt(fmax(0.25 * tr * tr - det, 0.0));
    double l1 = 0.5 * tr + disc, l2 = 0.5 * tr - disc;
    return fill >= 0.8 && fill <= 1.2 && l2 > 0.0 && l1 <= 9.0 * l2;
}

/* ---- candidate bucket grid ---- */

static int build_grid(det_ctx *D)
{
    const int w = D->img->width, h = D->img->height;
    D->gcell = 16;
    D->gw = (w + D->gcell - 1) / D->gcell;
    D->gh = (h + D->gcell - 1) / D->gcell;
    D->gstart = malloc(sizeof *D->gstart * (size_t)D->gw * D->gh);
    D->gnext = malloc(sizeof *D->gnext * ((size_t)D->n_cand + 1));
    if (!D->gstart || !D->gnext)
        return MB_ENOMEM;
    for (int i = 0; i < D->gw * D->gh; i++)
        D->gstart[i] = -1;
    for (int c = 0; c < D->n_cand; c++) {
        const blob *B = &D->blobs[D->cand[c]];
        int gx = (int)(B->cx / D->gcell), gy = (int)(B->cy / D->gcell);
        gx = gx < 0 ? 0 : gx >= D->gw ? D->gw - 1 : gx;
        gy = gy < 0 ? 0 : gy >= D->gh ? D->gh - 1 : gy;
        D->gnext[c] = D->gstart[gy * D->gw + gx];
        D->gstart[gy * D->gw + gx] = c;
    }
    return MB_OK;
}

/* Nearest candidate to (x, y) within radius whose area is within a factor
   `ratio` of area (ratio <= 0: any area), excluding `skip`; -1 if none. */
static int nearest_cand(const det_ctx *D, double x, double y, double radius,
                        double area, double ratio, int skip)
{
    int gx0 = (int)floor((x - radius) / D->gcell);
    int gx1 = (int)floor((x + radius) / D->gcell);
    int gy0 = (int)floor((y - radius) / D->gcell);
    int gy1 = (int)floor((y + radius) / D->gcell);
    gx0 = gx0 < 0 ? 0 : gx0;
    gy0 = gy0 < 0 ? 0 : gy0;
    gx1 = gx1 >= D->gw ? D->gw - 1 : gx1;
    gy1 = gy1 >= D->gh ? D->gh - 1 : gy1;
    int best = -1;
    double bd = radius * radius;
    for (int gy = gy0; gy <= gy1; gy++)
        for (int gx = gx0; gx <= gx1; gx++)
            for (int c = D->gstart[gy * D->gw + gx]; c >= 0; c = D->gnext[c]) {
                if (c == skip)
                    continue;
                const blob *B = &D->blobs[D->cand[c]];
                if (ratio > 0.0 &&
                    (B->area > ratio * area || B->area * ratio < area))
                    continue;
                double d =
                    (B->cx - x) * (B->cx - x) + (B->cy - y) * (B->cy - y);
                if (d <= bd) {
                    bd = d;
                    best = c;
                }
            }
    return best;
}

/* ---- seeds ---- */

typedef struct {
    int cand;
    double score;
    double a[2], b[2];
} seed;

static int cmp_seed(const void *pa, const void *pb)
{
    const seed *a = pa, *b = pb;
    return (a->score > b->score) - (a->score < b->score);
}

/* The four nearest similar candidates of c as two opposite pairs. Returns
   0 and fills s, or -1. */
static int seed_of(const det_ctx *D, int c, seed *s)
{
    const blob *B = &D->blobs[D->cand[c]];
    int nn[4];
    double nd[4], vx[4], vy[4];
    int k = 0;
    /* Widening search for the 4 nearest with area within a factor 2. */
    for (double rad = 2.0 * sqrt(B->area); k < 4 && rad < 40.0 * sqrt(B->area);
         rad *= 1.5) {
        k = 0;
        int gx0 = (int)floor((B->cx - rad) / D->gcell);
        int gx1 = (int)floor((B->cx + rad) / D->gcell);
        int gy0 = (int)floor((B->cy - rad) / D->gcell);
        int gy1 = (int)floor((B->cy + rad) / D->gcell);
        gx0 = gx0 < 0 ? 0 : gx0;
        gy0 = gy0 < 0 ? 0 : gy0;
        gx1 = gx1 >= D->gw ? D->gw - 1 : gx1;
        gy1 = gy1 >= D->gh ? D->gh - 1 : gy1;
        for (int i = 0; i < 4; i++)
            nd[i] = INFINITY;
        for (int gy = gy0; gy <= gy1; gy++)
            for (int gx = gx0; gx <= gx1; gx++)
                for (int o = D->gstart[gy * D->gw + gx]; o >= 0;
                     o = D->gnext[o]) {
                    if (o == c)
                        continue;
                    const blob *O = &D->blobs[D->cand[o]];
                    if (O->area > 2.0 * B->area || 2.0 * O->area < B->area)
                        continue;
                    double d = hypot(O->cx - B->cx, O->cy - B->cy);
                    if (d > rad || d >= nd[3])
                        continue;
                    int p = 3;
                    while (p > 0 && nd[p - 1] > d) {
                        nd[p] = nd[p - 1];
                        nn[p] = nn[p - 1];
                        p--;
                    }
                    nd[p] = d;
                    nn[p] = o;
                }
        for (int i = 0; i < 4; i++)
            if (isfinite(nd[i]))
                k = i + 1;
    }
    if (k < 4)
        return -1;
    for (int i = 0; i < 4; i++) {
        const blob *O = &D->blobs[D->cand[nn[i]]];
        vx[i] = O->cx - B->cx;
        vy[i] = O->cy - B->cy;
    }
    /* Pair the nearest with its most opposite partner. */
    int pj = 1;
    double best = INFINITY;
    for (int j = 1; j < 4; j++) {
        double e = hypot(vx[0] + vx[j], vy[0] + vy[j]);
        if (e < best) {
            best = e;
            pj = j;
        }
    }
    int q1 = -1, q2 = -1;
    for (int j = 1; j < 4; j++)
        if (j != pj) {
            if (q1 < 0)
                q1 = j;
            else
                q2 = j;
        }
    double e2 = hypot(vx[q1] + vx[q2], vy[q1] + vy[q2]);
    double ax = 0.5 * (vx[0] - vx[pj]), ay = 0.5 * (vy[0] - vy[pj]);
    double bx = 0.5 * (vx[q1] - vx[q2]), by = 0.5 * (vy[q1] - vy[q2]);
    double la = hypot(ax, ay), lb = hypot(bx, by);
    if (!(la > 0.0 && lb > 0.0))
        return -1;
    double cosab = (ax * bx + ay * by) / (la * lb);
    double ratio = la > lb ? la / lb : lb / la;
    if (fabs(cosab) > 0.8 || ratio > 2.5)
        return -1;
    s->cand = c;
    s->score = (best + e2) / (la + lb) + fabs(cosab) * 0.1;
    s->a[0] = ax;
    s->a[1] = ay;
    s->b[0] = bx;
    s->b[1] = by;
    if (s->score > 0.3)
        return -1;
    return 0;
}

/* ---- lattice growth ---- */

static int pack(int i, int j)
{
    return (i + LAT_HALF) * LAT_SIDE + (j + LAT_HALF);
}

static void unpack(int p, int *i, int *j)
{
    *i = p / LAT_SIDE - LAT_HALF;
    *j = p % LAT_SIDE - LAT_HALF;
}

/* Grow a lattice from seed s; its dots' packed positions go to out (count
   returned), D->lat and D->lat_of are left filled for them. Returns -1 on
   an inconsistent lattice. */
static int grow(det_ctx *D, const seed *s, int *out)
{
    int head = 0, tail = 0, n = 0;
    int c0 = s->cand;
    D->lat[pack(0, 0)] = c0 + 1;
    D->lat_of[c0] = pack(0, 0);
    memcpy(D->la + 4 * (size_t)c0, s->a, 2 * sizeof(double));
    memcpy(D->la + 4 * (size_t)c0 + 2, s->b, 2 * sizeof(double));
    D->queue[tail++] = c0;
    out[n++] = pack(0, 0);
    static const int dirs[4][2] = {{1, 0}, {-1, 0}, {0, 1}, {0, -1}};
    int bad = 0;
    while (head < tail && !bad) {
        int c = D->queue[head++];
        const blob *B = &D->blobs[D->cand[c]];
        int i, j;
        unpack(D->lat_of[c], &i, &j);
        const double *lv = D->la + 4 * (size_t)c;
        for (int d = 0; d < 4 && !bad; d++) {
            int di = dirs[d][0], dj = dirs[d][1];
            int ni = i + di, nj = j + dj;
            if (abs(ni) >= LAT_HALF || abs(nj) >= LAT_HALF) {
                bad = 1;
                break;
            }
            if (D->lat[pack(ni, nj)])
                continue;
            double px, py;
            int back = (abs(i - di) < LAT_HALF && abs(j - dj) < LAT_HALF)
                           ? D->lat[pack(i - di, j - dj)]
                           : 0;
            if (back) {
                const blob *O = &D->blobs[D->cand[back - 1]];
                px = 2.0 * B->cx - O->cx;
                py = 2.0 * B->cy - O->cy;
            } else {
                px = B->cx + di * lv[0] + dj * lv[2];
                py = B->cy + di * lv[1] + dj * lv[3];
            }
            double step = di ? hypot(lv[0], lv[1]) : hypot(lv[2], lv[3]);
            double other = di ? hypot(lv[2], lv[3]) : hypot(lv[0], lv[1]);
            double radius = 0.3 * fmin(step, other);
            int f = nearest_cand(D, px, py, radius, B->area, 2.0, c);
            if (f < 0)
                continue;
            if (D->lat_of[f] >= 0) {
                if (D->lat_of[f] != pack(ni, nj))
                    bad = 1; /* reached twice at different places */
                continue;
            }
            const blob *F = &D->blobs[D->cand[f]];
            D->lat[pack(ni, nj)] = f + 1;
            D->lat_of[f] = pack(ni, nj);
            double *fv = D->la + 4 * (size_t)f;
            memcpy(fv, lv, 4 * sizeof(double));
            if (di) {
                fv[0] = (F->cx - B->cx) * di;
                fv[1] = (F->cy - B->cy) * di;
            } else {
                fv[2] = (F->cx - B->cx) * dj;
                fv[3] = (F->cy - B->cy) * dj;
            }
            D->queue[tail++] = f;
            out[n++] = pack(ni, nj);
        }
    }
    return bad ? -1 : n;
}

/* Clear the lattice maps of the n dots at packed positions pos. */
static void clear_lattice(det_ctx *D, const int *pos, int n)
{
    for (int k = 0; k < n; k++) {
        int c = D->lat[pos[k]] - 1;
        if (c >= 0)
            D->lat_of[c] = -1;
        D->lat[pos[k]] = 0;
    }
}

/* ---- grey sampling ---- */

static double grey_at(const mb_image *im, double x, double y)
{
    if (x < 0)
        x = 0;
    if (y < 0)
        y = 0;
    if (x > im->width - 1)
        x = im->width - 1;
    if (y > im->height - 1)
        y = im->height - 1;
    int x0 = (int)floor(x), y0 = (int)floor(y);
    int x1 = x0 + 1 < im->width ? x0 + 1 : x0;
    int y1 = y0 + 1 < im->height ? y0 + 1 : y0;
    double fx = x - x0, fy = y - y0;
    const uint8_t *r0 = im->pixels + (size_t)y0 * im->stride;
    const uint8_t *r1 = im->pixels + (size_t)y1 * im->stride;
    return (1 - fy) * ((1 - fx) * r0[x0] + fx * r0[x1]) +
           fy * ((1 - fx) * r1[x0] + fx * r1[x1]);
}

static int cmp_double(const void *pa, const void *pb)
{
    double a = *(const double *)pa, b = *(const double *)pb;
    return (a > b) - (a < b);
}

/* Position of lattice point (s, t) of a w x h grid stored row-major in p
   (index t * w + s), x and y. */
typedef struct {
    const double *p;
    int w, h;
} grid_pts;

static void gp(const grid_pts *g, int s, int t, double *x, double *y)
{
    *x = g->p[2 * (t * g->w + s)];
    *y = g->p[2 * (t * g->w + s) + 1];
}

/* Mark contrast of cell (s, t) (between lattice points s..s+1, t..t+1). */
static double cell_contrast(const mb_image *im, const grid_pts *g, int s, int t)
{
    double x00, y00, x10, y10, x01, y01, x11, y11;
    gp(g, s, t, &x00, &y00);
    gp(g, s + 1, t, &x10, &y10);
    gp(g, s, t + 1, &x01, &y01);
    gp(g, s + 1, t + 1, &x11, &y11);
    /* Centre: crossing of the diagonals 00-11 and 10-01. */
    double d1x = x11 - x00, d1y = y11 - y00, d2x = x01 - x10, d2y = y01 - y10;
    double den = d1x * d2y - d1y * d2x;
    double cx, cy;
    if (fabs(den) > 1e-12) {
        double u = ((x10 - x00) * d2y - (y10 - y00) * d2x) / den;
        cx = x00 + u * d1x;
        cy = y00 + u * d1y;
    } else {
        cx = 0.25 * (x00 + x10 + x01 + x11);
        cy = 0.25 * (y00 + y10 + y01 + y11);
    }
    /* Cell axes (mean of opposite sides). */
    double ax = 0.5 * ((x10 - x00) + (x11 - x01));
    double ay = 0.5 * ((y10 - y00) + (y11 - y01));
    double bx = 0.5 * ((x01 - x00) + (x11 - x10));
    double by = 0.5 * ((y01 - y00) + (y11 - y10));
    double side = fmin(hypot(ax, ay), hypot(bx, by));
    double rs = fmax(0.05 * side, 0.5);
    double m = grey_at(im, cx, cy);
    for (int k = 0; k < 6; k++) {
        double phi = k * M_PI / 3.0;
        m += grey_at(im, cx + rs * cos(phi), cy + rs * sin(phi));
    }
    m /= 7.0;
    double paper[4] = {grey_at(im, cx + 0.3 * ax, cy + 0.3 * ay),
                       grey_at(im, cx - 0.3 * ax, cy - 0.3 * ay),
                       grey_at(im, cx + 0.3 * bx, cy + 0.3 * by),
                       grey_at(im, cx - 0.3 * bx, cy - 0.3 * by)};
    qsort(paper, 4, sizeof paper[0], cmp_double);
    double white = 0.5 * (paper[1] + paper[2]);
    double black = 0.25 * (grey_at(im, x00, y00) + grey_at(im, x10, y10) +
                           grey_at(im, x01, y01) + grey_at(im, x11, y11));
    if (!(white - black > 1.0))
        return 0.0;
    return (white - m) / (white - black);
}

/* ---- sub-pixel centre ---- */

/* Solve the 3x3 symmetric system a x = b (Cramer). */
static int solve3(const double a[9], const double b[3], double x[3])
{
    double det = a[0] * (a[4] * a[8] - a[5] * a[7]) -
                 a[1] * (a[3] * a[8] - a[5] * a[6]) +
                 a[2] * (a[3] * a[7] - a[4] * a[6]);
    if (!(fabs(det) > 1e-12))
        return -1;
    for (int c = 0; c < 3; c++) {
        double m[9];
        memcpy(m, a, sizeof m);
        for (int r = 0; r < 3; r++)
            m[3 * r + c] = b[r];
        x[c] = (m[0] * (m[4] * m[8] - m[5] * m[7]) -
                m[1] * (m[3] * m[8] - m[5] * m[6]) +
                m[2] * (m[3] * m[7] - m[4] * m[6])) /
               det;
    }
    return 0;
}

/* Grey-weighted centroid of the dot near (x, y) whose local lattice
   vectors are a and b (px per pitch). */
static int refine_centre(const mb_image *im, const double a[2],
                         const double b[2], double *x, double *y)
{
    double det = a[0] * b[1] - a[1] * b[0];
    if (!(fabs(det) > 1e-9))
        return -1;
    /* A^-1 maps an image offset to lattice units. */
    const double i00 = b[1] / det, i01 = -b[0] / det;
    const double i10 = -a[1] / det, i11 = a[0] / det;
    /* The window reaches 4 px beyond the dot's edge (0.25 pitch; room for
       the blur of a focused lens) and no further: every background pixel
       inside it adds only noise to the centroid. The background ring
       stays at 0.45 .. 0.55 pitch, clear of dots and marks. */
    const double pitch_px = fmin(hypot(a[0], a[1]), hypot(b[0], b[1]));
    const double rwin = fmin(0.25 + WINDOW_MARGIN_PX / pitch_px, 0.45);
    const double rin = 0.45, rout = 0.55;
    double ext = rout * (fabs(a[0]) + fabs(b[0])) + 1.0;
    double eyt = rout * (fabs(a[1]) + fabs(b[1])) + 1.0;
    double cx = *x, cy = *y;
    for (int iter = 0; iter < 3; iter++) {
        int xa = (int)floor(cx - ext), xb = (int)ceil(cx + ext);
        int ya = (int)floor(cy - eyt), yb = (int)ceil(cy + eyt);
        if (xa < 0 || ya < 0 || xb > im->width - 1 || yb > im->height - 1)
            return -1;
        double beta[3] = {0, 0, 0}, sd = 0.0;
        for (int pass = 0; pass < 2; pass++) {
            double N[9] = {0}, r[3] = {0};
            double res[2048];
            int nres = 0;
            for (int py = ya; py <= yb; py++) {
                const uint8_t *row = im->pixels + (size_t)py * im->stride;
                for (int px = xa; px <= xb; px++) {
                    double dx = px - cx, dy = py - cy;
                    double u = i00 * dx + i01 * dy, v = i10 * dx + i11 * dy;
                    double rr = u * u + v * v;
                    if (rr <= rin * rin || rr > rout * rout)
                        continue;
                    double g = row[px];
                    if (pass == 1 &&
                        g < beta[0] + beta[1] * dx + beta[2] * dy - 3.0 * sd)
                        continue;
                    double f[3] = {1.0, dx, dy};
                    for (int p = 0; p < 3; p++) {
                        r[p] += f[p] * g;
                        for (int q = 0; q < 3; q++)
                            N[3 * p + q] += f[p] * f[q];
                    }
                    if (pass == 0 && nres < 2048)
                        res[nres++] = g;
                }
            }
            if (N[0] < 8.0 || solve3(N, r, beta) < 0)
                return -1;
            if (pass == 0) {
                /* Robust spread of the ring about the fitted plane: median
                   absolute deviation of the raw ring from its median, a
                   conservative bound (1.4826 MAD estimates sigma). */
                qsort(res, (size_t)nres, sizeof res[0], cmp_double);
                double med = res[nres / 2];
                for (int k = 0; k < nres; k++)
                    res[k] = fabs(res[k] - med);
                qsort(res, (size_t)nres, sizeof res[0], cmp_double);
                sd = fmax(1.4826 * res[nres / 2], 1.0);
            }
        }
        double S = 0.0, Sx = 0.0, Sy = 0.0;
        for (int py = ya; py <= yb; py++) {
            const uint8_t *row = im->pixels + (size_t)py * im->stride;
            for (int px = xa; px <= xb; px++) {
                double dx = px - cx, dy = py - cy;
                double u = i00 * dx + i01 * dy, v = i10 * dx + i11 * dy;
                if (u * u + v * v > rwin * rwin)
                    continue;
                double bg = fmax(beta[0] + beta[1] * dx + beta[2] * dy, 1.0);
                double wgt = 1.0 - row[px] / bg;
                S += wgt;
                Sx += wgt * dx;
                Sy += wgt * dy;
            }
        }
        if (!(S > 0.0))
            return -1;
        double nx = cx + Sx / S, ny = cy + Sy / S;
        double moved = hypot(nx - cx, ny - cy);
        cx = nx;
        cy = ny;
        if (moved < 1e-4)
            break;
    }
    *x = cx;
    *y = cy;
    return 0;
}

/* ---- the detector ---- */

static int refuse(det_ctx *D, mb_detect_fault f, char *err, const char *fmt,
                  ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 4, 5)))
#endif
    ;

static int refuse(det_ctx *D, mb_detect_fault f, char *err, const char *fmt,
                  ...)
{
    D->info->fault = f;
    if (err) {
        va_list ap;
        va_start(ap, fmt);
        vsnprintf(err, MB_ERR_LEN, fmt, ap);
        va_end(ap);
    }
    return mb_detect_fault_code(f);
}

static void free_ctx(det_ctx *D)
{
    free(D->labels);
    free(D->blobs);
    free(D->cand);
    free(D->gstart);
    free(D->gnext);
    free(D->lat);
    free(D->lat_of);
    free(D->la);
    free(D->queue);
    free(D->best);
    free(D->best_cand);
}

/* The body of mb_target_detect after the blobs are found. */
static int detect_lattice(det_ctx *D, double *xy, char *err);

int mb_target_detect(const mb_image *img, const mb_target *t,
                     const mb_detect_config *cfg, double *xy,
                     mb_detect_info *info, char *err)
{
    mb_detect_info local;
    if (!info)
        info = &local;
    memset(info, 0, sizeof *info);
    if (!img || !img->pixels || img->width < 8 || img->height < 8 || !t || !xy)
        return mb_err_set(err, MB_EINVAL,
                          "target detection: no frame, target or output");
    if (t->rows < MB_TARGET_MIN_SIDE || t->cols < MB_TARGET_MIN_SIDE ||
        t->rows > MB_TARGET_MAX_SIDE || t->cols > MB_TARGET_MAX_SIDE ||
        !(t->pitch > 0.0))
        return mb_err_set(err, MB_EINVAL, "target detection: invalid target");
    det_ctx D;
    memset(&D, 0, sizeof D);
    D.img = img;
    D.t = t;
    D.info = info;
    if (cfg)
        D.cfg = *cfg;
    else
        mb_detect_config_default(&D.cfg);
    int rc;

    uint32_t hist[256];
    mb_otsu ot;
    mb_outline_histogram(img, hist);
    if (mb_outline_threshold(hist, &ot) < 0 ||
        ot.mean_bright - ot.mean_dark < D.cfg.min_contrast) {
        rc = refuse(&D, MB_DETECT_NO_TARGET, err,
                    "no calibration target in view: the frame has no dark "
                    "dots on a bright field (contrast %.0f grey levels)",
                    ot.mean_bright - ot.mean_dark);
        goto done;
    }
    info->threshold = ot.threshold;
    D.labels = malloc(sizeof *D.labels * (size_t)img->width * img->height);
    if (!D.labels) {
        rc = mb_err_set(err, MB_ENOMEM, "target detection: out of memory");
        goto done;
    }
    if ((rc = label_blobs(&D, ot.threshold)) < 0) {
        mb_err_set(err, rc, "target detection: out of memory");
        goto done;
    }
    info->blobs = D.n_blobs;
    D.cand = malloc(sizeof *D.cand * ((size_t)D.n_blobs + 1));
    if (!D.cand) {
        rc = mb_err_set(err, MB_ENOMEM, "target detection: out of memory");
        goto done;
    }
    double max_area = (double)img->width * img->height / 25.0;
    for (int b = 0; b < D.n_blobs; b++)
        if ((D.blobs[b].cand = dot_shaped(&D.blobs[b], max_area)))
            D.cand[D.n_cand++] = b;
    info->candidates = D.n_cand;
    if ((rc = build_grid(&D)) < 0) {
        mb_err_set(err, rc, "target detection: out of memory");
        goto done;
    }
    rc = detect_lattice(&D, xy, err);
done:
    free_ctx(&D);
    return rc;
}

/* The 8 ways of reading a found n1 x n2 lattice (s, t) as target (col,
   row): swap the axes or not, flip each or not. */
static void apply_sym(int sym, int n1, int n2, int s, int t, int *c, int *r)
{
    int swap = sym & 1, fc = (sym >> 1) & 1, fr = (sym >> 2) & 1;
    int a = swap ? t : s, b = swap ? s : t;
    int na = swap ? n2 : n1, nb = swap ? n1 : n2;
    *c = fc ? na - 1 - a : a;
    *r = fr ? nb - 1 - b : b;
}

static int detect_lattice(det_ctx *D, double *xy, char *err)
{
    const mb_target *t = D->t;
    mb_detect_info *info = D->info;
    const mb_image *im = D->img;
    const int R = t->rows, C = t->cols, want = R * C;
    int rc = MB_OK;
    seed *seeds = NULL;
    int *cur = NULL;
    double *pts = NULL, *ring = NULL;
    int n_seeds = 0, n_second = 0;

    D->lat = calloc((size_t)LAT_SIDE * LAT_SIDE, sizeof *D->lat);
    D->lat_of = malloc(sizeof *D->lat_of * ((size_t)D->n_cand + 1));
    D->la = malloc(sizeof *D->la * 4 * ((size_t)D->n_cand + 1));
    D->queue = malloc(sizeof *D->queue * ((size_t)D->n_cand + 1));
    D->best = malloc(sizeof *D->best * ((size_t)D->n_cand + 1));
    D->best_cand = malloc(sizeof *D->best_cand * ((size_t)D->n_cand + 1));
    cur = malloc(sizeof *cur * ((size_t)D->n_cand + 1));
    seeds = malloc(sizeof *seeds * ((size_t)D->n_cand + 1));
    if (!D->lat || !D->lat_of || !D->la || !D->queue || !D->best ||
        !D->best_cand || !cur || !seeds) {
        rc = mb_err_set(err, MB_ENOMEM, "target detection: out of memory");
        goto out;
    }
    for (int c = 0; c < D->n_cand; c++) {
        D->lat_of[c] = -1;
        if (seed_of(D, c, &seeds[n_seeds]) == 0)
            n_seeds++;
    }
    qsort(seeds, (size_t)n_seeds, sizeof *seeds, cmp_seed);

    /* Grow from the best seeds; keep the largest lattice and the size of
       the largest other one. used[] marks candidates already in one. */
    {
        char *used = calloc((size_t)D->n_cand + 1, 1);
        if (!used) {
            rc = mb_err_set(err, MB_ENOMEM, "target detection: out of memory");
            goto out;
        }
        int tried = 0;
        for (int k = 0; k < n_seeds && tried < MAX_SEEDS_TRIED; k++) {
            if (used[seeds[k].cand])
                continue;
            tried++;
            int n = grow(D, &seeds[k], cur);
            if (n > 0)
                for (int q = 0; q < n; q++)
                    used[D->lat[cur[q]] - 1] = 1;
            else
                used[seeds[k].cand] = 1;
            if (n >= MIN_LATTICE) {
                if (n > D->n_best) {
                    n_second = D->n_best;
                    D->n_best = n;
                    memcpy(D->best, cur, sizeof *cur * (size_t)n);
                    for (int q = 0; q < n; q++)
                        D->best_cand[q] = D->lat[cur[q]] - 1;
                } else if (n > n_second) {
                    n_second = n;
                }
            }
            if (n > 0)
                clear_lattice(D, cur, n);
            else {
                /* An inconsistent growth left its maps dirty: clear all. */
                for (int c = 0; c < D->n_cand; c++)
                    D->lat_of[c] = -1;
                memset(D->lat, 0, sizeof *D->lat * (size_t)LAT_SIDE * LAT_SIDE);
            }
        }
        free(used);
    }
    if (D->n_best < MIN_LATTICE) {
        rc = refuse(D, MB_DETECT_NO_TARGET, err,
                    "no calibration target in view: %d dark blobs, %d "
                    "dot-shaped, but no grid of dots among them",
                    D->n_blobs, D->n_cand);
        goto out;
    }
    if (n_second >= MIN_LATTICE && 2 * n_second >= want) {
        rc = refuse(D, MB_DETECT_MULTIPLE, err,
                    "two dot grids in view (%d and %d dots): show one "
                    "calibration target at a time",
                    D->n_best, n_second);
        goto out;
    }

    /* The best lattice as a rectangle n1 x n2 of positions (s, t). */
    int imin = LAT_HALF, imax = -LAT_HALF, jmin = LAT_HALF, jmax = -LAT_HALF;
    for (int q = 0; q < D->n_best; q++) {
        int i, j;
        unpack(D->best[q], &i, &j);
        imin = i < imin ? i : imin;
        imax = i > imax ? i : imax;
        jmin = j < jmin ? j : jmin;
        jmax = j > jmax ? j : jmax;
    }
    const int n1 = imax - imin + 1, n2 = jmax - jmin + 1;
    info->found_rows = n2;
    info->found_cols = n1;
    pts = malloc(sizeof *pts * 2 * (size_t)n1 * n2);
    char *have = calloc((size_t)n1 * n2, 1);
    if (!pts || !have) {
        free(have);
        rc = mb_err_set(err, MB_ENOMEM, "target detection: out of memory");
        goto out;
    }
    double med_area = 0.0;
    {
        for (int q = 0; q < D->n_best; q++) {
            int i, j;
            unpack(D->best[q], &i, &j);
            int s = i - imin, tt = j - jmin;
            const blob *B = &D->blobs[D->cand[D->best_cand[q]]];
            pts[2 * (tt * n1 + s)] = B->cx;
            pts[2 * (tt * n1 + s) + 1] = B->cy;
            have[tt * n1 + s] = 1;
            med_area += B->area / D->n_best;
        }
    }
    const int full = D->n_best == n1 * n2;

    /* Local pitch and cell shape over the complete cells. */
    double side_min = INFINITY, side_max = 0.0, aniso = 1.0;
    double sc_min = INFINITY, sc_max = 0.0;
    for (int tt = 0; tt + 1 < n2; tt++)
        for (int s = 0; s + 1 < n1; s++) {
            int i00 = tt * n1 + s, i10 = i00 + 1, i01 = i00 + n1, i11 = i01 + 1;
            if (!have[i00] || !have[i10] || !have[i01] || !have[i11])
                continue;
            double ax = 0.5 * (pts[2 * i10] - pts[2 * i00] + pts[2 * i11] -
                               pts[2 * i01]);
            double ay = 0.5 * (pts[2 * i10 + 1] - pts[2 * i00 + 1] +
                               pts[2 * i11 + 1] - pts[2 * i01 + 1]);
            double bx = 0.5 * (pts[2 * i01] - pts[2 * i00] + pts[2 * i11] -
                               pts[2 * i10]);
            double by = 0.5 * (pts[2 * i01 + 1] - pts[2 * i00 + 1] +
                               pts[2 * i11 + 1] - pts[2 * i10 + 1]);
            double la = hypot(ax, ay), lb = hypot(bx, by);
            side_min = fmin(side_min, fmin(la, lb));
            side_max = fmax(side_max, fmax(la, lb));
            double det = fabs(ax * by - ay * bx);
            double fro = ax * ax + ay * ay + bx * bx + by * by;
            double disc = sqrt(fmax(fro * fro - 4.0 * det * det, 0.0));
            double s1 = sqrt(0.5 * (fro + disc)), s2 = det / s1;
            if (s2 > 0.0)
                aniso = fmax(aniso, s1 / s2);
            sc_min = fmin(sc_min, sqrt(det));
            sc_max = fmax(sc_max, sqrt(det));
        }
    if (!isfinite(side_min)) {
        free(have);
        rc = refuse(D, MB_DETECT_NO_TARGET, err,
                    "no calibration target in view: the dots found form no "
                    "complete grid cell");
        goto out;
    }
    info->pitch_px_min = side_min;
    info->pitch_px_max = side_max;
    info->anisotropy = aniso;
    if (side_min < D->cfg.min_pitch_px) {
        free(have);
        rc = refuse(D, MB_DETECT_TOO_SMALL, err,
                    "the calibration target is too small in the frame: dots "
                    "%.1f px apart, at least %.0f px needed; move the camera "
                    "closer or print a larger pitch",
                    side_min, D->cfg.min_pitch_px);
        goto out;
    }
    if (aniso > D->cfg.max_anisotropy ||
        sc_max > D->cfg.max_pitch_ratio * sc_min) {
        free(have);
        rc = refuse(D, MB_DETECT_TOO_OBLIQUE, err,
                    "the calibration target is seen too obliquely: grid cells "
                    "squashed %.2f:1 (at most %.2f) and their size varying "
                    "%.2f:1 across the target (at most %.2f); lay it flat on "
                    "the conveyor under the camera",
                    aniso, D->cfg.max_anisotropy, sc_max / sc_min,
                    D->cfg.max_pitch_ratio);
        goto out;
    }

    /* Is the grid cut by the frame or does it go on? A homography of
       lattice coordinates to px predicts the ring around the rectangle. */
    int runs_off = 0, goes_on = 0;
    {
        double *src = malloc(sizeof *src * 2 * (size_t)D->n_best);
        double *dst = malloc(sizeof *dst * 2 * (size_t)D->n_best);
        double HL[9];
        int k = 0;
        if (!src || !dst) {
            free(src);
            free(dst);
            free(have);
            rc = mb_err_set(err, MB_ENOMEM, "target detection: out of memory");
            goto out;
        }
        for (int q = 0; q < n1 * n2; q++)
            if (have[q]) {
                src[2 * k] = q % n1;
                src[2 * k + 1] = q / n1;
                dst[2 * k] = pts[2 * q];
                dst[2 * k + 1] = pts[2 * q + 1];
                k++;
            }
        int hrc = mb_calib_homography_dlt(k, src, dst, HL);
        free(src);
        free(dst);
        if (hrc < 0) {
            free(have);
            rc = refuse(D, MB_DETECT_NO_TARGET, err,
                        "no calibration target in view: the dots found do not "
                        "form a planar grid");
            goto out;
        }
        const double margin = 0.25 * side_min;
        for (int s = -1; s <= n1; s++)
            for (int tt = -1; tt <= n2; tt++) {
                if (s >= 0 && s < n1 && tt >= 0 && tt < n2)
                    continue;
                double px, py;
                double w = mb_calib_homography_apply(HL, s, tt, &px, &py);
                if (!(w > 0.0) && !(w < 0.0))
                    continue;
                if (px < margin || py < margin || px > im->width - 1 - margin ||
                    py > im->height - 1 - margin) {
                    runs_off = 1;
                    continue;
                }
                /* A dot-sized blob there (even one cut by the border)? */
                int x0 = (int)floor(px - 0.3 * side_min);
                int x1 = (int)ceil(px + 0.3 * side_min);
                int y0 = (int)floor(py - 0.3 * side_min);
                int y1 = (int)ceil(py + 0.3 * side_min);
                x0 = x0 < 0 ? 0 : x0;
                y0 = y0 < 0 ? 0 : y0;
                x1 = x1 >= im->width ? im->width - 1 : x1;
                y1 = y1 >= im->height ? im->height - 1 : y1;
                for (int y = y0; y <= y1 && !goes_on; y++)
                    for (int x = x0; x <= x1; x++) {
                        int l = D->labels[(size_t)y * im->width + x];
                        if (!l)
                            continue;
                        const blob *B = &D->blobs[l - 1];
                        if (hypot(B->cx - px, B->cy - py) <= 0.3 * side_min &&
                            B->area >= 0.3 * med_area &&
                            B->area <= 3.0 * med_area) {
                            goes_on = 1;
                            break;
                        }
                    }
            }
    }
    const int dims_ok = (n1 == C && n2 == R) || (n1 == R && n2 == C);
    if (!full) {
        free(have);
        rc = refuse(D, MB_DETECT_PARTIAL, err,
                    "the calibration target is only partly visible: %d of the "
                    "%d x %d dots around it were found (the rest covered, "
                    "dirty, unlit or cut by the frame edge)",
                    D->n_best, n2, n1);
        goto out;
    }
    if (goes_on || (!dims_ok && runs_off)) {
        free(have);
        rc = refuse(D, MB_DETECT_PARTIAL, err,
                    "the calibration target is only partly in view: %d x %d "
                    "dots found and the grid goes on %s; the whole target "
                    "(%d x %d) must be in the frame",
                    n2, n1,
                    goes_on ? "with dots that could not be joined"
                            : "beyond the frame edge",
                    R, C);
        goto out;
    }
    free(have);
    if (!dims_ok) {
        rc = refuse(D, MB_DETECT_GRID_SIZE, err,
                    "the target in view has %d x %d dots, but --rows %d "
                    "--cols %d were given",
                    n1 < n2 ? n1 : n2, n1 < n2 ? n2 : n1, R, C);
        goto out;
    }

    /* Orientation: the unmarked corner cell, then the reading(s) that put
       it at target cell (R-2, C-2). */
    grid_pts g = {pts, n1, n2};
    const int corner_s[4] = {0, n1 - 2, 0, n1 - 2};
    const int corner_t[4] = {0, 0, n2 - 2, n2 - 2};
    double cc[4];
    int low = 0;
    for (int k = 0; k < 4; k++) {
        cc[k] = cell_contrast(im, &g, corner_s[k], corner_t[k]);
        if (cc[k] < cc[low])
            low = k;
    }
    /* Blur lowers every mark's contrast alike: the three marked corners
       set the level, the unmarked one must stay well below it, and the
       code cells are judged at half that level. */
    double weakest = INFINITY, level = 0.0;
    for (int k = 0; k < 4; k++)
        if (k != low) {
            weakest = fmin(weakest, cc[k]);
            level += cc[k] / 3.0;
        }
    if (weakest < MARK_MIN_CONTRAST ||
        weakest < 2.5 * fmax(cc[low], MARK_NOISE) || cc[low] > 0.5 * level) {
        rc = refuse(D, MB_DETECT_ORIENTATION, err,
                    "the grid's corner marks were not found (three of the "
                    "four corner cells must carry a mark; contrasts %.2f %.2f "
                    "%.2f %.2f): is this a modeband target (modeband target), "
                    "printed in full? At %.1f px between dots the marks may "
                    "also be too blurred to see: focus, or bring the camera "
                    "closer",
                    cc[0], cc[1], cc[2], cc[3], side_min);
        goto out;
    }
    const double mark_threshold = 0.5 * level;
    int syms[8], n_syms = 0;
    for (int sym = 0; sym < 8; sym++) {
        int c, r;
        int swap = sym & 1;
        if ((swap ? n2 : n1) != C || (swap ? n1 : n2) != R)
            continue;
        /* Cell (s, t) of the lattice covers lattice points s..s+1; under
           the reading its target cell is min of the two mapped columns. */
        int c1, r1, c2, r2;
        apply_sym(sym, n1, n2, corner_s[low], corner_t[low], &c1, &r1);
        apply_sym(sym, n1, n2, corner_s[low] + 1, corner_t[low] + 1, &c2, &r2);
        c = c1 < c2 ? c1 : c2;
        r = r1 < r2 ? r1 : r2;
        if (c == C - 2 && r == R - 2)
            syms[n_syms++] = sym;
    }
    /* Handedness of each reading: target axes as seen in the image. */
    int order[2] = {0, 1};
    double hand[2] = {0, 0};
    for (int k = 0; k < n_syms && k < 2; k++) {
        /* Lattice points of target dots (0,0), (0,1) [column +1], (1,0). */
        double p[3][2];
        const int tc[3] = {0, 1, 0}, tr[3] = {0, 0, 1};
        for (int q = 0; q < 3; q++)
            for (int s = 0; s < n1; s++)
                for (int tt = 0; tt < n2; tt++) {
                    int c, r;
                    apply_sym(syms[k], n1, n2, s, tt, &c, &r);
                    if (c == tc[q] && r == tr[q]) {
                        p[q][0] = pts[2 * (tt * n1 + s)];
                        p[q][1] = pts[2 * (tt * n1 + s) + 1];
                    }
                }
        double ex = p[1][0] - p[0][0], ey = p[1][1] - p[0][1];
        double fx = p[2][0] - p[0][0], fy = p[2][1] - p[0][1];
        hand[k] = ex * fy - ey * fx;
    }
    if (n_syms == 2 && hand[0] < 0.0 && hand[1] > 0.0) {
        order[0] = 1;
        order[1] = 0;
    }
    int chosen = -1, code = 0, tried_codes = 0;
    for (int o = 0; o < n_syms && o < 2; o++) {
        int sym = syms[order[o]];
        int word = 0;
        /* Read every code cell under this reading. */
        for (int s = 0; s + 1 < n1; s++)
            for (int tt = 0; tt + 1 < n2; tt++) {
                int c1, r1, c2, r2;
                apply_sym(sym, n1, n2, s, tt, &c1, &r1);
                apply_sym(sym, n1, n2, s + 1, tt + 1, &c2, &r2);
                int c = c1 < c2 ? c1 : c2, r = r1 < r2 ? r1 : r2;
                int bit = mb_target_cell_bit(t, r, c);
                if (bit < 0)
                    continue;
                if (cell_contrast(im, &g, s, tt) > mark_threshold)
                    word |= 1 << bit;
            }
        tried_codes++;
        if (mb_target_pitch_of_code(word) > 0.0) {
            chosen = order[o];
            code = word;
            break;
        }
    }
    if (chosen < 0) {
        rc = refuse(D, MB_DETECT_ORIENTATION, err,
                    "the target's pitch code could not be read (%d "
                    "reading%s tried): marks dirty or out of focus, or not a "
                    "modeband target",
                    tried_codes, tried_codes == 1 ? "" : "s");
        goto out;
    }
    info->mirrored = hand[chosen] < 0.0;
    info->coded_pitch = mb_target_pitch_of_code(code);
    info->found_rows = R;
    info->found_cols = C;
    if (fabs(t->pitch / info->coded_pitch - 1.0) > D->cfg.max_pitch_error) {
        rc =
            refuse(D, MB_DETECT_PITCH, err,
                   "the target in view was printed with a %.1f mm pitch, "
                   "but --pitch %g was given (more than %.0f %% apart): "
                   "give the printed or measured pitch",
                   info->coded_pitch, t->pitch, 100.0 * D->cfg.max_pitch_error);
        goto out;
    }

    /* Target order and sub-pixel centres. */
    {
        int sym = syms[chosen];
        for (int s = 0; s < n1; s++)
            for (int tt = 0; tt < n2; tt++) {
                int c, r;
                apply_sym(sym, n1, n2, s, tt, &c, &r);
                xy[2 * (r * C + c)] = pts[2 * (tt * n1 + s)];
                xy[2 * (r * C + c) + 1] = pts[2 * (tt * n1 + s) + 1];
            }
        ring = malloc(sizeof *ring * 2 * (size_t)want);
        if (!ring) {
            rc = mb_err_set(err, MB_ENOMEM, "target detection: out of memory");
            goto out;
        }
        memcpy(ring, xy, sizeof *ring * 2 * (size_t)want);
        for (int r = 0; r < R; r++)
            for (int c = 0; c < C; c++) {
                /* Local lattice vectors from the binary centroids. */
                int cl = c > 0 ? c - 1 : c, ch = c + 1 < C ? c + 1 : c;
                int rl = r > 0 ? r - 1 : r, rh = r + 1 < R ? r + 1 : r;
                double a[2] = {
                    (ring[2 * (r * C + ch)] - ring[2 * (r * C + cl)]) /
                        (ch - cl),
                    (ring[2 * (r * C + ch) + 1] - ring[2 * (r * C + cl) + 1]) /
                        (ch - cl)};
                double b[2] = {
                    (ring[2 * (rh * C + c)] - ring[2 * (rl * C + c)]) /
                        (rh - rl),
                    (ring[2 * (rh * C + c) + 1] - ring[2 * (rl * C + c) + 1]) /
                        (rh - rl)};
                double *p = xy + 2 * (r * C + c);
                if (refine_centre(im, a, b, &p[0], &p[1]) < 0) {
                    rc = refuse(D, MB_DETECT_PARTIAL, err,
                                "dot (row %d, column %d) of the target could "
                                "not be measured: too close to the frame edge",
                                r + 1, c + 1);
                    goto out;
                }
            }
        double *tp = ring; /* reuse as target points */
        for (int r = 0; r < R; r++)
            for (int c = 0; c < C; c++) {
                tp[2 * (r * C + c)] = c * t->pitch;
                tp[2 * (r * C + c) + 1] = r * t->pitch;
            }
        if (mb_calib_homography_dlt(want, tp, xy, info->h) < 0)
            memset(info->h, 0, sizeof info->h);
    }
    info->fault = MB_DETECT_OK;
    rc = MB_OK;
out:
    free(seeds);
    free(cur);
    free(pts);
    free(ring);
    return rc;
}
